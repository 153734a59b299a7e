"""What the readings carry, for inverse.fit: the linear Gaussian problem with its prior mean,
the noise with the sensors' placement, and the modes the basis leaves out and the steps over an
unseen edge stretch marginalized into that noise (truncation.py, stretch.py), with their share
of the answer given the kept sensors."""

from __future__ import annotations

import numpy as np

from .design import NOMINAL_PRECISION_FACTOR
from .hyperprior import learn_prior
from .linear_gaussian import LinearGaussianProblem
from .marginal_sets import MarginalSets, prior_at_points
from .noise import Whitener, noise_covariance
from .robust import nominal_level
from .strength import choose_strength
from .stretch import step_level, stretch_steps
from .truncation import conditional, face_tail, left_out_columns, tail_covariance


def steps_given_kept(steps, lin, kept, residual):
    """(m (n,) [K], v (n,) [K^2]): the unseen stretches' steps (stretch.StretchSteps) at every
    reading given the residual (n,) [K] at the readings `kept`, under lin's noise S (which
    holds them): m = G V G_k^T S_kk^-1 r_k, v = diag(G V G^T - G V G_k^T S_kk^-1 G_k V G^T)
    (truncation.conditional, each reading's step fields as a functional's row)."""
    k = np.flatnonzero(kept)
    G = steps.at_readings
    H, v = conditional([(G[k], steps.v, G)], lin.noise.covariance[np.ix_(k, k)])
    return H.T @ residual[k], v


def with_steps_given_kept(steps, problem, lin, kept, fitted):
    """(t0 (n,), noise variance (n,)) of every reading for log_evidence_on_all: the readings'
    own variance (Whitener.own_sd), and with the unseen stretches' steps their conditional
    mean added to t0 and their conditional variance to the noise (steps_given_kept), so that
    a set-aside reading over the stretch is judged with them.  fitted (n,) [K]: X c."""
    var = lin.noise.own_sd ** 2
    if steps is None:
        return problem.t0, var
    m, v = steps_given_kept(steps, lin, kept, problem.d - problem.t0 - fitted)
    return problem.t0 + m, var + v


def linear_problem(G, t0, noise, rd, P, u, ok):
    """The linear Gaussian problem with prior mean gamma u, gamma the GLS level of u over the
    readings `ok` (those that passed the gross-fault screen)."""
    var = noise.variance if isinstance(noise, Whitener) else noise
    gamma = nominal_level(rd.temperature - t0, G @ u, var, ok)
    return LinearGaussianProblem(G, rd.temperature, t0, noise, P, c0=gamma * u)


def reading_noise(rd, opts):
    return noise_covariance(rd.sigma, rd.offset_sd, opts.common_offset_sd)


def with_placement(problem, rd, ev, dG, P, u, ok, opts):
    """Placement tolerance: effective variance (grad T . delta x)^2 with delta x uniform in
    +-tol, the gradient from a first fit on the readings that passed the gross-fault screen."""
    if not np.any(rd.position_tolerance > 0):
        return problem
    request = opts.strength_request
    first = problem.subset(np.flatnonzero(ok))
    c_first = first.coefficients(choose_strength(first, request if not isinstance(request, str)
                                                 else "evidence").alpha)
    grad = ev.gradient + np.einsum("dpk,k->dp", dG, c_first)
    pos_var = (grad ** 2).sum(axis=0) * rd.position_tolerance ** 2 / 3.0
    base = reading_noise(rd, opts)
    var = base + (np.diag(pos_var) if base.ndim == 2 else pos_var)
    return linear_problem(problem.G, problem.t0, var, rd, P, u, ok)


