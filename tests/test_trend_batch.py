"""Batch inversion (inverse.batch): equal to per-row fits, shared offsets cancel in changes.

Synthetic readings come from forward.CylinderModel of a known-flux version of the demo
platen (the heater flux given, a smooth weakened sector of the outer zone).  That is the
fit's own series: the inverse-crime caution is about recovery accuracy; here the
statistics of the batch solver are under test (equality with `fit`, the noise model).
"""

from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import norm

import heatsight.forward as fw
from heatsight import inverse
from heatsight.data_io.case import load_case
from heatsight.data_io.tables import read_layout
from heatsight.inverse.batch import BatchSolver, change_threshold, face_functionals
from heatsight.inverse.face_grid import quadrature

ROOT = Path(__file__).resolve().parent.parent
CASE = ROOT / "demo_data" / "platen.toml"
Q0 = 12_000.0        # W/m^2, the nominal heater flux (a scenario of our own)
WEAK_ZONE = "outer 60-180"


def weak_shape(r, theta):
    """1 inside the outer ring between 60 and 180 deg, 0 outside, smooth edges."""
    ring = 0.5 * (1 + np.tanh((np.asarray(r) - 0.105) / 0.006))
    d = np.angle(np.exp(1j * (np.asarray(theta) - 2 * np.pi / 3)))
    return ring * 0.5 * (1 - np.tanh((np.abs(d) - np.pi / 3) / 0.12))


@lru_cache(maxsize=None)
def platen():
    """(case, layout frame, T at the sensors for the nominal heater [K], T with the outer
    sector fully off [K], true change of each zone's mean flux for a full loss [W/m^2])."""
    case = load_case(CASE, purpose="fit")
    lay = read_layout(case.sensors.layout, case.cylinder).frame

    def field(q):
        faces = dict(case.faces)
        faces["bottom"] = fw.Flux(q)
        model = fw.CylinderModel(case.cylinder, faces, tolerance=1e-7)
        return model.evaluate(lay["r"].to_numpy(), lay["theta"].to_numpy(), lay["z"].to_numpy()).temperature

    t_nom = field(lambda r, th: Q0 + 0 * np.asarray(r))
    t_off = field(lambda r, th: Q0 * (1 - weak_shape(r, th)))
    quad = quadrature("bottom", case.cylinder)
    loss = {}
    for zone in case.zones:
        w = quad.weights * zone.contains(quad.u, quad.v)
        loss[zone.name] = -float(w @ (Q0 * weak_shape(quad.u, quad.v))) / float(w.sum())
    return case, lay, t_nom, t_off, loss


def readings(temperature, sigma, offset_sd=0.0, names=None):
    _, lay, *_ = platen()
    keep = np.isfinite(temperature)
    names = list(lay.index) if names is None else names
    return inverse.SensorReadings([n for n, k in zip(names, keep) if k], lay["r"].to_numpy()[keep],
                                  lay["theta"].to_numpy()[keep], lay["z"].to_numpy()[keep], temperature[keep],
                                  np.broadcast_to(sigma, keep.shape)[keep],
                                  np.broadcast_to(offset_sd, keep.shape)[keep], 0.0)


@lru_cache(maxsize=None)
def reference_fit():
    case, _, t_nom, t_off, _ = platen()
    # trend inverts logs with the smooth model (data_io/trend_run.py), so its fits here do too
    return inverse.fit(case, readings(t_nom + 0.3 * (t_off - t_nom), 0.1, 0.5), model="smooth")


def _rows(seed=0, rows=5):
    _, _, t_nom, t_off, _ = platen()
    rng = np.random.default_rng(seed)
    lam = np.linspace(0.0, 0.6, rows)
    D = t_nom + lam[:, None] * (t_off - t_nom) + rng.normal(0.0, 0.1, (rows, t_nom.size))
    D[1, 3] = np.nan
    D[3, [0, 7, 12]] = np.nan
    return D


