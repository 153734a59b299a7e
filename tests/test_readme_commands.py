"""The README's two set-up commands are the ones CI runs, verbatim."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _readme_commands():
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```sh\n(.*?)```", text, flags=re.S)
    return [b.strip() for b in blocks[:2]]


def test_ci_runs_the_readme_commands_verbatim():
    demo, tests = _readme_commands()
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert demo in ci and tests in ci
    assert demo.endswith("heatsight demo") and tests.endswith("pytest")


def test_readme_opens_with_the_job_and_carries_the_cautions():
    text = (ROOT / "README.md").read_text()
    first = [p for p in text.split("\n\n") if p.strip() and not p.startswith("#")][0]
    assert "thermocouple" in first and "heat flux" in first
    assert "licensed practice" in text and "interlocks" in text


def test_readme_python_example_runs(monkeypatch):
    """The library snippet of the README gives the same kind of answer as the CLI."""
    text = (ROOT / "README.md").read_text()
    code = re.findall(r"```python\n(.*?)```", text, flags=re.S)[0]
    monkeypatch.chdir(ROOT / "demo_data")
    scope = {}
    exec(compile(code, "README.md", "exec"), scope)  # the README's own example
    result = scope["result"]
    assert result.face == "bottom" and result.quantity == "heat_flux"
    assert result.raw.summary["set_aside"] == ["TC19"]


def test_every_command_help_has_an_example(capsys):
    from heatsight.data_io.cli import main

    for cmd in ("fit", "simulate", "check", "demo"):
        assert main([cmd, "--help"]) == 0
        out = capsys.readouterr().out
        assert "example" in out and f"heatsight {cmd}" in out
