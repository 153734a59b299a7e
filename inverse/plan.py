"""Layout planning: where new thermocouples most reduce the posterior sd of chosen targets.

In the linear-Gaussian model the posterior covariance C of the state x does not depend on
the readings, so a layout can be planned exactly before any hole is drilled.  The state is
the face coefficients c and, when a common offset b_c ~ N(0, tau_c^2) is declared, b_c
itself (so every reading's noise is independent given x: d_i = g_i . c + b_c + e_i with
var e_i = s_i^2 = sigma_i^2 + tau_i^2 [+ placement]).  A sensor with row g and noise
variance s^2 [K^2] changes C by one rank (Sherman-Morrison):

    add:   C' = C - C g g^T C / (g^T C g + s^2)
    lose:  C' = C + C g g^T C / (s^2 - g^T C g)

and a target t = f . x [face unit, or W] has var t = f^T C f.  Greedy selection adds, one
at a time, the admissible candidate with the largest weighted fall of the targets' variance

    gain(g) = sum_i w_i (f_i^T C g)^2 / (g^T C g + s^2),  w_i = 1 / (n_i var_i before),

n_i = number of rows of target i's group (the face map's grid points form one group), so
every target counts as one whatever its unit.  Each step costs O(K N) for N candidates.

Which covariance (hyperparameters): a fit with the learned prior (hyperprior.py) is a
mixture over amplitude, length scale and order; the planner takes its DOMINANT component
(the (sigma_f, l, s, rho) grid point of largest posterior weight), one Gaussian whose C is
updated exactly, so a planned sd equals the sd of a refit with that sensor at those
hyperparameters to round-off.  An alpha-averaged fit (fixed prior) likewise takes its
dominant alpha; a fit at one strength takes it.  The zone model and a fit with calibrated
face parameters take the fit's (moment-matched or linearized) covariance of c as it is:
an approximation, said in `source`.  With the learned prior, the fit's readings share the
left-out modes' signal (truncation.py: a full noise covariance): C is still the fit's, and
each candidate's noise variance adds its own share of those modes (`PlanState.variances`),
but a new sensor's share is taken as independent of the others' (approximate: the exact
refit would correlate them).  Steps (ramps on a temperature face) over an unseen edge
stretch (stretch.py), which the fit marginalizes, are part of the state, x = (c, s, [b_c])
(plan_steps.py): a sensor over the stretch settles them, and the plan credits it.  Without readings the prior has fixed hyperparameters:
l = the face size, smoothness nu = 1 (exponent nu + d/2), amplitude sigma_f = the expected
variation the user states (sigma_f^2 = sum_k' 1 / (alpha w_k), hyperprior.py), i.e. alpha = sum_k' 1 / w_k / sigma_f^2.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .batch import TREND_FAMILY_LEVEL, change_threshold
from .design import NOMINAL_PRECISION_FACTOR, Design, nominal_direction
from .errors import InverseError
from .face_grid import display_grid
from .functionals import functional_matrix
from .hyperprior import face_size, matern_exponent, matern_precision, matern_weights
from .truncation import tail_variance
from .noise import noise_covariance
from .plan_rules import COVARIANCES, clear_of_pick
from .plan_steps import figure_rows, joint_covariance, noise_without_steps
from .readings import DEFAULT_SIGMA_K

#: a target "depends on a single sensor" when losing that one sensor multiplies its sd by
#: more than this (common practice, no source)
SINGLE_SENSOR_RATIO = 1.5
#: eigenvalues of an implied prior precision below this share of its largest are raised to
#: it (consistent_covariance); the answers move by under 1 % between 1e-8 and 1e-4
CONSISTENT_FLOOR = 1e-6
#: ... and an eigenvalue counts as positive above this share of the largest (the learned
#: prior's nearly free nominal level sits near 3e-9 of it on the demo)
CONSISTENT_TOLERANCE = 1e-12
#: Matern smoothness nu of the default (no readings) prior, a member of the learned family
DEFAULT_SMOOTHNESS = 1.0


@dataclass
class Target:
    """A planning target: name, rows F (q, S) of the state, kind 'scalar' | 'map'."""

    name: str
    F: np.ndarray
    kind: str = "scalar"
    #: variance no sensor here reduces: the left-out modes' remaining share of a fitted figure
    extra_variance: float = 0.0
    #: a map's points on the face (face_grid.display_grid), None for a scalar
    points: object = None


@dataclass
class PlanState:
    """The Gaussian the planner updates: covariance C (S, S) of the state (c, [b_c]),
    model columns `design` (.sensors(r, theta, z) -> (G, t0)), whether a common offset is
    part of the state, the targets, the noise variance of a new sensor [K^2], the existing
    sensors (names, r, theta, z [m, rad, m], noise variance [K^2]) and where C came from."""

    C: np.ndarray
    design: object
    common_offset: bool
    targets: list
    new_variance: float
    existing: dict
    source: str
    zone_names: list = field(default_factory=list)
    tail_prior: object = None   # the learned prior whose left-out modes add to a new sensor's noise
    #: the unseen stretches' steps (stretch.StretchSteps) carried in the state after c, or None
    steps: object = None

    def variances(self, r, theta, z) -> np.ndarray:
        """Noise variance [K^2] of new sensors at (r, theta, z): the new-sensor variance plus,
        with a learned prior, the left-out modes' variance there (truncation.py; each sensor's
        own share: the shares' correlation between sensors is left out of the planning)."""
        var = np.full(np.size(r), self.new_variance)
        if self.tail_prior is not None:
            var = var + tail_variance(self.design, np.atleast_1d(r), np.atleast_1d(theta), np.atleast_1d(z),
                                      self.tail_prior)
        return var

    def rows(self, r, theta, z) -> np.ndarray:
        """Rows g (P, S) of new sensors at (r, theta, z) [m, rad, m]: K per unit state."""
        r, theta, z = (np.atleast_1d(x) for x in (r, theta, z))
        G, _ = self.design.sensors(r, theta, z)
        return self._state_columns(G, None if self.steps is None else self.steps.fields(r, theta, z), 1.0)

    def face_rows(self, u, v) -> np.ndarray:
        """Rows (P, S) of the face values at face coordinates (u, v): face unit per unit state."""
        B = self.design.face(u, v)[0]
        return self._state_columns(B, None if self.steps is None else self.steps.face(u, v)[0], 0.0)

    def _state_columns(self, on_c, on_steps, on_offset):
        """The state's columns in order: c, the steps (if carried), the common offset (if any)."""
        parts = [on_c] + ([on_steps] if self.steps is not None else [])
        if self.common_offset:
            parts.append(np.full((on_c.shape[0], 1), on_offset))
        return np.hstack(parts) if len(parts) > 1 else on_c

    def target_matrix(self):
        """(F (q, S): every target's rows stacked, group (q,): the index of each row's target)."""
        F = np.vstack([t.F for t in self.targets])
        group = np.concatenate([np.full(t.F.shape[0], i) for i, t in enumerate(self.targets)])
        return F, group

    def target_sd(self, C=None) -> np.ndarray:
        """sd of every target under C (default self.C); a map: the RMS of its pointwise sds."""
        C = self.C if C is None else C
        return np.array([_group_sd(np.einsum("qk,kl,ql->q", t.F, C, t.F) + t.extra_variance)
                         for t in self.targets])


