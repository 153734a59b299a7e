"""Planning with the unseen stretch's steps in the state (inverse/plan_steps.py).

An aluminium chuck (a = 150 mm, L = 25 mm, k = 170 W/(m K), a typical value from memory)
with an unknown bottom heat flux whose heater ends at 140 mm, a convection-cooled top and an
insulated rim; ten thermocouples, none beyond 100 mm, so the fit carries steps over the
unseen stretch 100-150 mm (inverse/stretch.py).  The readings come from the series of a known
flux; what is under test is the planner's Gaussian algebra and where it sends the next sensor.
"""

import math
import types

import numpy as np
import pytest

import heatsight.forward as fw
from heatsight import inverse
from heatsight.inverse import plan as pl
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.plan_rules import PlanRules, candidate_grid, drill_face
from heatsight.inverse.plan_steps import joint_covariance
from heatsight.inverse.problem import Zone

A, L, K = 0.15, 0.025, 170.0
ZONES = [Zone("inner", "bottom", (0.0, 2 * math.pi), r=(0.0, 0.07)),
         Zone("outer", "bottom", (0.0, 2 * math.pi), r=(0.07, 0.15))]
OUTERMOST = 0.10


def _case():
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    return types.SimpleNamespace(cylinder=fw.Cylinder(A, L, K), faces=faces, zones=ZONES,
                                 fit=types.SimpleNamespace())


@pytest.fixture(scope="module")
def fitted():
    case = _case()
    r = np.array([0.0, 0.04, 0.04, 0.04, 0.08, 0.08, 0.08, 0.08, OUTERMOST, OUTERMOST])
    th = np.radians([0, 0, 120, 240, 45, 135, 225, 315, 90, 270])
    z = np.full(r.size, 0.01)
    truth = fw.Flux(lambda rr, tt: 5000.0 * (rr < 0.14) * (1.0 + 0.1 * (rr / A) * np.cos(tt)))
    T = fw.CylinderModel(case.cylinder, dict(case.faces, bottom=truth), tolerance=1e-7).evaluate(r, th, z).temperature
    T = T + 0.1 * np.random.default_rng(1).standard_normal(r.size)
    rd = inverse.SensorReadings([f"TC{i + 1:02d}" for i in range(r.size)], r, th, z, T, 0.1, np.zeros(r.size), 0.0)
    res = inverse.fit(case, rd, harmonics=6, terms=6, grid=(4, 8), model="smooth")
    assert res.marginal is not None and res.marginal.steps is not None
    return case, res


def _candidates(state):
    rules = PlanRules()
    cyl = fw.Cylinder(A, L, K)
    ex = state.existing
    return candidate_grid(rules, drill_face(rules, "bottom", cyl), cyl, (ex["r"], ex["theta"], ex["z"])), rules


def test_joint_covariance_is_the_stacked_posterior():
    """Cov(c, s) from C (the steps marginalized) and the steps' conditional given c against the
    inverse of the stacked information matrix [[X'N^-1X + P, X'N^-1G_s], [G_s'N^-1X,
    G_s'N^-1G_s + V^-1]] (the textbook Gaussian posterior of a linear model, computed
    directly with numpy)."""
    rng = np.random.default_rng(7)
    n, k, j = 9, 5, 3
    X, Gs = rng.standard_normal((n, k)), rng.standard_normal((n, j))
    P, v = np.diag(rng.uniform(0.5, 2.0, k)), rng.uniform(0.2, 3.0, j)
    W = rng.standard_normal((n, n))
    N = W @ W.T / n + 0.3 * np.eye(n)
    S = N + (Gs * v) @ Gs.T
    C = np.linalg.inv(X.T @ np.linalg.solve(S, X) + P)
    A_ = np.hstack([X, Gs])
    info = A_.T @ np.linalg.solve(N, A_) + np.block([[P, np.zeros((k, j))], [np.zeros((j, k)), np.diag(1.0 / v)]])
    np.testing.assert_allclose(joint_covariance(C, X, Gs, v, N), np.linalg.inv(info), rtol=1e-10, atol=1e-12)


