"""Heater-zone model on readings from the scikit-fem reference solver (tests/fem_cylinder.py).

Scenario: a platen heated from below by three sharp ring heaters; the middle ring is made
of four 90-degree elements, one delivering 60 %; top cooled by convection, rim insulated;
28 sensors 4-8 mm above the heated face.  The flux pattern's angular part is given to the
FE solver as a Fourier series (one solve per harmonic, Lanczos sigma factors against Gibbs
ringing); the truth below is that same series.  The fit's basis and zone columns share no
code with the solver: no inverse crime.
"""

import json
import math
import types
from dataclasses import replace

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

import heatsight.forward as fw
from heatsight import inverse
from fem_cylinder import solve_field

A, L, K, H, TAMB = 0.12, 0.03, 25.0, 40.0, 300.0      # m, m, W/(m K), W/(m^2 K), K
Q = 2.0e4                                               # W/m^2, every heater's nominal flux
RINGS = ((0.010, 0.030), (0.050, 0.070), (0.090, 0.110))
WEAK, WEAK_SPAN = 0.6, (-0.25 * math.pi, 0.25 * math.pi)
M = 48                                                  # harmonics given to the FE solver


def _ring(s, ring):
    return ((s >= ring[0]) & (s < ring[1])).astype(float)


def _angular_coefficients():
    """cos coefficients a_m of w(theta) = 1 - (1 - WEAK) 1[|theta| < pi/4], Lanczos-damped."""
    half = 0.25 * math.pi
    a = [1.0 - (1.0 - WEAK) * half / math.pi]
    for m in range(1, M + 1):
        sigma = np.sinc(m / (M + 1))
        a.append(-(1.0 - WEAK) * 2.0 * math.sin(m * half) / (math.pi * m) * sigma)
    return np.array(a)


COEF = _angular_coefficients()


def truth(r, theta):
    """The flux into the bottom face [W/m^2] given to the FE solver."""
    w = COEF @ np.cos(np.multiply.outer(np.arange(M + 1), theta))
    return Q * (_ring(r, RINGS[0]) + _ring(r, RINGS[1]) * w + _ring(r, RINGS[2]))


def zones():
    out = [inverse.Zone("inner", "bottom", (0.0, 2 * math.pi), r=RINGS[0], nominal=Q * math.pi * (0.03 ** 2 - 0.01 ** 2))]
    for j in range(4):
        start = -0.25 * math.pi + 0.5 * math.pi * j
        area = 0.25 * math.pi * (RINGS[1][1] ** 2 - RINGS[1][0] ** 2)
        out.append(inverse.Zone(f"middle{j}", "bottom", (start, start + 0.5 * math.pi), r=RINGS[1],
                                nominal=Q * area))
    out.append(inverse.Zone("outer", "bottom", (0.0, 2 * math.pi), r=RINGS[2]))
    return out


def zone_truth(zone, n=4000):
    """Mean of the truth over a zone: midpoint rule in theta (the radial factor is constant)."""
    th = zone.theta[0] + (zone.theta[1] - zone.theta[0]) * (np.arange(n) + 0.5) / n
    r_mid = np.full(n, 0.5 * (zone.r[0] + zone.r[1]))
    return float(truth(r_mid, th).mean())


@pytest.fixture(scope="module")
def readings():
    faces = {}
    for m in range(M + 1):
        top = ("R", H, TAMB if m == 0 else 0.0)

        def q(s, m=m):
            ring2 = _ring(s, RINGS[1]) * COEF[m]
            return Q * (ring2 + (_ring(s, RINGS[0]) + _ring(s, RINGS[2])) * (m == 0))
        faces[(m, "cos")] = {"bottom": ("N", q), "top": top, "side": ("N", 0.0)}
    fem = solve_field(A, L, K, faces, nr=60, nz=12)
    rng = np.random.default_rng(8)
    n, sigma = 28, 0.1
    r = A * np.sqrt(rng.uniform(0.0, 0.95, n))
    theta = rng.uniform(0.0, 2 * math.pi, n)
    z = rng.choice([0.004, 0.006, 0.008], n)
    t = fem.temperature(r, theta, z) + sigma * rng.standard_normal(n)
    power = fem.heat_in("bottom")
    return inverse.SensorReadings([f"T{i:02d}" for i in range(n)], r, theta, z, t, sigma, 0.0, 0.0), power