def with_tail(problem, design, rd, P, u, ok, stretch=True, zones=()):
    """(problem, prior, steps): the modes the basis leaves out and the steps (ramps on a
    temperature face) over an unseen edge stretch (stretch.py), marginalized into the noise
    (truncation.py), the modes' variance from a first learned prior on the readings `ok` (those
    a first screening kept), the steps' from its face map (stretch.step_level); that prior; the StretchSteps or None
    (always None without `stretch`: with calibrated face parameters, whose answer would not
    carry the steps' share).  The steps' variance at each reading is marked as shared
    (Whitener's shared_variance), so that a reading's own sd leaves it out."""
    first = learn_prior(problem.subset(np.flatnonzero(ok)), design.basis, nominal=u > 0,
                        nominal_factor=NOMINAL_PRECISION_FACTOR)
    steps = (stretch_steps(design, rd.subset(np.flatnonzero(ok)), step_level(design, first.coefficients()), zones)
             if stretch else None)
    S = problem.noise.covariance + tail_covariance(design, rd, first)
    shared = None
    if steps is not None:
        shared = steps.attach(rd).covariance
        S = S + shared
    noise = Whitener(S, shared_variance=None if shared is None else np.diag(shared))
    return linear_problem(problem.G, problem.t0, noise, rd, P, u, ok), first, steps


def lead_tail_prior(model, tail_prior, zone_model):
    """The left-out modes' prior under the model that leads: the smooth model's, or the zone
    models' shared one."""
    return tail_prior if model == "smooth" else zone_model[0].tail_prior


def answer_tails(model, columns, design, rd, kept, problem, tail_prior, zone_model, zones, steps=None):
    """The left-out modes and the unseen stretches' steps under the model that leads, given the
    kept sensors' residual, for FitResult.build: (figure_tails, map_tail, point_tail, marginal,
    gradient_tail).
    figure_tails = (X, residual, {name: (h, variance)}): their share of the total power, the
    face mean and each zone mean (marginal_sets.MarginalSets.shares), value = k + f . c + h .
    (residual - X c) with the variance added; map_tail: points -> (dF, dk, variance), their
    part of the face map, k + dk + (F + dF) c with the variance added (truncation.face_tail);
    point_tail: points (r, theta, z) -> (dG, dt0, variance), their part of the temperature
    inside the part alike (MarginalSets.at_points); marginal: the marginal_sets.MarginalSets
    (planning carries the steps in its state); gradient_tail: points -> (dGg (3, Q, K), dg0
    (3, Q)), their part of the temperature gradient (MarginalSets.gradient_at_points).
    zone_model: (the leading ZoneModel, the zone columns' field at the sensors (n, J'))."""
    idx = np.flatnonzero(kept)
    lin = problem if model == "smooth" else zone_model[0].smooth      # its readings, noise and columns
    prior = lead_tail_prior(model, tail_prior, zone_model)
    X = lin.G[idx] if columns is design else np.hstack([lin.G[idx], zone_model[1][idx]])
    S = lin.noise.covariance[np.ix_(idx, idx)]
    kept_rd, residual = rd.subset(idx), lin.d[idx] - lin.t0[idx]
    left = left_out_columns(design, kept_rd)        # one enlarged basis for every share below
    marginal = MarginalSets(left, prior, steps, kept_rd, S, X, None if steps is None else steps.at_readings[idx])

    def on_face(points):
        H, variance = face_tail(left, points, prior, kept_rd, S, steps)
        return -H @ X, H @ residual, variance

    def at_points(points):
        H, variance = marginal.at_points(points.r, points.theta, points.z)
        return -H @ X, H @ residual, variance

    def gradient_at(points):
        Hg = marginal.gradient_at_points(points.r, points.theta, points.z)
        return -Hg @ X, Hg @ residual
    return (X, residual, marginal.shares(zones)), on_face, at_points, marginal, gradient_at


def calibrated_tails(design, rd, kept, prior, steps=None):
    """(map_tail, point_tail) of a fit with calibrated face parameters, as answer_tails's but
    variance only: the left-out modes' (and steps') prior variance on the face
    (truncation.face_tail without the readings) and inside the part
    (marginal_sets.prior_at_points), not given the readings' residual."""
    kept_rd = rd.subset(np.flatnonzero(kept))
    left = left_out_columns(design, kept_rd)

    def on_face(points):
        return None, None, face_tail(left, points, prior, kept_rd, steps=steps)[1]

    def at_points(points):
        return None, None, prior_at_points((left, steps), prior, points.r, points.theta, points.z)
    return on_face, at_points
