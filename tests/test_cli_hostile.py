"""The hostile-input audit of issue 10, items 1-10: every failure is one line, exit status 2,
nothing written and the inputs unchanged; legal inputs give an answer (exit 0).  One
parametrized case per finding."""

import errno
import os
import signal

import pytest

from heatsight.data_io.cli import main
from test_cli_errors import FIT, KNOWN, LAYOUT, READINGS, files, sub
from test_cli_fit import GOOD_LAYOUT, GOOD_READINGS

GOOD = dict(files(**{"case.toml": FIT, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS}))
LOG_FIT = sub('readings = "readings.csv"', 'readings = "log.csv"', FIT)
LOG = "time [s],TC1,TC2,TC3\n0,85,80,40\n10,85.1,80.1,40.1\n20,85.2,80,40\n"
ZONE = '\n[[zones]]\nname = "{}"\nr = ["0 mm", "50 mm"]\n'


def tree(folder):
    """Every file and folder below `folder` (hidden ones too) with its bytes and mtime."""
    out = {}
    for root, dirs, names in os.walk(folder):
        for d in dirs:
            out[os.path.relpath(os.path.join(root, d), folder)] = "dir"
        for n in names:
            p = os.path.join(root, n)
            with open(p, "rb") as fh:
                out[os.path.relpath(p, folder)] = (fh.read(), os.stat(p).st_mtime_ns)
    return out


def setup(folder, content, dirs=()):
    for d in dirs:
        (folder / d).mkdir(parents=True, exist_ok=True)
    for name, text in content.items():
        p = folder / name
        p.parent.mkdir(parents=True, exist_ok=True)
        (p.write_bytes if isinstance(text, bytes) else p.write_text)(text)


