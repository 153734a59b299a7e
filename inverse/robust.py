"""First, robust pass over the readings: gross faults out before anything the readings feed.

A logger's overflow code (9.9e37), a 1e9 or a 999999 in one channel must not reach the
prior's nominal level, the placement variance or the strength. So, before the problem is
built:

1. level of the nominal profile by least absolute deviations (robust to a minority of wild
   readings): with r_i = d_i - t0_i (known field removed), g_i = (G u)_i the nominal
   profile's field at sensor i and sd_i = sqrt(S_ii),

       gamma_L1 = argmin sum_i |r_i - gamma g_i| / sd_i = weighted median of r_i / g_i,
                  weights |g_i| / sd_i;

2. standardized residuals e_i = (r_i - gamma_L1 g_i) / sd_i, robust scale
   s = max(1.4826 MAD(e), 1) (1.4826 MAD = sd for a normal sample), and a reading is a gross
   fault when |e_i - median(e)| > GROSS_Z s and its departure |e_i - median(e)| sd_i [K] is
   beyond SIGNAL_SHARE of the nominal profile's typical size at the sensors (median
   |gamma_L1 g_i|: readings that agree among themselves make s small). Such a reading is set aside before the fit;
   everything milder is left to the leave-one-out screening (inverse.diagnostics).  Several
   readings that far out together (diagnostics.model_suspect: a heated sector of a thin wall
   20 K above the rest, read with 0.1 K sigma, put six genuine readings 30 robust sds out)
   are a feature of the field more likely than as many faults: a group (each within GROSS_Z
   robust sds of another far-out reading at a different value, within FEATURE_K of the other
   readings and below PLAUSIBLE_K) goes to the leave-one-out screening, which suspects the model
   first.  Identical readings (channels stuck at a logger's full scale or open at the room's
   temperature), readings far from every other and impossible temperatures are set aside here.
3. the nominal level of the fit is then the generalized-least-squares level over the
   readings that are not gross faults.
"""

from __future__ import annotations

import numpy as np

from .diagnostics import SetAside, model_suspect

#: |robust z| beyond which a reading is a gross fault. A conduction field seen through a
#: smooth nominal profile does not put one sensor 25 robust sds from the rest; real but
#: strong local features stay well inside (common practice, no source).
GROSS_Z = 25.0
MAD_TO_SD = 1.4826  # 1 / Phi^-1(3/4), normal consistency of the MAD (Hampel 1974)
#: the highest temperature a thermocouple reads [K]: type B and C sensors top out near 2100 and
#: 2600 K (from memory), so a reading above 3000 K is a code or a fault, never a temperature
PLAUSIBLE_K = 3000.0
#: a reading departs from the robust nominal fit by at least this share of the nominal profile's
#: typical size at the sensors (median |gamma_L1 g_i|) before it can be a gross fault.  The
#: robust scale comes from the other readings' agreement, and readings agree tightly whenever
#: several sensors share a radius and depth: three thermocouples at 0, 120 and 240 deg in a
#: tube's wall over a bore of 150 + 20 cos(theta) degC read 138.2, 116.4 and 116.4 degC, and the
#: first, 218 robust sds out, was set aside as a "gross fault"; the answer was then a flat bore
#: of 140.8 +- 0.21 degC, the power 84 sd off.  Codes, open circuits and unit mix-ups depart by
#: far more than half the heating they sit in; smaller faults are the leave-one-out screening's,
#: which judges them against the model (common practice, no source).
SIGNAL_SHARE = 0.5
#: readings of one group that differ by less than this [K] are one value: a stuck channel, not a
#: feature (a logger writes at least 0.01 K; common practice, no source)
SAME_READING_K = 1e-3
#: how far [K] from the other readings' median a group may lie and still be a feature of the
#: part (a heated zone, a cooled end); beyond it, a channel's full scale or a unit mix-up
#: (common practice, no source)
FEATURE_K = 500.0


def _weighted_median(x, w):
    order = np.argsort(x)
    x, w = x[order], w[order]
    cdf = np.cumsum(w)
    return float(x[np.searchsorted(cdf, 0.5 * cdf[-1])])


