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

    return (os.environ.get("MALLOC_TRIM_THRESHOLD_"), os.environ.get("OPENBLAS_NUM_THREADS"),
            dask.config.get("distributed.worker.profile.enabled"))


def test_local_workers_keep_glibc_adaptive_heap_and_one_blas_thread():
    """dask's nannies set MALLOC_TRIM_THRESHOLD_ for their workers, which fixes glibc's mmap
    threshold at 128 KiB (a part ran 8 -> 14 s in a worker); the local cluster unsets it and
    keeps BLAS on one thread per worker."""
    client = fleet._client(None, 1)
    try:
        assert list(client.run(_worker_settings).values()) == [(None, "1", False)]
    finally:
        cluster = client.cluster
        client.close()
        cluster.close()


_PRELOADED = []


def _preload():
    _PRELOADED.append(True)


def _probe(case, out, options):
    """A fleet task reporting whether the worker holds the parent's preloaded state."""
    return {"case": case, "status": "done", "preloaded": bool(_PRELOADED)}


@pytest.mark.skipif(not fleet.LOCAL_START_METHOD, reason="the local cluster forks its workers on Linux only")
def test_local_workers_start_from_the_preloaded_parent(tmp_path):
    """On Linux the local cluster forks its workers after run_fleet's preload, so the parts'
    modules are not imported again in each worker (bench/fleet.py); a worker started fresh
    (spawn) would import this module anew and see no preload."""
    cases = []
    for name in ("a", "b"):
        (tmp_path / f"{name}.toml").write_text("")
        cases.append(tmp_path / f"{name}.toml")
    _PRELOADED.clear()
    records, status = fleet.run_fleet(cases, _probe, workers=1, preload=_preload)
    assert status == 0 and [r["preloaded"] for r in records] == [True, True]
    _PRELOADED.clear()