def _group_sd(var):
    return float(np.sqrt(np.mean(np.maximum(var, 0.0))))


# ------------------------------------------------------------------------------ targets
def target_list(design, zones, which, grid=(11, 24)) -> list:
    """Targets on the model columns `design`: each entry of `which` is "zones" (every zone on
    the unknown face), "power" (total power into the part [W]), "mean" (face mean), "face"
    (the face map on the display grid, as one target) or a zone name."""
    names, F, _ = functional_matrix(design, zones)
    zone_names = names[2:]
    out = []
    for item in which:
        if item == "zones":
            if not zone_names:
                raise InverseError("target 'zones' needs zones declared on the unknown face ([[zones]])")
            out += [Target(n, F[i + 2][None, :]) for i, n in enumerate(zone_names)]
        elif item == "power":
            out.append(Target("total_power", F[1][None, :]))
        elif item == "mean":
            out.append(Target("mean", F[0][None, :]))
        elif item == "face":
            cyl = design.cylinder
            pts = display_grid(design.face_name, cyl, *grid)
            out.append(Target("face", design.face(pts.u, pts.v)[0], "map", points=pts))
        elif item in zone_names:
            out.append(Target(item, F[names.index(item)][None, :]))
        else:
            known = ", ".join(["zones", "power", "mean", "face"] + zone_names)
            raise InverseError(f"unknown target {item!r}; expected one of: {known}")
    seen, unique = set(), []
    for t in out:
        if t.name not in seen:
            seen.add(t.name)
            unique.append(t)
    return unique