@pytest.mark.parametrize("per_row_noise", [True, False])
def test_batch_equals_per_row_fits(per_row_noise):
    case, lay, *_ = platen()
    ref = reference_fit()
    alpha = ref.posterior.alpha
    D = _rows()
    rng = np.random.default_rng(5)
    RV = rng.uniform(0.005, 0.03, D.shape) if per_row_noise else np.full(D.shape[1], 0.02)
    tau = np.full(D.shape[1], 0.5)
    solver = BatchSolver.from_fit(ref, lay["r"], lay["theta"], lay["z"], offset_sd=tau, zones=case.zones,
                                  grid=(41, 72))
    est = solver.solve(D, RV)
    for i in range(D.shape[0]):
        rv = RV[i] if per_row_noise else RV
        f = inverse.fit(case, readings(D[i], np.sqrt(rv), tau), strength=alpha, keep_all_sensors=True, model="smooth")
        s = f.summary
        got = [est.value("mean")[i], est.sd_of("mean")[i], est.value("total_power")[i],
               est.sd_of("total_power")[i], est.min[i], est.max[i], est.nonuniformity[i]]
        want = [s["mean"], s["mean_sd"], s["total_power_W"], s["total_power_sd_W"], s["min"], s["max"],
                s["nonuniformity"]]
        np.testing.assert_allclose(got, want, rtol=1e-8)  # round-off: the nearly flat nominal direction costs ~4 digits of conditioning
        for z in s["zones"]:
            assert est.value(z["name"])[i] == pytest.approx(z["mean"], rel=1e-9)
            assert est.sd_of(z["name"])[i] == pytest.approx(z["sd"], rel=1e-9)
        assert est.n_used[i] == f.summary["n_sensors_used"]


def test_groups_and_single_rows_agree():
    case, lay, *_ = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    D = _rows(seed=1, rows=7)
    rv = np.full(D.shape[1], 0.02)
    changes = solver.changes()
    for s_ in (solver, changes):
        X = D if s_ is solver else D - D[0]
        whole = s_.solve(X, rv)
        for i in range(D.shape[0]):
            one = s_.solve(X[i:i + 1], rv)
            for name in ("values", "sd", "min", "max", "nonuniformity", "nonuniformity_sd"):
                np.testing.assert_allclose(getattr(one, name)[0], getattr(whole, name)[i], rtol=1e-10,
                                           atol=1e-9)
    assert changes.names == changes.change_names == solver.change_names
    assert changes.alpha == solver.alpha / 2
    # fewer than three sensors: no answer, NaN
    few = np.full((1, D.shape[1]), np.nan)
    few[0, :2] = D[0, :2]
    assert np.isnan(solver.solve(few, rv).value("mean")).all()


def test_change_sd_covers_the_change():
    """A change's sd is its posterior sd (the nominal profile's level the row's own, so its
    spread is added): over changes drawn from the change prior itself (coefficients N(gamma
    u, (alpha P)^-1), gamma free) the 95 % bands hold 95 % of the zones' true changes (a
    Gaussian posterior's coverage averaged over its prior: Bayes' theorem, computed
    directly).  With nothing changing, change / sd is at most N(0, 1): the noise-only sd of
    the estimator (sd_kind "noise", which the flags used until session 33) is smaller, and
    judged on it the change of a zone whose neighbour moved was flagged."""
    case, lay, t_nom, t_off, _ = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones).changes()
    rng = np.random.default_rng(11)
    rows, noise = 4000, 0.02
    c = (rng.standard_normal((rows, solver.K)) * solver.p_isqrt / np.sqrt(solver.alpha)
         + rng.normal(0.0, 50.0, rows)[:, None] * solver.u[None, :])
    x = c @ solver.G.T + rng.normal(0.0, np.sqrt(noise), (rows, solver.n))
    est = solver.solve(x, np.full(solver.n, noise))
    truth = c @ solver.Fq[:solver.nf].T
    inside = np.abs(est.values - truth) <= 1.959964 * est.sd
    np.testing.assert_allclose(inside.mean(axis=0), 0.95, atol=0.015)
    # nothing changing: the reference's own noise is common to all rows, so it is
    # conditioned on by subtracting the mean
    base = t_nom + 0.3 * (t_off - t_nom)
    ref = base + rng.normal(0.0, 0.1, base.size)
    flat = base + rng.normal(0.0, 0.1, (4000, base.size))
    est = solver.solve(flat - ref[None, :], np.full(base.size, 0.02))
    z = (est.values - est.values.mean(axis=0)) / est.sd
    assert np.all(np.std(z, axis=0) <= np.sqrt(0.01 / 0.02) * 1.05)
    solver.sd_kind = "noise"
    noise_only = solver.solve(flat - ref[None, :], np.full(base.size, 0.02))
    np.testing.assert_allclose(np.std((noise_only.values - noise_only.values.mean(axis=0)) / noise_only.sd,
                                      axis=0), np.sqrt(0.01 / 0.02), rtol=0.05)
    assert np.all(noise_only.sd <= est.sd * (1 + 1e-9))


