"""`heatsight trend` over several parts on dask.distributed: the same files as one part at a
time, progress per part, one part's bad input reported while the others go on."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

pytest.importorskip("distributed")

from heatsight.data_io import fleet                                 # noqa: E402
from heatsight.data_io.cli import main                              # noqa: E402
from heatsight.data_io.errors import InputError                     # noqa: E402
from heatsight.data_io.trend_command import run_trend               # noqa: E402
from test_trend_cli import make_folder, make_log                     # noqa: E402


def _part(root: Path, name: str, seed: int) -> Path:
    f = root / name
    f.mkdir()
    make_folder(f)
    make_log(f, hours=1.0, seed=seed)
    text = (f / "platen.toml").read_text().replace('readings = "readings.csv"', 'readings = "log.csv"')
    (f / f"{name}.toml").write_text(text)
    (f / "platen.toml").unlink()
    return f / f"{name}.toml"


def test_fleet_matches_one_by_one_and_goes_on_past_a_bad_part(tmp_path, capsys):
    a, b = _part(tmp_path, "a", 0), _part(tmp_path, "b", 1)
    bad = tmp_path / "c" / "c.toml"
    bad.parent.mkdir()
    shutil.copy(a, bad)                                    # its layout and log are missing
    code = main(["trend", str(a), str(bad), str(b), "--out", str(tmp_path / "fleet"), "--workers", "2",
                 "--every", "5"])
    out, err = capsys.readouterr()
    assert code == 2                                       # a part had bad input; the others are written
    assert sorted(p.name for p in (tmp_path / "fleet").iterdir()) == ["a-trend", "b-trend"]
    assert out.count("done in") == 2 and "2 of 3 parts done" in out
    # a fleet says what it runs before the first part's minutes pass (long work shows progress)
    assert out.splitlines()[0] == "3 parts on a local cluster of 2 worker processes; a line as each part finishes"
    assert err.count("heatsight: error: ") == 1 and "c.toml" in err and "layout.csv" in err
    assert "Traceback" not in err
    for case in (a,):                                      # the same bytes as the part run alone
        run_trend(case, out=tmp_path / f"alone-{case.stem}", every=5, progress=False, echo=lambda *_: None)
        for name in ("trend.csv",):
            assert (tmp_path / "fleet" / f"{case.stem}-trend" / name).read_bytes() == \
                (tmp_path / f"alone-{case.stem}" / name).read_bytes()
        sa = json.loads((tmp_path / "fleet" / f"{case.stem}-trend" / "summary.json").read_text())
        sb = json.loads((tmp_path / f"alone-{case.stem}" / "summary.json").read_text())
        # identical to 1e-12: a process of its own may round the last bit differently (SIMD alignment)
        for key in ("last_row", "first_row", "strength", "change_strength"):
            assert _close(sa[key], sb[key]), key
        assert _close(sa["reference_fit"]["mean"], sb["reference_fit"]["mean"])
        # each part's warnings reach the console, named by its case (they stayed in its files)
        assert sa["warnings"] and all(f"heatsight: warning: {case}: {w}" in err for w in sa["warnings"])


def _close(x, y, rel=1e-12):
    """x and y (numbers in nested dicts / lists) equal to `rel`, everything else equal."""
    if isinstance(x, dict):
        return x.keys() == y.keys() and all(_close(x[k], y[k], rel) for k in x)
    if isinstance(x, (list, tuple)):
        return len(x) == len(y) and all(_close(a, b, rel) for a, b in zip(x, y))
    if isinstance(x, float):
        return x == pytest.approx(y, rel=rel, abs=0)
    return x == y


def test_fleet_parts_and_folders(tmp_path):
    for n in ("x", "y"):
        (tmp_path / f"{n}.toml").write_text("")
    (tmp_path / "notes.txt").write_text("")
    assert [p.name for p in fleet.fleet_parts([tmp_path])] == ["x.toml", "y.toml"]
    with pytest.raises(InputError, match="given twice"):
        fleet.fleet_parts([tmp_path, tmp_path / "x.toml"])
    with pytest.raises(InputError, match="no such case"):
        fleet.fleet_parts([tmp_path / "missing.toml"])
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match="no case file"):
        fleet.fleet_parts([tmp_path / "empty"])
    (tmp_path / "z").mkdir()
    (tmp_path / "z" / "x.toml").write_text("")
    with pytest.raises(InputError, match="two parts would write"):
        fleet.part_folders([tmp_path / "x.toml", tmp_path / "z" / "x.toml"], tmp_path / "out")


def test_exit_status():
    assert fleet.exit_status([{"status": "done"}] * 2) == 0
    assert fleet.exit_status([{"status": "done"}, {"status": "bad input"}]) == 2
    assert fleet.exit_status([{"status": "failed"}, {"status": "bad input"}]) == 1


def test_log_option_is_refused_for_several_parts(tmp_path, capsys):
    (tmp_path / "x.toml").write_text("")
    (tmp_path / "y.toml").write_text("")
    code = main(["trend", str(tmp_path / "x.toml"), str(tmp_path / "y.toml"), "--log", "l.csv"])
    assert code == 2 and "each case reads its own log" in capsys.readouterr().err


def _worker_settings():
    import os

    import dask
    from threadpoolctl import threadpool_info

    blas = sorted({i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"})
    return (os.environ.get("MALLOC_TRIM_THRESHOLD_"), os.environ.get("OPENBLAS_NUM_THREADS"),
            dask.config.get("distributed.worker.profile.enabled"), blas)


def test_local_workers_keep_glibc_adaptive_heap_and_one_blas_thread():
    """dask's nannies set MALLOC_TRIM_THRESHOLD_ for their workers, which fixes glibc's mmap
    threshold at 128 KiB (a part ran 8 -> 14 s in a worker); the local cluster unsets it and
    keeps BLAS on one thread per worker."""
    from heatsight.data_io.trend_command import PART_MODULES

    client = fleet._client(None, 1, PART_MODULES)
    try:
        assert list(client.run(_worker_settings).values()) == [(None, "1", False, [1])]
    finally:
        cluster = client.cluster
        client.close()
        cluster.close()



_PROBE = """
import sys
from heatsight.data_io import fleet

