"""The typed problem at the inverse boundary: FitOptions (defaults, choices, overrides),
Problem.from_case (the one adapter for case-like objects), the 95 % factor."""

import math
import types

import numpy as np
import pytest
from scipy.stats import norm

import heatsight.forward as fw
from heatsight import inverse
from heatsight.inverse import result
from heatsight.inverse.bands import Z95, z_factor
from heatsight.inverse.problem import FitOptions, Problem
from fem_cylinder import solve_field


def test_95_factor_in_one_place():
    assert Z95 == pytest.approx(norm.ppf(0.975), rel=1e-15)          # scipy.stats.norm (reference library)
    assert z_factor(0.9) == pytest.approx(norm.ppf(0.95), rel=1e-15)  # scipy.stats.norm (reference library)
    assert inverse.Z95 is not None and result.Z95 == Z95


@pytest.mark.parametrize("kwargs, fragment", [
    (dict(smoothing="smooth"), "fit option smoothing: got 'smooth'; expected one of: size, gradient, curvature"),
    (dict(strength_method="fixed"), "fit option strength: a fixed strength must be a positive number"),
    (dict(strength_method="fixed", strength=-1.0), "a fixed strength must be a positive number"),
    (dict(strength=2.0), "only taken with strength_method 'fixed'"),
    (dict(model="zone"), "fit option model: got 'zone'"),
    (dict(loss="cauchy"), "fit option loss"),
    (dict(terms=0), "fit option terms: expected a whole number >= 1"),
    (dict(calibrate=(("top", "k"),)), "fit option calibrate"),
    (dict(calibrate=(("top", "h"), ("top", "h"))), "listed twice"),
    (dict(grid=(1, 5)), "fit option grid"),
])
def test_options_refuse_bad_values(kwargs, fragment):
    with pytest.raises(inverse.InverseError, match=None) as err:
        FitOptions(**kwargs)
    assert fragment in str(err.value)


def test_overrides_and_adapter():
    cyl = fw.Cylinder(0.1, 0.04, 20.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(40.0, 300.0), "side": fw.Insulated()}
    bare = types.SimpleNamespace(cylinder=cyl, faces=faces)
    p = Problem.from_case(bare)
    assert p.options == FitOptions() and p.zones == () and p.unknown_face == "bottom"
    assert p.options.basis_size == (6, 10)
    # an old-style options object with some of the fields
    legacy = types.SimpleNamespace(cylinder=cyl, faces=faces, zones=None,
                                   fit=types.SimpleNamespace(smoothing="size", keep_all_sensors=True, terms=None))
    p = Problem.from_case(legacy, strength="auto:gcv", calibrate={("top", "h"): (40.0, 10.0)})
    o = p.options
    assert (o.smoothing, o.keep_all_sensors, o.strength_method, o.strength_request) == ("size", True, "gcv", "gcv")
    assert o.calibration == {("top", "h"): (40.0, 10.0)}
    assert Problem.from_case(p, strength=1e-5).options.strength_request == 1e-5
    assert Problem.from_case(p, strength="auto").options.strength_method == "evidence"
    with pytest.raises(TypeError, match="unknown fit option 'smothing'"):
        Problem.from_case(bare, smothing="size")
    two = types.SimpleNamespace(cylinder=cyl, faces=dict(faces, side=fw.UnknownTemperature()))
    with pytest.raises(inverse.InverseError, match="exactly one unknown face"):
        Problem.from_case(two).unknown_face


def test_problem_and_case_like_give_the_same_fit():
    a, length, k = 0.1, 0.04, 20.0
    fem = solve_field(a, length, k, {(0, "cos"): {"bottom": ("N", lambda s: 5e3 * (1 + (s / a) ** 2)),
                                                   "top": ("R", 60.0, 300.0), "side": ("N", 0.0)}}, nr=16, nz=8)
    rng = np.random.default_rng(2)
    r, th, z = a * np.sqrt(rng.uniform(0, 0.9, 12)), rng.uniform(0, 2 * math.pi, 12), np.full(12, 0.01)
    rd = inverse.SensorReadings([f"s{i}" for i in range(12)], r, th, z, fem.temperature(r, th, z), 0.2, 0.0, 0.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(60.0, 300.0), "side": fw.Insulated()}
    cyl = fw.Cylinder(a, length, k)
    one = inverse.fit(types.SimpleNamespace(cylinder=cyl, faces=faces), rd, smoothing="size", grid=(5, 8))
    two = inverse.fit(Problem(cyl, faces, (), FitOptions(smoothing="size", grid=(5, 8))), rd)
    # equal to round-off (not bit for bit: the second fit refines the root tables the first
    # one cached, which moves the last bits when this file runs first in its process)
    assert one.summary["total_power_W"] == pytest.approx(two.summary["total_power_W"], rel=1e-13)
    assert one.summary["smoothing"] == "size" and one.summary["model"] == "smooth"
    # the heat in through the face matches the prescribed flux's integral within 2 sd
    exact = 5e3 * math.pi * a * a * 1.5        # integral of q over the disc (elementary)
    assert abs(one.summary["total_power_W"] - exact) <= 2 * one.summary["total_power_sd_W"]


def test_zone_model_with_calibration_needs_the_learned_prior():
    cyl = fw.Cylinder(0.1, 0.04, 20.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(40.0, 300.0), "side": fw.Insulated()}
    rd = inverse.SensorReadings(["a", "b", "c"], [0.0, 0.05, 0.08], [0.0, 1.0, 2.0], [0.01] * 3,
                                [320.0, 321.0, 319.0], 0.2, 0.0, 0.0)
    with pytest.raises(inverse.InverseError, match="zone model with calibrated face parameters needs the learned"):
        inverse.fit(types.SimpleNamespace(cylinder=cyl, faces=faces), rd, model="zones",
                    calibrate={("top", "h"): None}, prior="fixed")


def test_zones_without_a_range_cover_the_whole_span():
    """A Zone given through the API without r (end face) or z (wall) covers the face's whole
    span, as a case file's zone does; a semi-infinite part's wall zone must give z."""
    cyl = fw.Cylinder(0.1, 0.05, 20.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(50.0, 300.0), "side": fw.Insulated()}
    half = inverse.Zone("half", None, (0.0, math.pi))
    band = inverse.Zone("band", "side", (0.0, 1.0))
    p = Problem.from_case(types.SimpleNamespace(cylinder=cyl, faces=faces, zones=[half, band]))
    assert p.zones[0].r == (0.0, 0.1) and p.zones[0].z is None
    assert p.zones[1].z == (0.0, 0.05) and p.zones[1].r is None
    # a ready-made Problem too
    q = Problem.from_case(Problem(cyl, faces, (half, band)))
    assert q.zones == p.zones
    bar = fw.Cylinder(0.1, math.inf, 20.0)
    with pytest.raises(inverse.InverseError, match="semi-infinite part needs a z range"):
        Problem.from_case(types.SimpleNamespace(cylinder=bar, faces={"bottom": fw.UnknownFlux(),
                                                                     "side": fw.Convection(10.0, 300.0)},
                                                zones=[band]))
