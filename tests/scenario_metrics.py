"""Scores of a fit against a scenario's truth, and the goals of issue 9.

Per run (one scenario, one noise seed), from the public FitResult only:

    relative RMS error   sqrt(mean (estimate - truth)^2) / sd(truth), over the display grid
    coverage             fraction of grid points whose truth lies inside the 95 % band
    sharpness            mean half band (upper - lower) / 2 / sd(truth)
    zone error           (zone mean - true zone mean) / zone sd, per zone
    power error          (total power - true power) / its sd
    set aside            sensors the fit set aside, against the scenario's broken ones

sd(truth) is the plain standard deviation of the truth over the grid points.
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


def _z(value, truth, sd):
    if sd is None or not np.isfinite(sd) or sd <= 0:
        return math.inf
    return (value - truth) / sd


def score(scn, res) -> Score:
    """Score one FitResult against the scenario's truth."""
    g = res.grid
    truth = scn.truth_on(g)
    sd_t = float(np.std(truth))
    est, lo, hi = (g[c].to_numpy() for c in ("estimate", "lower", "upper"))
    s = Score(scn.name, 0, broken=tuple(scn.broken), rms_goal=scn.rms_goal, resolves=scn.resolves)
    s.rel_rms = float(np.sqrt(np.mean((est - truth) ** 2)) / sd_t)
    s.coverage = float(np.mean((truth >= lo) & (truth <= hi)))
    s.sharpness = float(np.mean(0.5 * (hi - lo)) / sd_t)
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
