"""Benchmark of `heatsight trend` over a fleet of parts; prints figures measured in this run.

8 parts (the demo platen with its own invented log each: a steady heater, noise and
offsets drawn per part) are trended, each way in a fresh Python process whose imports are
counted (as a command line run):
  1. one after another (a loop over the parts, data_io.trend_command.run_part), and
  2. as one fleet on a new local dask cluster of 2 worker processes (data_io.fleet.run_fleet
     as `heatsight trend A.toml B.toml ...` runs it: the parts' modules imported first, the
     workers forked on Linux; the cluster's start-up is counted).
Goal: (1) / (2) >= 1.6, and the numbers identical to 1e-12: every column of each part's
trend.parquet (full doubles) and the summary's reference figures are compared, and the
largest relative difference is printed.

Run:  python bench/fleet.py [--parts 8] [--hours 2] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))


def make_parts(root: Path, parts: int, hours: float) -> list[Path]:
    """`parts` case files, each in its own folder with its own log (test_trend_cli's maker)."""
    from test_trend_cli import make_folder, make_log

    cases = []
    for i in range(parts):
        f = root / f"part{i + 1:02d}"
        f.mkdir()
        make_folder(f)
        make_log(f, hours=hours, seed=100 + i)
        text = (f / "platen.toml").read_text().replace('readings = "readings.csv"', 'readings = "log.csv"')
        (f / "platen.toml").unlink()
        case = f / f"part{i + 1:02d}.toml"
        case.write_text(text)
        cases.append(case)
    return cases


def max_rel_difference(a: Path, b: Path) -> float:
    """Largest relative difference between the numbers of two output folders (trend.parquet
    columns, summary.json's first/last rows and reference fit mean)."""
    import pyarrow.parquet as pq

    ta, tb = pq.read_table(a / "trend.parquet").to_pandas(), pq.read_table(b / "trend.parquet").to_pandas()
    if list(ta.columns) != list(tb.columns) or len(ta) != len(tb):
        return float("inf")
    worst = 0.0
    for c in ta.columns:
        x, y = ta[c].to_numpy(), tb[c].to_numpy()
        if x.dtype.kind == "f":
            if not np.array_equal(np.isnan(x), np.isnan(y)):
                return float("inf")
            ok = np.isfinite(x)
            scale = np.maximum(np.abs(x[ok]), np.abs(y[ok]))
            d = np.abs(x[ok] - y[ok]) / np.where(scale > 0, scale, 1.0)
            worst = max(worst, float(d.max()) if d.size else 0.0)
        elif not (x == y).all():
            return float("inf")

    def flat(v):
        if isinstance(v, dict):
            return [z for k in sorted(v) for z in flat(v[k])]
        if isinstance(v, (list, tuple)):
            return [z for e in v for z in flat(e)]
        return [float(v)] if isinstance(v, (int, float)) and not isinstance(v, bool) else []

    sa, sb = (json.loads((p / "summary.json").read_text()) for p in (a, b))
    for key in ("first_row", "last_row", "strength", "change_strength"):
        for x, y in zip(flat(sa[key]), flat(sb[key])):
            if x != y:
                worst = max(worst, abs(x - y) / max(abs(x), abs(y)))
    return worst


def _process(code: str) -> float:
    """Seconds of a fresh Python process running `code` (BLAS on one thread, as the command line)."""
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    t = time.perf_counter()
    res = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True)
    if res.returncode != 0:
        raise SystemExit(f"run failed:\n{res.stderr[-3000:]}")
    return time.perf_counter() - t


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--parts", type=int, default=8)
    ap.add_argument("--hours", type=float, default=2.0, help="hours of log per part (10 s sampling)")
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
          f"load average {os.getloadavg()[0]:.1f} at start")
    tmp = Path(tempfile.mkdtemp(prefix="heatsight-bench-fleet-"))
    try:
        cases = make_parts(tmp, args.parts, args.hours)
        options = {"fmt": "parquet"}
        parts = json.dumps([str(c) for c in cases])
        seq = (f"import json\nfrom heatsight.data_io.trend_command import run_part\n"
               f"for c in json.loads({parts!r}):\n"
               f"    rec = run_part(c, {str(tmp / 'seq')!r} + '/' + c.rsplit('/', 1)[1][:-5] + '-trend', {options!r})\n"
               f"    assert rec['status'] == 'done', rec\n")
        fleet = (f"import json\nfrom heatsight.data_io.fleet import run_fleet\n"
                 f"from heatsight.data_io.trend_command import PART_MODULES, run_part\n"
                 f"records, status = run_fleet(json.loads({parts!r}), run_part, out={str(tmp / 'fleet')!r}, "
                 f"workers={args.workers}, options={options!r}, preload=PART_MODULES)\n"
                 f"assert status == 0, records\n")
        t_seq = _process(seq)
        t_fleet = _process(fleet)
        worst = max(max_rel_difference(tmp / "seq" / f"{c.stem}-trend", tmp / "fleet" / f"{c.stem}-trend")
                    for c in cases)
        print(f"{args.parts} parts, {args.hours:g} h of log each: one after another {t_seq:.1f} s; "
              f"fleet on {args.workers} local workers {t_fleet:.1f} s (cluster start-up included)")
        print(f"speed-up = {t_seq / t_fleet:.2f}x (goal >= 1.6)")
        print(f"largest relative difference of any number, fleet vs one by one = {worst:.3g} (goal <= 1e-12)")
        print(f"load average {os.getloadavg()[0]:.1f} at the end")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