# name -> (files, folders, argv, fragment of the one-line message)
REFUSED = {
    # 1. input files overwritten
    "1 readings named like an output": (dict(GOOD, **{"sensors.csv": GOOD_READINGS}), (),
                                        ["fit", "case.toml", "--readings", "sensors.csv", "--out", ".",
                                         "--overwrite"], "sensors.csv in the output folder is an input"),
    "1 points named like an output": (dict(GOOD, **{"points.csv": "r,theta,z\n0,0,0.01\n"}), (),
                                      ["fit", "case.toml", "--at", "points.csv", "--out", ".", "--overwrite"],
                                      "points.csv in the output folder is an input"),
    "1 demo over a foreign summary": ({"proj/summary.json": "{}\n"}, (), ["demo", "--out", "proj"],
                                      "summary.json in the output folder was not written by heatsight"),
    "1 overwrite of a foreign report": (dict(GOOD, **{"res/report.html": "mine\n"}), (),
                                        ["fit", "case.toml", "--out", "res", "--overwrite"],
                                        "report.html in the output folder was not written by heatsight"),
    # 2. a log with one more field per row than its header
    "2 record number after the time": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv":
                                                     "time [s],TC1,TC2,TC3\n1,0,85,80,40\n2,10,85,80,40\n"}), (),
                                       ["check", "case.toml"], "line 2 has more fields than the header"),
    "2 record number after ISO times": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv":
                                                      "time,TC1,TC2,TC3\n2024-05-01T08:00:00,1,85,80,40\n"}), (),
                                        ["check", "case.toml"], "line 2 has more fields than the header"),
    "2 log row shorter than its header": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv":
                                                       LOG.replace("10,85.1,80.1,40.1", "10,85.1,80.1")}), (),
                                          ["check", "case.toml"], "log.csv: malformed CSV: line 3 has 3 fields "
                                                                  "but the header has 4"),
    "2 log row shorter, trend": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv":
                                               LOG.replace("20,85.2,80,40", "20,85.2,80")}), (),
                                 ["trend", "case.toml", "--out", "o"], "log.csv: malformed CSV: line 4 has 3 fields"),
    "2 layout row shorter than its header": (dict(GOOD, **{"layout.csv": GOOD_LAYOUT.replace("TC3,100,180,10,0.2",
                                                                                             "TC3,100,180,10")}), (),
                                             ["check", "case.toml"], "layout.csv: malformed CSV: line 4 has 4 "
                                                                     "fields but the header (line 1) has 5"),
    "2 snapshot row shorter than its header": (dict(GOOD, **{"readings.csv": GOOD_READINGS.replace("TC2,58", "TC2")}),
                                               (), ["fit", "case.toml", "--out", "o"],
                                               "readings.csv: malformed CSV: line 3 has 1 field but"),
    # 3. tolerances outside a sane range
    "3 simulate tolerance 0.5": (files(), (), ["simulate", "case.toml", "--at", "points.csv", "--out", "o.csv",
                                               "--tolerance", "0.5"], "--tolerance 0.5 is outside 1e-12 to 0.001"),
    # 4. ordinary problems were 'internal error'
    "4 output under /proc": (GOOD, (), ["fit", "case.toml", "--out", "/proc/heatsight-x"], "/proc: cannot write here"),
    "4 a billion draws": (GOOD, (), ["fit", "case.toml", "--monte-carlo", "1000000000", "--out", "o"],
                          "--monte-carlo 1000000000 is more than 100000"),
    "4 terms = 100000": (dict(GOOD, **{"case.toml": FIT + "\n[fit]\nterms = 100000\n"}), (),
                         ["fit", "case.toml", "--out", "o"], "fit.terms: terms = 100000 is more than 200"),
    "4 every 10^30": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": LOG}), (),
                      ["trend", "case.toml", "--every", str(10 ** 30), "--out", "o"], "--every"),
    # 5. outputs all or none
    "5 a folder named summary.json": (dict(GOOD), ("res/summary.json",), ["fit", "case.toml", "--out", "res",
                                                                          "--overwrite"],
                                      "summary.json in the output folder is a folder"),
    # 6. zone names colliding with whole-face columns
    "6 zone mean": (dict(GOOD, **{"case.toml": FIT + ZONE.format("mean")}), (), ["check", "case.toml"],
                    "zone name 'mean' is also the name of a whole-face figure"),
    "6 zone nonuniformity": (dict(GOOD, **{"case.toml": FIT + ZONE.format("nonuniformity")}), (),
                             ["check", "case.toml"], "zone name 'nonuniformity'"),
    "6 zone Total_Power": (dict(GOOD, **{"case.toml": FIT + ZONE.format("Total_Power")}), (),
                           ["trend", "case.toml", "--log", "readings.csv", "--out", "o"], "zone name 'Total_Power'"),
    # 7. hangs and unbounded memory
    "7 harmonics = 5000": (dict(GOOD, **{"case.toml": FIT + "\n[fit]\nharmonics = 5000\n"}), (),
                           ["fit", "case.toml", "--out", "o"], "fit.harmonics: harmonics = 5000 is more than 48"),
    "7 tolerance 1e-20": (files(), (), ["simulate", "case.toml", "--at", "points.csv", "--tolerance", "1e-20"],
                          "--tolerance 1e-20 is outside"),
    "7 layout /dev/zero": (dict(GOOD, **{"case.toml": sub('"layout.csv"', '"/dev/zero"', FIT)}), (),
                           ["check", "case.toml"], "/dev/zero: is not a regular file"),
    # 8. a log named in the case: refused from its header, the body is not read
    "8 fit of a log named in the case": (dict(GOOD, **{"case.toml": LOG_FIT,
                                                       "log.csv": LOG + "30,garbage,x,y,z,w\n" * 5}), (),
                                         ["fit", "case.toml", "--out", "o"], "log.csv: reads as a log (its first column 'time'"),
    # 9. misleading refusals
    "9 sigma floor 0 names the option": (GOOD, (), ["trend", "case.toml", "--log", "readings.csv",
                                                    "--sigma-floor", "0"], "--sigma-floor: expected a positive"),
    # 10. minor
    "10 escape sequence in a sensor id": (dict(GOOD, **{"layout.csv": GOOD_LAYOUT.replace("TC5", "TC\x1b[2J5")}),
                                          (), ["check", "case.toml"], "holds the control character '\\x1b'"),
    "10 escape sequence in a log header": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv":
                                                         LOG.replace("TC3", "TC3\x07")}), (),
                                           ["check", "case.toml"], "holds the control character '\\x07'"),
    # 11. a second audit (session 36): what fit or trend refuses, check refuses too
    "11 keep_sensors names no sensor": (dict(GOOD, **{"case.toml": FIT + '[fit]\nkeep_sensors = ["TC99"]\n'}), (),
                                        ["check", "case.toml"], "fit.keep_sensors: names TC99, not in the sensor layout"),
    "11 two usable readings": (dict(GOOD, **{"readings.csv": "sensor,temperature [degC]\nTC1,60\nTC2,58\n"}), (),
                               ["check", "case.toml"], "only 2 usable sensor reading(s); a fit needs at least 3"),
    "11 a log of two sensors": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": "time [s],TC1,TC2\n0,85,80\n10,85,80\n"}),
                                (), ["check", "case.toml"], "the log has 2 sensor column(s) of the layout"),
    "11 a plan grid of millions": (dict(GOOD, **{"case.toml": FIT + "[plan]\npositions = 100\ndepths = 100\n"
                                                                    'angle_step = "1 deg"\n'}), (),
                                   ["check", "case.toml"], "makes 3600000 candidate positions, more than 200000"),
    "11 a snapshot whose first column is not sensor": (dict(GOOD, **{"readings.csv": "TC,temperature [degC]\nTC1,60\n"}),
                                                       (), ["check", "case.toml"], "unknown column 'TC' in snapshot"),
    "11 a two-column table that reads as a log": (dict(GOOD, **{"snap.csv": "id,temp [degC]\nTC1,60\n"}), (),
                                                  ["fit", "case.toml", "--readings", "snap.csv", "--out", "o"],
                                                  "reads as a log (its first column 'id' the time"),
    "11 the case file as readings": (GOOD, (), ["fit", "case.toml", "--readings", "case.toml", "--out", "o"],
                                     "case.toml: is a case file (TOML), not readings"),
    "11 a time cell too large for a number": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": LOG + "1e400,85,80,40\n"}),
                                              (), ["check", "case.toml"], "inf is not a finite number of seconds"),
    "10 profile of 4.5e223 degC": (files(**{"case.toml": sub('value = "25 degC"\n[sensors]',
                                                             'profile = "side.csv"\n[sensors]'),
                                            "side.csv": "theta,z [mm],value [degC]\n0,0,25\n120,20,4.5e223\n"
                                                        "240,40,27\n"}), (),
                                   ["simulate", "case.toml", "--at", "points.csv"], "is above 10000 K"),
}


