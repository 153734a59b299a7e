"""The heater-zone models of inverse.fit and the choice between them and the smooth model
(model_choice.py: evidence on all the readings, exact mixture bands)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from scipy.special import logsumexp

from .design import NOMINAL_PRECISION_FACTOR, smooth_prior
from .face_grid import display_grid
from .fit_problem import with_steps_given_kept
from .hyperprior import LearnedPrior
from .model_choice import MIXED_MODELS, ModelMixture, embedded_mixture, log_evidence_on_all, model_weights
from .result import Posterior, valid_zones
from .strength import choose_strength, default_alphas
from .truncation import nearest_distance
from .zone_columns import ZoneDesign, designs_by_edge, edge_settings
from .zones import MAX_CHOSEN_ZONES, ZONE_LEVEL_FACTORS, ZONE_PRIOR_FACTOR, ZoneModel, level_sets


def build_zone_models(spec, design, rd, problem, warnings, post, shift=None):
    """The zone models (zones.ZoneModel on all sensors), one per edge width
    (zone_edges.edge_widths; the declared zones alone with the fixed prior), when asked for (model
    "zones" or "auto") and zones with ranges are declared on the unknown face, else [].
    The zone levels' prior sd: with the learned prior (post.averaged a LearnedPrior) on the
    scale of the smooth model's amplitude (its median; the factor is chosen later,
    ZoneModel.choose_level_scale), else ZONE_PRIOR_FACTOR x the face's level scale.
    shift: the calibrated parameters' step columns and prior (calibration.learned_calibration),
    integrated out with the zone levels; calibration with the fixed prior has no zone model."""
    opts = spec.options
    if opts.model == "smooth":
        return []
    cyl = spec.cylinder
    zones = [z for z in valid_zones(spec.zones, design.face_name, cyl, []) if hasattr(z, "indicator")]
    # "auto" (the default) quietly stays smooth where the zone model cannot be asked
    if not zones:
        if opts.model == "zones":
            warnings.append(f"model = 'zones' needs zones declared on the {design.face_name} face "
                            "(with r/theta or theta/z ranges); the smooth model is used")
        return []
    if opts.calibrate and shift is None:
        return []
    learned = opts.learned_prior
    if isinstance(post.averaged, LearnedPrior):
        scale, factor = float(post.averaged.amplitude_quantiles(0.5)), ZONE_LEVEL_FACTORS[1]
    else:
        pts = display_grid(design.face_name, cyl, 11, 24)
        B, known = design.face(pts.u, pts.v)
        scale, factor = float(np.sqrt(np.mean((known + B @ problem.c0) ** 2))), ZONE_PRIOR_FACTOR
    if not scale > 0:
        warnings.append("the zone model needs a scale for its levels, and the face's is zero; "
                        "the smooth model is used")
        return []
    if isinstance(post.averaged, LearnedPrior) and len(zones) > MAX_CHOSEN_ZONES:
        warnings.append(f"{len(zones)} zones declared on the {design.face_name} face: beyond {MAX_CHOSEN_ZONES}, "
                        "heatsight does not test which zones really differ from the face around them and treats "
                        "each as a heater of its own, so zones declared only for reporting make the zone-by-zone "
                        "answer look less likely than it is; declare only zones that match separately "
                        "powered heaters")
    # The remainder keeps the smooth prior's nearly flat nominal direction: the face between
    # and around the zones has a level of its own (a background), which zone levels alone
    # cannot carry without biasing every zone.
    remainder, _ = smooth_prior(design.basis, cyl.radius, opts.smoothing)
    widths = edge_settings(design, zones) if learned else (None,)
    models = []
    for width, zd in zip(widths, designs_by_edge(design, zones, nearest_distance(design, rd.r, rd.z), widths)):
        models.append(ZoneModel(design, rd, problem, zd.zones, scale, remainder, zd.big, zd.A,
                                edge_width=width, shift=shift, level_factor=factor))
    return models


def zone_fit(opts, design, zone_model, zscreen, post, u, problem, steps=None):
    """One zone model's posterior (ZoneFit) with its evidence on all the readings (learned
    prior) or against the smooth model on its kept sensors (fixed prior)."""
    if hasattr(post.averaged, "log_marginal"):
        zf = zone_model.learned_fit(zscreen.kept, design.basis, u > 0, NOMINAL_PRECISION_FACTOR,
                                    like=post.averaged)
        X = np.hstack([problem.G, zone_model.level_columns])
        t0, var = with_steps_given_kept(steps, problem, zone_model.smooth, zscreen.kept, X @ zf.c)
        logz = log_evidence_on_all(zf.log_evidence["zones"], zscreen.kept, X, t0, problem.d, var, zf.c, zf.C)
        return replace(zf, log_evidence={"zones": logz + zone_model.level_choice_correction})
    marginal = zone_model.marginal.subset(np.flatnonzero(zscreen.kept))
    alphas = default_alphas(marginal) if opts.strength_method == "evidence" else np.array([zscreen.choice.alpha])
    return zone_model.fit(zscreen.kept, alphas)


def choose_model(opts, design, zone_models, zscreens, smooth, steps, post, u, problem, warnings, spare=()):
    """(model columns, posterior, screening, summary keys, (leading zone model, zone columns
    at the sensors) or None): the smooth model, the zone model when asked (model = "zones"),
    or with "auto" both averaged with their posterior probabilities
    (model_choice.embedded_mixture; a model below MIXED_MODELS is dropped).  The zone model
    is itself an average over its edge widths (zone_edges.edge_widths, equal prior mass each;
    with the learned prior): its evidence is the widths' mean, each width weighs by its own.
    With the learned prior each model keeps its own screening and the evidences cover all
    the readings (model_choice.py); with the fixed prior both are compared on the zone
    model's kept sensors over one log-alpha grid.  Calibrated parameters (learned prior) are
    shared by both models: their step from the linearization point is the last block of
    every component, and the answer's Calibration carries the mixture's joint posterior."""
    if not zone_models:
        return design, post, smooth, {"model": "smooth"}, None
    fits = [zone_fit(opts, design, zm, zs, post, u, problem, steps) for zm, zs in zip(zone_models, zscreens)]
    zscreens = [at_answer_prior(zs, zm, opts) for zs, zm in zip(zscreens, zone_models)]
    le = np.array([f.log_evidence["zones"] for f in fits])
    cal = post.calibration
    p = 0 if cal is None else cal.values.size
    # the smooth model's columns at the sensors, mean and covariance, with the parameters' step
    Xs, cs, Cs = (problem.G, post.c, post.C) if cal is None else \
        (np.hstack([problem.G, cal.step_columns]), np.concatenate([post.c, cal.mean_step]), cal.covariance)
    if hasattr(post.averaged, "log_marginal"):
        t0, var = with_steps_given_kept(steps, problem, problem, smooth.kept, Xs @ cs)
        logz = {"smooth": log_evidence_on_all(post.averaged.log_marginal, smooth.kept, Xs, t0,
                                              problem.d, var, cs, Cs),
                "zones": float(logsumexp(le) - math.log(le.size))}
    else:
        logz = dict(fits[0].log_evidence)
    weights = model_weights(logz)
    info = {"model_evidence": logz, "model_weights": weights}
    w_edge = np.exp(le - le.max())
    w_edge /= w_edge.sum()
    if any(f.edge for f in fits):
        warnings.append("the zone model's evidence-weighted strength reaches the edge of its grid")
    p_zones = float(weights["zones"])
    if opts.model == "auto" and p_zones <= MIXED_MODELS:
        return design, post, smooth, {"model": "smooth", **info}, None
    if len(fits) > 1:      # the zone model's edge widths [m] (the widest zone's) and their posterior weights
        info["zone_edge_widths_m"] = [float(zm.edge_width) for zm in zone_models]
        info["zone_edge_weights"] = [float(w) for w in w_edge]
    if hasattr(post.averaged, "log_marginal"):
        # the zone levels' prior sd [face unit] the evidence chose (per edge width;
        # zones.ZoneModel.choose_level_scale)
        info["zone_level_prior_sd"] = [zm.level_scale for zm in zone_models]
    # the widths that carry weight; their zone columns side by side after the smooth ones
    use = [i for i in range(len(fits)) if w_edge[i] > MIXED_MODELS]
    lead = max(use, key=lambda i: w_edge[i])
    if hasattr(post.averaged, "log_marginal") and len(level_sets(len(zone_models[lead].columns.zones))) > 1:
        # each zone's probability of a level of its own under the zone model, departing from
        # the background (ZoneModel.choose_level_scale), over the edge widths that carry weight
        inclusion = sum(w_edge[i] * zone_models[i].inclusion for i in use) / w_edge[use].sum()
        info["zone_level_probability"] = {z.name: float(pz) for z, pz in zip(zone_models[lead].columns.zones,
                                                                             inclusion)}
    K, J = design.size, len(zone_models[0].columns.zones)
    all_zones = [z for i in use for z in zone_models[i].columns.zones]
    columns = ZoneDesign(design, all_zones, None, zone_models[lead].columns.big,
                         np.vstack([zone_models[i].columns.A for i in use])) if len(use) > 1 \
        else zone_models[lead].columns
    Gz = np.hstack([zone_models[i].Gz for i in use])
    p_smooth = 0.0 if opts.model == "zones" or p_zones >= 1.0 - MIXED_MODELS else 1.0 - p_zones
    share = w_edge[use] / w_edge[use].sum()
    n = K + J * len(use)
    step = n + np.arange(p)
    parts = [(np.concatenate([np.arange(K), K + j * J + np.arange(J), step]), fits[i].c, fits[i].C,
              (1.0 - p_smooth) * share[j]) for j, i in enumerate(use)]
    if p_smooth > 0:
        parts.append((np.concatenate([np.arange(K), step]), cs, Cs, p_smooth))
        info["model_averaged"] = True
    c, C = embedded_mixture(parts, n + p)
    zone_model = (zone_models[lead], Gz)
    # bands: exact mixture quantiles, over the learned prior's own components where it has
    # them; with calibrated parameters the joint Gaussian's (Posterior.figures)
    learned = isinstance(post.averaged, LearnedPrior) and p_smooth > 0
    mixture = None if len(parts) == 1 or p else \
        ModelMixture(parts[:len(use)], n, post.averaged, p_smooth) if learned else ModelMixture(parts, n)
    calibrated = None if cal is None else cal.with_columns(
        columns, c[:n], c[n:], C, ModelMixture(parts, n + p) if len(parts) > 1 else None)
    c, C = c[:n], C[:n, :n]
    if p_smooth > 0.5:
        if hasattr(post.averaged, "description"):
            info["prior"] = post.averaged.description()
        return (columns, Posterior(c, C, post.alpha, mixture, calibrated), smooth, {"model": "smooth", **info},
                zone_model)
    zf = fits[lead]
    warnings.extend(zones_disputed(zscreens[lead], spare))
    if design.quantity == "temperature" and any(z.edge <= 0 for z in columns.zones):
        warnings.append("sharp zone edges on a temperature face: the heat flux is singular at a "
                        "temperature step, so the total power is not defined; give the zones an edge width")
    if zf.prior is not None:
        warnings[:] = [w for w in warnings if w not in post.averaged.warnings] + list(zf.prior.warnings)
        info["prior"] = zf.prior.description()
    return (columns, Posterior(c, C, zf.alpha, mixture, calibrated), zscreens[lead], {"model": "zones", **info},
            zone_model)


def zones_disputed(zscreen, spare) -> list[str]:
    """A warning when the zone model leads the answer but fails on sensors that the smooth
    model finds unremarkable (`spare`, inverse.fitting.unremarkable: flagged 'suspect' by the
    zone model's screening, which never sets those aside).  Declared zones that are not heater
    footprints (zones for reporting: a wedge over a lamp's spot, quadrants over a hot spot) do
    this: the readings beside a zone disprove a plateau over it (the second scenario set,
    tests/scenario_holdout.py: lamp_spot, vessel_hotspot); so does a fault that the smooth
    model's rough profiles absorb."""
    zflag = np.asarray(zscreen.table["flag"])
    names = list(zscreen.table["sensor"])
    only = [str(names[i]) for i in sorted(int(x) for x in spare) if zflag[i] == "suspect"]
    if not only:
        return []
    listed = ", ".join(only)
    they, them = ("they stay", "they read") if len(only) > 1 else ("it stays", "it reads")
    return [f"the zone model cannot explain {listed}, which the smooth model explains, so {they} in: either the "
            f"declared zones are not separately heated areas (zones only for reporting) and their levels may be "
            f"wrong, or {them} wrong; fit with model = 'smooth' to compare, or check {listed} in place"]


def at_answer_prior(zscreen, zone_model, opts):
    """The zone model's screening with its problem and strength at the levels' prior the
    answer uses, where ZoneModel.learned_fit chose it again at the learned remainder's point:
    the same sensors; the table's leave-one-out columns stay the screening's."""
    if not zone_model.refined:
        return zscreen
    problem = zone_model.marginal.subset(np.flatnonzero(zscreen.kept))
    return replace(zscreen, problem=problem, choice=choose_strength(problem, opts.strength_request))