def _sd(var):
    var = np.asarray(var, dtype=float)
    return np.sqrt(np.diag(var) if var.ndim == 2 else var)


def robust_level(residual, nominal_field, var) -> float:
    """gamma_L1: weighted median of r_i / g_i with weights |g_i| / sd_i (0 if g = 0 everywhere)."""
    r, g, sd = np.asarray(residual, float), np.asarray(nominal_field, float), _sd(var)
    use = np.abs(g) > 1e-12 * max(float(np.abs(g).max()), 1e-300)
    if not use.any():
        return 0.0
    return _weighted_median(r[use] / g[use], np.abs(g[use]) / sd[use])


def gross_faults(residual, nominal_field, var, names, temperature=None) -> list[SetAside]:
    """Readings beyond GROSS_Z robust sds of the robust nominal fit (see module doc), worst first,
    less a group of them that is a feature (module doc; needs `temperature` [K], the readings
    themselves: None keeps every far-out reading out)."""
    r, g, sd = np.asarray(residual, float), np.asarray(nominal_field, float), _sd(var)
    if r.size < 3:
        return []
    level = robust_level(r, g, var)
    e = (r - level * g) / sd
    med = float(np.median(e))
    scale = max(MAD_TO_SD * float(np.median(np.abs(e - med))), 1.0)
    z = (e - med) / scale
    # what the unknown face's nominal profile puts at the sensors [K]: a reading that departs
    # by less than SIGNAL_SHARE of it may be a feature of the face, however tightly the other
    # readings agree among themselves (see SIGNAL_SHARE)
    floor = SIGNAL_SHARE * float(np.median(np.abs(level * g)))
    out = []
    for i in np.argsort(-np.abs(z)):
        if abs(z[i]) <= GROSS_Z or len(out) >= (r.size - 1) // 2:
            break
        if abs(e[i] - med) * sd[i] <= floor:
            continue
        out.append(SetAside(str(names[i]), int(i), float(z[i]), GROSS_Z,
                            f"reading {r[i] + 0.0:.4g} K above the known field is {abs(z[i]):.3g} robust sds "
                            f"from the level of the other sensors (limit {GROSS_Z:g}): a gross fault "
                            "(logger overflow code, broken wire or unit mix-up)"))
    if temperature is not None and len(out) > 1:
        T = np.asarray(temperature, float)
        flagged = np.array([s.index for s in out])
        rest = np.setdiff1d(np.arange(r.size), flagged)
        level = float(np.median(T[rest])) if rest.size else float(np.median(T))

        def grouped(i):
            # another far-out reading within GROSS_Z robust sds of it, at a different value: stuck
            # or open channels read one value (a logger's full scale, the room), real ones scatter
            others = flagged[flagged != i]
            close = np.abs(z[others] - z[i]) <= GROSS_Z
            return bool(np.any(close & (np.abs(T[others] - T[i]) > SAME_READING_K)))

        group = [s for s in out if grouped(s.index) and 0.0 < T[s.index] <= PLAUSIBLE_K
                 and abs(T[s.index] - level) <= FEATURE_K]
        if model_suspect(len(group), r.size):
            spared = {s.index for s in group}
            out = [s for s in out if s.index not in spared]
    return out


def nominal_level(residual, nominal_field, var, keep=None) -> float:
    """Generalized-least-squares level of the nominal profile over the readings `keep` (mask):
    gamma = (g^T S^-1 r) / (g^T S^-1 g) on the kept block (0 when g^T S^-1 g = 0)."""
    r, g = np.asarray(residual, float), np.asarray(nominal_field, float)
    var = np.asarray(var, dtype=float)
    idx = np.arange(r.size) if keep is None else np.flatnonzero(keep)
    r, g = r[idx], g[idx]
    if var.ndim == 2:
        wg = np.linalg.solve(var[np.ix_(idx, idx)], g)
    else:
        wg = g / var[idx]
    denom = float(g @ wg)
    return float(wg @ r) / denom if denom > 0 else 0.0
