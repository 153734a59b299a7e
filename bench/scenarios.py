"""The independent scenario suite: how well does inverse.fit recover realistic unseen faces?

    python bench/scenarios.py [--seeds N] [--set suite|second|all] [--only a,b]
                              [--fit key=value ...] [--scale S] [--mesh-check]

Runs every scenario of tests/scenario_cases.py, or with --set second the second set kept
apart from it (tests/scenario_holdout.py: no default was chosen on it), or both (readings from the scikit-fem solver, truths
that are heater patterns, not prior draws), prints one row per scenario (averaged over the
seeds) and then each goal of issue 9 as MET / NOT MET.  Columns:

    relRMS   RMS error of the face / sd of the truth over the display grid
    cover    share of grid points whose truth lies in the 95 % band
    sharp    mean half band / sd of the truth
    zones    zone means within 2 sd / zones, and the largest |error| / sd
    power    (total power - truth) / sd (the worst over the seeds)
    aside    sensors set aside: expected -> got (first seed); below it, a doubtful sensor the
             answer weighs (inverse.sensor_doubt) and its fault probability, per seed

--fit passes keywords to inverse.fit (e.g. --fit smoothing=curvature --fit harmonics=10);
values are read as int, float, true/false or text.  --mesh-check also solves each scenario on
a mesh with twice the cells in r and z and 1.5x the harmonics and prints the largest change
of a reading against the smallest sensor sigma (the FEM convergence check).
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != HERE]
sys.path.insert(0, str(HERE.parent / "tests"))

import numpy as np  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

import scenario_cases as sc  # noqa: E402
import scenario_holdout as holdout  # noqa: E402
import scenario_metrics as sm  # noqa: E402


def _value(text):
    low = text.lower()
    if low in ("true", "false"):
        return low == "true"
    for kind in (int, float):
        try:
            return kind(text)
        except ValueError:
            pass
    return text


def parse_fit(items):
    out = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        if not sep or not key:
            raise SystemExit(f"--fit expects key=value, got {item!r}")
        out[key.strip()] = _value(value.strip())
    return out


def fmt(x, spec=".2f"):
    return "   nan" if x is None or not np.isfinite(x) else format(x, spec)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=1, help="noise seeds per scenario (default 1)")
    ap.add_argument("--only", default="", help="comma-separated scenario names (default: all of the set)")
    ap.add_argument("--set", choices=("suite", "second", "all"), default="suite",
                    help="the suite (tests/scenario_cases.py, default), the second set kept apart from it "
                         "(tests/scenario_holdout.py), or both")
    ap.add_argument("--fit", action="append", metavar="KEY=VALUE", help="keyword passed to inverse.fit")
    ap.add_argument("--scale", type=float, default=1.0, help="FEM cell-count factor (default 1)")
    ap.add_argument("--mesh-check", action="store_true", help="also compare with a refined FEM solve")
    args = ap.parse_args(argv)
    sets = {"suite": sc.NAMES, "second": holdout.NAMES, "all": sc.NAMES + holdout.NAMES}
    known = sc.NAMES + holdout.NAMES
    names = [n.strip() for n in args.only.split(",") if n.strip()] or list(sets[args.set])
    unknown = [n for n in names if n not in known]
    if unknown:
        raise SystemExit(f"unknown scenario(s) {unknown}; known: {', '.join(known)}")
    fit_kwargs = parse_fit(args.fit)
    print(f"scenario {args.set}: {len(names)} scenarios x {args.seeds} seed(s); fit keywords {fit_kwargs or 'defaults'}",
          flush=True)

    scores, checks = [], {}
    for i, name in enumerate(names, 1):
        for seed in range(args.seeds):
            print(f"[{i}/{len(names)}] {name} seed {seed} ...", end=" ", flush=True)
            t0 = time.perf_counter()
            scn = sc.make(name, seed=seed, scale=args.scale)
            t_fem = time.perf_counter() - t0
            with threadpool_limits(1):
                s = sm.run(scn, seed=seed, **fit_kwargs)
            scores.append(s)
            print(f"FEM {t_fem:.1f} s, fit {s.seconds:.1f} s" + (f"  FAILED: {s.error}" if s.error else ""),
                  flush=True)
        if args.mesh_check:
            checks[name] = sc.mesh_check(name, args.scale)
            d, sig, f1, f2 = checks[name]
            print(f"      mesh check: max change {d:.2g} K = {d / sig:.2g} sigma "
                  f"({f1['nr']}x{f1['nz']}, m<={f1['m_max']} -> {f2['nr']}x{f2['nz']}, m<={f2['m_max']}); "
                  f"heat in {f1['fem_heat_in']:.6g} -> {f2['fem_heat_in']:.6g} W",
                  flush=True)

    print()
    head = f"{'scenario':<22} {'relRMS':>6} {'cover':>6} {'sharp':>6} {'zones':>12} {'power':>7}  aside (expected -> got)"
    print(head)
    print("-" * len(head))
    for name, ss in sm._by_name(scores).items():
        zz = [abs(z) for s in ss for z in s.zone_z.values()]
        within = sum(z <= sm.WITHIN_SD for z in zz)
        worst_p = max((abs(s.power_z) for s in ss), default=math.nan)
        sign = next((np.sign(s.power_z) for s in ss if abs(s.power_z) == worst_p), 1.0)
        zones = f"{within}/{len(zz)} {fmt(max(zz), '.1f') if zz else '-':>4}"
        goal = "*" if ss[0].rms_goal != 0.5 else " "
        res = " " if ss[0].resolves else "-"
        print(f"{name:<22} {fmt(np.mean([s.rel_rms for s in ss])):>5}{goal} "
              f"{fmt(np.mean([s.coverage for s in ss])):>6} {fmt(np.mean([s.sharpness for s in ss])):>5}{res} "
              f"{zones:>12} {fmt(sign * worst_p, '+.1f'):>7}  {list(ss[0].broken)} -> {list(ss[0].set_aside)}")
        for s in ss:     # the first seed, and every seed with a zone beyond 2 sd
            if s.zone_z and (s is ss[0] or max(map(abs, s.zone_z.values())) > sm.WITHIN_SD):
                print(f"{'':<22} zone error / sd (seed {s.seed}): "
                      + ", ".join(f"{k} {v:+.1f}" for k, v in s.zone_z.items()))
        for s in ss:
            if s.extra.get("calibrated"):
                cal = ", ".join(f"{k} = {v:.3g} +- {sd:.2g}" for k, (v, sd) in s.extra["calibrated"].items())
                print(f"{'':<22} calibrated (seed {s.seed}): {cal}")
            if s.extra.get("doubt"):
                d = s.extra["doubt"]
                print(f"{'':<22} weighed (seed {s.seed}): {d['sensor']} broken with probability "
                      f"{d['fault_probability']:.2f}")
            if s.error:
                print(f"{'':<22} seed {s.seed} failed: {s.error}")
    print("(* relative RMS goal 0.8 on the sparse layout; - layout does not resolve the face: no sharpness goal)")
    print()
    for goal, met, detail in sm.goals(scores):
        print(f"{'MET    ' if met else 'NOT MET'}  {goal}: {detail}")


if __name__ == "__main__":
    main()
