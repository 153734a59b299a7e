"""Scores of a fit against a scenario's truth, and the goals of issue 9.

Per run (one scenario, one noise seed), from the public FitResult only:

    relative RMS error   sqrt(mean (estimate - truth)^2) / sd(truth), over the face
    coverage             share of the face whose truth lies inside the 95 % band
    sharpness            mean half band (upper - lower) / 2 / sd(truth)
    zone error           (zone mean - true zone mean) / zone sd, per zone
    power error          (total power - true power) / its sd
    set aside            sensors the fit set aside, against the scenario's broken ones

Means and sd(truth) are over the face's area: each display-grid point weighs by the area of its
cell (face_weights). On an end face the grid is uniform in r and theta, so a plain mean over
its points counts the centre 72 times and weighs a ring by its number of points, not its
area; the plain means are kept in Score.extra["grid_points"] for comparison.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from heatsight import inverse

WITHIN_SD = 2.0                    # zone means and power: within 2 sd (issue 9)
COVERAGE_POOLED = (0.90, 0.99)     # pooled pointwise coverage of the 95 % bands (issue 9)
COVERAGE_EACH = 0.85               # every scenario (issue 9)
SHARPNESS = 1.0                    # mean half band / sd(truth), where the layout resolves the face
ZONE_SHARE = 0.90                  # share of zone means within 2 sd (issue 9)


@dataclass
class Score:
    name: str
    seed: int
    rel_rms: float = math.nan
    coverage: float = math.nan
    sharpness: float = math.nan
    zone_z: dict = field(default_factory=dict)
    power_z: float = math.nan
    broken: tuple = ()
    set_aside: tuple = ()
    rms_goal: float = 0.5
    resolves: bool = True
    seconds: float = 0.0
    error: str | None = None
    extra: dict = field(default_factory=dict)

    @property
    def aside_ok(self):
        return self.error is None and set(self.broken) == set(self.set_aside)


def _edges(u):
    """Cell edges around sorted grid values u (n,): half-way between neighbours, the outer
    edges at the first and last value (n + 1,)."""
    return np.concatenate(([u[0]], 0.5 * (u[1:] + u[:-1]), [u[-1]]))


def _cells(u, periodic=False):
    """Widths of the cells around sorted grid values u (_edges; wrapped for a periodic angle)."""
    u = np.asarray(u, float)
    if u.size == 1:
        return np.array([2.0 * math.pi if periodic else 1.0])
    if periodic:
        ext = np.concatenate(([u[-1] - 2.0 * math.pi], u, [u[0] + 2.0 * math.pi]))
        return 0.5 * (ext[2:] - ext[:-2])
    return np.diff(_edges(u))


def face_weights(grid) -> np.ndarray:
    """Area [m^2] of each display-grid point's cell (per metre of a long part's wall): on an end
    face (z constant) the annulus piece (r_hi^2 - r_lo^2) / 2 x dtheta, on a wall (r constant)
    r dtheta dz. Their sum is the face's area."""
    r, th, z = (np.asarray(grid[c], float) for c in ("r_m", "theta_rad", "z_m"))
    ut, it = np.unique(th, return_inverse=True)
    dth = _cells(ut, periodic=True)[it]
    if np.ptp(r) > 0:                       # an end face: cells in r are pieces of annuli
        ur, ir = np.unique(r, return_inverse=True)
        edges = _edges(ur)
        piece = 0.5 * (edges[1:] ** 2 - edges[:-1] ** 2)
        # the points at r = 0 share one cell: split it between them
        count = np.bincount(ir)
        share = np.where(ur == 0.0, 1.0 / count, 1.0)
        return (piece * share)[ir] * np.where(ur[ir] == 0.0, 2.0 * math.pi, dth)
    uz, iz = np.unique(z, return_inverse=True)
    dz = _cells(uz)[iz] if uz.size > 1 else 1.0
    return r * dth * dz


def _weighted_figures(w, truth, est, lo, hi) -> dict:
    """Relative RMS, coverage and sharpness with weights w (summing to 1) over the grid points."""
    sd_t = math.sqrt(float(np.sum(w * (truth - np.sum(w * truth)) ** 2)))
    return dict(rel_rms=math.sqrt(float(np.sum(w * (est - truth) ** 2))) / sd_t,
                coverage=float(np.sum(w * ((truth >= lo) & (truth <= hi)))),
                sharpness=float(np.sum(w * 0.5 * (hi - lo))) / sd_t)


def _z(value, truth, sd):
    if sd is None or not np.isfinite(sd) or sd <= 0:
        return math.inf
    return (value - truth) / sd


