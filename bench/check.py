"""Benchmark of `heatsight check` on a case whose `readings` is a long log; prints ratios
measured in this one run.

`check` streams the log through the one log reader keeping only counts (rows, first and last
time, warnings), so it accepts and refuses what `trend` does while its memory does not grow
with the log.  Measured, each in a fresh process (peak resident memory from VmHWM, wall time):

1. `check` on a short and a 10x longer log: memory ratio long / short (goal: about 1, the
   memory does not grow with the log).
2. `check` against reading the whole long log into one table as `check` did before
   (`heatsight.data_io.tables.read_log`, imports included in both): memory and time ratios.
3. `check` of the same case with the bundled snapshot readings (imports, case and layout
   only): what the log adds.

The logs (the trend benchmark's 32-sensor platen, 1 s sampling) are made in a temporary
folder and removed afterwards.  Run:  python bench/check.py [--rows N]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "bench"))

from trend import make_case, make_log, sensor_field  # noqa: E402  (the trend benchmark's log maker)

PEAK = "print([l.split()[1] for l in open('/proc/self/status') if l.startswith('VmHWM')][0])"


def run(code: str) -> tuple[float, float]:
    """(peak resident memory [MB], wall time [s]) of `code` in a fresh Python process."""
    t = time.perf_counter()
    res = subprocess.run([sys.executable, "-c", code + "\n" + PEAK], capture_output=True, text=True, cwd=ROOT)
    wall = time.perf_counter() - t
    if res.returncode != 0:
        raise SystemExit(f"failed: {res.stderr[-400:]}")
    return int(res.stdout.strip().splitlines()[-1]) / 1024.0, wall


def check(case: Path) -> tuple[float, float]:
    return run("import io, contextlib\nfrom heatsight.data_io.cli import main\n"
               f"with contextlib.redirect_stdout(io.StringIO()):\n    assert main(['check', {str(case)!r}]) == 0")


def whole(case: Path, log: Path) -> tuple[float, float]:
    """What `check` did before: the whole log read into one table."""
    return run("from heatsight.data_io.case import load_case\n"
               "from heatsight.data_io.tables import read_layout, read_log\n"
               f"case = load_case({str(case)!r})\n"
               "layout = read_layout(case.sensors.layout, case.cylinder)\n"
               f"read_log({str(log)!r}, layout)")


def best(fn, runs=2):
    """The run with the least wall time (a shared machine makes single timings jumpy)."""
    return min((fn() for _ in range(runs)), key=lambda x: x[1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=128_000, help="rows of the short log (default 128000, ~37 MB)")
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="heatsight-bench-check-"))
    try:
        make_case(tmp)
        base = sensor_field(tmp)
        text = (tmp / "case.toml").read_text()
        cases = {}
        for name, rows in (("short", args.rows), ("long", 10 * args.rows)):
            make_log(tmp / f"{name}.csv", rows, base)
            cases[name] = tmp / f"{name}.toml"
            cases[name].write_text(text.replace('readings = "readings.csv"', f'readings = "{name}.csv"'))
        mb = {n: (tmp / f"{n}.csv").stat().st_size / 1e6 for n in ("short", "long")}
        m_snap, t_snap = best(lambda: check(tmp / "case.toml"))
        m_short, t_short = best(lambda: check(cases["short"]))
        m_long, t_long = best(lambda: check(cases["long"]))
        m_whole, t_whole = best(lambda: whole(cases["long"], tmp / "long.csv"), 1)
        print(f"logs: {args.rows} rows ({mb['short']:.0f} MB) and {10 * args.rows} rows ({mb['long']:.0f} MB), "
              f"32 sensors")
        print(f"check with the snapshot: {m_snap:.0f} MB, {t_snap:.2f} s")
        print(f"check, short log: {m_short:.0f} MB, {t_short:.2f} s; long log: {m_long:.0f} MB, {t_long:.2f} s")
        print(f"whole long log in one table (check before): {m_whole:.0f} MB, {t_whole:.2f} s")
        print(f"memory ratio check long / short = {m_long / m_short:.2f} (goal: about 1, no growth with the log)")
        print(f"check / whole-table reading of the long log: memory {m_long / m_whole:.2f}, "
              f"time {t_long / t_whole:.2f}")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