def _pad(targets, extra):
    return [Target(t.name, np.hstack([t.F, np.zeros((t.F.shape[0], extra))]), t.kind, t.extra_variance, t.points)
            for t in targets]


def _with_steps(targets, marginal, zones, N):
    """Targets on the state (c, s) (plan_steps.py): a scalar figure's row [f - h X, f_s - h
    G_s] with the left-out modes' remaining variance; the face map's rows [B, B_s]."""
    rows = figure_rows(marginal, zones, N)
    out = []
    for t in targets:
        if t.kind == "map":
            F = np.hstack([t.F, marginal.steps.face(t.points.u, t.points.v)[0]])
            out.append(Target(t.name, F, t.kind, t.extra_variance, t.points))
        else:
            extra, variance = rows[t.name]
            F = np.hstack([t.F, np.zeros((1, extra.size - t.F.shape[1]))]) + extra[None, :]
            out.append(Target(t.name, F, t.kind, variance))
    return out


def _with_tails(targets, tails):
    """Scalar targets as the fit reports them: with the left-out modes' share (FitResult's
    functional_tails: rows f - X^T h, their remaining variance held fixed, as no new sensor
    is planned to see those modes)."""
    if tails is None:
        return targets
    X, _, rows = tails
    return [Target(t.name, t.F - (rows[t.name][0] @ X)[None, :], t.kind, rows[t.name][1], t.points)
            if t.kind == "scalar" and t.name in rows else t for t in targets]


# ------------------------------------------------------------------------------ the covariance
def dominant_component(posterior, problem):
    """(LinearGaussianProblem, alpha, weight, text) of the component the planner uses: for a
    learned prior the (length scale, order, axisymmetric ratio and order) of largest posterior
    weight (summed over the amplitude) at its amplitude of largest weight."""
    avg = posterior.averaged
    parts = getattr(avg, "_parts", None)
    if parts:                                    # learned prior: (problem, alphas, weights) per (l, s, rho, s0)
        # the (l, s, rho, s0) of largest weight
        best = max(range(len(parts)), key=lambda k: float(np.sum(parts[k][2])))
        pb, a, w = parts[best]
        i = int(np.argmax(w))                                        # its amplitude of largest weight
        length, order, rho, axis_order = avg.hyperparameters()[best][0]
        own = f" (axisymmetric part {axis_order:g})" if axis_order != order else ""
        text = (f"the learned prior's dominant hyperparameters: length scale {length * 1e3:.3g} mm, order "
                f"{order:g}{own}, axisymmetric ratio {rho:g} (weight {float(np.sum(w)):.2f}), strength {a[i]:.3g}")
        return pb, float(a[i]), float(np.sum(w)), text
    if avg is not None and hasattr(avg, "alpha_mixture"):
        a, w = avg.alpha_mixture()
        i = int(np.argmax(w))
        return avg.problem, float(a[i]), float(w[i]), f"dominant strength {a[i]:.3g} (weight {w[i]:.2f})"
    return problem, float(posterior.alpha), 1.0, f"strength {posterior.alpha:.3g}"


def _independent_variance(noise, common_sd):
    """Per-reading variances s_i^2 [K^2] once the common offset is taken into the state. The
    learned prior's left-out modes (truncation.py) correlate the readings; planning keeps
    each reading's own share of them and leaves out the correlation (approximate).  The
    unseen stretches' steps (stretch.py), shared by the readings, are left out (own_sd): the
    state carries them (plan_steps.py)."""
    return noise.own_sd ** 2 - common_sd ** 2


def _state_covariance(G, var, prior_precision, common_sd):
    """C of the state (c, [b_c]) from rows G (n, K), independent variances var (n,) [K^2],
    the prior precision diagonal (K,) and the common offset's prior sd [K] (0: none)."""
    if common_sd > 0:
        G = np.hstack([G, np.ones((G.shape[0], 1))])
        prior_precision = np.append(prior_precision, 1.0 / common_sd ** 2)
    H = (G.T / var) @ G + np.diag(prior_precision)
    # scale by the diagonal before inverting: the nominal direction's precision is ~1e-4 of the rest
    s = 1.0 / np.sqrt(np.diag(H))
    C = s[:, None] * np.linalg.inv(s[:, None] * H * s[None, :]) * s[None, :]
    return 0.5 * (C + C.T)