def test_joint_evidence_is_the_sum_of_row_evidences():
    case, lay, *_ = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    D = _rows(seed=2, rows=4)
    RV = np.random.default_rng(3).uniform(0.005, 0.02, D.shape)
    alphas = np.array([1e-7, 1e-5, 1e-3])
    total = np.zeros(alphas.size)
    for i in range(D.shape[0]):
        f = inverse.fit(case, readings(D[i], np.sqrt(RV[i]), 0.5), strength=1e-4, keep_all_sensors=True, model="smooth")
        total += f.problem.log_evidence(alphas)
    np.testing.assert_allclose(solver.joint_log_evidence(D, RV, alphas), total, rtol=1e-10)
    alpha, notes = solver.joint_strength(D, RV)
    grid = np.geomspace(alpha / 3, alpha * 3, 7)
    assert np.argmax(solver.joint_log_evidence(D, RV, grid)) == 3 and not notes


def test_row_evidence_is_each_rows_fit_evidence():
    """One noise for every row (one SVD per pattern) and a noise per row give each row's
    log evidence of `inverse.fit`'s LinearGaussianProblem (the Gaussian marginal likelihood,
    computed there from its own SVD); a row with a sensor missing as well."""
    case, lay, *_ = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    D = _rows(seed=4, rows=4)                   # rows 1 and 3 with sensors missing
    rv = np.random.default_rng(5).uniform(0.005, 0.02, D.shape[1])
    alphas = np.array([1e-8, 1e-6, 1e-4, 1e-2])
    shared = solver.row_log_evidence(D, rv, alphas)
    per_row = solver.row_log_evidence(D, np.tile(rv, (4, 1)), alphas)
    for i in range(4):
        f = inverse.fit(case, readings(D[i], np.sqrt(rv), 0.5), strength=1e-4, keep_all_sensors=True,
                        model="smooth")
        np.testing.assert_allclose(shared[i], f.problem.log_evidence(alphas), rtol=1e-10)
        np.testing.assert_allclose(per_row[i], shared[i], rtol=1e-12)


def test_changes_averaged_over_strengths_by_each_rows_evidence():
    """solve_averaged: per row, the Gaussian mixture over the strengths with weights
    p(d | alpha) / sum (uniform prior over the grid): mean sum w m, variance
    sum w (sd^2 + m^2) - mean^2 (law of total variance), the components from single-strength
    solves; a row with a loss in one sector puts its weight on weaker strengths than a row
    with nothing changing."""
    case, lay, t_nom, t_off, _ = platen()
    changes = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                   zones=case.zones).changes()
    rng = np.random.default_rng(8)
    ref = t_nom + rng.normal(0.0, 0.05, t_nom.size)
    X = np.vstack([t_nom + rng.normal(0.0, 0.05, t_nom.size), t_off + rng.normal(0.0, 0.05, t_nom.size)]) - ref
    rv = np.full(t_nom.size, 2 * 0.05 ** 2)
    grid = changes.strength_grid(rv)
    got = changes.solve_averaged(X, rv, grid)
    ev = changes.row_log_evidence(X, rv, grid)
    w = np.exp(ev - ev.max(axis=1, keepdims=True))
    w /= w.sum(axis=1, keepdims=True)
    parts = [changes.with_alpha(a).solve(X, rv) for a in grid]
    m = np.stack([p.values for p in parts])
    v = np.stack([p.sd for p in parts]) ** 2
    for i in range(2):
        mean = w[i] @ m[:, i, :]
        np.testing.assert_allclose(got.values[i], mean, rtol=1e-12)
        np.testing.assert_allclose(got.sd[i] ** 2, w[i] @ (v[:, i, :] + m[:, i, :] ** 2) - mean ** 2, rtol=1e-9)
    centre = w @ np.log(grid)
    assert centre[1] < centre[0] - np.log(100.0)
    # one SVD per pattern (one noise for every row) and one solve per strength (a noise per
    # row) agree, a row with a sensor missing among them
    Y = np.vstack([X, X[1]])
    Y[2, 4] = np.nan
    one, each = changes.solve_averaged(Y, rv, grid), changes.solve_averaged(Y, np.tile(rv, (3, 1)), grid)
    np.testing.assert_allclose(one.values, each.values, rtol=1e-9, atol=1e-9 * np.abs(each.values).max())
    np.testing.assert_allclose(one.sd, each.sd, rtol=1e-7)
    assert not np.allclose(one.values[2], one.values[1])
    with pytest.raises(inverse.InverseError):
        BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"]).solve_averaged(X, rv, grid)


