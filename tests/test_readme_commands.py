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
