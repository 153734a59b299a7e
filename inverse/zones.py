"""Heater-zone model: one level per declared zone plus a smooth remainder.

Face quantity q = known + sum_j z_j chi_j + sum_k c_k Phi_k, chi_j the zone's indicator
(product of a radial/axial and an angular window, edges of the zone's width).  On the face
the zone column is chi_j exactly; its field at the sensors comes from the projection of
chi_j on the face's eigenfunctions with many terms and harmonics,
    a_jk = integral chi_j Phi_k dA / N_k,   G_zone = G_big A^T,
which converges at interior sensors (each mode decays into the part).

Priors: the remainder c ~ N(0, (alpha P)^-1), P the smooth model's prior with its nearly
flat nominal level (a background between and around the zones). With the learned prior
(the default) P is the Whittle-Matern family of hyperprior.py, its strength, length scale
and order averaged by the remainder's own evidence (over the smooth model's orders: the
readings cannot tell them apart, and between sensors the rough ones are what keeps the bands
honest), the amplitude scale the smooth model's
(`remainder_spread`, `learned_fit`); with the fixed prior, P = prior_diagonal
and the strength alone is averaged (`fit`); z ~ N(0, diag(s^2)): a zone's level departs from
the background's by a prior amount. With the learned prior s_j = f sigma_f for the zones of a
set S that carry a level of their own and 0 for the others, sigma_f the smooth model's
amplitude [face unit] (its posterior median: how far the face departs from its nominal
profile), f in ZONE_LEVEL_FACTORS with equal prior mass and S with the prior of
level_set_log_prior; (f, S) weighed by their evidence (`choose_level_scale`, chosen again at
the learned remainder's leading point: `refine_level_choice`) into one Gaussian prior with
the mixture's second moment per zone, whose evidence is corrected to the mixture's
(`level_choice_correction`); with the fixed prior s = ZONE_PRIOR_FACTOR x the face's level
scale (weak) for every zone.  A zone's nominal power is a yardstick
for its delivered fraction, not a prior mean: a prior centred on the rating pulls a weak
heater towards "as rated" wherever the readings are thin, and on a temperature face a power
is no level at all.  Marginalizing z gives d ~ N(t0 + G c0, S + G_zone diag(s^2) G_zone^T +
G (alpha P)^-1 G^T), so the evidence p(d | alpha, zones) is exact. It compares with the
smooth model's evidence (learned prior: both integrated over strength, length scale and
order, on one grid of length scales and orders and one amplitude hyperprior; fixed prior:
both on one log-alpha grid), equal prior model odds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import logsumexp

from .errors import InverseError
from .design import NOMINAL_PRECISION_FACTOR
from .hyperprior import learn_prior, readings_spread
from .linear_gaussian import LinearGaussianProblem
from .marginal_columns import MarginalColumns
from .noise import Whitener
from .truncation import nearest_distance, tail_covariance
from .zone_columns import ZoneDesign

#: fixed prior: zone level prior sd = this factor x the face's level scale (weak; common
#: practice, no source)
ZONE_PRIOR_FACTOR = 10.0
#: learned prior: zone level prior sd = f x the smooth model's amplitude sigma_f, f among these
#: (half decades), averaged by the evidence (choose_level_scale). A vague sd costs the zone model ln(s / posterior
#: sd) nats per zone whatever the data say (Lindley's paradox, from memory): at 10x the face's
#: level (sd 120,000 W/m^2 on tube_bore_flux; 4,600 K on a bore at 460 K) the zone model lost by
#: 17 nats while all its zone means lay within 0.9 sd and the smooth answer's fouled side 5.5 sd
#: off. A single f fails the other way: f = 1 shrank three sharp rings' levels (every zone 2.6-4
#: sd low, evidence -42.1 against -35.1 at f = 3.2).
ZONE_LEVEL_FACTORS = (1.0, 10.0 ** 0.5, 10.0, 10.0 ** 1.5)
#: the sets of zones with a level of their own are all tried (2^J - 1 of them) up to this many
#: zones; with more, every zone keeps its level (choose_level_scale).  The sets' evidences cost
#: 0.07-0.24 s per choice at 8 zones (40-80 amplitudes, four factors), 0.5-0.9 s at 10
MAX_CHOSEN_ZONES = 8
#: the levels' prior chosen again at the learned remainder's hyperparameters
#: (refine_level_choice) is kept only when some zone's level sd moves by more than this (in
#: log): below it the remainder is not learned again (5 % in s moves the evidence by ~0.05
#: nats per zone)
SAME_LEVEL_SD = 0.05


@dataclass
class ZoneFit:
    """The zone model's posterior and the evidence comparison with the smooth model.

    c (K + J,), C: moment-matched mixture over alpha (law of total covariance); alpha: the
    evidence-weighted geometric mean strength; log_evidence: {"smooth": ..., "zones": ...}
    integrated over log alpha on one grid; weights: posterior model probabilities (equal
    prior odds); edge: True when the zone model's alpha weights reach the grid's ends.
    """

    c: np.ndarray
    C: np.ndarray
    alpha: float
    log_evidence: dict
    weights: dict
    edge: bool
    prior: object = None    # the remainder's LearnedPrior (learned_fit), else None


def level_sets(n_zones) -> np.ndarray:
    """The sets of zones that may carry a level of their own (n_sets, n_zones) bool: every
    non-empty one (a zone model without a level is the smooth model) up to
    MAX_CHOSEN_ZONES zones, beyond that only all of them."""
    if n_zones > MAX_CHOSEN_ZONES:
        return np.ones((1, n_zones), dtype=bool)
    codes = np.arange(1, 2 ** n_zones)
    return (codes[:, None] >> np.arange(n_zones)[None, :]) & 1 == 1


def level_set_log_prior(sets) -> np.ndarray:
    """log p(S) of level_sets' sets: the number k of zones with a level of their own uniform
    on 1..J and, given k, every set of k zones alike, p(S) = 1 / (J C(J, k)): a prior on the
    count, not 1/2 per zone, so that many declared zones do not make a few real ones
    improbable: a uniform prior on the probability that a zone has a level makes the count
    uniform on 0..J (a beta-binomial), and J C(J, k) follows on leaving out k = 0, the smooth
    model's own case (the multiplicity correction of variable selection, Scott & Berger 2010,
    from memory)."""
    sets = np.asarray(sets, bool)
    J, k = sets.shape[1], sets.sum(axis=1)
    if sets.shape[0] == 1:
        return np.zeros(1)
    return -math.log(J) - np.array([math.log(math.comb(J, int(x))) for x in k])


def added_levels_log_evidence(Q, b, s, sets, block=2 ** 20) -> np.ndarray:
    """log p(d | alpha, S) - log p(d | alpha, no level) (m, n_sets) for zone levels
    z_S ~ N(0, diag(s_S^2)) (s (J,) [face unit]), from LinearGaussianProblem.column_gains'
    Q (m, J, J) and b (m, J) of the zone columns: -1/2 log det(I + s Q s) + 1/2 (s b)^T
    (I + s Q s)^-1 (s b), a zone outside S with s = 0 (its row and column the identity's).
    In blocks of sets holding about `block` matrix entries."""
    m, J = b.shape
    out = np.empty((m, len(sets)))
    step = max(1, block // max(1, m * J * J))
    for start in range(0, len(sets), step):
        sm = np.asarray(sets[start:start + step], float) * np.asarray(s, float)[None, :]      # (k, J)
        B = np.eye(J) + Q[:, None] * sm[None, :, :, None] * sm[None, :, None, :]             # (m, k, J, J)
        sb = b[:, None, :] * sm[None]                                                        # (m, k, J)
        L = np.linalg.cholesky(B)
        logdet = 2.0 * np.log(np.diagonal(L, axis1=-2, axis2=-1)).sum(axis=-1)
        v = np.linalg.solve(B, sb[..., None])[..., 0]
        out[:, start:start + step] = -0.5 * logdet + 0.5 * np.sum(sb * v, axis=-1)
    return out


def zone_prior(n_zones, level_scale, factor=ZONE_PRIOR_FACTOR):
    """(mu, s) of the zone levels [face unit]: mean 0 (a departure from the background) and
    sd factor x level_scale for every zone."""
    if not float(level_scale) > 0:
        raise InverseError("zone model: the face's level scale is zero (every reading at the "
                           "nominal profile); use model = \"smooth\"")
    return np.zeros(n_zones), np.full(n_zones, factor * float(level_scale))


class ZoneModel:
    """The zone model on all sensors of `smooth` (the smooth model's LinearGaussianProblem:
    readings, noise, G, t0) with zone levels marginalized: `marginal` is a
    LinearGaussianProblem in the remainder's coefficients (prior mean 0, precision
    alpha * remainder_prior) whose noise is S + G_zone diag(s^2) G_zone^T; screening,
    strength and evidence of the zone model work on it."""

    def __init__(self, design, rd, smooth, zones, level_scale, remainder_prior, big=None, A=None,
                 edge_width=None, shift=None, level_factor=ZONE_PRIOR_FACTOR):
        # [m] the widest edge its zones were given (edge_widths; None: as declared)
        self.edge_width = None if edge_width is None else float(np.max(edge_width))
        self.columns = ZoneDesign(design, zones, nearest_distance(design, rd.r, rd.z), big, A)
        self.Gz = self.columns.sensors(rd.r, rd.theta, rd.z)[0][:, design.size:]
        self._prior_of = lambda factor: zone_prior(len(zones), level_scale, factor)  # noqa: E731
        self.level_factor = level_factor
        # each zone's probability of a level of their own (choose_level_scale; 1 until it has
        # chosen)
        self.inclusion = np.ones(len(zones))
        self.levels_chosen = False
        self.refined = False        # learned_fit chose the levels' prior again (refine_level_choice)
        # log of (prior-weighted mean over (f, S) of p(d | f, S)) / p(d | the averaged prior)
        # (choose_level_scale)
        self.level_choice_correction = 0.0
        self.mu, self.s = self._prior_of(level_factor)
        self.P = np.asarray(remainder_prior, float)
        # calibrated parameters' step (calibration.learned_calibration): (columns (n, p), prior
        # mean (p,), sd (p,)), integrated out with the zone levels; None without calibration
        self.shift = shift
        self._set_smooth(smooth)

    @property
    def level_columns(self) -> np.ndarray:
        """The columns integrated out beside the remainder: the zone levels', then the
        calibrated parameters' step, if any (n, J + p)."""
        return self._levels.X

    def _levels_for(self, smooth, mu, s, P):
        """MarginalColumns of the zone levels N(mu, s^2) (and a calibrated parameters' step)
        beside `smooth`, the remainder's prior precision P."""
        X = self.Gz
        if self.shift is not None:
            X, mu, s = (np.concatenate([a, b], axis=-1) for a, b in zip((X, mu, s), self.shift))
        return MarginalColumns(smooth, X, mu, s, P, np.zeros(P.size))

    def _set_smooth(self, smooth):
        """Readings, noise and columns of the smooth part; the zone levels (and a calibrated
        parameters' step) integrated out (marginal_columns.py): `marginal` is the remainder's
        problem."""
        self.smooth = smooth
        self._levels = self._levels_for(smooth, self.mu, self.s, self.P)
        self.marginal = self._levels.marginal
        self._learned = None        # (key, basis, like, the remainder's LearnedPrior) (_remainder_prior)

    def choose_level_scale(self, kept, leading) -> dict:
        """The zone levels' prior from the readings `kept`: how large a level may be (sd
        f x sigma_f, f in ZONE_LEVEL_FACTORS, equal prior mass) and which zones carry a level
        of their own (a set S; the others' levels are 0 and the remainder alone carries them;
        level_sets, prior level_set_log_prior), each (f, S) weighed by its evidence at
        `leading` = (precision P, strengths alpha, log hyperprior weights) of the smooth
        model's leading hyperparameter point (hyperprior.LearnedPrior.leading), the amplitude
        integrated under its hyperprior (a cheap stand-in for the full learned evidence; the
        remainder's own prior is learned afterwards):

            log p(d | f, S) = logsumexp_alpha(log p(d | alpha, f, S) + log w_alpha).

        A level the readings do not ask for costs the zone model ln(s / posterior sd) nats
        whatever they say (a zone declared to be reported, a quadrant over a band heater):
        with every level always in, tube_bore_flux's zone model (seven zones, three real) lost
        to the smooth model by 1.1 nats.  The choices are averaged, not picked: a single best
        (f, S) flipped between near-equal sets (semi_infinite, 0.05 nats apart; coverage
        0.80 -> 0.28).  The averaged prior is one Gaussian with the mixture's second moment:
        zone j's level sd s_j = sqrt(sum_{f,S} p(f, S | d) 1[j in S] (f sigma_f)^2), its
        `inclusion` = sum_{f,S} p(f, S | d) 1[j in S] (the sets' correlation between zones is
        not kept).  The zone model's evidence, computed at that prior, is corrected to the
        prior-weighted mean over (f, S), the ratio taken at `leading` (assumed the same at
        the other hyperparameters):
        `level_choice_correction` = log sum_{f,S} p(f) p(S) p(d | f, S) - log p(d | s), of
        either sign.  Zone levels have prior mean 0 here (zone_prior).
        Returns {(f, S as a tuple of bools): log p(d | f, S)}."""
        idx = np.flatnonzero(kept)
        P, alphas, log_w = leading
        J = len(self.columns.zones)
        none = np.zeros(J)
        base = self._levels_for(self.smooth, none, none, P).marginal.subset(idx)
        le0 = base.log_evidence(alphas)
        Q, b = base.column_gains(self.Gz[idx], alphas)

        def evidence(s, sets):
            return logsumexp(le0[:, None] + added_levels_log_evidence(Q, b, s, sets) + log_w[:, None], axis=0)

        sets = level_sets(J)
        scales = np.array([self._prior_of(f)[1] for f in ZONE_LEVEL_FACTORS])                 # (n_f, J)
        table = np.array([evidence(s, sets) for s in scales])                                 # (n_f, n_S)
        post = table + level_set_log_prior(sets)[None, :]
        p = np.exp(post - logsumexp(post))
        self.inclusion = p.sum(axis=0) @ sets
        self.level_factor = ZONE_LEVEL_FACTORS[int(np.argmax(p.sum(axis=1)))]
        self.mu = np.zeros(J)
        self.s = np.sqrt(np.einsum("fs,sj,fj->j", p, sets.astype(float), scales ** 2))
        at = float(evidence(self.s, np.ones((1, J), dtype=bool))[0])
        self.level_choice_correction = float(logsumexp(post) - math.log(len(ZONE_LEVEL_FACTORS)) - at)
        self.levels_chosen = True
        self._set_smooth(self.smooth)
        return {(f, tuple(bool(x) for x in S)): float(table[a, k])
                for a, f in enumerate(ZONE_LEVEL_FACTORS) for k, S in enumerate(sets)}

    @property
    def level_scale(self) -> float:
        """The level sd f x sigma_f [face unit] of the most probable factor f (choose_level_scale)."""
        return float(np.max(self._prior_of(self.level_factor)[1]))

    def _level_choice(self):
        return self.mu, self.s, self.inclusion, self.level_factor, self.level_choice_correction

    def _restore_level_choice(self, choice):
        self.mu, self.s, self.inclusion, self.level_factor, self.level_choice_correction = choice
        self._set_smooth(self.smooth)

    def add_tail(self, design, rd, nominal, ok, like=None, extra=0.0):
        """The remainder's left-out modes marginalized into the noise (truncation.py), their
        variance from a first learned remainder prior on the readings `ok`: the zones carry
        the sharp structure, so the remainder's tail is its own, not the smooth model's.
        extra (n, n) [K^2]: more marginalized columns' covariance, the smooth model's own
        (the unseen stretches' steps, stretch.py), so that both models hold them."""
        first = self._learn_remainder(np.flatnonzero(ok), design.basis, nominal, NOMINAL_PRECISION_FACTOR, like)
        sm = self.smooth
        self.tail_prior = first
        shared = None if np.ndim(extra) < 2 else np.diag(extra)
        self._set_smooth(LinearGaussianProblem(sm.G, sm.d, sm.t0,
                                               Whitener(sm.noise.covariance + tail_covariance(design, rd, first)
                                                        + extra, shared_variance=shared), sm.prior_diag, sm.c0))

    def share_tail(self, other: "ZoneModel"):
        """The left-out modes' variance of `other` (add_tail), reused: zone models that
        differ in their edge widths alone share one remainder tail."""
        self.tail_prior = other.tail_prior
        self._set_smooth(other.smooth)

    def fit(self, kept, alphas) -> ZoneFit:
        """Posterior of (c, z) on the kept sensors, averaged over the log-alpha grid `alphas`
        with the zone model's evidence weights, and the evidence comparison."""
        idx = np.flatnonzero(kept)
        smooth, marginal = self.smooth.subset(idx), self.marginal.subset(idx)
        alphas = np.atleast_1d(np.asarray(alphas, float))
        le_z, le_s = marginal.log_evidence(alphas), smooth.log_evidence(alphas)
        w = np.exp(le_z - le_z.max())
        w /= w.sum()
        keep = w > 1e-8 * w.max()
        X = np.hstack([smooth.G, self.Gz[idx]])
        XtSi = smooth.noise.whiten_transpose(smooth.noise.whiten(X)).T
        H = XtSi @ X
        x0 = np.concatenate([np.zeros(self.P.size), self.mu])
        b0 = XtSi @ (smooth.d - smooth.t0)
        means, covs = [], []
        for a in alphas[keep]:
            prec = np.concatenate([a * self.P, 1.0 / self.s ** 2])
            C = np.linalg.inv(H + np.diag(prec))
            C = 0.5 * (C + C.T)
            means.append(C @ (b0 + prec * x0))
            covs.append(C)
        wk = w[keep] / w[keep].sum()
        M = np.array(means)
        mean = wk @ M
        cov = np.einsum("a,akl->kl", wk, np.array(covs)) + (M - mean).T @ ((M - mean) * wk[:, None])
        n_a = alphas.size
        logz = {"smooth": float(logsumexp(le_s) - math.log(n_a)),
                "zones": float(logsumexp(le_z) - math.log(n_a))}
        p_z = 1.0 / (1.0 + math.exp(min(700.0, logz["smooth"] - logz["zones"])))
        alpha = float(np.exp(wk @ np.log(alphas[keep])))
        edge = n_a > 2 and max(w[0], w[-1]) > 1e-3
        return ZoneFit(mean, cov, alpha, logz, {"smooth": 1.0 - p_z, "zones": p_z}, edge)

    def remainder_spread(self, idx) -> float:
        """The amplitude scale of the remainder's learned prior (hyperprior.LearnedPrior's
        `spread`): the smooth model's, the whitened mean square of the readings beyond the
        noise about the nominal profile, so that both models' evidences are integrated over
        the same amplitude hyperprior.  (The spread left after the zone levels' own fit made the
        remainder's prior as tight as the zones' fit where the sensors are, and the face
        where none are as certain: sparse_sector's power +2.1 sd, 619.8 +- 7.2 W against
        604.7 W; with the smooth model's scale +1.0 sd.)"""
        return readings_spread(self.smooth.subset(idx))

    def _learn_remainder(self, idx, basis, nominal, nominal_factor, like):
        """The remainder's LearnedPrior on the marginal problem of the readings `idx`: the
        smooth model's amplitude scale and length scales (`like`) and its orders."""
        return learn_prior(self.marginal.subset(idx), basis, nominal=nominal, nominal_factor=nominal_factor,
                           spread=self.remainder_spread(idx), like=like)

    def _remainder_prior(self, kept, basis, nominal, nominal_factor, like):
        """The remainder's LearnedPrior on the marginal problem of the readings `kept`, kept
        until the levels' prior changes (_set_smooth)."""
        key = (np.asarray(kept, bool).tobytes(), np.asarray(nominal).tobytes(), float(nominal_factor))
        held = self._learned
        if held is None or held[0] != key or held[1] is not basis or held[2] is not like:
            lp = self._learn_remainder(np.flatnonzero(kept), basis, nominal, nominal_factor, like)
            self._learned = (key, basis, like, lp)
        return self._learned[3]

    def refine_level_choice(self, kept, basis, nominal, nominal_factor, like=None) -> bool:
        """Choose the levels' prior once more (choose_level_scale) at the leading point of the
        remainder's prior learned on the readings `kept`, instead of the smooth model's: the
        smooth model's remainder is rougher and carries heater bands itself, so at its point a
        zone's level looked less needed (tube_bore_flux: the fouled side's level probability
        0.91 -> 1.0, the quadrants' 0.2-0.3 -> 0.05-0.08, the zone model's evidence -54.0 ->
        -51.4).  The new choice stands when some zone's level sd moves by more than
        SAME_LEVEL_SD (in log); else the one before stays, with its learned remainder.  True
        when the choice changed."""
        lp = self._remainder_prior(kept, basis, nominal, nominal_factor, like)
        before, learned = self._level_choice(), self._learned
        self.choose_level_scale(kept, lp.leading())
        with np.errstate(divide="ignore", invalid="ignore"):     # a level sd of 0 (an underflowed weight)
            moved = np.abs(np.log(self.s / before[1]))
        if np.any(moved[~np.isnan(moved)] >= SAME_LEVEL_SD):
            return True
        self._restore_level_choice(before)
        self._learned = learned
        return False

    def learned_fit(self, kept, basis, nominal, nominal_factor, like=None) -> "ZoneFit":
        """Posterior of (c, z) (and the calibrated parameters' step, when given) with the
        remainder's Whittle-Matern prior learned from the data (hyperprior.LearnedPrior on
        the marginal problem: strength, length scale and order averaged with their
        hyperpriors), moment-matched over the mixture's components.
        Exactly: c's mixture is the marginal problem's (the zone levels integrated out), and
        z | c is the same Gaussian in every component (marginal_columns.MarginalColumns.joint).
        log_evidence holds {"zones": log p(d_kept | zone model)} integrated over the
        hyperpriors; the comparison with the smooth model is model_choice's (weights None).
        Where the levels' prior was chosen (choose_level_scale, at the smooth model's leading
        point), it is chosen once more at the learned remainder's own (refine_level_choice)
        and the remainder learned again where that moves it; the sensors `kept` stay those of
        the screening at the first choice (fit_screening.settled_screen says why)."""
        idx = np.flatnonzero(kept)
        lp = self._remainder_prior(kept, basis, nominal, nominal_factor, like)
        self.refined = self.levels_chosen and self.refine_level_choice(kept, basis, nominal, nominal_factor, like)
        if self.refined:
            lp = self._remainder_prior(kept, basis, nominal, nominal_factor, like)
        mean, cov = self._levels.joint(lp.coefficients(), lp.posterior_covariance(), idx)
        log_a = sum(float(w @ np.log(alphas)) for _, alphas, w in lp.hyperparameters())
        return ZoneFit(mean, cov, math.exp(log_a), {"zones": float(lp.log_marginal)},
                       None, False, lp)