@pytest.mark.parametrize("loss", [0.1, 0.6])
def test_a_sectors_loss_with_sharp_edges_is_held_by_its_zones_step(loss):
    """The outer 60-180 sector loses 10 % or 60 % of its flux (edges 6 mm and 7 deg wide,
    the exact series of that heater pattern: no draw from the prior); each row's change is
    averaged over strengths by its own evidence.  With a step level per zone the weak zone's
    change is within 2 sd of the truth and the others within 2 sd of theirs (largest 1.3 and
    0.8 sd); the smooth change alone, which rounds the step's edges off, misses the weak zone
    by a median 2.8 and 3.0 sd over the rows."""
    case, lay, t_nom, t_off, truth = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    rng = np.random.default_rng(12)
    ref = t_nom + rng.normal(0.0, 0.02, t_nom.size)
    rows = t_nom + loss * (t_off - t_nom) + rng.normal(0.0, 0.05, (20, t_nom.size))
    rv = np.full(t_nom.size, 0.05 ** 2 + 0.02 ** 2)
    changes = solver.changes()
    est = changes.solve_averaged(rows - ref, rv, changes.strength_grid(rv))
    z = np.array([(est.value(n) - loss * truth[n]) / est.sd_of(n) for n in changes.names])
    assert np.all(np.abs(z) < 2.0), z.max(axis=1)
    smooth = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    smooth._step_source = None                       # the change solver of session 32
    plain = smooth.changes()
    old = plain.solve_averaged(rows - ref, rv, plain.strength_grid(rv))
    miss = (old.value(WEAK_ZONE) - loss * truth[WEAK_ZONE]) / old.sd_of(WEAK_ZONE)
    assert np.median(np.abs(miss)) > 2.5


def test_a_small_loss_read_row_by_row_does_not_flag_unchanged_zones():
    """A loss of 0.3-1 % of one sector, one row each, 20 noise draws: the averaged change of an
    unchanged zone beyond the flag limit for 120 comparisons (Bonferroni, 2 % family-wise) in
    at most 5 % of the rows.  With the strength grid stretched by the nominal direction's
    nearly flat prior, 7 of its 17 strengths left every other direction shrunk to nothing and
    such rows came out uniform over the zones: 20 of 120 rows flagged an unchanged zone."""
    case, lay, t_nom, t_off, _ = platen()
    changes = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                   zones=case.zones).changes()
    rv = np.full(t_nom.size, 2 * 0.05 ** 2)
    grid = changes.strength_grid(rv)
    losses = np.array([0.003, 0.004, 0.005, 0.006, 0.0075, 0.01])
    others = [i for i, n in enumerate(changes.names) if n != WEAK_ZONE]
    limit = change_threshold(120)
    false = 0
    for seed in range(20):
        noise = np.random.default_rng(seed).normal(0.0, np.sqrt(rv), t_nom.size)
        est = changes.solve_averaged(losses[:, None] * (t_off - t_nom)[None, :] + noise, rv, grid)
        false += int(np.sum(np.max(np.abs(est.values[:, others]) / est.sd[:, others], axis=1) > limit))
    assert false <= 0.05 * 20 * losses.size


