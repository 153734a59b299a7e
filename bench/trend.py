"""Benchmark of `heatsight trend` on long logs; prints ratios measured in this one run.

1. Time: a 1,000,000-row x 32-sensor log (1 s sampling, numeric time column), end to end
   `heatsight trend CASE --log LOG --every 1` (in this process, imports already done:
   parsing, streaming, the reference fit, a million inversions, trend.csv, figure, report)
   against a plain `pandas.read_csv` of the same file.  Goal: ratio <= 2.
   Also timed: the streaming part alone (reading, windows, inversion, writing the rows; the
   reference fit, figures and report left out) with --format parquet, goal <= 2.5x
   read_csv; the whole command with --format parquet, goal <= 3.5x; and, each both ways
   in this run, BLAS threads (library default vs one thread, inverse.threads.BLAS_THREADS)
   and the reader thread (data_io.trend_run.READ_AHEAD 0 vs 2).
2. Memory: peak resident memory of the same command on the 1,000,000-row log against a
   100,000-row log, each in a fresh process.  Goal: ratio <= 2 (the log is read in chunks
   and trend.csv is streamed).

The logs are made in a temporary folder (about 250 MB for the long one) and removed
afterwards.  Run:  python bench/trend.py [--rows N]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

N_SENSORS = 32
def make_case(folder: Path):
    """The demo platen case with 32 thermocouples on rings at two heights above the heater face
    (z = 6 and 20 mm; a layout of our own)."""
    rows = ["sensor,r [mm],theta [deg],z [mm],sigma [K],type,class"]
    k = 0
    for height, rings in ((6.0, (0, 40, 80, 120, 140)), (20.0, (30, 90, 135))):
        for ring in rings:
            count = 1 if ring == 0 else 4
            for j in range(count):
                if k < N_SENSORS:
                    rows.append(f"TC{k + 1:02d},{ring},{j * 360 / count + 15 * (height > 10):g},{height:g},0.1,K,1")
                    k += 1
    while k < N_SENSORS:
        rows.append(f"TC{k + 1:02d},{50 + 20 * (k % 4)},{37 * k % 360},32,0.1,K,1")
        k += 1
    (folder / "layout.csv").write_text("\n".join(rows) + "\n")
    for name, target in (("platen.toml", "case.toml"), ("readings.csv", "readings.csv")):
        shutil.copy(ROOT / "demo_data" / name, folder / target)    # the demo platen and its zones


def sensor_field(folder: Path) -> np.ndarray:
    """Steady readings [degC] of the layout's sensors for a smooth heater profile."""
    import heatsight.forward as fw
    from heatsight.data_io.case import load_case
    from heatsight.data_io.tables import read_layout

    case = load_case(folder / "case.toml")
    lay = read_layout(folder / "layout.csv", case.cylinder).frame
    faces = dict(case.faces)
    faces["bottom"] = fw.Flux(lambda r, th: 12000.0 * (1 + 0.1 * (r / 0.15) ** 2 * np.cos(th)))
    model = fw.CylinderModel(case.cylinder, faces, tolerance=1e-6)
    return model.evaluate(lay["r"].to_numpy(), lay["theta"].to_numpy(), lay["z"].to_numpy()).temperature - 273.15


def make_log(path: Path, rows: int, base: np.ndarray, seed: int = 0) -> None:
    """`rows` rows at 1 s: steady readings + noise, written in blocks with the fast writer."""
    from heatsight.data_io.fast_csv import csv_header, csv_rows, number_cells

    rng = np.random.default_rng(seed)
    names = ["time [s]"] + [f"TC{k + 1:02d}" for k in range(N_SENSORS)]
    with open(path, "wb") as fh:
        fh.write(csv_header(names).encode())
        for lo in range(0, rows, 200_000):
            n = min(200_000, rows - lo)
            t = np.arange(lo, lo + n, dtype=float)
            x = base[None, :] + rng.normal(0.0, 0.1, (n, N_SENSORS))
            fh.write(csv_rows([number_cells(t, 12)] + [number_cells(x[:, j], 7) for j in range(N_SENSORS)]))


def peak_memory_mb(folder: Path, log: Path, out: Path) -> float:
    """Peak resident memory [MB] of `heatsight trend --every 1` in a fresh process: VmHWM of
    /proc/self/status (reset by exec; ru_maxrss is not, so a child would inherit the
    parent's high-water mark)."""
    code = ("import sys; from heatsight.data_io.cli import main; "
            f"rc = main(['trend', {str(folder / 'case.toml')!r}, '--log', {str(log)!r}, '--every', '1', "
            f"'--out', {str(out)!r}]); "
            "print([l.split()[1] for l in open('/proc/self/status') if l.startswith('VmHWM')][0]); sys.exit(rc)")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    if res.returncode != 0:
        raise SystemExit(f"trend failed: {res.stderr}")
    return int(res.stdout.strip().splitlines()[-1]) / 1024.0