def probe(case, out, options):
    return {"case": case, "status": "done", "loaded": "wave" in sys.modules}

if __name__ == "__main__":
    records, status = fleet.run_fleet(sys.argv[1:], probe, workers=1, preload=["wave"])
    assert status == 0, records
    print(",".join(str(r["loaded"]) for r in records))
"""


@pytest.mark.skipif(not fleet.LOCAL_START_METHOD, reason="the local cluster preloads its workers on Linux only")
def test_local_workers_start_with_the_preloaded_modules(tmp_path):
    """On Linux the local cluster's workers come from a fork server that imported run_fleet's
    `preload` list first (a fresh process: the server is one per process); a spawned worker
    would not hold the marker module (stdlib `wave`, which nothing here imports)."""
    import subprocess
    import sys

    cases = []
    for name in ("a", "b"):
        (tmp_path / f"{name}.toml").write_text("")
        cases.append(str(tmp_path / f"{name}.toml"))
    (tmp_path / "probe.py").write_text(_PROBE)
    res = subprocess.run([sys.executable, str(tmp_path / "probe.py"), *cases], capture_output=True, text=True,
                         cwd=tmp_path, timeout=300)
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.strip() == "True,True"


_ORDER = """
import sys
from heatsight.data_io import fleet

seen = []
real = fleet.start_fork_server

def spy(modules):
    seen.append(("dask" in sys.modules, list(modules)))
    real(modules)

if __name__ == "__main__":
    fleet.start_fork_server = spy
    client = fleet._client(None, 1, ["wave"])
    try:
        print(seen, client.run(lambda: "wave" in sys.modules))
    finally:
        cluster = client.cluster
        client.close()
        cluster.close()