@pytest.mark.parametrize("name", list(REFUSED))
def test_refused_cleanly(tmp_path, monkeypatch, capsys, name):
    content, dirs, argv, fragment = REFUSED[name]
    setup(tmp_path, content, dirs)
    before = tree(tmp_path)
    monkeypatch.chdir(tmp_path)
    code = main(argv)
    cap = capsys.readouterr()
    assert code == 2, cap.err
    assert cap.out == ""
    assert cap.err.startswith("heatsight: error: ") and cap.err.count("\n") == 1, cap.err
    assert "Traceback" not in cap.err and "internal error" not in cap.err
    assert fragment in cap.err, cap.err
    assert tree(tmp_path) == before               # nothing written, nothing changed, no temp files


# name -> (files, argv, fragment expected on stderr (a warning) or None)
ANSWERED = {
    "9 semicolons and decimal commas": (dict(GOOD, **{"readings.csv": GOOD_READINGS.replace(",", ";")
                                                      .replace("60", "60,5")}), ["check", "case.toml"], None),
    "9 one blank first line": (dict(GOOD, **{"readings.csv": "\n" + GOOD_READINGS}), ["check", "case.toml"], None),
    "9 trailing commas on a sorted log": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": LOG.replace("\n", ",\n")}),
                                          ["check", "case.toml"], None),
    "10 overflow code in a log": (dict(GOOD, **{"case.toml": LOG_FIT, "log.csv": LOG.replace("85.1", "9.9E+37")}),
                                  ["check", "case.toml"], "a logger's overflow code; treated as missing"),
    "10 overflow code in a snapshot": (dict(GOOD, **{"readings.csv": GOOD_READINGS.replace("52", "9.9E+37")}),
                                       ["check", "case.toml"], "a logger's overflow code; treated as missing"),
    "10 extra channel in a snapshot": (dict(GOOD, **{"readings.csv": GOOD_READINGS + "water,20\n"}),
                                       ["check", "case.toml"], "sensor 'water' is not a sensor of the layout; ignored"),
}