def state_from_fit(result, which, zones=(), new_sigma=None, new_offset_sd=None,
                   covariance: str = "mixture") -> PlanState:
    """The PlanState of a FitResult (the kept sensors are the existing ones; zones: the
    case's Zone objects); a new sensor's sigma / offset sd [K] default to the medians of the
    kept sensors'.  covariance: "mixture" (the fit's posterior covariance, moment-matched over
    its hyperparameters: the planned sds keep the hyperparameters' share of the uncertainty;
    each pick is the exact Gaussian update of that moment-matched posterior) or "dominant"
    (the dominant component, `dominant_component`: planned sds equal refits at those
    hyperparameters to round-off).  With a common offset the dominant component is used."""
    if covariance not in COVARIANCES:
        raise InverseError(f"covariance must be one of {', '.join(COVARIANCES)}, got {covariance!r}")
    post, rd, kept = result.posterior, result.readings, np.asarray(result.kept, bool)
    common = float(getattr(result.options, "common_offset_sd", 0.0) or 0.0)
    design = result.design
    marginal = result.marginal
    steps = None if marginal is None else marginal.steps
    targets = target_list(design, zones, which)
    if steps is None:
        targets = _with_tails(targets, result.functional_tails)
    else:
        N = noise_without_steps(marginal)
        targets = _with_steps(targets, marginal, zones, N)
    sub = rd.subset(kept)
    sigma = float(np.median(sub.sigma)) if new_sigma is None else float(new_sigma)
    tau = float(np.median(sub.offset_sd)) if new_offset_sd is None else float(new_offset_sd)
    # the zone model or a model average is no Gaussian posterior of the readings: its
    # updates are approximate
    exact = post.calibration is None and result.smooth_only
    if exact and (covariance == "dominant" or common > 0 or post.averaged is None):
        pb, alpha, _, text = dominant_component(post, result.problem)
        text = f"the dominant component: {text}"
        var = _independent_variance(pb.noise, common)
        G, precision = pb.G, alpha * pb.prior_diag
        if steps is not None:        # the steps as columns of their own, with their prior
            G, precision = np.hstack([G, marginal.step_fields]), np.append(precision, 1.0 / steps.v)
        C = _state_covariance(G, var, precision, common)
    else:
        C = post.C
        if steps is not None:
            C = joint_covariance(C, marginal.X, marginal.step_fields, steps.v, N)
        if exact:
            var = _independent_variance(result.problem.noise, 0.0)
            text = ("the fit's posterior covariance, moment-matched over its hyperparameters (each pick the exact "
                    "update of that Gaussian)")
        else:
            var = _independent_variance(result.problem.noise, common)
            if common > 0:   # b_c given c: its posterior from the readings' residual direction (approximate)
                C = np.pad(C, ((0, 1), (0, 1)))
                C[-1, -1] = common ** 2
            text = ("the fit's covariance of the face coefficients (zone model or calibrated face parameters): "
                    "planned sds are approximate")
    if steps is not None:
        text += f"; the {steps.v.size} steps over the unseen edge stretch are part of the state"
    doubt = result.summary.get("sensor_doubt")
    if doubt:      # the answer mixes this fit with the one without a doubtful sensor (sensor_doubt.py)
        which = "sets aside" if doubt.get("weighed_back") else "keeps"
        text += (f"; the fit that {which} {doubt['sensor']}, which the answer weighs as possibly broken (probability "
                 f"{doubt['fault_probability']:.2f}): the answer's sds also carry that doubt, the plan's do not")
    if common > 0:
        targets = _pad(targets, 1)
    existing = {"names": list(sub.names), "r": sub.r, "theta": sub.theta, "z": sub.z, "variance": var}
    tail = post.averaged if hasattr(post.averaged, "hyperparameters") else None
    return PlanState(C, design, common > 0, targets, sigma ** 2 + tau ** 2, existing, text,
                     [t.name for t in targets if t.name not in ("total_power", "mean", "face")], tail, steps)