def score(scn, res) -> Score:
    """Score one FitResult against the scenario's truth."""
    g = res.grid
    truth = scn.truth_on(g)
    est, lo, hi = (g[c].to_numpy() for c in ("estimate", "lower", "upper"))
    s = Score(scn.name, 0, broken=tuple(scn.broken), rms_goal=scn.rms_goal, resolves=scn.resolves)
    area = face_weights(g)
    face = _weighted_figures(area / area.sum(), truth, est, lo, hi)
    s.rel_rms, s.coverage, s.sharpness = face["rel_rms"], face["coverage"], face["sharpness"]
    s.extra["grid_points"] = _weighted_figures(np.full(truth.size, 1.0 / truth.size), truth, est, lo, hi)
    fitted = {z["name"]: z for z in res.summary.get("zones", [])}
    # a declared zone the fit did not report counts as missed (infinite error)
    s.zone_z = {name: (_z(fitted[name]["mean"], true, fitted[name]["sd"]) if name in fitted else math.inf)
                for name, true in scn.zone_means.items()}
    s.power_z = _z(res.summary["total_power_W"], scn.power, res.summary["total_power_sd_W"])
    s.set_aside = tuple(res.summary.get("set_aside", ()))
    # the smallest fixed offset the check against the others catches, per broken sensor [K]
    table = getattr(res, "sensors", None)
    if table is not None:
        caught = dict(zip(table["sensor"], table["caught_offset"]))
        s.extra["caught_offset"] = {b: float(caught[b]) for b in scn.broken if b in caught}
    if res.summary.get("sensor_doubt"):
        s.extra["doubt"] = dict(res.summary["sensor_doubt"])
    cal = res.summary.get("calibrated")
    if cal:
        s.extra["calibrated"] = {k: (v["value"], v["sd"]) for k, v in cal.items()}
    return s


def run(scn, seed=0, **fit_kwargs) -> Score:
    """Fit the scenario (its own fit keywords, overridden by fit_kwargs) and score it; an
    exception from the fit is recorded as a failed run, not raised."""
    kwargs = dict(scn.fit_kwargs)
    kwargs.update(fit_kwargs)
    t0 = time.perf_counter()
    try:
        res = inverse.fit(scn.case, scn.readings, **kwargs)
        out = score(scn, res)
    except Exception as exc:  # a crash is a result the table must show
        out = Score(scn.name, seed, broken=tuple(scn.broken), rms_goal=scn.rms_goal,
                    resolves=scn.resolves, error=f"{type(exc).__name__}: {exc}")
        out.zone_z = {name: math.inf for name in scn.zone_means}
        out.power_z = math.inf
    out.seed = seed
    out.seconds = time.perf_counter() - t0
    return out


def _by_name(scores):
    out = {}
    for s in scores:
        out.setdefault(s.name, []).append(s)
    return out


def goals(scores) -> list[tuple[str, bool, str]]:
    """(goal, met, figures) for issue 9's goals over all runs; NaN figures never count as met."""
    groups = _by_name(scores)
    mean = {n: {k: float(np.mean([getattr(s, k) for s in ss])) for k in ("rel_rms", "coverage", "sharpness")}
            for n, ss in groups.items()}
    first = {n: ss[0] for n, ss in groups.items()}
    out = []

    bad = [f"{n} {m['rel_rms']:.2f}" for n, m in mean.items() if not m["rel_rms"] <= first[n].rms_goal]
    out.append(("relative RMS <= 0.5 (<= 0.8 sparse)", not bad, "; ".join(bad) or "all within"))

    pooled = float(np.mean([s.coverage for s in scores]))
    ok = COVERAGE_POOLED[0] <= pooled <= COVERAGE_POOLED[1]
    out.append((f"pooled coverage in [{COVERAGE_POOLED[0]:.2f}, {COVERAGE_POOLED[1]:.2f}]", ok, f"{pooled:.3f}"))

    bad = [f"{n} {m['coverage']:.2f}" for n, m in mean.items() if not m["coverage"] >= COVERAGE_EACH]
    out.append((f"coverage >= {COVERAGE_EACH:.2f} in every scenario", not bad, "; ".join(bad) or "all"))

    bad = [f"{n} {m['sharpness']:.2f}" for n, m in mean.items()
           if first[n].resolves and not m["sharpness"] <= SHARPNESS]
    out.append((f"sharpness <= {SHARPNESS:.1f} where the layout resolves the face", not bad, "; ".join(bad) or "all"))

    zz = [abs(z) for s in scores for z in s.zone_z.values()]
    share = float(np.mean([z <= WITHIN_SD for z in zz])) if zz else math.nan
    out.append((f">= {ZONE_SHARE:.0%} of zone means within {WITHIN_SD:g} sd", share >= ZONE_SHARE,
                f"{share:.0%} of {len(zz)}"))

    bad = [f"{s.name}/{s.seed} {s.power_z:+.1f}" for s in scores if not abs(s.power_z) <= WITHIN_SD]
    out.append((f"every total power within {WITHIN_SD:g} sd", not bad, "; ".join(bad) or "all"))

    bad = [f"{s.name}/{s.seed} expected {list(s.broken)} got {list(s.set_aside)}"
           for s in scores if not s.aside_ok]
    out.append(("every broken sensor set aside, no healthy one", not bad, "; ".join(bad) or "all"))
    return out
