"""Layout planning against finite-element truths, and the planner's speed.

    python bench/plan.py [--seeds 20] [--add 4] [--scenario sparse_sector] [--scale 0.5]

Scenario: tests/scenario_cases.py (readings from the scikit-fem solver, a heater pattern
that no prior drew).  Targets: the four quadrants of the heater ring and the total power.
For each seed: fit the existing layout (noise seed), plan `--add` sensors from the
[plan]-rule grid (holes from the top), draw as many random admissible positions (same grid,
same spacing rule), give both layouts FEM readings plus the scenario's noise, refit (the
sensors the first fit kept plus the new ones: a sensor it set aside stays out), and
compare every target with its exact FEM value.  Per draw the score is the RMS over targets of
|error| / (the target's sd before adding); the goal is median(planned) <= 0.5 x
median(random).  Coverage: the share of (draw, target) whose truth lies within 1.96 planned
sds of the refit's estimate (goal >= 0.9); the refit's own 95 % bands are shown beside it.
Speed: greedy choice of 8 out of 5,000 candidates with 5 targets (goal < 1 s), and the time
to evaluate the 5,000 candidate rows, printed separately.
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
import scenario_fem as sf  # noqa: E402
from heatsight import inverse  # noqa: E402
from heatsight.inverse import plan as pl  # noqa: E402
from heatsight.inverse.plan_rules import PlanRules, candidate_grid, drill_face, min_distance, _xyz  # noqa: E402
from heatsight.inverse.problem import Zone  # noqa: E402

Z95 = 1.959963984540054   # Phi^-1(0.975) (scipy.stats.norm.ppf)
FIT = dict(grid=(6, 12))  # a coarse display grid: only the zone means and the power are scored


def quadrant_zones(face, r):
    return [Zone(f"q{k}", face, (k * math.pi / 2, (k + 1) * math.pi / 2), r=r) for k in range(4)]


def random_picks(rng, xyz, n, spacing):
    """n random candidates, each at least `spacing` from the earlier ones (rejection in order)."""
    order = rng.permutation(xyz.shape[0])
    out = []
    for j in order:
        if not out or min_distance(xyz[j][None, :], xyz[out])[0] >= spacing:
            out.append(int(j))
        if len(out) == n:
            break
    return out


def refit(scn, zones, extra_pos, extra_T, sigma, kept):
    """Fit the scenario's readings of the sensors the first fit kept (`kept`, the layout the
    plan started from: a sensor set aside stays out) plus new sensors at extra_pos
    (r, theta, z) reading extra_T [K]."""
    rd = scn.readings.subset(np.flatnonzero(kept))
    n = len(extra_T)
    names = rd.names + [f"N{i + 1}" for i in range(n)]
    new = inverse.SensorReadings(names, np.r_[rd.r, extra_pos[0]], np.r_[rd.theta, extra_pos[1]],
                                 np.r_[rd.z, extra_pos[2]], np.r_[rd.temperature, extra_T],
                                 np.r_[rd.sigma, np.full(n, sigma)], np.r_[rd.offset_sd, np.zeros(n)], 0.0)
    case = scn.case
    case.zones = zones
    res = inverse.fit(case, new, keep_all_sensors=True, **FIT)
    est = {z["name"]: (z["mean"], z["sd"]) for z in res.summary["zones"]}
    est["total_power"] = (res.summary["total_power_W"], res.summary["total_power_sd_W"])
    return est


def simulation(name, seeds, n_add, scale):
    scn = sc.make(name, seed=0, scale=scale)
    truth_fn, phys, _ = sc._PHYSICS[name]
    cyl = scn.case.cylinder
    face = scn.face
    ring = (0.0, cyl.radius) if face != "side" else None
    zones = quadrant_zones(face, ring)
    span = phys.fem_height if math.isinf(phys.height) else phys.height
    truth = {z.name: sf.face_average(truth_fn, face, phys.radius, span, z.contains)[0] for z in zones}
    truth["total_power"] = scn.power
    rules = PlanRules()
    dface = drill_face(rules, face, cyl)
    rd = scn.readings
    cand = candidate_grid(rules, dface, cyl, (rd.r, rd.theta, rd.z))
    t0 = time.perf_counter()
    fem = sf.solve(truth_fn, phys, *cand, scale=scale).temperature
    print(f"{name}: {cand[0].size} admissible candidates (holes from the {dface}); FEM readings there "
          f"in {time.perf_counter() - t0:.1f} s")
    sigma = float(np.median(rd.sigma))
    xyz = _xyz(*cand)
    names = [z.name for z in zones] + ["total_power"]
    kinds = ("mixture", "dominant", "random")
    rows = {k: [] for k in kinds}
    cover = {k: [] for k in kinds[:2]}
    cover_fit, predicted, realized = {k: [] for k in kinds}, {k: [] for k in kinds[:2]}, {k: [] for k in kinds}
    per_target = {n: {k: [] for k in kinds} for n in names}
    for seed in range(seeds):
        scn = sc.make(name, seed=seed, scale=scale)
        scn.case.zones = zones
        base = inverse.fit(scn.case, scn.readings, **FIT)
        rng = np.random.default_rng([seed, 12])
        choices, sds, sd0 = {}, {}, None
        for mode in kinds[:2]:
            state = pl.state_from_fit(base, ["zones", "power"], zones, covariance=mode)
            sd0 = dict(zip(names, state.target_sd())) if mode == "mixture" else sd0
            plan = pl.greedy(state, state.rows(*cand), n_add, cand, rules.spacing)
            choices[mode], sds[mode] = plan.picks, plan.sd[-1]
        choices["random"] = random_picks(rng, xyz, n_add, rules.spacing)
        for kind, picks in choices.items():
            noise = sigma * rng.standard_normal(len(picks))
            pos = tuple(c[picks] for c in cand)
            est = refit(scn, zones, pos, fem[picks] + noise, sigma, base.kept)
            err = np.array([(est[n][0] - truth[n]) / sd0[n] for n in names])
            rows[kind].append(float(np.sqrt(np.mean(err ** 2))))
            for j, n in enumerate(names):
                e = abs(est[n][0] - truth[n])
                per_target[n][kind].append(e / sd0[n])
                cover_fit[kind].append(e <= Z95 * est[n][1])
                realized[kind].append(e / sd0[n])
                if kind in sds:
                    cover[kind].append(e <= Z95 * sds[kind][j])
                    predicted[kind].append(sds[kind][j] / sd0[n])
        along = cand[2] if face == "side" else cand[0]
        where = ", ".join(f"({1e3 * along[j]:.0f}, {math.degrees(cand[1][j]):.0f})" for j in choices["mixture"])
        print(f"  seed {seed:2d}: " + "  ".join(f"{k} {rows[k][-1]:.3f}" for k in kinds)
              + f"  (RMS |error| / sd before; mixture picks at (r or z mm, deg) {where})", flush=True)
    for j, n in enumerate(names):
        cp = {k: np.array(cover[k]).reshape(-1, len(names))[:, j].mean() for k in cover}
        print(f"  {n:12s} median |error| / sd before: " + ", ".join(f"{k} {np.median(per_target[n][k]):.2f}"
                                                                    for k in kinds)
              + "; coverage of the planned sds: " + ", ".join(f"{k} {v:.2f}" for k, v in cp.items())
              + f"; truth {truth[n]:.5g}")
    out = {}
    for mode in kinds[:2]:
        med_p, med_r = float(np.median(rows[mode])), float(np.median(rows["random"]))
        ratio, cov = med_p / med_r, float(np.mean(cover[mode]))
        print(f"{name} [{mode}]: median score planned {med_p:.3f}, random {med_r:.3f}, ratio {ratio:.2f} "
              f"(goal <= 0.5: {'MET' if ratio <= 0.5 else 'NOT MET'}); coverage of the planned 95 % intervals "
              f"{cov:.2f} over {len(cover[mode])} (draw, target) (goal >= 0.9: {'MET' if cov >= 0.9 else 'NOT MET'}); "
              f"the refit's own bands {np.mean(cover_fit[mode]):.2f}; median predicted sd / sd before "
              f"{np.median(predicted[mode]):.2f}, realized |error| / sd before {np.median(realized[mode]):.2f}")
        out[mode] = (ratio, cov)
    print(f"{name} [random]: the refit's own bands cover {np.mean(cover_fit['random']):.2f}")
    return out


def speed(n_cand=5000, n_add=8):
    """Greedy choice among n_cand candidates with 5 targets (four quadrants and the power),
    on the demo-sized platen with the default prior (no readings, 20 sensors on two circles)."""
    import types

    import heatsight.forward as fw
    from heatsight.inverse.problem import Problem

    cyl = fw.Cylinder(0.15, 0.04, 16.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(250.0, 313.15), "side": fw.Insulated()}
    zones = quadrant_zones("bottom", (0.0, 0.15))
    case = types.SimpleNamespace(cylinder=cyl, faces=faces, zones=zones, fit=types.SimpleNamespace())
    th = np.radians(np.arange(20) * 18.0)
    r = np.where(np.arange(20) % 2 == 0, 0.125, 0.07)
    sensors = ([f"TC{i}" for i in range(20)], r, th, np.full(20, 0.005), np.full(20, 0.15), np.zeros(20))
    state = pl.state_from_prior(Problem.from_case(case), ["zones", "power"], 1000.0, sensors, zones=zones)
    rules = PlanRules(along=25, angle_step=2 * math.pi / 50, depths=4, spacing=0.0)
    cand = candidate_grid(rules, "top", cyl)
    cand = tuple(c[:n_cand] for c in cand)
    t0 = time.perf_counter()
    rows = state.rows(*cand)
    t_rows = time.perf_counter() - t0
    t0 = time.perf_counter()
    plan = pl.greedy(state, rows, n_add, cand, 0.005)
    t_greedy = time.perf_counter() - t0
    print(f"speed: {n_add} picks out of {rows.shape[0]} candidates, {len(state.targets)} targets, "
          f"{state.C.shape[0]} coefficients: greedy {t_greedy:.3f} s (goal < 1 s: "
          f"{'MET' if t_greedy < 1 else 'NOT MET'}); candidate rows {t_rows:.3f} s; "
          f"together {t_rows + t_greedy:.3f} s; {len(plan.picks)} picks")
    return t_greedy


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=20)
    ap.add_argument("--add", type=int, default=4)
    ap.add_argument("--scenario", default="sparse_sector")
    ap.add_argument("--scale", type=float, default=0.5, help="FEM cell-count factor (default 0.5)")
    ap.add_argument("--only-speed", action="store_true")
    args = ap.parse_args(argv)
    with threadpool_limits(1):
        speed()
        if not args.only_speed:
            for name in args.scenario.split(","):
                simulation(name.strip(), args.seeds, args.add, args.scale)


if __name__ == "__main__":
    main()
