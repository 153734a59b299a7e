"""Command-line conventions (issue 10): --json, --quiet, --verbose; the answer on stdout,
warnings on stderr; Python's own warnings kept off stderr unless --verbose; --version from the
package metadata; --help without the numerical stack."""

import importlib.metadata
import io
import json
import re
import subprocess
import sys
import warnings

import pytest

from heatsight.data_io.cli import main
from test_cli_errors import files
from test_cli_hostile import GOOD, setup


@pytest.fixture
def folder(tmp_path, monkeypatch):
    setup(tmp_path, GOOD)
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_json_summary_of_check(folder, capsys):
    assert main(["check", "case.toml", "--json"]) == 0
    out = capsys.readouterr().out
    data = json.loads(out)
    assert data["case"].endswith("case.toml") and any("ready for: fit" in x for x in data["lines"])


def test_json_rows_of_simulate(tmp_path, monkeypatch, capsys):
    setup(tmp_path, files())
    monkeypatch.chdir(tmp_path)
    assert main(["simulate", "case.toml", "--at", "points.csv", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["columns"][:3] == ["r_mm", "theta_deg", "z_mm"] and len(data["rows"]) == 2


def test_check_says_what_the_fit_will_do(folder, capsys):
    """check named a smoothing the default learned prior does not use and left out a
    calibration; it now says which prior, which model, and what is fitted with the face."""
    assert main(["check", "case.toml"]) == 0
    out = capsys.readouterr().out
    assert "fit: prior learned (strength, length scale and smoothness order from the readings), model auto" in out
    assert "smoothing" not in out
    text = (folder / "case.toml").read_text()
    (folder / "case.toml").write_text(text + '\n[fit]\nprior = "fixed"\ncommon_offset = "0.5 K"\n'
                                             'calibrate = ["top.h"]\n')
    assert main(["check", "case.toml"]) == 0
    out = capsys.readouterr().out
    assert "fit: prior fixed (strength auto (evidence), smoothing gradient)" in out
    assert "fit: calibrated with the face: top.h; an offset shared by all sensors, sd 0.5 K" in out


def test_quiet_prints_nothing_but_warnings(folder, capsys):
    (folder / "readings.csv").write_text((folder / "readings.csv").read_text() + "water,20\n")
    assert main(["check", "case.toml", "--quiet"]) == 0
    cap = capsys.readouterr()
    assert cap.out == ""
    assert "heatsight: warning: " in cap.err and "water" in cap.err


def test_warnings_on_stderr_not_stdout(folder, capsys):
    (folder / "readings.csv").write_text((folder / "readings.csv").read_text() + "water,20\n")
    assert main(["check", "case.toml"]) == 0
    cap = capsys.readouterr()
    assert "ready for: fit" in cap.out and "warning" not in cap.out
    assert cap.err.startswith("heatsight: warning: ")


def test_python_warnings_only_with_verbose(folder, capsys, monkeypatch):
    from heatsight.data_io import describe

    real = describe.describe_case

    def noisy(case):
        warnings.warn("a library's own warning", RuntimeWarning)
        return real(case)

    monkeypatch.setattr(describe, "describe_case", noisy)
    assert main(["check", "case.toml"]) == 0
    assert "a library's own warning" not in capsys.readouterr().err
    assert main(["check", "case.toml", "--verbose"]) == 0
    assert "(RuntimeWarning) a library's own warning" in capsys.readouterr().err


def test_version_from_the_package_metadata(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"heatsight {importlib.metadata.version('heatsight')}"


def test_help_does_not_import_the_numerical_stack():
    code = ("import sys; from heatsight.data_io.cli import main; "
            "rc = main(['--help']); "
            "print(sorted(m for m in ('numpy', 'pandas', 'scipy', 'matplotlib', 'lmfit') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"
    assert "trend" in out and "--quiet, --verbose and --json" in out


def test_every_command_takes_the_console_options(capsys):
    for command in ("fit", "simulate", "check", "demo", "trend"):
        assert main([command, "--help"]) == 0
        text = capsys.readouterr().out
        assert "--quiet" in text and "--verbose" in text and "--json" in text, command


class _Terminal(io.StringIO):
    """stderr as a terminal sees it."""

    def isatty(self):
        return True


def test_fit_shows_its_steps_on_a_terminal_and_clears_the_line(folder, monkeypatch):
    err = _Terminal()
    monkeypatch.setattr(sys, "stderr", err)
    assert main(["fit", "case.toml", "--out", "o"]) == 0
    text = err.getvalue()
    steps = re.findall(r"\rheatsight: fitting \[(\d+)/(\d+)\]: ", text)
    n = int(steps[0][1])
    assert [int(k) for k, _ in steps] == list(range(1, n + 1)) and {t for _, t in steps} == {str(n)}
    assert "\rheatsight: drawing the figures and the report for o" in text
    # the status line is blanked before anything else is written on stderr
    last = text.rindex("\rheatsight: drawing")
    blank = re.search(r"\r +\r", text[last:])
    assert blank is not None and "\r" not in text[last + blank.end():]


def test_fit_steps_are_lines_with_verbose_and_absent_otherwise(folder, capsys):
    assert main(["fit", "case.toml", "--out", "o1"]) == 0
    assert "fitting [" not in capsys.readouterr().err          # not a terminal: no status line
    assert main(["fit", "case.toml", "--out", "o2", "--verbose"]) == 0
    err = capsys.readouterr().err
    assert "heatsight: fitting [1/" in err and "\r" not in err


def test_plan_shows_its_steps_on_a_terminal(folder, monkeypatch):
    err = _Terminal()
    monkeypatch.setattr(sys, "stderr", err)
    assert main(["plan", "case.toml", "--add", "1", "--out", "p"]) == 0
    shown = [line.strip() for line in err.getvalue().split("\r") if line.strip()]
    first = [i for i, line in enumerate(shown) if line.startswith("heatsight: fitting [1/")][0]
    steps = [line.split(": ", 1)[1] for line in shown[first:] if not line.startswith("heatsight: warning")]
    assert steps[-3].startswith("choosing 1 of ") and steps[-3].endswith(" candidate positions")
    assert steps[-2] == "ranking the sensors by what their loss would cost"
    assert steps[-1] == "drawing the figures and the report for p"


def test_status_line_is_cut_to_the_terminal_and_gives_way_to_a_progress_bar(monkeypatch):
    import os

    from heatsight.data_io.console import Console

    monkeypatch.setattr("shutil.get_terminal_size", lambda fallback=None: os.terminal_size((40, 24)))
    err = _Terminal()
    con = Console(err=err)
    status = con.status()
    status.show("x" * 100)
    line = err.getvalue().split("\r")[-1]
    assert len(line) == 39 and line.endswith("...")          # one row: \r can rewrite it
    monkeypatch.setitem(sys.modules, "tqdm", None)            # the plain bar
    bar = con.progress(3, "drawing")
    text = err.getvalue()
    assert text.endswith("\r" + " " * 39 + "\r")              # the status line cleared first
    monkeypatch.setattr("shutil.get_terminal_size", lambda fallback=None: os.terminal_size((80, 24)))
    bar.describe("fitting the reference window [1/3]: " + "y" * 80)    # what holds the bar up
    bar.describe("drawing")
    shown = err.getvalue().split("\r")
    assert shown[-2].startswith("  fitting the reference window [1/3]: y...")
    assert len(shown[-2]) == 79 and "...  0/3 [" not in shown[-2] and "... 0/3 [" in shown[-2]   # one row
    assert shown[-1].startswith("  drawing 0/3 [") and len(shown[-1]) == len(shown[-2])   # blanked to its end
    bar.update(3)
    bar.close()
    status.close()                                            # nothing left to clear
    assert err.getvalue().count("\r" + " " * 39 + "\r") == 1


def test_quiet_and_verbose_together_are_refused(capsys):
    """-q and -v ask for opposite things: one clear usage error, exit 2."""
    assert main(["check", "case.toml", "-q", "-v"]) == 2
    err = capsys.readouterr().err
    assert "not allowed with argument -q/--quiet" in err and err.count("\n") == 1


def test_check_of_a_case_whose_readings_are_a_log_says_trend_not_fit(tmp_path, monkeypatch, capsys):
    """A case naming a log as its readings: `check` said "ready for: fit", and fit and plan then
    refused the log.  It now says trend, and fit and plan name both commands and trend."""
    from test_cli_hostile import LOG, LOG_FIT

    setup(tmp_path, dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": LOG}))
    monkeypatch.chdir(tmp_path)
    assert main(["check", "case.toml"]) == 0
    out = capsys.readouterr().out
    assert "ready for: trend" in out and "ready for: fit" not in out
    assert main(["fit", "case.toml"]) == 2
    err = capsys.readouterr().err
    assert "fit and plan take a snapshot" in err and "heatsight trend" in err


def test_readings_given_on_the_command_line_need_no_case_readings_file(tmp_path, monkeypatch, capsys):
    """`trend --log` and `fit --readings` take the readings from the command line; a case naming
    a readings file that does not exist was refused ("sensors.readings: file not found").  (This
    case declares no zones: its trend ended in an internal error, the changes' solver having
    nothing to estimate.)"""
    from test_cli_hostile import LOG

    missing = GOOD["case.toml"].replace('readings = "readings.csv"', 'readings = "gone.csv"')
    setup(tmp_path, dict(GOOD, **{"case.toml": missing, "log.csv": LOG}))
    monkeypatch.chdir(tmp_path)
    assert main(["fit", "case.toml", "--readings", "readings.csv", "--out", "f", "-q"]) == 0
    assert main(["trend", "case.toml", "--log", "log.csv", "--window", "30", "--out", "t", "-q"]) == 0
    err = capsys.readouterr().err
    assert "gone.csv" not in err and "file not found" not in err
    assert main(["fit", "case.toml", "--out", "g"]) == 2             # without --readings it is still needed
    assert "gone.csv" in capsys.readouterr().err


def test_json_of_fit_is_its_summary_file(folder, capsys):
    """`fit --json` printed the fit's SI summary (kelvin, radians, no unit keys) where
    summary.json holds user units; it now prints what summary.json holds, plus `outputs`."""
    assert main(["fit", "case.toml", "--out", "o", "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    written = json.loads((folder / "o" / "summary.json").read_text())
    assert set(printed) - set(written) == {"outputs"}
    for key in ("mean", "mean_sd", "min_at", "total_power_W", "power_unit", "caution"):
        assert printed[key] == written[key], key
