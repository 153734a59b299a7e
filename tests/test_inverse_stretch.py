"""Steps (ramps on a temperature face) over an unseen edge stretch of the unknown face
(inverse/stretch.py), marginalized with the left-out modes (inverse/truncation.py).

The scenario-level check (a heater that ends where no sensor sees, its zone means within
2 sd) is tests/test_scenarios.py's chuck_calibrated; here the pieces.
"""

import math
import types

import numpy as np
import pytest

import heatsight.forward as fw
from heatsight.inverse.design import Design
from heatsight.inverse.functionals import functional_matrix
from heatsight.inverse.readings import SensorReadings
from heatsight.inverse.face_grid import display_grid
from heatsight.inverse.stretch import STEPS, step_level, stretch_steps, stretch_zones
from heatsight.inverse.truncation import functional_tails

A, L, K = 0.15, 0.025, 170.0


def chuck_design():
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    return Design(fw.Cylinder(A, L, K), faces, 1e-6, 6, 8)


def chuck_sensors():
    r = np.array([0.05] * 4 + [0.11] * 8)
    th = np.radians(np.r_[np.arange(4) * 90.0, 22.5 + np.arange(8) * 45.0])
    return SensorReadings([f"T{i}" for i in range(r.size)], r, th, np.full(r.size, 0.010),
                          np.full(r.size, 330.0), 0.1, 0.0, 0.0)


def test_steps_lie_inside_the_unseen_stretch():
    # the chuck: sensors out to 110 mm of 150; three steps from 120, 130, 140 mm to the rim
    cyl = fw.Cylinder(A, L, K)
    zs = stretch_zones("bottom", cyl, [0.05, 0.11], [0.01, 0.01])
    assert len(zs) == STEPS == 3
    assert [z.r for z in zs] == [pytest.approx((x, 0.15)) for x in (0.12, 0.13, 0.14)]
    assert all(z.full_turn for z in zs)
    # a wall with both ends unseen: steps from each end inwards, none over the sensors
    wall = fw.Cylinder(0.05, 0.40, K)
    zs = stretch_zones("side", wall, [0.04, 0.04], [0.10, 0.30])
    spans = sorted(z.z for z in zs)
    assert spans == [pytest.approx(s) for s in sorted([(0.0, 0.025), (0.0, 0.05), (0.0, 0.075),
                                                        (0.325, 0.40), (0.35, 0.40), (0.375, 0.40)])]
    # sensors near every edge: no stretch
    assert stretch_zones("bottom", cyl, [0.05, 0.14], [0.01, 0.01]) == []