def main() -> None:
    import pandas as pd

    from heatsight.data_io.cli import main as cli

    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=1_000_000, help="rows of the long log (default 1e6)")
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="heatsight-bench-trend-"))
    try:
        make_case(tmp)
        base = sensor_field(tmp)
        long_log, short_log = tmp / "long.csv", tmp / "short.csv"
        t = time.perf_counter()
        make_log(long_log, args.rows, base)
        make_log(short_log, max(args.rows // 10, 1), base, seed=1)
        print(f"logs written in {time.perf_counter() - t:.1f} s: {args.rows} rows "
              f"({long_log.stat().st_size / 1e6:.0f} MB) and {max(args.rows // 10, 1)} rows, {N_SENSORS} sensors")

        # 2. memory first, each run in a fresh process (before this process holds big frames)
        m_long = peak_memory_mb(tmp, long_log, tmp / "mem-long")
        m_short = peak_memory_mb(tmp, short_log, tmp / "mem-short")

        # 1. time, both in this process (warm imports, warm file cache); the best of a few runs
        # each, since a shared machine makes single timings jumpy
        def best(fn, runs):
            times = []
            for _ in range(runs):
                t = time.perf_counter()
                fn()
                times.append(time.perf_counter() - t)
            return min(times)

        t_read = best(lambda: pd.read_csv(long_log), 3)
        out = iter(range(100))

        def run():
            if cli(["trend", str(tmp / "case.toml"), "--log", str(long_log), "--every", "1",
                    "--out", str(tmp / f"out-long-{next(out)}")]) != 0:
                raise SystemExit("trend failed")

        t_trend = best(run, 2)
        print(f"pandas.read_csv: {t_read:.2f} s; trend --every 1 end to end (trend.csv): {t_trend:.2f} s")
        print(f"time ratio trend / read_csv = {t_trend / t_read:.2f} (goal <= 2)")

        from heatsight.data_io import trend_run
        from heatsight.inverse import threads

        stream_t = []
        real_run, real_setup = trend_run.TrendRun.run, trend_run.TrendRun._setup

        def timed_run(self, *a, **k):
            self._setup_s = 0.0
            t0 = time.perf_counter()
            real_run(self, *a, **k)
            stream_t.append(time.perf_counter() - t0 - self._setup_s)

        def timed_setup(self, *a, **k):
            t0 = time.perf_counter()
            real_setup(self, *a, **k)
            self._setup_s += time.perf_counter() - t0

        trend_run.TrendRun.run, trend_run.TrendRun._setup = timed_run, timed_setup

        def run_pq():
            stream_t.clear()
            if cli(["trend", str(tmp / "case.toml"), "--log", str(long_log), "--every", "1", "--format", "parquet",
                    "--out", str(tmp / f"out-long-{next(out)}")]) != 0:
                raise SystemExit("trend failed")

        def whole_and_stream():
            t0 = time.perf_counter()
            run_pq()
            return time.perf_counter() - t0, stream_t[0]

        t_pq, s_pq = min(whole_and_stream() for _ in range(2))
        print(f"--format parquet: whole command {t_pq:.2f} s = {t_pq / t_read:.2f}x read_csv (goal <= 3.5); "
              f"streaming part {s_pq:.2f} s = {s_pq / t_read:.2f}x read_csv (goal <= 2.5)")
        threads.BLAS_THREADS = None
        t_blas, s_blas = whole_and_stream()
        threads.BLAS_THREADS = 1
        t_one, s_one = whole_and_stream()
        print(f"BLAS threads, library default vs one: whole {t_blas:.2f} vs {t_one:.2f} s "
              f"({t_blas / t_one:.2f}x), streaming {s_blas:.2f} vs {s_one:.2f} s ({s_blas / s_one:.2f}x)")
        trend_run.READ_AHEAD = 0
        t_noth, s_noth = whole_and_stream()
        trend_run.READ_AHEAD = 2
        t_th, s_th = whole_and_stream()
        print(f"reader thread, without vs with: streaming {s_noth:.2f} vs {s_th:.2f} s ({s_noth / s_th:.2f}x)")
        sizes = {p.suffix: p.stat().st_size for p in (tmp / "out-long-0" / "trend.csv",
                                                        tmp / "out-long-2" / "trend.parquet")}
        print(f"rows file: trend.csv {sizes['.csv'] / 1e6:.0f} MB, trend.parquet {sizes['.parquet'] / 1e6:.0f} MB; "
              f"log {long_log.stat().st_size / 1e6:.0f} MB")
        trend_run.TrendRun.run, trend_run.TrendRun._setup = real_run, real_setup
        print(f"peak memory: {m_long:.0f} MB for {args.rows} rows, {m_short:.0f} MB for "
              f"{max(args.rows // 10, 1)} rows")
        print(f"memory ratio = {m_long / m_short:.2f} (goal <= 2)")
        import os
        import platform
        print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
              f"load average {os.getloadavg()[0]:.1f} at the end")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