@pytest.mark.parametrize("name", list(ANSWERED))
def test_legal_input_answered(tmp_path, monkeypatch, capsys, name):
    content, argv, warning = ANSWERED[name]
    setup(tmp_path, content)
    before = tree(tmp_path)
    monkeypatch.chdir(tmp_path)
    code = main(argv)
    cap = capsys.readouterr()
    assert code == 0, cap.err
    assert "warning" not in cap.out                 # warnings go to stderr
    if warning:
        assert warning in cap.err
    assert tree(tmp_path) == before


# ---------------------------------------------------------------------------- the machine's problems


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    """One real fit of GOOD and its output files, reused so that each test below runs only the
    command's writing step (the fit itself is tested elsewhere)."""
    from heatsight.data_io.fit_steps import fit_case, load_fit_case, output_files

    folder = tmp_path_factory.mktemp("fitted")
    setup(folder, GOOD)
    case, readings = load_fit_case(folder / "case.toml")
    result, _ = fit_case(case, readings)
    return result, output_files(result, case, readings)


@pytest.fixture
def quick_fit(fitted, monkeypatch):
    from heatsight.data_io import fit_steps

    result, outputs = fitted
    monkeypatch.setattr(fit_steps, "fit_case", lambda *a, **k: (result, None))
    monkeypatch.setattr(fit_steps, "output_files", lambda *a, **k: list(outputs))


@pytest.mark.parametrize("error, fragment", [
    (OSError(errno.ENOSPC, "No space left on device"), "free some space"),
    (OSError(errno.EACCES, "Permission denied"), "choose a folder you may write to"),
    (OSError(errno.EROFS, "Read-only file system"), "the file system is read-only"),
    (MemoryError(), "not enough memory"),
])
def test_machine_problems_exit_2_and_leave_nothing(tmp_path, monkeypatch, capsys, quick_fit, error, fragment):
    from heatsight.data_io import csv_out

    setup(tmp_path, GOOD)
    before = tree(tmp_path)
    monkeypatch.chdir(tmp_path)
    real_add = csv_out.OutputSet.add

    def failing_add(self, name, data):
        if name == "summary.json":
            raise error
        return real_add(self, name, data)

    monkeypatch.setattr(csv_out.OutputSet, "add", failing_add)
    code = main(["fit", "case.toml", "--out", "res"])
    err = capsys.readouterr().err
    assert code == 2 and fragment in err and err.count("\n") == 1, err
    assert tree(tmp_path) == before


@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGHUP])
def test_termination_while_writing_leaves_the_old_outputs(tmp_path, monkeypatch, capsys, quick_fit, signum):
    """A second run into the same folder is stopped by a signal after writing one staged file:
    the first run's outputs stay as they were and no temporary file is left."""
    from heatsight.data_io import csv_out

    setup(tmp_path, GOOD)
    monkeypatch.chdir(tmp_path)
    assert main(["fit", "case.toml", "--out", "res"]) == 0
    (tmp_path / "res" / "estimate.csv").write_text("first run\n")     # to see it is not replaced
    before = tree(tmp_path)
    real_add = csv_out.OutputSet.add
    calls = []

    def add_then_signal(self, name, data):
        real_add(self, name, data)
        calls.append(name)
        if len(calls) == 2:
            os.kill(os.getpid(), signum)

    monkeypatch.setattr(csv_out.OutputSet, "add", add_then_signal)
    code = main(["fit", "case.toml", "--out", "res", "--overwrite"])
    err = capsys.readouterr().err
    assert code == 128 + signum and "stopped by signal" in err
    assert tree(tmp_path) == before
    assert signal.getsignal(signum) is not main.__globals__["_on_signal"]     # handlers restored