def test_state_carries_the_steps_and_starts_from_the_fit(fitted):
    """The state is (c, s); its target sds before any pick are the fit's own reported sds,
    whose steps' share the fit computes as a Gaussian conditional of the marginalized steps
    (truncation.conditional): two routes to one number."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    J = res.marginal.steps.v.size
    assert state.C.shape == (res.design.basis.size + J,) * 2
    assert "steps over the unseen edge stretch" in state.source
    reported = [z["sd"] for z in res.summary["zones"]] + [res.summary["total_power_sd_W"]]
    np.testing.assert_allclose(state.target_sd(), reported, rtol=1e-8)
    (r, th, z), _ = _candidates(state)
    assert state.rows(r, th, z).shape[1] == state.C.shape[0]
    assert state.face_rows(np.array([0.12]), np.array([0.0])).shape == (1, state.C.shape[0])


def test_dominant_plan_equals_a_refit_with_the_steps_as_columns(fitted):
    """covariance = "dominant": the planned sds after each pick equal a new
    LinearGaussianProblem (one SVD, no rank-one update) whose columns are the face modes and
    the steps, the steps' prior precision 1 / v, with the picked rows appended."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones, covariance="dominant")
    (r, th, z), rules = _candidates(state)
    rows = state.rows(r, th, z)
    plan = pl.greedy(state, rows, 2, (r, th, z), rules.spacing)
    pb, alpha, _, _ = pl.dominant_component(res.posterior, res.problem)
    steps, m = res.marginal.steps, res.marginal
    Gs = steps.fields(m.rd.r, m.rd.theta, m.rd.z)
    F = np.vstack([t.F for t in state.targets])
    extra = np.array([t.extra_variance for t in state.targets])
    var_new = state.variances(r, th, z)
    for n_picks in (1, 2):
        picks = plan.picks[:n_picks]
        G = np.vstack([np.hstack([pb.G, Gs]), rows[picks]])
        noise = np.concatenate([state.existing["variance"], var_new[picks]])
        prior = np.append(pb.prior_diag, 1.0 / (alpha * steps.v))
        new = LinearGaussianProblem(G, np.zeros(G.shape[0]), np.zeros(G.shape[0]), noise, prior, np.zeros(G.shape[1]))
        C = new.posterior_covariance(alpha)
        np.testing.assert_allclose(plan.sd[n_picks], np.sqrt(np.einsum("qk,kl,ql->q", F, C, F) + extra), rtol=1e-7)


def test_first_pick_settles_the_unseen_stretch(fitted):
    """The fit warns that no sensor sees the stretch beyond 100 mm, and the heater's end there
    is what the power and the outer zone are least sure of: the planner's first pick lies
    in that stretch and cuts the outer zone's sd by more than a quarter.  (Before the steps
    were part of the state it went to the centre: a new sensor could not settle them.)"""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    (r, th, z), rules = _candidates(state)
    plan = pl.greedy(state, state.rows(r, th, z), 1, (r, th, z), rules.spacing)
    assert r[plan.picks[0]] > OUTERMOST + 0.01
    outer = plan.target_names.index("outer")
    assert plan.sd[1, outer] < 0.75 * plan.sd[0, outer]


def test_zone_model_state_starts_from_the_fit(fitted):
    """The zone model's columns (its levels after the face modes) take the steps after them
    too: the planner's sds before any pick are the zone fit's reported ones."""
    case, res = fitted
    zres = inverse.fit(case, res.readings, harmonics=6, terms=6, grid=(4, 8), model="zones")
    assert zres.marginal is not None and zres.marginal.steps is not None
    state = pl.state_from_fit(zres, ["zones", "power"], case.zones)
    assert state.C.shape[0] == zres.design.size + zres.marginal.steps.v.size
    reported = [z["sd"] for z in zres.summary["zones"]] + [zres.summary["total_power_sd_W"]]
    np.testing.assert_allclose(state.target_sd(), reported, rtol=1e-6)