def test_a_declared_zone_edge_inside_the_stretch_is_a_step_of_its_own():
    """Where a declared zone (a heater) ends inside the unseen stretch, the readings cannot see
    whether its heat stops there: a step begins there too, and the stretch's steps share the
    level's variance (second scenario set, quadrant_chuck: heaters end at 95 mm, sensors reach
    75 mm of 100)."""
    from heatsight.inverse.problem import Zone
    from heatsight.inverse.stretch import declared_edges

    cyl = fw.Cylinder(A, L, K)
    zones = [Zone("heater", "bottom", (0.0, math.pi / 2), r=(0.0, 0.125)),
             Zone("top zone", "top", (0.0, 2 * math.pi), r=(0.0, 0.118)),      # another face: not counted
             Zone("rim", "bottom", (0.0, 2 * math.pi), r=(0.13, 0.15))]        # 130 mm is an even step already
    edges = declared_edges(zones, "bottom")
    assert edges == pytest.approx([0.0, 0.125, 0.13, 0.15])
    zs = stretch_zones("bottom", cyl, [0.05, 0.11], [0.01, 0.01], edges=edges)
    assert [z.r[0] for z in zs] == pytest.approx([0.12, 0.125, 0.13, 0.14])
    d, rd = chuck_design(), chuck_sensors()
    steps = stretch_steps(d, rd, 4000.0, zones)
    assert steps.v == pytest.approx([4000.0 ** 2 / 4] * 4)
    assert steps.summary()["unseen_stretch_steps_m"] == pytest.approx([0.12, 0.125, 0.13, 0.14])
    # an edge next to an even step is a step of its own; one on it is not repeated
    zs = stretch_zones("bottom", cyl, [0.05, 0.11], [0.01, 0.01], edges=[0.1215, 0.14])
    assert [z.r[0] for z in zs] == pytest.approx([0.12, 0.1215, 0.13, 0.14])
    # a temperature face keeps its three ramps: its departure is continuous
    faces = {"bottom": fw.UnknownTemperature(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    ramps = stretch_steps(Design(cyl, faces, 1e-6, 6, 8), rd, 12.0, zones)
    assert len(ramps.zones) == STEPS
    # on a wall, the z of the zones; a stretch at each end keeps its own share
    wall = fw.Cylinder(0.05, 0.40, K)
    zs = stretch_zones("side", wall, [0.04, 0.04], [0.10, 0.30], edges=[0.06, 0.2, 0.39])
    assert sorted(z.z for z in zs if z.z[0] == 0.0) == [pytest.approx((0.0, x)) for x in (0.025, 0.05, 0.06, 0.075)]
    assert len(zs) == 4 + 4


def test_steps_on_a_flux_face_need_a_level():
    d, rd = chuck_design(), chuck_sensors()
    assert stretch_steps(d, rd, 0.0) is None
    steps = stretch_steps(d, rd, 4000.0)
    assert steps is not None and steps.v == pytest.approx([4000.0 ** 2 / STEPS] * STEPS)
    assert all(z.edge == 0.0 for z in steps.zones)


def test_ramps_on_a_temperature_face():
    # an unknown temperature departs continuously: each region is a linear ramp from its point
    # (0) out to the rim (1), its prior variance level^2 / STEPS as for the steps
    faces = {"bottom": fw.UnknownTemperature(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    d, rd = Design(fw.Cylinder(A, L, K), faces, 1e-6, 6, 8), chuck_sensors()
    steps = stretch_steps(d, rd, 12.0)
    assert steps is not None and steps.v == pytest.approx([12.0 ** 2 / STEPS] * STEPS)
    assert steps.summary()["unseen_stretch_steps_m"] == pytest.approx([0.12, 0.13, 0.14])
    for zone, x in zip(steps.zones, (0.12, 0.13, 0.14)):
        r = np.array([x - 0.002, x, 0.5 * (x + A), A])
        H = steps.face(r, np.zeros(r.size))[0][:, steps.zones.index(zone)]
        np.testing.assert_allclose(H, [0.0, 0.0, 0.5, 1.0], atol=1e-12)
    # none beside a face held at a known temperature (the corner's value is known there)
    held = dict(faces, side=fw.Temperature(350.0))
    assert stretch_steps(Design(fw.Cylinder(A, L, K), held, 1e-6, 6, 8), rd, 12.0) is None


def test_step_level_rule():
    """A flux face's steps reach |face mean| at the edge: the sign of the face does not
    matter.  A temperature face's ramps reach the spread (max - min) of its map: for one
    cos(theta) mode of amplitude f(r) over a uniform known part, twice the largest |f| on the
    grid's radii (the grid's angles include 0 and 180 deg), whatever the mode's sign."""
    d = chuck_design()
    c = np.zeros(d.basis.size)
    c[0] = 1.0
    names, F, k = functional_matrix(d)
    assert k[0] == 0.0 and step_level(d, c) == pytest.approx(abs(F[0] @ c)) == pytest.approx(step_level(d, -c))
    faces = {"bottom": fw.UnknownTemperature(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    dt = Design(fw.Cylinder(A, L, K), faces, 1e-6, 6, 8)
    ct = np.zeros(dt.basis.size)
    ct[np.flatnonzero((dt.basis.m == 1) & (np.arange(dt.basis.size) < dt.basis.n_eigen))[0]] = 2.0
    radii = display_grid("bottom", dt.cylinder, 21, 24).r
    B, known = dt.face(np.unique(radii), np.zeros(np.unique(radii).size))
    assert np.ptp(known) == 0.0          # a uniform known part (the top's ambient) does not count
    assert step_level(dt, ct) == pytest.approx(2 * np.abs(B @ ct).max(), rel=1e-12)
    assert step_level(dt, -ct) == pytest.approx(step_level(dt, ct), rel=1e-12)


def test_ramps_match_the_series_with_that_face_temperature():
    """Each ramp's field at points near the rim and its heat into the part (projected on the
    enlarged basis, as the zone model's columns are) against heatsight's forward series
    solved with that ramp as the bottom's known temperature (the exact Dirichlet series, no
    projection): 1e-3 of the ramp's level, 1e-3 of the power."""
    faces = {"bottom": fw.UnknownTemperature(), "top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    cyl = fw.Cylinder(A, L, K)
    steps = stretch_steps(Design(cyl, faces, 1e-6, 6, 8), chuck_sensors(), 12.0)
    r = np.array([0.10, 0.12, 0.13, 0.14, 0.149])
    th, z = np.zeros(r.size), np.full(r.size, 0.01)
    G = steps.fields(r, th, z)
    base = fw.CylinderModel(cyl, dict(faces, bottom=fw.Temperature(300.0)), tolerance=1e-8)
    for j, zone in enumerate(steps.zones):
        def ramp(rr, tt, zone=zone):
            return 300.0 + zone.along(np.asarray(rr, float), A, 0.0) * np.ones_like(np.asarray(tt, float))
        model = fw.CylinderModel(cyl, dict(faces, bottom=fw.Temperature(ramp)), tolerance=1e-8)
        T = model.evaluate(r, th, z).temperature - base.evaluate(r, th, z).temperature
        np.testing.assert_allclose(G[:, j], T, atol=1e-3)
        power = model.face_power("bottom") - base.face_power("bottom")
        assert steps.powers()[0][j] == pytest.approx(power, rel=1e-3)


def test_steps_power_is_their_area():
    # a step's heat into the part is its level times its area pi (a^2 - x^2) (elementary integral)
    steps = stretch_steps(chuck_design(), chuck_sensors(), 4000.0)
    areas = [math.pi * (A ** 2 - z.r[0] ** 2) for z in steps.zones]
    np.testing.assert_allclose(steps.powers()[0], areas, rtol=2e-3)


def test_marginalized_steps_give_the_gaussian_conditional():
    """functional_tails with the steps marginalized into S = N + G V G^T equals the posterior
    of the steps computed in information form, C = (V^-1 + G^T N^-1 G)^-1, mean C G^T N^-1 r
    (the two are equal by the Woodbury identity; textbook Gaussian conditioning)."""
    d, rd = chuck_design(), chuck_sensors()
    steps = stretch_steps(d, rd, 4000.0)
    G = steps.fields(rd.r, rd.theta, rd.z)
    N = np.diag(np.full(rd.n, 0.1 ** 2))
    S = N + steps.attach(rd).covariance
    r = np.random.default_rng(3).normal(0.0, 0.5, rd.n)
    names, F, _ = functional_matrix(steps, [])
    (h_mean, var_mean), (h_power, var_power) = functional_tails(None, None, rd, None, S, steps, F)
    C = np.linalg.inv(np.diag(1.0 / steps.v) + G.T @ np.linalg.solve(N, G))
    mean = C @ G.T @ np.linalg.solve(N, r)
    for f, h, var in ((F[0], h_mean, var_mean), (F[1], h_power, var_power)):
        assert h @ r == pytest.approx(f @ mean, rel=1e-8)
        assert var == pytest.approx(f @ C @ f, rel=1e-6)
    assert names[:2] == ["mean", "total_power"]


def test_no_steps_at_an_edge_the_series_holds():
    # a tube's bore flux beside an end held at a temperature: every column vanishes along that
    # edge (pinned_edges; the fit says so), so no step is put there; the other end's stretch
    # keeps its steps
    cyl = fw.Cylinder(0.08, 0.30, 45.0, inner_radius=0.05)
    faces = {"side": fw.Flux(2000.0), "bore": fw.UnknownFlux(), "bottom": fw.Temperature(450.0),
             "top": fw.Insulated()}
    d = Design(cyl, faces, 1e-6, 4, 8)
    z = np.linspace(0.08, 0.20, 6)
    rd = SensorReadings([f"T{i}" for i in range(z.size)], np.full(z.size, 0.06), np.zeros(z.size), z,
                        np.full(z.size, 460.0), 0.05, 0.0, 0.0)
    steps = stretch_steps(d, rd, 5000.0)
    assert steps is not None and [zn.z[1] for zn in steps.zones] == [pytest.approx(0.30)] * STEPS
    assert stretch_zones("bore", cyl, rd.r, rd.z) != stretch_zones("bore", cyl, rd.r, rd.z, [0.0])


def test_fit_marks_the_steps_as_shared_noise():
    """A chuck whose heater ends at 140 mm, sensors out to 110 mm, readings from heatsight's
    own series (a behaviour check of the wiring, not of accuracy): the steps are in every
    model's noise, each reading's own sd leaves them out, and the sensor table's residuals
    are in units of that own sd."""
    from heatsight import inverse

    def q(r, th):
        return 5000.0 * (np.asarray(r) < 0.14)
    cyl = fw.Cylinder(A, L, K)
    known = {"top": fw.Convection(300.0, 300.0), "side": fw.Insulated()}
    rd0 = chuck_sensors()
    t = fw.CylinderModel(cyl, {**known, "bottom": fw.Flux(q)}, tolerance=1e-6).evaluate(rd0.r, rd0.theta, rd0.z).temperature
    rd = SensorReadings(rd0.names, rd0.r, rd0.theta, rd0.z, t, 0.1, 0.0, 0.0)
    case = types.SimpleNamespace(cylinder=cyl, faces={**known, "bottom": fw.UnknownFlux()}, zones=[])
    res = inverse.fit(case, rd, grid=(12, 24))
    noise = res.problem.noise
    assert np.all(noise.sd > 3.0 * noise.own_sd)               # the steps' shared variance is large here
    assert noise.own_sd == pytest.approx(np.full(rd.n, 0.1), rel=0.2)   # sigma and the left-out modes
    assert np.max(np.abs(res.sensors["standardized"])) < 4.0
    # summary.json says where the steps begin and how large they may be
    from heatsight.data_io.fit_outputs import summary_dict

    out = summary_dict(res)
    assert out["unseen_stretch_steps_m"] == [pytest.approx(x) for x in (0.12, 0.13, 0.14)]
    assert out["unseen_stretch_level_sd"] == pytest.approx(res.summary["mean"], rel=0.1)


def test_annular_end_face_with_unseen_stretches_fits():
    """A hollow part's unknown end-face flux with no sensor near either wall: the steps over
    both unseen stretches need the annulus modes' radial factors of a subset of modes, which
    raised "truth value of an array is ambiguous" before (forward/annulus_modes.py)."""
    from threadpoolctl import threadpool_limits

    from heatsight import inverse

    cyl = fw.Cylinder(0.15, 0.03, 30.0, inner_radius=0.03)
    known = {"top": fw.Convection(300.0, 300.0), "side": fw.Insulated(), "bore": fw.Insulated()}
    r = np.array([0.06] * 4 + [0.10] * 6)
    th = np.linspace(0.0, 2.0 * np.pi, 10, endpoint=False)
    z = np.full(10, 0.01)
    # a uniform 5 kW/m^2 heater (invented); the series gives the readings
    T = fw.CylinderModel(cyl, {**known, "bottom": fw.Flux(5000.0)}, tolerance=1e-7).evaluate(r, th, z).temperature
    T = T + np.random.default_rng(0).normal(0.0, 0.05, T.size)
    rd = SensorReadings([f"T{i}" for i in range(10)], r, th, z, T, 0.05, 0.0, 0.0)
    case = types.SimpleNamespace(cylinder=cyl, faces={**known, "bottom": fw.UnknownFlux()}, zones=[])
    with threadpool_limits(1):
        res = inverse.fit(case, rd, grid=(9, 12))
    starts = res.summary["unseen_stretch_steps_m"]
    assert len(starts) == 2 * STEPS
    assert sum(x < 0.06 for x in starts) == STEPS and sum(x > 0.10 for x in starts) == STEPS
    area = math.pi * (0.15 ** 2 - 0.03 ** 2)        # annulus area (geometry)
    # within 3 sd of the heater's power: common practice, no source
    assert abs(res.summary["total_power_W"] - 5000.0 * area) <= 3.0 * res.summary["total_power_sd_W"]