def test_a_zone_covering_nothing_leaves_the_others_their_steps():
    """A zone declared beyond the rim (r = 200-300 mm of a 150 mm platen) covers nothing: it
    switched the steps off for every zone, silently; now the others keep theirs."""
    from heatsight.inverse.problem import Zone

    case, lay, *_ = platen()
    zones = list(case.zones) + [Zone("beyond the rim", "bottom", (0.0, 2 * np.pi), r=(0.2, 0.3))]
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], zones=zones)
    changes = solver.changes()
    assert changes.K == solver.K + len(case.zones)
    with pytest.raises(inverse.InverseError, match="rows must have 20 readings"):
        changes.solve_averaged(np.zeros((2, 10)), np.full(20, 0.01), changes.strength_grid(np.full(20, 0.01)))


def test_offsets_cancel_in_changes_but_widen_the_level():
    """Constant per-sensor offsets: zone changes and the trend of the non-uniformity are the
    same with and without them; the absolute level moves and its sd carries the offsets.

    The heater already has a weak sector that weakens further, so the real structure, not the
    offsets, decides where the face's extremes are (max - min is not linear: offsets on a
    featureless face make extremes of their own)."""
    case, lay, t_nom, t_off, _ = platen()
    rng = np.random.default_rng(7)
    tau = 0.3
    lam = np.linspace(0.3, 0.8, 12)
    clean = t_nom + lam[:, None] * (t_off - t_nom) + rng.normal(0.0, 0.05, (lam.size, t_nom.size))
    biased = clean + rng.normal(0.0, tau, t_nom.size)[None, :]
    rv = np.full(t_nom.size, 0.05 ** 2)
    fit = inverse.fit(case, readings(clean[0], 0.05, tau), model="smooth")
    with_tau = BatchSolver.from_fit(fit, lay["r"], lay["theta"], lay["z"], offset_sd=tau, zones=case.zones)
    no_tau = BatchSolver.from_fit(fit, lay["r"], lay["theta"], lay["z"], offset_sd=0.0, zones=case.zones)
    a, b = with_tau.solve(clean, rv), with_tau.solve(biased, rv)
    ca = with_tau.changes().solve(clean - clean[0], 2 * rv)
    cb = with_tau.changes().solve(biased - biased[0], 2 * rv)
    np.testing.assert_allclose(ca.values, cb.values, atol=1e-9 * np.abs(ca.values).max())
    np.testing.assert_allclose(ca.sd, cb.sd)
    trend_a = a.nonuniformity - a.nonuniformity[0]
    trend_b = b.nonuniformity - b.nonuniformity[0]
    assert np.max(np.abs(trend_a - trend_b)) < 0.1 * np.min(a.nonuniformity_sd)
    assert abs(b.nonuniformity[0] - a.nonuniformity[0]) > 4 * np.max(np.abs(trend_a - trend_b))
    # the level: the offsets move it (the same at every row), and its sd covers the move
    shift = b.value("mean") - a.value("mean")
    assert np.ptp(shift) < 1e-8 * np.abs(shift).max()
    assert np.all(np.abs(shift) < 3 * a.sd_of("mean"))
    level = no_tau.solve(clean, rv)
    assert np.all(a.sd_of("mean") > 1.5 * level.sd_of("mean"))
    # a change carries no offset: its estimator's noise alone is much tighter than the zone's
    # absolute sd (the rest of a change's sd is what the sensors cannot see of it)
    quiet = with_tau.changes()
    quiet.sd_kind = "noise"
    noise_only = quiet.solve(clean - clean[0], 2 * rv)
    assert np.all(noise_only.sd_of(WEAK_ZONE)[1:] < 0.5 * a.sd_of(WEAK_ZONE)[1:])


def test_change_threshold_is_bonferroni():
    assert change_threshold(1) == pytest.approx(norm.isf(0.02 / 2))        # scipy.stats reference
    assert change_threshold(500) == pytest.approx(norm.isf(0.02 / 1000))
    assert change_threshold(0) == change_threshold(1)


def test_face_functionals_match_the_fit():
    case, *_ = platen()
    ref = reference_fit()
    funcs = {name: (f, k) for name, f, k in face_functionals(ref.design, case.zones)}
    assert list(funcs)[:2] == ["mean", "total_power"]
    c = ref.posterior.c
    assert funcs["mean"][0] @ c + funcs["mean"][1] == pytest.approx(ref.summary["mean"], rel=1e-3)
    for z in ref.summary["zones"]:
        f, k = funcs[z["name"]]
        assert f @ c + k == pytest.approx(z["mean"], rel=1e-3)


