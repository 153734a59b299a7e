"""Time the demo's fit at two commits of this repository in one run, and compare their answers.

    python bench/versions.py BEFORE [AFTER] [--repeat 3] [--case demo_data/platen.toml]

BEFORE and AFTER are git revisions (AFTER defaults to the working tree).  Each is laid out as
an importable `heatsight` package in a temporary folder (`git archive`; the package-dir
mapping of that revision's pyproject.toml), and child processes alternate between the two: one warm-up fit,
then --repeat timed `heatsight.fit` calls each, one BLAS thread.  Prints the median times, their
ratio (after / before) and whether the two summaries agree number by number
(compare_summaries.py, --rtol, default 1e-9).  This machine's speed moves by tens of per cent from hour to
hour, so only ratios measured within one run mean anything.
"""

from __future__ import annotations

import argparse
import io
import json
import shutil
import statistics
import subprocess
import sys
import tarfile
import tempfile
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(Path(__file__).resolve().parent))
from compare_summaries import compare  # noqa: E402

CHILD = r"""
import json, sys, time
sys.path.insert(0, sys.argv[1])
from threadpoolctl import threadpool_limits
import heatsight
with threadpool_limits(1):
    heatsight.fit(sys.argv[2])
    times = []
    for _ in range(int(sys.argv[3])):
        t0 = time.perf_counter()
        res = heatsight.fit(sys.argv[2])
        times.append(time.perf_counter() - t0)
print(json.dumps({"file": heatsight.__file__, "times": times, "summary": res.raw.summary}, default=float))
"""


def lay_out(revision: str | None, into: Path) -> Path:
    """An importable tree into/heatsight/{forward, inverse, data_io, demo_data} of `revision`
    (None: the working tree)."""
    src = into / "src"
    if revision is None:
        src = ROOT
    else:
        data = subprocess.run(["git", "-C", str(ROOT), "archive", revision], check=True,
                              capture_output=True).stdout
        with tarfile.open(fileobj=io.BytesIO(data)) as tar:
            tar.extractall(src, filter="data")
    # where each package lives in that revision: its pyproject.toml's package-dir
    with open(src / "pyproject.toml", "rb") as f:
        package_dir = tomllib.load(f)["tool"]["setuptools"]["package-dir"]
    for package, folder in sorted(package_dir.items()):     # parents before their subpackages
        shutil.copytree(src / folder, into / "pkg" / Path(*package.split(".")))
    return into / "pkg"


def run(path: Path, case: str, repeat: int) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), case, str(repeat)], check=True,
                         capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("before")
    ap.add_argument("after", nargs="?", default=None)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--rounds", type=int, default=2, help="alternations of the two versions")
    ap.add_argument("--case", default=str(ROOT / "demo_data" / "platen.toml"))
    ap.add_argument("--rtol", type=float, default=1e-9, help="summaries agree to this (relative)")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        paths = {name: lay_out(rev, Path(tmp) / name)
                 for name, rev in (("before", args.before), ("after", args.after))}
        times, summaries = {"before": [], "after": []}, {}
        for _ in range(args.rounds):
            for name in ("before", "after"):
                got = run(paths[name], args.case, args.repeat)
                if not got["file"].startswith(tmp):
                    raise SystemExit(f"the {name} run imported {got['file']}, not its own tree")
                times[name] += got["times"]
                summaries[name] = got["summary"]
    label = {"before": args.before, "after": args.after or "working tree"}
    for name in ("before", "after"):
        print(f"{label[name]:>14}: median {statistics.median(times[name]):.2f} s "
              f"({', '.join(f'{t:.2f}' for t in times[name])})")
    ratio = statistics.median(times["after"]) / statistics.median(times["before"])
    print(f"ratio after / before: {ratio:.2f}")
    diffs = []
    bad = compare(summaries["before"], summaries["after"], args.rtol, out=diffs)
    worst = max((d for _, d in diffs), default=0.0)
    print(f"summaries: {len(diffs)} numbers, largest relative difference {worst:.2g}; "
          + (f"agree to {args.rtol:g}" if not bad else f"{len(bad)} differ beyond {args.rtol:g}, e.g. {bad[:3]}"))


if __name__ == "__main__":
    main()