def state_from_prior(spec, which, expected_variation, sensors=None, new_sigma=None, new_offset_sd=0.0,
                     zones=()) -> PlanState:
    """The PlanState without readings: prior at l = face size, smoothness nu = 1, amplitude
    `expected_variation` [face unit]; sensors: (names, r, theta, z, sigma, offset_sd) of the
    existing layout or None."""
    opts = spec.options
    if not (np.isfinite(expected_variation) and expected_variation > 0):
        raise InverseError("the expected variation must be a positive number")
    design = Design(spec.cylinder, spec.faces, opts.tolerance, *opts.basis_size)
    basis = design.basis
    length = face_size(basis)
    order = matern_exponent(basis, DEFAULT_SMOOTHNESS)
    P = matern_precision(basis, length, order)
    u = nominal_direction(basis)
    w = matern_weights(basis, length, order)
    alpha = float(np.sum(1.0 / w[u == 0])) / expected_variation ** 2
    P[u > 0] *= NOMINAL_PRECISION_FACTOR
    common = float(opts.common_offset_sd or 0.0)
    names, r, th, z, sig, tau = sensors if sensors is not None else ([], *(np.zeros(0),) * 5)
    if len(names):
        G, _ = design.sensors(r, th, z)
        var = noise_covariance(sig, tau)
    else:
        G, var = np.zeros((0, basis.size)), np.zeros(0)
    C = _state_covariance(G, var, alpha * P, common)
    targets = target_list(design, zones, which)
    if common > 0:
        targets = _pad(targets, 1)
    sigma = float(new_sigma) if new_sigma is not None else (float(np.median(sig)) if len(names) else DEFAULT_SIGMA_K)
    text = (f"prior without readings: length scale {length * 1e3:.3g} mm, smoothness {DEFAULT_SMOOTHNESS:g}, "
            f"expected variation {expected_variation:.3g} (strength {alpha:.3g})")
    existing = {"names": list(names), "r": np.asarray(r, float), "theta": np.asarray(th, float),
                "z": np.asarray(z, float), "variance": np.asarray(var, float)}
    return PlanState(C, design, common > 0, targets, sigma ** 2 + float(new_offset_sd) ** 2, existing, text,
                     [t.name for t in targets if t.name not in ("total_power", "mean", "face")])


# ------------------------------------------------------------------------------ updates
def add_sensor(C, g, variance):
    """C after adding a sensor with row g (S,) and noise variance [K^2] (Sherman-Morrison)."""
    u = C @ g
    return C - np.outer(u, u) / (g @ u + variance)


def consistent_covariance(C, G, variance):
    """C itself when it is the posterior of some Gaussian prior given the sensors' rows G (n, S)
    with independent variances (n,) [K^2], i.e. when the implied prior precision
    J0 = C^-1 - G^T diag(1 / variance) G is positive definite (eigenvalues above
    CONSISTENT_TOLERANCE of the largest); else the posterior of J0 with its other eigenvalues
    raised to CONSISTENT_FLOOR x the largest.  A covariance moment-matched over
    hyperparameters or models is wider than any one Gaussian with these sensors, and taking a
    sensor out of it (remove_sensor) then divides by a predictive variance beyond the sensor's
    own noise: losing the platen demo's TC09 came out as 2,757 W/m^2 on a zone whose sd is
    151 (a refit without TC09: 175)."""
    s = 1.0 / np.sqrt(np.diag(C))
    J = s[:, None] * np.linalg.inv(s[:, None] * C * s[None, :]) * s[None, :]
    data = (G.T / np.asarray(variance, float)) @ G
    J0 = 0.5 * (J + J.T) - data
    w, Q = np.linalg.eigh(0.5 * (J0 + J0.T))
    top = max(float(w.max()), 0.0)
    if w.min() > CONSISTENT_TOLERANCE * top:       # positive definite: C is that Gaussian's own
        return C
    # only the directions with no positive prior precision are raised (a nearly free nominal
    # level keeps its small one)
    w = np.where(w > CONSISTENT_TOLERANCE * top, w, CONSISTENT_FLOOR * top)
    if not top > 0:
        return C
    Jf = (Q * w) @ Q.T + data
    d = 1.0 / np.sqrt(np.diag(Jf))
    out = d[:, None] * np.linalg.inv(d[:, None] * Jf * d[None, :]) * d[None, :]
    return 0.5 * (out + out.T)


def remove_sensor(C, g, variance):
    """C after losing a sensor with row g (S,) and noise variance [K^2] that C already holds."""
    u = C @ g
    den = variance - g @ u
    if den <= 0:
        raise InverseError("the sensor removed is not part of this covariance")
    return C + np.outer(u, u) / den


@dataclass
class Plan:
    """Greedy picks: candidate indices in order, the state's covariance after them, and the
    target sds (targets,) now and after each pick ((n_picks + 1, targets); row 0: now)."""

    picks: list
    sd: np.ndarray
    C_after: np.ndarray
    target_names: list