def case():
    return types.SimpleNamespace(cylinder=fw.Cylinder(A, L, K), zones=zones(), faces={
        "bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Insulated()})


def _report(res, power):
    g = res.grid
    tr = truth(g.r_m.to_numpy(), g.theta_rad.to_numpy())
    cover = float(np.mean((g.lower.to_numpy() <= tr) & (tr <= g.upper.to_numpy())))
    errs = {z["name"]: (z["mean"] - zone_truth(next(x for x in zones() if x.name == z["name"]))) / z["sd"]
            for z in res.summary["zones"]}
    s = res.summary
    p_err = (s["total_power_W"] - power) / s["total_power_sd_W"]
    print(f"\n{s['model']}: coverage {cover:.3f}, zone errors / sd {np.round(list(errs.values()), 2)}, "
          f"power error / sd {p_err:.2f}, weights {s.get('model_weights')}")
    return cover, errs, p_err


def test_zone_model_on_ring_heaters(readings):
    rd, power = readings
    assert power == pytest.approx(Q * math.pi * sum(b ** 2 - a ** 2 for a, b in RINGS) * (1 - 0.25 * (1 - WEAK) / 3),
                                  rel=2e-3)   # scikit-fem vs the elementary integral of the pattern
    with threadpool_limits(1):
        res = inverse.fit(case(), rd, model="zones", grid=(40, 72))
    cover, errs, p_err = _report(res, power)
    assert res.summary["model"] == "zones"
    # the sensor table's fitted values are the answer's prediction at the sensors (zone levels
    # included, and the left-out modes' part given the residual, as predict has it), and the
    # healthy readings it kept lie within a few sd of it
    t = res.sensors.set_index("sensor").loc[list(rd.names)]
    columns = res.posterior.figures(lambda d: d.sensors(rd.r, rd.theta, rd.z), res.design)[0]
    mean, sd, _, _ = res.predict(rd.r, rd.theta, rd.z)
    np.testing.assert_allclose(t["fitted"].to_numpy(), mean, rtol=0, atol=1e-9)
    # the left-out modes' share at a kept sensor is small against predict's sd
    assert np.max(np.abs(mean - columns) / sd) < 0.5
    kept = t["flag"].to_numpy() != "set aside"
    assert np.max(np.abs(t["standardized"].to_numpy()[kept])) < 4.0
    # issue 9's goals: zone means within 2 sd, pointwise 95 % coverage >= 0.85 in every
    # scenario (the [0.90, 0.99] window is for the pooled figure, tests/test_scenarios.py);
    # the sharpness check below keeps the bands from buying coverage with width
    assert all(abs(e) <= 2.0 for e in errs.values())   # truth: the flux given to scikit-fem
    assert cover >= 0.85                               # truth: the flux given to scikit-fem
    assert abs(p_err) <= 2.0                           # truth: scikit-fem heat in
    # sharp as well as calibrated: mean half band well below the truth's own spread
    g = res.grid
    spread = np.std(truth(g.r_m.to_numpy(), g.theta_rad.to_numpy()))
    # 0.2: the figure measured with the ramps' present room (0.192) and a small margin; our
    # own bound, no source, meant to catch bands that grow.  It was 0.1 while the zone model took every edge as
    # declared (sharp): measured 0.055 then, 0.118 with the average over edge widths
    # (zone_edges.edge_widths: 0 and 5 mm here, weights 0.57 / 0.43), 0.15 until the ramps' room
    # went from a quarter to half the gap between rings (zone_edges.EDGE_ROOM: 0, 8 and 10 mm
    # here; measured 0.192), which soft heater edges need.  This truth is exactly sharp;
    # within a few mm of each edge the readings, 4-8 mm deep, cannot tell a sharp edge from a
    # 10 mm one, so the bands there are wide.
    assert np.mean(g.upper - g.lower) / 2 <= 0.2 * spread
    # delivered fraction of the weak element (nominal given): 60 % within 2 sd
    weak = next(z for z in res.summary["zones"] if z["name"] == "middle0")
    assert abs(weak["delivered_fraction"] - WEAK) <= 2.0 * weak["delivered_fraction_sd"]
    assert set(res.summary["model_weights"]) == {"smooth", "zones"}
    assert sum(res.summary["model_weights"].values()) == pytest.approx(1.0)
    # summary.json carries the model choice and the delivered fractions
    from heatsight.data_io.fit_outputs import summary_dict

    out = summary_dict(res)
    assert out["model"] == "zones" and out["model_weights"] == res.summary["model_weights"]
    weak_out = next(z for z in out["zones"] if z["name"] == "middle0")
    assert weak_out["delivered_fraction"] == weak["delivered_fraction"] and weak_out["nominal_W"] > 0
    # the edge widths the zone model was averaged over (rings 20 mm apart on a 120 mm radius:
    # sharp, 1/15 of the radius, and 2/15 capped at half the gap) and their weights
    assert out["zone_edge_widths_m"] == pytest.approx([0.0, 0.008, 0.010])
    assert sum(out["zone_edge_weights"]) == pytest.approx(1.0)


def test_evidence_prefers_zones_on_ring_heaters(readings):
    rd, power = readings
    with threadpool_limits(1):
        auto = inverse.fit(case(), rd, model="auto", grid=(12, 24))
        smooth = inverse.fit(case(), rd, model="smooth", grid=(12, 24))
        default = inverse.fit(case(), rd, grid=(12, 24))
    print(f"\nlog evidence {auto.summary['model_evidence']}")
    assert smooth.summary["model"] == "smooth" and "model_weights" not in smooth.summary
    assert auto.summary["model"] == "zones"
    assert auto.summary["model_weights"]["zones"] >= 0.95
    assert default.summary["model"] == "zones"           # "auto" is the default


def test_zone_columns_match_fem_fields():
    # The zone column at interior points is the field of the zone's indicator flux on the
    # bottom (other faces homogeneous: top h with zero ambient, insulated rim).  Reference:
    # scikit-fem with the ring's edges on mesh nodes, one solve per harmonic for a sector
    # (cos coefficients of the 90-degree window: 1/4 and 2 sin(m pi/4) / (pi m), elementary).
    from heatsight.inverse.design import Design
    from heatsight.inverse.functionals import functional_matrix
    from heatsight.inverse.zone_columns import ZoneDesign

    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
    design = Design(fw.Cylinder(A, L, K), faces, 1e-8, 6, 10)
    ring = inverse.Zone("ring", "bottom", (0.0, 2 * math.pi), r=RINGS[1])
    sector = inverse.Zone("sector", "bottom", WEAK_SPAN, r=RINGS[1])
    zd = ZoneDesign(design, [ring, sector], nearest=0.006)
    rng = np.random.default_rng(1)
    r, th, z = A * np.sqrt(rng.uniform(0, 0.95, 10)), rng.uniform(0, 2 * math.pi, 10), np.full(10, 0.006)
    G, _ = zd.sensors(r, th, z)
    step = lambda s: _ring(s, RINGS[1])  # noqa: E731
    n_harm = 40
    fem = solve_field(A, L, K, {(m, "cos"): {"bottom": ("N", (lambda s, m=m: step(s) * (
        0.25 if m == 0 else 2 * math.sin(0.25 * m * math.pi) / (math.pi * m)))),
        "top": ("R", H, 0.0), "side": ("N", 0.0)} for m in range(n_harm + 1)}, nr=120, nz=12)
    fem_ring = solve_field(A, L, K, {(0, "cos"): {"bottom": ("N", step), "top": ("R", H, 0.0),
                                                  "side": ("N", 0.0)}}, nr=120, nz=12)
    ring_ref, sector_ref = fem_ring.temperature(r, th, z), fem.temperature(r, th, z)
    print("\nring rel err", np.max(np.abs(G[:, -2] / ring_ref - 1)), "sector abs err / max",
          np.max(np.abs(G[:, -1] - sector_ref)) / np.max(np.abs(sector_ref)))
    np.testing.assert_allclose(G[:, -2], ring_ref, rtol=1e-4)                                # scikit-fem
    assert np.max(np.abs(G[:, -1] - sector_ref)) <= 1e-4 * np.max(np.abs(sector_ref))      # scikit-fem, 40 harmonics
    # heat in of each column: the zone's area (elementary), the face mean its area fraction
    names, F, k = functional_matrix(zd, [ring, sector])
    area = math.pi * (RINGS[1][1] ** 2 - RINGS[1][0] ** 2)
    assert F[1, -2] == pytest.approx(area, rel=1e-10) and F[1, -1] == pytest.approx(area / 4, rel=1e-10)
    assert F[names.index("sector"), -1] == pytest.approx(1.0, rel=1e-12)


def test_zone_columns_with_edges_match_fem_fields():
    # Edges of width w: a linear ramp centred on each edge.  The angular window with ramps
    # of width d = w / r_mid is the sharp window convolved with a box of width d, so its cos
    # coefficients are those of the sharp window times sin(m d / 2) / (m d / 2) (convolution
    # theorem); reference fields from scikit-fem with the ramps' ends on mesh nodes.
    from heatsight.inverse.design import Design
    from heatsight.inverse.zone_columns import ZoneDesign

    w = 0.004
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
    design = Design(fw.Cylinder(A, L, K), faces, 1e-8, 6, 10)
    sector = inverse.Zone("sector", "bottom", WEAK_SPAN, r=RINGS[1], edge=w)
    zd = ZoneDesign(design, [sector], nearest=0.006)
    rng = np.random.default_rng(3)
    r, th, z = A * np.sqrt(rng.uniform(0, 0.95, 10)), rng.uniform(0, 2 * math.pi, 10), np.full(10, 0.006)
    G, _ = zd.sensors(r, th, z)

    def radial(s):
        return np.clip((s - RINGS[1][0]) / w + 0.5, 0, 1) * np.clip((RINGS[1][1] - s) / w + 0.5, 0, 1)

    d = w / (0.5 * sum(RINGS[1]))
    coef = [0.25] + [2 * math.sin(0.25 * m * math.pi) / (math.pi * m) * math.sin(0.5 * m * d) / (0.5 * m * d)
                     for m in range(1, 41)]
    fem = solve_field(A, L, K, {(m, "cos"): {"bottom": ("N", (lambda s, m=m: radial(s) * coef[m])),
                                             "top": ("R", H, 0.0), "side": ("N", 0.0)} for m in range(41)},
                      nr=120, nz=12)
    ref = fem.temperature(r, th, z)
    print("\nedged sector abs err / max", np.max(np.abs(G[:, -1] - ref)) / np.max(np.abs(ref)))
    assert np.max(np.abs(G[:, -1] - ref)) <= 1e-4 * np.max(np.abs(ref))      # scikit-fem, 40 harmonics


def test_evidence_keeps_the_smooth_model_on_a_smooth_truth():
    # The bundled demo: readings from scikit-fem (demo_data/generate_demo.py) of a platen
    # whose outer heater weakens smoothly around 150 deg; its five zones are regions, not
    # heaters with sharp edges, so the evidence should prefer the smooth model. With the zone
    # levels' prior on the smooth model's own amplitude scale (zones.ZONE_LEVEL_FACTORS) the
    # zone model keeps 0.37 of the weight (it took under 0.05 with the old prior of 10x the
    # face's level, whose Occam penalty alone decided); the zone means stay within 2 sd.
    from importlib.resources import files

    import heatsight

    case = files("heatsight.demo_data") / "platen.toml"
    with threadpool_limits(1):
        res = heatsight.fit(str(case), model="auto", grid=(8, 12))
    print(f"\ndemo: {res.raw.summary['model_weights']}")
    assert res.raw.summary["model"] == "smooth"
    assert res.raw.summary["model_weights"]["smooth"] >= 0.5
    truth = json.loads((files("heatsight.demo_data") / "truth.json").read_text())["zone_mean_W_m2"]
    for z in res.raw.summary["zones"]:          # the demo's finite-element truth
        assert abs(z["mean"] - truth[z["name"]]) <= 2.0 * z["sd"], z


def test_learned_zone_posterior_equals_the_componentwise_joint_solve(readings, monkeypatch):
    """The zone model's learned posterior (c, z) from the remainder's mixture and the zone
    levels' conditional (zones.ZoneModel.learned_fit) against the direct route: the joint
    posterior of (c, z) solved for every (alpha, l, s, rho, s0) component, then moment-matched."""
    from heatsight.inverse import zones as zm
    seen = {}
    original = zm.ZoneModel.learned_fit

    def spy(self, kept, *args, **kwargs):
        out = original(self, kept, *args, **kwargs)
        if "fit" not in seen:         # the first edge width's (sharp edges)
            seen["model"], seen["kept"], seen["fit"] = self, kept, out
        return out

    monkeypatch.setattr(zm.ZoneModel, "learned_fit", spy)
    with threadpool_limits(1):          # here and in the direct route: two test workers share two cores
        inverse.fit(case(), readings[0], model="zones", grid=(6, 12))
        _componentwise_check(seen["model"], seen["kept"], seen["fit"])


def _componentwise_check(model, kept, fit):
    """The joint posterior of (c, z) by dense inverses (numpy.linalg.inv), one per component,
    moment-matched, against the zone model's learned fit."""
    idx = np.flatnonzero(kept)
    smooth = model.smooth.subset(idx)
    X = np.hstack([smooth.G, model.Gz[idx]])
    W = smooth.noise.whiten(X)
    H, b0 = W.T @ W, W.T @ smooth.noise.whiten(smooth.d - smooth.t0)
    x0 = np.concatenate([np.zeros(model.P.size), model.mu])
    eye = np.eye(H.shape[0])
    means, ws, cov_sum = [], [], np.zeros_like(H)
    for P, alphas, w in fit.prior.components():        # one batched inverse per (l, s, rho, s0)
        prec = np.hstack([np.multiply.outer(alphas, P), np.broadcast_to(1.0 / model.s ** 2, (alphas.size, model.s.size))])
        C = np.linalg.inv(H + prec[:, :, None] * eye)
        means.append(np.einsum("kij,kj->ki", C, b0 + prec * x0))
        ws.append(w)
        cov_sum += np.einsum("k,kij->ij", w, C)
    ws = np.concatenate(ws)
    M = np.vstack(means)
    mean = ws @ M / ws.sum()
    cov = cov_sum / ws.sum() + (M - mean).T @ ((M - mean) * (ws / ws.sum())[:, None])
    scale = np.sqrt(np.diag(cov))
    np.testing.assert_allclose(fit.c, mean, atol=1e-6 * float(np.max(np.abs(mean))))
    np.testing.assert_allclose(fit.C / np.outer(scale, scale), cov / np.outer(scale, scale), atol=1e-6)


def test_edge_widths_fit_between_neighbouring_edges():
    # three rings 10 mm apart (tests/scenario_cases.py three_rings): no ramp wider than
    # EDGE_ROOM (half) of that gap; declared edges are kept as they are
    from heatsight.inverse.zone_edges import EDGE_FRACTIONS, EDGE_ROOM, OWN_ROOM, edge_rooms, edge_widths
    rings = [(0.0, 0.045), (0.055, 0.095), (0.105, 0.145)]
    zs = [inverse.Zone(f"ring{i}", "bottom", (0.0, 2 * math.pi), r=r) for i, r in enumerate(rings)]
    rooms = edge_rooms(zs, False, 0.15, (0.0, 0.15))
    assert rooms == pytest.approx([EDGE_ROOM * 0.010] * 3)
    widths = edge_widths(zs, 0.15, rooms)
    assert widths == ((0.0,) * 3, tuple(pytest.approx(EDGE_ROOM * 0.010) for _ in range(3)))  # 10 and 20 mm capped
    wide = [inverse.Zone("half", "bottom", (0.0, math.pi), r=(0.03, 0.13))]
    assert edge_widths(wide, 0.15, edge_rooms(wide, False, 0.15, (0.0, 0.15))) == \
        tuple((pytest.approx(f * 0.15),) for f in EDGE_FRACTIONS)
    # one width reached two ways counts once: the platen's heaters (rings 20 mm apart on a
    # 150 mm radius) reach 10 mm as 1/15 of the radius and as half the gap, which differ in
    # the last bit (0.01 against 0.010000000000000002); counted twice, the 10 mm ramp had two
    # thirds of the prior mass
    heaters = [inverse.Zone("inner", "bottom", (0.0, 2 * math.pi), r=(0.0, 0.06)),
               inverse.Zone("outer", "bottom", (0.0, 2 * math.pi), r=(0.08, 0.14))]
    assert EDGE_ROOM == 0.5 and EDGE_FRACTIONS[1] == 1.0 / 15.0
    assert edge_widths(heaters, 0.15, edge_rooms(heaters, False, 0.15, (0.0, 0.15))) == \
        ((0.0, 0.0), (pytest.approx(0.010), pytest.approx(0.010)))
    declared = [inverse.Zone("ring", "bottom", (0.0, 2 * math.pi), r=(0.02, 0.04), edge=0.003)]
    assert edge_widths(declared, 0.15) == (None,)
    # a temperature face never gets a sharp step (its heat flux would be singular)
    assert edge_widths(wide, 0.15, edge_rooms(wide, False, 0.15, (0.0, 0.15)), "temperature") == \
        tuple((pytest.approx(f * 0.15),) for f in EDGE_FRACTIONS if f > 0)
    # a wall: a 60 deg streak across four quadrants (which it overlaps: no cap from their
    # edges) is held by its own arc; the quadrants and an end band 20 mm above them by that gap
    a = 0.04
    quads = [inverse.Zone(f"q{i}", "bore", (i * math.pi / 2, (i + 1) * math.pi / 2), z=(0.0, 0.30))
             for i in range(4)]
    streak = inverse.Zone("streak", "bore", (math.radians(220), math.radians(280)), z=(0.05, 0.33))
    end = inverse.Zone("end", "bore", (0.0, 2 * math.pi), z=(0.32, 0.40))
    rooms = edge_rooms(quads + [streak, end], True, a, (0.0, 0.40))
    assert rooms[:4] == pytest.approx([EDGE_ROOM * 0.020] * 4)
    assert rooms[4] == pytest.approx(OWN_ROOM * math.radians(60) * a)
    assert rooms[5] == pytest.approx(EDGE_ROOM * 0.020)


def test_zones_sharing_an_edge_keep_summing_to_one():
    # zones that share an edge take the same ramp there, so their indicators add up to 1 across
    # it for every edge setting (a ring 0-20 mm inside a ring 20-150 mm; three sectors of one
    # ring); a zone with no edge on the face gets no ramp settings of its own; a semi-infinite
    # part's wall still caps two bands 5 mm apart (the face's length is infinite)
    from heatsight.inverse.zone_edges import EDGE_ROOM, edge_rooms, edge_widths, with_edge
    a = 0.15
    cases = [[inverse.Zone("in", "bottom", (0.0, 2 * math.pi), r=(0.0, 0.02)),
              inverse.Zone("out", "bottom", (0.0, 2 * math.pi), r=(0.02, a))],
             [inverse.Zone(f"s{i}", "bottom", (t0, t1), r=(0.05, 0.12))
              for i, (t0, t1) in enumerate([(0.0, 0.5), (0.5, 2.1), (2.1, 2 * math.pi)])]]
    t = np.linspace(0.0, 2 * math.pi, 721)
    # across the rings' shared edge everywhere; around the sectors' ring at its mid radius
    for zs, r in zip(cases, (np.linspace(0.0, a, 301), np.array([0.085]))):
        rooms = edge_rooms(zs, False, a, (0.0, a))
        assert np.ptp(rooms) == 0.0
        R, T = (x.ravel() for x in np.meshgrid(r, t, indexing="ij"))
        for widths in edge_widths(zs, a, rooms):
            total = sum(z.indicator(R, T, a, a) for z in with_edge(zs, widths))
            assert np.allclose(total, 1.0, atol=1e-12)
    whole = [inverse.Zone("all", "bottom", (0.0, 2 * math.pi), r=(0.0, a))]
    assert edge_rooms(whole, False, a, (0.0, a)) == pytest.approx([0.0])
    assert edge_widths(whole, a, edge_rooms(whole, False, a, (0.0, a))) == ((0.0,),)
    bands = [inverse.Zone("low", "side", (0.0, 2 * math.pi), z=(0.02, 0.06)),
             inverse.Zone("high", "side", (0.0, 2 * math.pi), z=(0.065, 0.12))]
    assert edge_rooms(bands, True, 0.04, (0.0, math.inf)) == pytest.approx([EDGE_ROOM * 0.005] * 2)


def test_zone_levels_prior_is_averaged_over_scale_and_sets(readings, monkeypatch, tmp_path):
    """The zone levels' prior (zones.ZoneModel.choose_level_scale): for each factor f and set
    S of zones with a level of their own, the evidence at the leading hyperparameters it is
    given (the smooth model's, then the learned remainder's), amplitude integrated, against
    the Gaussian marginal likelihood of the readings formed directly,
        d ~ N(t0, S + G_z diag(s_f,S^2) G_z^T + G (alpha P)^-1 G^T),
    by its Cholesky factor (scipy.linalg, reference library), the nominal level's nearly flat
    column through the determinant lemma (inside one Cholesky factor it cost up to 5e-3
    nats); the prior averaged over (f, S) by their posterior."""
    from scipy.linalg import cho_factor, cho_solve
    from scipy.special import logsumexp

    def log_normal(x, mean, cov):
        c = cho_factor(cov, lower=True)
        r = x - mean
        return float(-0.5 * r @ cho_solve(c, r) - np.sum(np.log(np.diag(c[0])))
                     - 0.5 * x.size * math.log(2 * math.pi))

    from heatsight.inverse import zones as zm
    seen = []
    original = zm.ZoneModel.choose_level_scale

    def spy(self, kept, leading):
        out = original(self, kept, leading)
        seen.append((self, kept, leading, out))
        return out

    monkeypatch.setattr(zm.ZoneModel, "choose_level_scale", spy)
    from heatsight.inverse import fit_models as ft
    on_all, original_all = [], ft.log_evidence_on_all

    def spy_all(*args, **kwargs):
        on_all.append(original_all(*args, **kwargs))
        return on_all[-1]

    monkeypatch.setattr(ft, "log_evidence_on_all", spy_all)
    rd, _ = readings
    with threadpool_limits(1):
        rated = inverse.fit(case(), rd, model="zones", grid=(8, 12))
    # the zone model's evidence is the mean over its edge widths of each width's evidence on all
    # the readings plus its own correction for the choice of (f, S): added once, per width
    models = list(dict.fromkeys(m for m, *_ in seen))
    le = np.array(on_all[:len(models)]) + np.array([m.level_choice_correction for m in models])
    assert len(models) > 1 and any(abs(m.level_choice_correction) > 1e-6 for m in models)
    # each model chooses at the smooth model's leading hyperparameters, then once more at its
    # learned remainder's (ZoneModel.learned_fit), whose choice the answer keeps
    for m in models:
        points = [lead[0] for mm, _, lead, _ in seen if mm is m]
        assert len(points) >= 2 and not np.array_equal(points[0], points[-1])
    assert rated.summary["model_evidence"]["zones"] == pytest.approx(
        float(logsumexp(le) - math.log(len(models))), abs=1e-9)
    model, kept, (P, alphas, log_w), out = seen[-1]
    idx = np.flatnonzero(kept)
    sm = model.smooth.subset(idx)
    Gz = model.Gz[idx]
    J = len(zones())
    sets = zm.level_sets(J)
    assert set(out) == {(f, tuple(S)) for f in zm.ZONE_LEVEL_FACTORS for S in sets}
    assert len(sets) == 2 ** J - 1
    # p(S) = 1 / (J C(J, k)), a proper prior over the non-empty sets
    assert np.exp(zm.level_set_log_prior(sets)).sum() == pytest.approx(1.0, abs=1e-12)
    every = tuple([True] * J)
    scale = model._prior_of(1.0)[1][0]

    def log_normal_flat(x, cov, F, v):
        """log N(x; 0, cov + F diag(v) F^T) for the nearly flat columns F (variances v, many
        orders above the rest): the rest by its Cholesky factor, F through the determinant
        lemma and Woodbury, so that the flat direction costs no digits."""
        c = cho_factor(cov, lower=True)
        B = np.sqrt(v)[None, :] * F
        M = np.eye(v.size) + B.T @ cho_solve(c, B)
        b = B.T @ cho_solve(c, x)
        return float(log_normal(x, 0.0, cov) - 0.5 * np.linalg.slogdet(M)[1] + 0.5 * b @ np.linalg.solve(M, b))

    flat = P < 1e-6 * np.median(P)
    assert 0 < flat.sum() < 3

    def direct(s, leading=(P, alphas, log_w)):
        """log p(d | zone levels ~ N(0, diag(s^2))), amplitude integrated, formed directly."""
        P, alphas, log_w = leading
        flat = P < 1e-6 * np.median(P)
        base = sm.noise.covariance + (Gz * s ** 2) @ Gz.T
        le = [log_normal_flat(sm.d - sm.t0, base + (sm.G[:, ~flat] / (a * P[~flat])) @ sm.G[:, ~flat].T,
                              sm.G[:, flat], 1.0 / (a * P[flat])) for a in alphas]
        return float(logsumexp(np.array(le) + log_w))

    # the determinant-lemma evidence of every factor against the direct Gaussian marginal
    # likelihood for every zone, one zone alone and the two first
    for f in zm.ZONE_LEVEL_FACTORS:
        mu, s = model._prior_of(f)
        # mu = 0 although these zones declare nominal powers (a yardstick, not a prior mean);
        # s = f x one scale for every zone
        assert not np.any(mu) and np.allclose(s, f * scale)
        for S in (every, tuple(j == 0 for j in range(J)), tuple(j < 2 for j in range(J))):
            assert out[(f, S)] == pytest.approx(direct(np.where(S, s, 0.0)), abs=1e-6)
    # (f, S) averaged with their posterior (f with equal prior mass): each zone's level sd is
    # the root of its prior variance's posterior mean, 0 where a set leaves the zone out
    log_prior = dict(zip(map(tuple, sets), zm.level_set_log_prior(sets)))

    def averaged(out):
        keys = list(out)
        post = np.array([out[k] + log_prior[k[1]] for k in keys])
        p = np.exp(post - logsumexp(post))
        in_set = np.array([k[1] for k in keys], float)
        f2 = np.array([k[0] for k in keys]) ** 2
        mean = float(logsumexp(post) - math.log(len(zm.ZONE_LEVEL_FACTORS)))
        return np.sqrt((p * f2) @ in_set) * scale, p @ in_set, mean

    # the choice at the learned remainder's point is kept where some zone's sd moves by more
    # than SAME_LEVEL_SD (in log), else the one before it stands (and the remainder is not
    # learned again)
    calls = [(lead, o) for mm, _, lead, o in seen if mm is model]
    s_last, inclusion, mean = averaged(calls[-1][1])
    s_before, inclusion_before, mean_before = averaged(calls[-2][1])
    kept_call = calls[-1]
    if np.max(np.abs(np.log(s_last / s_before))) < zm.SAME_LEVEL_SD:
        s_last, inclusion, mean, kept_call = s_before, inclusion_before, mean_before, calls[-2]
    assert np.allclose(model.s, s_last, rtol=1e-12)
    assert np.allclose(model.inclusion, inclusion, rtol=1e-12)
    assert 0.0 < model.inclusion.min() and model.inclusion.max() <= 1.0
    # the zone model's evidence, computed at that prior, is corrected to the prior-weighted
    # mean over (f, S), both at the leading point of the choice that stands
    assert model.level_choice_correction == pytest.approx(mean - direct(model.s, kept_call[0]), abs=1e-6)
    # the summary's probabilities: the edge widths' (those that carry weight) weighted by
    # their posterior weights; `models` holds the widths in order
    lead = rated.summary["zone_level_probability"]
    assert list(lead) == [z.name for z in zones()]
    w = np.array(rated.summary["zone_edge_weights"])
    assert len(w) == len(models)
    use = w > 1e-3
    expected = sum(wi * m.inclusion for wi, m, u in zip(w, models, use) if u) / w[use].sum()
    assert np.allclose(list(lead.values()), expected, rtol=1e-12)
    # the report gives them beside the zone model's probability
    from heatsight.data_io import report
    page = report.write_report(rated, tmp_path / "report.html").read_text(encoding="utf-8")
    p_z = rated.summary["model_weights"]["zones"]
    assert f"if the face is read zone by zone (probability {p_z:.2f})" in page
    assert ", ".join(f"{k} {v:.2f}" for k, v in lead.items()) in page
    # the nominal powers are a yardstick only: without them the zone means are the same, and
    # each delivered fraction is the zone's power over its nominal
    plain = case()
    plain.zones = [replace(z, nominal=None) for z in plain.zones]
    with threadpool_limits(1):
        unrated = inverse.fit(plain, rd, model="zones", grid=(8, 12))
    for a, b, z in zip(rated.summary["zones"], unrated.summary["zones"], zones()):
        assert a["mean"] == pytest.approx(b["mean"], rel=1e-9) and a["sd"] == pytest.approx(b["sd"], rel=1e-9)
        if z.nominal:
            assert a["delivered_fraction"] == pytest.approx(a["power_W"] / z.nominal, rel=1e-9)


def test_zone_model_without_a_level_scale_leaves_the_smooth_model():
    """Readings at the ambient temperature everywhere (no heat: every face flux zero) with the
    fixed prior: the face's level scale is zero, so the zone levels have no prior scale; the
    fit keeps the smooth model and says why, instead of failing."""
    cyl = fw.Cylinder(0.1, 0.03, 20.0)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(50.0, 300.0), "side": fw.Insulated()}
    rings = [inverse.Zone("in", "bottom", (0.0, 2 * math.pi), r=(0.0, 0.05)),
             inverse.Zone("out", "bottom", (0.0, 2 * math.pi), r=(0.05, 0.1))]
    rng = np.random.default_rng(0)
    n = 12
    rd = inverse.SensorReadings([f"T{i}" for i in range(n)], 0.09 * np.sqrt(rng.uniform(0, 1, n)),
                                rng.uniform(0, 2 * math.pi, n), rng.choice([0.005, 0.015], n),
                                np.full(n, 300.0), 0.1, 0.0, 0.0)
    res = inverse.fit(types.SimpleNamespace(cylinder=cyl, faces=faces, zones=rings), rd, model="zones",
                      prior="fixed", grid=(6, 12))
    assert res.summary["model"] == "smooth"
    assert any("zone model needs a scale for its levels" in w for w in res.warnings)
    assert abs(res.summary["total_power_W"]) <= 2.0 * res.summary["total_power_sd_W"]   # no heat in


def test_fit_steps_count_what_runs(readings):
    """stage(k, n, text): steps 1..n in order, the last one k = n, also where a counted step
    does not run (Monte Carlo draws asked for while the zone model answers)."""
    rd, _ = readings
    for kwargs in ({"model": "zones", "monte_carlo": 3, "grid": (9, 12)}, {"model": "smooth", "grid": (9, 12)}):
        calls = []
        inverse.fit(case(), rd, stage=lambda k, n, text: calls.append((k, n, text)), **kwargs)
        assert [k for k, _, _ in calls] == list(range(1, len(calls) + 1))
        # the last step: the answer's bands, or the weighing of a doubtful sensor found after them
        assert calls[-1][0] == calls[-1][1] and calls[-1][2].startswith(("bands", "weighing sensor"))


def test_zone_models_share_the_smooth_models_length_scales(readings, monkeypatch):
    """The smooth and the zone model are compared on one grid of length scales and orders:
    every learned prior of the zone models takes the smooth model's (hyperprior.learn_prior's
    `like`), widened or not, and its Matern orders from 0.25 (the readings cannot tell them
    apart; between sensors the rough ones keep the bands honest, tube_demo)."""
    from heatsight.inverse import hyperprior, zones as zones_module

    rd, _ = readings
    seen = []
    real = hyperprior.learn_prior

    def recorded(*args, like=None, **kwargs):
        out = real(*args, like=like, **kwargs)
        seen.append((like, out))
        return out
    monkeypatch.setattr(zones_module, "learn_prior", recorded)
    monkeypatch.setattr(hyperprior, "LONG_END_MASS", -1.0)      # every free choice widens
    res = inverse.fit(case(), rd, grid=(9, 12))
    assert seen and all(like is not None for like, _ in seen)
    for like, out in seen:
        np.testing.assert_array_equal(out.lengths, like.lengths)
        assert out.smoothness == like.smoothness == hyperprior.SMOOTHNESS
    assert res.summary["prior"]["length_scale_range_widened_from_m"] is not None
    # zones lead here: the summary's orders are the remainder's
    assert res.summary["model"] == "zones" and set(res.summary["prior"]["smoothness_weights"]) == \
        {f"{nu:g}" for nu in hyperprior.SMOOTHNESS}


def test_level_sets_and_their_prior():
    """zones.level_sets / level_set_log_prior: every non-empty set of zones up to
    MAX_CHOSEN_ZONES, the count uniform and the sets of one count alike; beyond it, all zones
    keep their level."""
    from heatsight.inverse import zones as zm

    sets = zm.level_sets(3)
    assert {tuple(x) for x in sets} == {(a, b, c) for a in (0, 1) for b in (0, 1) for c in (0, 1)} - {(0, 0, 0)}
    p = dict(zip(map(tuple, sets), np.exp(zm.level_set_log_prior(sets))))
    # count 1, 2, 3 each 1/3: one zone alone 1/9, two 1/9, all three 1/3
    assert p[(True, False, False)] == pytest.approx(1 / 9) and p[(True, True, False)] == pytest.approx(1 / 9)
    assert p[(True, True, True)] == pytest.approx(1 / 3)
    many = zm.level_sets(zm.MAX_CHOSEN_ZONES + 1)
    assert many.shape == (1, zm.MAX_CHOSEN_ZONES + 1) and many.all()
    assert zm.level_set_log_prior(many) == pytest.approx([0.0])
    assert zm.level_sets(zm.MAX_CHOSEN_ZONES).shape[0] == 2 ** zm.MAX_CHOSEN_ZONES - 1


@pytest.mark.parametrize("same", [0.0, math.inf])
def test_levels_chosen_again_at_the_remainders_point(readings, monkeypatch, same):
    """ZoneModel.refine_level_choice: the levels' prior chosen once more at the learned
    remainder's leading point (ZoneModel.learned_fit).  Kept (SAME_LEVEL_SD = 0): the
    remainder is learned again for the answer, on the sensors of the zone model's first
    screening, and the screening handed on has its problem and strength at the new prior
    (fit_models.at_answer_prior); dropped (SAME_LEVEL_SD = inf): the choice before it stands,
    its learned remainder is reused (one learned prior per model) and the screening is the
    first one."""
    from heatsight.inverse import fit_models as ft
    from heatsight.inverse import zones as zm

    monkeypatch.setattr(zm, "SAME_LEVEL_SD", same)
    learned, handed = [], []
    original_learn = zm.learn_prior

    def spy_learn(problem, *args, **kwargs):
        learned.append(problem.n)
        return original_learn(problem, *args, **kwargs)

    original_at = ft.at_answer_prior

    def spy_at(zscreen, zone_model, opts):
        out = original_at(zscreen, zone_model, opts)
        handed.append((zscreen, zone_model, out))
        return out

    monkeypatch.setattr(zm, "learn_prior", spy_learn)
    monkeypatch.setattr(ft, "at_answer_prior", spy_at)
    rd, _ = readings
    with threadpool_limits(1):
        inverse.fit(case(), rd, model="zones", grid=(8, 12))
    n_models = len(handed)
    assert n_models > 1
    # add_tail's learned prior first, then each model's: two where the choice moved, else one,
    # every one on the sensors the model's screening kept
    per_model = 2 if same == 0.0 else 1
    assert len(learned) - 1 == per_model * n_models
    assert learned[1:] == [int(zs.kept.sum()) for zs, _, _ in handed for _ in range(per_model)]
    for first, zone_model, out in handed:
        assert zone_model.refined == (same == 0.0)
        assert np.array_equal(out.kept, first.kept) and out.table is first.table
        final = zone_model.marginal.subset(np.flatnonzero(first.kept)).noise.covariance
        if same == 0.0:
            assert out.problem.noise.covariance == pytest.approx(final, rel=1e-12, abs=1e-15)
            assert not np.allclose(first.problem.noise.covariance, final, rtol=1e-6, atol=0.0)
        else:
            assert out is first
            assert first.problem.noise.covariance == pytest.approx(final, rel=1e-12, abs=1e-15)


def test_more_zones_than_are_weighed_keep_every_level_and_say_so(readings):
    """Beyond MAX_CHOSEN_ZONES zones every zone keeps its level (level_sets): the fit says so
    and gives no level probabilities; at the cap there is no such warning."""
    from heatsight.inverse import zones as zm

    rd, _ = readings
    extra = [inverse.Zone(f"outer {j}", "bottom", (j * math.pi / 2, (j + 1) * math.pi / 2), r=RINGS[2])
             for j in range(4)]
    many = case()
    many.zones = zones() + extra[:zm.MAX_CHOSEN_ZONES + 1 - len(zones())]
    assert len(many.zones) == zm.MAX_CHOSEN_ZONES + 1
    with threadpool_limits(1):
        fit = inverse.fit(many, rd, model="zones", grid=(8, 12))
    said = [w for w in fit.summary["warnings"] if "does not test which zones really differ" in w]
    assert len(said) == 1 and f"{zm.MAX_CHOSEN_ZONES + 1} zones" in said[0]
    assert "zone_level_probability" not in fit.summary
    fewer = case()
    fewer.zones = many.zones[:zm.MAX_CHOSEN_ZONES]
    with threadpool_limits(1):
        fit = inverse.fit(fewer, rd, model="zones", grid=(8, 12))
    assert not any("does not test which zones really differ" in w for w in fit.summary["warnings"])
    assert len(fit.summary["zone_level_probability"]) == zm.MAX_CHOSEN_ZONES