def test_a_mixture_of_change_priors_weighs_every_pair_by_each_rows_evidence():
    """solve_mixture over two change priors (the zones' steps at 1e-2 and 1e6 times their
    smooth variance, sharp and widest edges), each with its own strength grid: per row, the
    Gaussian mixture over every (prior, strength) pair with weights p(d | pair) / sum (a
    uniform prior over the priors and, within each, over its grid), the evidences the full
    row evidences (row_log_evidence: the readings' part outside the design and log det S
    included, so that the parts' evidences are compared whole) and the components single
    solves; the one-SVD path (one noise for every row) and the per-row path agree."""
    from heatsight.inverse.batch import solve_mixture

    case, lay, t_nom, t_off, _ = platen()
    solver = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], offset_sd=0.5,
                                  zones=case.zones)
    assert solver.step_edges == 3
    rng = np.random.default_rng(9)
    ref = t_nom + rng.normal(0.0, 0.05, t_nom.size)
    X = np.vstack([t_nom, t_off, t_nom + 0.2 * (t_off - t_nom)]) + rng.normal(0.0, 0.05, (3, t_nom.size)) - ref
    X[2, 5] = np.nan
    rv = np.full(t_nom.size, 2 * 0.05 ** 2)
    parts = [(c, c.strength_grid(rv, num=5)) for c in (solver.changes(step_factor=1e-2, edge=0),
                                                        solver.changes(step_factor=1e6, edge=2))]
    got = solve_mixture(parts, X, rv)
    ev = np.hstack([c.row_log_evidence(X, rv, g) - np.log(g.size) for c, g in parts])
    w = np.exp(ev - ev.max(axis=1, keepdims=True))
    w /= w.sum(axis=1, keepdims=True)
    solved = [c.with_alpha(a).solve(X, rv) for c, g in parts for a in g]
    m = np.stack([p.values for p in solved], axis=1)
    v = np.stack([p.sd for p in solved], axis=1) ** 2
    mean = np.einsum("ra,raq->rq", w, m)
    np.testing.assert_allclose(got.values, mean, rtol=1e-9, atol=1e-9 * np.abs(mean).max())
    np.testing.assert_allclose(got.sd ** 2, np.einsum("ra,raq->rq", w, v + m ** 2) - mean ** 2, rtol=1e-7)
    # the loss of a whole sector leans on the steps alone
    assert w[1, 5:].sum() > 0.99
    each = solve_mixture(parts, X, np.tile(rv, (3, 1)))
    np.testing.assert_allclose(got.values, each.values, rtol=1e-9, atol=1e-9 * np.abs(mean).max())
    np.testing.assert_allclose(got.sd, each.sd, rtol=1e-7)


def test_a_second_fits_solver_shares_the_zones_steps():
    """The trend builds a solver from the reference fit and another from the fit at the
    joint strength: the zones' steps (three edge widths, the costliest part) are built once
    when the sensors and their design columns agree (to rounding), and the shared steps give
    the same changes as steps built afresh; other sensors get their own."""
    import heatsight.inverse as inv

    case, lay, t_nom, t_off, _ = platen()
    first = BatchSolver.from_fit(reference_fit(), lay["r"], lay["theta"], lay["z"], zones=case.zones)
    first.zone_steps()
    other = inv.fit(case, readings(t_nom + 0.3 * (t_off - t_nom), 0.1, 0.5), model="smooth", strength=1e-3)
    shared = BatchSolver.from_fit(other, lay["r"], lay["theta"], lay["z"], zones=case.zones, like=first)
    fresh = BatchSolver.from_fit(other, lay["r"], lay["theta"], lay["z"], zones=case.zones)
    assert shared._steps is first._steps and fresh._steps is None
    X = (t_off - t_nom)[None, :] * np.array([[0.1], [0.5]])
    rv = np.full(t_nom.size, 0.01)
    for e in range(3):
        a, b = (s.changes(step_factor=100.0, edge=e).solve(X, rv) for s in (shared, fresh))
        np.testing.assert_allclose(a.values, b.values, rtol=1e-9)
    few = BatchSolver.from_fit(other, lay["r"][:-1], lay["theta"][:-1], lay["z"][:-1], zones=case.zones, like=first)
    assert few._steps is None