def greedy(state: PlanState, rows, n_add: int, positions=None, spacing: float = 0.0,
           variance=None, face: str | None = None, cylinder=None) -> Plan:
    """Pick `n_add` of the candidates (rows (N, S); positions (r, theta, z) for the spacing
    rule between picks, and their holes' clearance when the drilling face and the cylinder
    are given; variance (N,) or the state's new-sensor variance) one at a time, each the
    largest weighted fall of the targets' variance (module doc)."""
    rows = np.asarray(rows, float)
    N = rows.shape[0]
    if n_add < 1:
        raise InverseError("the number of sensors to add must be at least 1")
    if N == 0:
        raise InverseError("no admissible candidate position")
    if variance is not None:
        s2 = np.asarray(variance, float)
    else:
        s2 = state.variances(*positions) if positions is not None else np.full(N, state.new_variance)
    F, group = state.target_matrix()
    C = state.C.copy()
    var0 = np.maximum(np.einsum("qk,kl,ql->q", F, C, F), 1e-300)
    sizes = np.bincount(group)[group]
    w = 1.0 / (sizes * var0)
    CG = C @ rows.T                              # (S, N)
    d = np.einsum("nk,kn->n", rows, CG)          # g^T C g
    W = F @ CG                                   # (q, N)
    free = np.ones(N, dtype=bool)
    sds = [state.target_sd(C)]
    picks = []
    for _ in range(min(n_add, N)):
        gain = np.where(free, (w @ W ** 2) / (d + s2), -np.inf)
        j = int(np.argmax(gain))
        if not np.isfinite(gain[j]):
            break
        u = CG[:, j].copy()
        den = d[j] + s2[j]
        gu = rows @ u
        CG -= np.outer(u, gu) / den
        W -= np.outer(F @ u, gu) / den
        d -= gu ** 2 / den
        C -= np.outer(u, u) / den
        picks.append(j)
        free[j] = False
        if positions is not None and spacing > 0:
            free &= clear_of_pick(positions, j, spacing, face, cylinder)
        sds.append(state.target_sd(C))
    return Plan(picks, np.array(sds), 0.5 * (C + C.T), [t.name for t in state.targets])


def sensor_value(state: PlanState) -> pd.DataFrame:
    """For every existing sensor: each target's sd if that sensor is lost [target unit],
    the ratio to its sd now, the largest ratio, the rank (1 = most valuable) and the targets
    it alone supports (ratio > SINGLE_SENSOR_RATIO).  SI units; one row per sensor.  The
    ratio is the loss's in the Gaussian consistent with the state and its sensors
    (consistent_covariance: the state's own covariance when it is a Gaussian posterior),
    applied to the sd now."""
    ex = state.existing
    if not ex["names"]:
        return pd.DataFrame(columns=["sensor", "rank", "largest_ratio", "sole_support"])
    G = state.rows(ex["r"], ex["theta"], ex["z"])
    now = state.target_sd()
    C = consistent_covariance(state.C, G, ex["variance"])
    base = state.target_sd(C)
    rows = []
    for i, name in enumerate(ex["names"]):
        try:
            ratio = state.target_sd(remove_sensor(C, G[i], ex["variance"][i])) / np.where(base > 0, base, np.nan)
        except InverseError:
            ratio = np.full(now.shape, np.nan)
        sd = now * ratio
        row = {"sensor": name, "r_m": ex["r"][i], "theta_rad": ex["theta"][i], "z_m": ex["z"][i]}
        for t, s, q in zip(state.targets, sd, ratio):
            row[f"sd_if_lost:{t.name}"] = s
            row[f"ratio:{t.name}"] = q
        row["largest_ratio"] = float(np.nanmax(ratio)) if np.any(np.isfinite(ratio)) else np.nan
        row["sole_support"] = ", ".join(t.name for t, q in zip(state.targets, ratio) if q > SINGLE_SENSOR_RATIO)
        rows.append(row)
    frame = pd.DataFrame(rows)
    # a sensor whose loss the covariance cannot show (NaN) ranks last
    frame["rank"] = frame["largest_ratio"].rank(ascending=False, method="first", na_option="bottom").astype(int)
    return frame.sort_values("rank").reset_index(drop=True)


def detection_limit(n_zones: int) -> float:
    """|change| / sd beyond which a zone change is flagged: the trend's Bonferroni limit
    Phi^-1(1 - level / (2 m)) over m = n_zones comparisons, family level TREND_FAMILY_LEVEL."""
    return change_threshold(max(int(n_zones), 1), TREND_FAMILY_LEVEL)



__all__ = ["PlanState", "Plan", "Target", "target_list", "state_from_fit", "state_from_prior", "greedy",
           "sensor_value", "add_sensor", "remove_sensor", "consistent_covariance", "detection_limit",
           "dominant_component"]
