"""Parquet logs in (streamed in row groups), trend.parquet out, the reader thread and the
BLAS thread limit of the batch solver: the same numbers as the CSV / plain paths."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")

from heatsight.data_io import logs, trend_run                     # noqa: E402
from heatsight.data_io.errors import InputError                   # noqa: E402
from heatsight.data_io.trend_command import run_trend             # noqa: E402
from test_trend_cli import make_folder, make_log                   # noqa: E402


def _quiet(*_):
    pass


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    f = make_folder(tmp_path_factory.mktemp("pq"))
    make_log(f, hours=1.5)
    frame = pd.read_csv(f / "log.csv")
    # small row groups, so that the reader really streams several of them
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), f / "log.parquet", row_group_size=157)
    return f


def test_parquet_log_gives_the_csv_log_numbers(folder):
    a, _ = run_trend(folder / "platen.toml", log=folder / "log.csv", out=folder / "a", progress=False, echo=_quiet)
    b, _ = run_trend(folder / "platen.toml", log=folder / "log.parquet", out=folder / "b", progress=False,
                     echo=_quiet, chunk_rows=200)
    ta, tb = pd.read_csv(folder / "a" / "trend.csv"), pd.read_csv(folder / "b" / "trend.csv")
    assert list(ta.columns) == list(tb.columns) and len(ta) == len(tb) > 5
    # the CSV text holds 4 decimals of the same values, so both logs give the same numbers
    assert np.allclose(ta.select_dtypes(float), tb.select_dtypes(float), rtol=1e-12, atol=1e-9, equal_nan=True)
    assert a["rows_read"] == b["rows_read"] == len(pd.read_csv(folder / "log.csv"))


def test_parquet_log_is_read_in_row_groups_not_whole(folder, monkeypatch):
    seen = []
    real = pq.ParquetFile.iter_batches

    def spy(self, *args, **kwargs):
        seen.append(kwargs.get("batch_size"))
        return real(self, *args, **kwargs)

    monkeypatch.setattr(pq.ParquetFile, "iter_batches", spy)
    monkeypatch.setattr(pd, "read_parquet", lambda *a, **k: pytest.fail("a Parquet log was read whole"))
    from heatsight.data_io.log_header import open_log
    from heatsight.data_io.tables import read_layout
    from heatsight.data_io.case import load_case

    case = load_case(folder / "platen.toml", purpose="fit")
    layout = read_layout(case.sensors.layout, case.cylinder)
    cols = open_log(folder / "log.parquet", layout)
    chunks = list(logs.LogReader(cols, layout, chunk_rows=300))
    assert seen == [300] and len(chunks) == -(-cols_rows(folder) // 300)
    assert logs.count_rows(folder / "log.parquet") == cols_rows(folder) + 1


def cols_rows(folder):
    return pq.ParquetFile(folder / "log.parquet").metadata.num_rows


def test_parquet_timestamps_are_times(folder, tmp_path):
    frame = pd.read_csv(folder / "log.csv")
    t = frame.pop("time [s]")
    frame.insert(0, "time", pd.Timestamp("2025-03-01T06:00:00+01:00") + pd.to_timedelta(t, unit="s"))
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), tmp_path / "stamped.parquet")
    s, out = run_trend(folder / "platen.toml", log=tmp_path / "stamped.parquet", out=tmp_path / "o",
                       progress=False, echo=_quiet)
    rows = pd.read_csv(out / "trend.csv")
    assert rows["start_iso"].iloc[0].startswith("2025-03-01T0") and rows["start_iso"].iloc[0].endswith("+01:00")
    assert rows["start_s"].iloc[0] >= 0 and len(rows) == s["trend_rows"]


def test_a_boolean_sensor_column_is_refused_and_an_ignored_one_kept(folder, tmp_path):
    """A Parquet column of true/false under a sensor's name was read as temperatures of 0 and
    1 degC; a flag column that is not a sensor of the layout is ignored as before."""
    frame = pd.read_csv(folder / "log.csv").head(400)
    frame["alarm"] = frame["TC01"] > 1e9
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), tmp_path / "ok.parquet")
    from heatsight.data_io.case import load_case
    from heatsight.data_io.log_header import open_log
    from heatsight.data_io.tables import read_layout

    case = load_case(folder / "platen.toml", purpose="fit")
    layout = read_layout(case.sensors.layout, case.cylinder)
    assert "alarm" in open_log(tmp_path / "ok.parquet", layout).ignored
    frame["TC03"] = frame["TC03"] > 100.0
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), tmp_path / "flags.parquet")
    with pytest.raises(InputError, match="column 'TC03' holds true/false values, not temperatures"):
        open_log(tmp_path / "flags.parquet", layout)


def test_trend_parquet_output_holds_the_csv_rows(folder):
    run_trend(folder / "platen.toml", log=folder / "log.csv", out=folder / "c", progress=False, echo=_quiet)
    s, out = run_trend(folder / "platen.toml", log=folder / "log.csv", out=folder / "p", progress=False,
                       echo=_quiet, fmt="parquet")
    assert sorted(p.name for p in out.iterdir()) == ["report.html", "summary.json", "trend.parquet", "trend.png"]
    assert json.loads((out / "summary.json").read_text())["output_files"][0] == "trend.parquet"
    a, b = pd.read_csv(folder / "c" / "trend.csv"), pq.read_table(out / "trend.parquet").to_pandas()
    assert list(a.columns) == list(b.columns)
    assert b["n_rows"].dtype == np.int64 and b["inner_flag"].dtype == bool
    # CSV holds fixed decimals giving 9 significant digits at each column's largest magnitude
    # (data_io.fast_csv.number_cells): half a unit of that last digit apart at most
    for c in (c for c in a.columns if a[c].dtype == float and not c.endswith("_s")):
        x, y = a[c].to_numpy(), b[c].to_numpy()
        big = np.nanmax(np.abs(y))
        half = 0.5 * 10.0 ** (np.floor(np.log10(big)) - 8) if big > 0 else 0.0
        assert np.all(np.abs(x - y)[np.isfinite(y)] <= half * (1 + 1e-9)), c
        assert (np.isnan(x) == np.isnan(y)).all()
    assert (a["inner_flag"] == b["inner_flag"]).all()


def test_read_ahead_same_chunks_and_errors_in_the_consumer():
    chunks = [np.arange(i, i + 3) for i in range(0, 30, 3)]
    assert [list(c) for c in logs.read_ahead(iter(chunks))] == [list(c) for c in chunks]

    def broken():
        yield 1
        raise InputError("line 7: bad", file="x.csv")

    got = []
    with pytest.raises(InputError, match="line 7"):
        for c in logs.read_ahead(broken()):
            got.append(c)
    assert got == [1]
    gen = logs.read_ahead(iter(range(1000)), depth=1)      # closing early stops the reader
    assert next(gen) == 0
    gen.close()


def test_reader_thread_and_blas_limit_do_not_change_the_rows(folder, monkeypatch):
    from heatsight.inverse import threads

    run_trend(folder / "platen.toml", log=folder / "log.csv", out=folder / "t1", progress=False, echo=_quiet,
              every=7)
    monkeypatch.setattr(trend_run, "READ_AHEAD", 0)
    monkeypatch.setattr(threads, "BLAS_THREADS", None)
    run_trend(folder / "platen.toml", log=folder / "log.csv", out=folder / "t2", progress=False, echo=_quiet,
              every=7)
    a, b = (pd.read_csv(folder / n / "trend.csv") for n in ("t1", "t2"))
    num = [c for c in a.columns if a[c].dtype == float]
    assert np.allclose(a[num], b[num], rtol=1e-8, atol=1e-9, equal_nan=True)


def test_blas_threads_limits_and_restores():
    threadpoolctl = pytest.importorskip("threadpoolctl")
    from heatsight.inverse.threads import blas_threads

    np.ones((2, 2)) @ np.ones((2, 2))
    before = [p["num_threads"] for p in threadpoolctl.threadpool_info() if p["user_api"] == "blas"]
    with blas_threads(1) as limited:
        inside = [p["num_threads"] for p in threadpoolctl.threadpool_info() if p["user_api"] == "blas"]
    after = [p["num_threads"] for p in threadpoolctl.threadpool_info() if p["user_api"] == "blas"]
    assert limited and all(n == 1 for n in inside) and after == before
    with blas_threads(None) as limited:
        assert not limited