"""


@pytest.mark.skipif(fleet.LOCAL_START_METHOD != "forkserver", reason="the fork server serves Linux only")
def test_fork_server_starts_before_dask_is_imported(tmp_path):
    """The fork server's imports (about 1.4 s for a part's modules) run while this process
    imports dask and starts the scheduler: it is started first (bench/fleet.py: the fleet of
    8 parts 0.5-0.8 s sooner in paired runs)."""
    import subprocess
    import sys

    (tmp_path / "order.py").write_text(_ORDER)
    res = subprocess.run([sys.executable, str(tmp_path / "order.py")], capture_output=True, text=True,
                         cwd=tmp_path, timeout=300)
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.startswith("[(False, ['distributed', 'wave'])]"), res.stdout
    assert res.stdout.rstrip().endswith("True}"), res.stdout


def test_the_parts_modules_exist():
    """A name in PART_MODULES that does not import would be skipped silently by the fork server."""
    import importlib

    from heatsight.data_io.trend_command import PART_MODULES

    for name in PART_MODULES:
        importlib.import_module(name)


def test_workers_with_one_case_is_refused_in_words(tmp_path, capsys):
    """`--workers` with one case switched to the fleet quietly (output in DIR/<case>-trend, and
    with --log: "--log serves one part" though one part was given); it is refused now."""
    a = _part(tmp_path, "a", 0)
    assert main(["trend", str(a), "--log", str(a.parent / "log.csv"), "--workers", "1"]) == 2
    err = capsys.readouterr().err
    assert "--workers serves several parts" in err and "--log serves one part" not in err


def _fake_part(case, out, options):
    """A stand-in task: what a worker received; a case named 'bad*' leaves a staged file in a
    folder it made, as a killed write would, and fails."""
    import os
    from pathlib import Path as P

    if P(case).stem.startswith("bad"):
        P(out).mkdir(parents=True, exist_ok=True)
        (P(out) / ".trend.csv.k1ll3d.tmp").write_text("partial")
        return {"case": case, "status": "failed", "error": "worker lost"}
    return {"case": case, "status": "done", "absolute": [os.path.isabs(case), os.path.isabs(out)]}


def test_fleet_runs_keep_to_their_own_parts_paths_and_leftovers(tmp_path, monkeypatch):
    """Task names are unique to each run (two runs on one cluster never take each other's
    results); workers get absolute paths (a real cluster's workers start elsewhere) while the
    records name each case as given; a part that did not finish leaves no folder made by this
    run, and an --out folder left empty goes too."""
    monkeypatch.chdir(tmp_path)
    for name in ("a", "b", "bad"):
        (tmp_path / f"{name}.toml").write_text("")
    client = fleet._client(None, 1)
    keys = []
    submit = client.submit
    monkeypatch.setattr(client, "submit", lambda *a, **k: keys.append(k["key"]) or submit(*a, **k))
    try:
        first, status = fleet.run_fleet(["a.toml", "b.toml"], _fake_part, out="o1", client=client)
        assert status == 0 and [r["case"] for r in first] == ["a.toml", "b.toml"]
        assert all(r["absolute"] == [True, True] for r in first)
        second, status = fleet.run_fleet(["a.toml", "bad.toml"], _fake_part, out="o2", client=client)
        assert status == 1 and [r["status"] for r in second] == ["done", "failed"]
    finally:
        client.close()
        client.cluster.close()
    assert len(set(keys)) == 4 and not set(keys[:2]) & set(keys[2:])
    assert not (tmp_path / "o2").exists()          # bad-trend held only a staged file; o2 was empty


def test_output_folder_with_only_a_killed_runs_staged_files(tmp_path):
    """A staged '.NAME.XXXXXXXX.tmp' of heatsight's output names, left by a killed run, does not
    make the folder 'not empty' and is removed when the next run commits; a hidden file of
    anyone else's still does."""
    import types

    from heatsight.data_io.csv_out import OutputSet, output_folder, staging_leftovers

    case = types.SimpleNamespace(input_files=lambda: [])
    out = tmp_path / "run"
    out.mkdir()
    (out / ".trend.csv.ab12cd34.tmp").write_text("partial")
    (out / ".summary.json.zz99.tmp").write_text("partial")
    assert [p.name for p in staging_leftovers(out)] == [".summary.json.zz99.tmp", ".trend.csv.ab12cd34.tmp"]
    folder, create = output_folder(out, case, overwrite=False, names=("trend.csv", "summary.json"))
    assert folder == out and not create
    with OutputSet(out) as outset:
        outset.add("trend.csv", "t\n")
    assert sorted(p.name for p in out.iterdir()) == ["trend.csv"]
    other = tmp_path / "other"
    other.mkdir()
    (other / ".notes.tmp").write_text("mine")
    with pytest.raises(InputError, match="not empty"):
        output_folder(other, case, overwrite=False, names=("trend.csv",))


def test_scheduler_and_out_options_refused_in_words(tmp_path):
    """--scheduler '' and --workers beside --scheduler are refused before anything connects;
    an --out whose parent is missing is refused as for one part; a port where something
    other than a dask scheduler answers says so (not 'not enough memory')."""
    import socket
    import threading

    a = tmp_path / "a.toml"
    a.write_text("")
    with pytest.raises(InputError, match="scheduler's address"):
        fleet.run_fleet([a], _fake_part, scheduler=" ")
    with pytest.raises(InputError, match="leave --workers out"):
        fleet.run_fleet([a], _fake_part, scheduler="tcp://127.0.0.1:1", workers=2)
    with pytest.raises(InputError, match="does not exist"):
        fleet.run_fleet([a], _fake_part, out=tmp_path / "no" / "such")
    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(4)

    def answer():                      # an HTTP server's reply to whatever arrives
        for _ in range(4):
            try:
                conn, _ = srv.accept()
            except OSError:
                return
            conn.recv(65536)
            conn.sendall(b"HTTP/1.1 400 Bad Request\r\nContent-Length: 0\r\n\r\n" * 64)
            conn.close()
    threading.Thread(target=answer, daemon=True).start()
    try:
        with pytest.raises(InputError, match="not a dask scheduler"):
            fleet.run_fleet([a], _fake_part, scheduler=f"tcp://127.0.0.1:{srv.getsockname()[1]}")
    finally:
        srv.close()


def test_folder_of_part_folders_is_named_in_the_message(tmp_path):
    """A folder whose case files sit one level down (a folder per part) is refused with where
    they are and how to give them."""
    (tmp_path / "plant" / "press").mkdir(parents=True)
    (tmp_path / "plant" / "press" / "press.toml").write_text("")
    with pytest.raises(InputError, match=r"subfolders hold 1 .*plant/\*/\*\.toml"):
        fleet.fleet_parts([tmp_path / "plant"])