def test_failed_rename_puts_the_old_files_back(tmp_path, monkeypatch, capsys, quick_fit):
    """os.replace failing half-way through the renames: the replaced files come back."""
    from heatsight.data_io import csv_out

    setup(tmp_path, GOOD)
    monkeypatch.chdir(tmp_path)
    assert main(["fit", "case.toml", "--out", "res"]) == 0
    for p in (tmp_path / "res").iterdir():
        if p.name != "summary.json":                 # (it lists heatsight's own outputs)
            p.write_bytes(b"first run " + p.name.encode())              # every old file recognisable
    before = tree(tmp_path)
    real_replace = os.replace
    count = []
    for fail_at in (7, 9):              # while keeping an old file aside, and while renaming a new one
        count.clear()
        monkeypatch.setattr(csv_out.os, "replace",
                            lambda a, b, n=fail_at: (_ for _ in ()).throw(OSError(errno.EIO, "I/O error", str(b)))
                            if count.append(b) or len(count) == n else real_replace(a, b))
        code = main(["fit", "case.toml", "--out", "res", "--overwrite"])
        err = capsys.readouterr().err
        assert code == 2 and "I/O error" in err, err
        assert tree(tmp_path) == before


# ---------------------------------------------------------------------------- the Python API


@pytest.mark.parametrize("call, fragment", [
    (lambda hs: hs.fit(None), "case_path must be a path"),
    (lambda hs: hs.fit(42), "case_path must be a path"),
    (lambda hs: hs.fit("case.toml", readings=3.5), "readings must be a path"),
    (lambda hs: hs.fit("case.toml", bogus=1), "unknown option 'bogus'"),
    (lambda hs: hs.fit("case.toml").to_frame("sensor"), "which must be 'face', 'zones' or 'sensors'"),
    (lambda hs: hs.fit("case.toml").predict("abc"), "predict: points must be numbers"),
    (lambda hs: hs.fit("case.toml").predict([0.0, 1.0], [0.0], [10.0]), "the same length"),
    (lambda hs: hs.fit("case.toml").predict([float("nan")], [0.0], [10.0]), "finite"),
])
def test_api_misuse_raises_the_projects_error(tmp_path, monkeypatch, call, fragment):
    import heatsight
    from heatsight.data_io import InputError

    setup(tmp_path, GOOD)
    monkeypatch.chdir(tmp_path)
    with pytest.raises(InputError, match=fragment.replace("(", r"\(").replace("'", "'")):
        call(heatsight)


def test_escape_sequences_never_reach_the_terminal(tmp_path, monkeypatch, capsys):
    """A control character in a case-file key (read by the TOML parser, not by our CSV readers)
    is shown escaped in the one-line message."""
    setup(tmp_path, dict(GOOD, **{"case.toml": FIT.replace("radius =", '"rad\\u001b[2Jius" =')}))
    monkeypatch.chdir(tmp_path)
    assert main(["check", "case.toml"]) == 2
    err = capsys.readouterr().err
    assert "\x1b" not in err and err.count("\n") == 1, repr(err)


def test_termination_during_a_trend_leaves_no_temporary_file(tmp_path, monkeypatch, capsys):
    """SIGTERM while trend.csv is being streamed: no output folder and no hidden temporary file
    left (which made the rerun refuse a "non-empty" folder)."""
    from heatsight.data_io import trend_run
    from test_trend_cli import make_folder, make_log

    folder = make_folder(tmp_path)
    make_log(folder, hours=0.5, seed=3)
    before = tree(folder)
    monkeypatch.chdir(folder)
    real_run = trend_run.TrendRun.run

    def run_then_signal(self, stream, progress, expected_rows):
        stream.stream.write(b"start_s\n" * 1000)        # something staged in the hidden file (under the sink)
        os.kill(os.getpid(), signal.SIGTERM)
        return real_run(self, stream, progress, expected_rows)

    monkeypatch.setattr(trend_run.TrendRun, "run", run_then_signal)
    code = main(["trend", "platen.toml", "--log", "log.csv", "--out", "res"])
    assert code == 128 + signal.SIGTERM and "stopped by signal" in capsys.readouterr().err
    assert tree(folder) == before       # no folder res, so a rerun is not refused as "not empty"
