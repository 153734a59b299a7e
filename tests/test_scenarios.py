"""The fast part of the scenario suite (bench/scenarios.py runs all of them).

Ten scenarios of tests/scenario_cases.py on half-size FEM meshes (shown converged below),
noise seed 0.  Each goal of issue 9 is a test: goals the current fit meets are asserted;
goals it does not meet yet are xfail(strict=True) with the figure measured when this file
was written, so they turn into failures (to be promoted) the day they are met.

The scenario data themselves are checked against the outside world first: the readings are
scikit-fem solutions, reproduced by heatsight's own series with the TRUE face prescribed, and
the FEM readings change by far less than the noise when the mesh is refined.
"""

import math
import os
import subprocess
import sys
import types
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from threadpoolctl import threadpool_limits

import heatsight.forward as fw
import scenario_cases as sc
import scenario_fem as sf
import scenario_metrics as sm

SCALE = 0.5
FAST = ("platen_flux", "platen_heater_zones", "top_temperature", "side_flux", "calibrated_convection", "chuck_class2",
        "chuck_calibrated",
        "wall_cooled_end", "tube_bore_temperature", "tube_bore_flux")
HOLLOW = ("tube_bore_temperature", "tube_bore_flux")  # issue 11: the bore of a process tube

# Goals not met by the fit (scale 0.5, seed 0, default fit: model "auto" (the smooth and the
# zone model averaged by their evidence), learned prior with the axisymmetric ratio and the
# axisymmetric profile's dimension, the left-out modes marginalized into the noise,
# gross-fault and model-first screening, the unseen-wall corner columns).  Met since the suite
# was written: platen coverage (0.76 -> 0.88), power (+2.5 -> -0.4 sd) and zone means (0/3 ->
# 3/3), top_temperature sharpness (1.33 -> 0.28) and coverage (0.84 -> 0.88, the profile of
# its own for the contact ring), side_flux relative RMS and sharpness (0.41, 0.21), chuck
# coverage and zones (0.02 -> 1.00, 0/4 -> 4/4), the cooled-end wall's power (+12 -> -1.5 sd),
# coverage (0.76 -> 0.87), zone means (0/2 -> 2/2) and sensors (healthy TC19 no longer set
# aside), pooled coverage (0.70 -> 0.92), calibrated convection's relative RMS (0.54 -> 0.47)
# and zone means (0/2 -> 2/2: calibration under the learned prior and with the zone model).
# The tube bore flux's sharpness was met (1.02 -> 0.79) and is lost again to the profile
# dimension (below).  Figures are over the face's area (scenario_metrics.face_weights).  Met
# since the zone levels' prior is on the smooth model's amplitude scale (zones.
# ZONE_LEVEL_FACTORS; it was 10x the face's level): top_temperature's zones (4 -> 5 of 6),
# calibrated convection's sharpness (1.06 -> 0.86), the tube bore temperature's sharpness
# (1.31 -> 0.11) and broken TC07 (now set aside), the tube bore flux's zones (5 -> 7 of 7:
# fouled side -5.5 -> -0.9 sd).  Lost then: the platen's sharpness (0.99 -> 1.003).  Since
# the zone model's evidence counts the choice of its levels' scale (ZoneModel.
# level_choice_correction) and each zone's edge ramp is held by its own room (zones.
# edge_rooms): the platen's sharpness (1.003 -> 1.00, at the goal), the tube bore
# temperature's zones (5 -> 6 of 6: cool streak -3.8 -> -0.7 sd); lost: top_temperature's
# zones (5 -> 4 of 6) and the tube bore flux's sharpness (1.03 -> 1.17).  Since the learned
# prior widens its length scales' range when the readings press its long end (hyperprior.
# learn_prior): the platen's coverage 0.905 -> 0.932 and relative RMS 0.577 -> 0.559; lost: its
# sharpness (0.997 -> 1.068).  Since the zone model averages over which zones carry a level of
# their own (ZoneModel.choose_level_scale, level_sets): the tube bore flux's sharpness (1.17 ->
# 0.99; its four quadrant zones, declared to be reported, no longer charge the zone model four
# levels' Occam factors); lost: calibrated convection's relative RMS (0.50 -> 0.57).  Since
# the zone model's remainder was smooth (nu >= 1, session 29; the smooth model's orders again
# since session 30) and edge ramps may take half the gap between zones (zone_edges.EDGE_ROOM): the
# tube bore flux's sharpness 0.99 -> 0.62 (0.99 again with the rough orders, seed 0); platen_heater_zones (added then: the platen's readings, its zones declared as the
# heaters) zone means 1/3 -> 3/3 (3.0 / 2.0 / 3.0 -> 1.6 / 0.9 / 1.6 sd), coverage 0.67 -> 0.84.
# Since the unseen edge stretch of a flux face may step (inverse/stretch.py): chuck_calibrated
# (added then) zone means 1/4 -> 4/4 (-3.2 / -0.5 / -3.1 / -3.6 -> -1.5 / +0.4 / -1.5 / -1.5 sd)
# and power (+2.2 -> +1.0 sd).
NOT_MET = {
    ("platen_flux", "rel_rms"): "0.56",
    ("platen_flux", "sharpness"): "1.06 (0.997 before the length scales' range was widened where the "
                                  "readings press its long end; coverage 0.905 -> 0.932)",
    ("calibrated_convection", "rel_rms"): "0.54 (seed 0; 0.44 over seeds 0-2; 0.57 before the zone model's "
                                          "smooth remainder, 0.50 and 0.41 before it averaged over which zones "
                                          "carry a level: the edge zone's level at probability 0.43)",
    ("chuck_class2", "rel_rms"): "1.08",
    # the heater ends at 140 mm in a stretch no sensor sees (beyond 110 mm): with the unseen
    # stretch's steps (inverse/stretch.py) its zone means came within 2 sd (-3.2 / -0.5 / -3.1 /
    # -3.6 sd before) and the power +2.2 -> +1.0 sd; what is left is the width the doubt costs
    ("chuck_calibrated", "rel_rms"): "0.67 (0.88 before the unseen stretch's steps; the rim band "
                                      "135-150 mm +1.0 truth sd, its half band 2.6)",
    ("chuck_calibrated", "sharpness"): "1.79 (1.56 before the steps)",
    ("platen_heater_zones", "coverage"): "0.84 (0.76 / 0.86 in seeds 1 / 2; 0.67 / 0.53 / 0.68 with ramps of "
                                         "at most a quarter of the gap: the tilt rides on the rings, so what "
                                         "the levels leave has the rings' edges, which the smooth remainder "
                                         "cannot follow)",
    ("top_temperature", "zones"): "4 of 6 (centre +2.1, contact ring -2.1 sd: the smooth model's answer, "
                                  "the zone model 5.6 nats behind)",
}


@lru_cache(maxsize=None)
def scenario(name):
    return sc.make(name, seed=0, scale=SCALE)


@lru_cache(maxsize=None)
def scored(name):
    with threadpool_limits(1):
        return sm.run(scenario(name), seed=0)


def _goal_params():
    out = []
    for name in FAST:
        goals = ["rel_rms", "coverage", "zones", "power", "sensors"]
        if name not in sc.UNRESOLVED:
            goals.insert(2, "sharpness")
        for goal in goals:
            why = NOT_MET.get((name, goal))
            marks = [pytest.mark.xfail(strict=True, reason=f"issue 9 goal not met yet: measured {why}")] if why else []
            out.append(pytest.param(name, goal, marks=marks, id=f"{name}-{goal}"))
    return out


# ------------------------------------------------------------------ the scenario data
# the chuck's sharp-sector projection takes ~20 s in the series; the semi-infinite bar is
# checked here too (its FEM stands in with a 1 m bar, the series is truly semi-infinite)
@pytest.mark.parametrize("name", HOLLOW)
def test_hollow_series_with_true_bore_reproduces_fem_readings(name):
    """The same for the tube scenarios (tests/scenario_hollow.py, FEM on the annulus)."""
    import scenario_hollow as sh

    scn = scenario(name)
    truth, phys, pos = sh._PHYSICS[name]
    faces = dict(scn.case.faces)
    faces["bore"] = fw.Temperature(truth) if phys.kind == "temperature" else fw.Flux(truth)
    # tolerance 1e-6 of the ~450 K scale: 0.5 mK, a tenth of what is asserted
    series = fw.CylinderModel(scn.case.cylinder, faces, tolerance=1e-6).evaluate(*pos).temperature
    fem = sh._fem(name, truth, phys, pos, SCALE).temperature
    # 0.05 sigma: "well below the noise", common practice, no source
    assert np.abs(series - fem).max() <= 0.05 * scn.readings.sigma.min()  # reference: scikit-fem


@pytest.mark.parametrize("name", [n for n in FAST if not n.startswith("chuck") and n not in HOLLOW]
                         + ["semi_infinite"])
def test_series_with_true_face_reproduces_fem_readings(name):
    """heatsight's series with the true face prescribed gives the scikit-fem readings to a
    small fraction of the noise: the readings, the truth and the case agree."""
    scn = scenario(name)
    truth, phys, pos = sc._PHYSICS[name]
    faces = dict(scn.case.faces)
    faces.update({f: fw.Convection(spec[1], spec[2]) for f, spec in phys.known.items() if spec[0] == "R"})
    faces[scn.face] = fw.Temperature(truth) if phys.kind == "temperature" else fw.Flux(truth)
    series = fw.CylinderModel(scn.case.cylinder, faces, tolerance=1e-9).evaluate(*pos).temperature
    fem = sc.fem_readings(name, truth, phys, pos, SCALE).temperature
    # 0.05 sigma: "well below the noise", common practice, no source
    assert np.abs(series - fem).max() <= 0.05 * scn.readings.sigma.min()  # reference: scikit-fem


@pytest.mark.parametrize("name", ["top_temperature", "platen_flux", "wall_cooled_end"])
def test_fem_readings_converged_on_test_mesh(name):
    """Twice the cells in r and z and 1.5x the harmonics change no reading by more than a
    tenth of the noise (bench/scenarios.py --mesh-check does this for every scenario)."""
    diff, sigma, coarse, fine = sc.mesh_check(name, SCALE)
    assert fine["nr"] == 2 * coarse["nr"] and fine["nz"] == 2 * coarse["nz"]
    assert diff <= 0.1 * sigma  # scikit-fem at two mesh levels; 0.1 sigma: common practice, no source
    # the true power of a temperature face is the FEM heat in: converged to 0.1 % (common practice, no source)
    assert fine["fem_heat_in"] == pytest.approx(coarse["fem_heat_in"], rel=1e-3)  # scikit-fem, two levels


@pytest.mark.parametrize("name", ["platen_flux", "side_flux", "chuck_class2"])
def test_true_power_matches_fem_heat_balance(name):
    """The true power of a flux face (midpoint rule over the face) equals the heat the FEM
    solve took in through that face (its m = 0 harmonic): the harmonic split lost nothing."""
    scn = scenario(name)
    assert scn.fem["fem_heat_in"] == pytest.approx(scn.power, rel=1e-4)  # scikit-fem facet quadrature


def test_declared_class_offsets_are_as_large_as_the_signal():
    """The chuck's declared offsets: IEC 60584-1 class 2 type K, +-2.5 K below 333 degC
    (from memory), standard uncertainty 2.5 / sqrt(3) (GUM 4.3.7); the readings' spread is of
    the same size (the situation of issue 9)."""
    rd = scenario("chuck_class2").readings
    np.testing.assert_allclose(rd.offset_sd, 2.5 / math.sqrt(3.0), rtol=1e-12)  # IEC 60584-1 (from memory)
    assert 0.5 <= np.std(rd.temperature) / 2.5 <= 2.0


def test_broken_sensor_reads_high():
    scn = scenario("platen_flux")
    truth, phys, pos = sc._PHYSICS["platen_flux"]
    fem = sc.fem_readings("platen_flux", truth, phys, pos, SCALE).temperature
    i = scn.readings.names.index("TC18")
    assert scn.readings.temperature[i] - fem[i] == pytest.approx(sc.BROKEN_OFFSET, abs=5 * scn.readings.sigma[i])


def test_face_average_of_a_closed_form():
    """Midpoint rule of the truths' zone means against elementary integrals: <(r/a)^2> over
    the disc = 1/2 and over r1 < r < r2 = (rho1^2 + rho2^2) / 2; <cos theta> over |theta| < phi
    on the side = sin(phi) / phi."""
    a = 0.1
    mean, area = sf.face_average(lambda r, t: (r / a) ** 2, "bottom", a, 0.05)
    assert mean == pytest.approx(0.5, rel=1e-5) and area == pytest.approx(math.pi * a * a, rel=1e-12)
    ring = lambda u, v: (u >= 0.03) & (u <= 0.07)  # noqa: E731
    mean, _ = sf.face_average(lambda r, t: (r / a) ** 2, "bottom", a, 0.05, ring)
    assert mean == pytest.approx((0.3 ** 2 + 0.7 ** 2) / 2, rel=2e-3)  # elementary integral
    phi = 0.6
    cap = lambda u, v: np.abs(np.angle(np.exp(1j * u))) < phi  # noqa: E731
    mean, area = sf.face_average(lambda t, z: np.cos(t), "side", a, 0.2, cap)
    assert mean == pytest.approx(math.sin(phi) / phi, rel=1e-3)  # elementary integral
    # the mask edge is resolved to one cell of 2 pi / 1200 rad: 0.5 % of this 1.2 rad cap
    assert area == pytest.approx(2 * phi * a * 0.2, rel=5e-3)  # elementary integral


# ------------------------------------------------------------------ the metrics
def test_scores_follow_their_definitions():
    """A fake result whose estimate is the truth plus 0.3 sd(truth), with half bands of
    0.2 sd(truth): relative RMS 0.3, coverage 0, sharpness 0.2; zone and power z-scores."""
    scn = scenario("top_temperature")
    th = np.linspace(0, 2 * np.pi, 40, endpoint=False)
    r = np.linspace(0, scn.case.cylinder.radius, 11)
    R, TH = np.meshgrid(r, th, indexing="ij")
    grid = pd.DataFrame({"r_m": R.ravel(), "theta_rad": TH.ravel(), "z_m": scn.case.cylinder.height})
    truth = scn.truth_on(grid)
    w = sm.face_weights(grid)
    w = w / w.sum()
    sd = np.sqrt(np.sum(w * (truth - np.sum(w * truth)) ** 2))      # the face's sd, by area
    grid["estimate"] = truth + 0.3 * sd
    grid["lower"], grid["upper"] = grid.estimate - 0.2 * sd, grid.estimate + 0.2 * sd
    zones = [{"name": n, "mean": m + 1.0, "sd": 0.5} for n, m in scn.zone_means.items()]
    res = types.SimpleNamespace(grid=grid, summary={"zones": zones[1:], "set_aside": ["TC01"],
                                                    "total_power_W": scn.power - 3.0, "total_power_sd_W": 1.0})
    s = sm.score(scn, res)
    assert s.rel_rms == pytest.approx(0.3, rel=1e-12)   # definition
    assert s.coverage == 0.0 and s.sharpness == pytest.approx(0.2, rel=1e-12)
    first = next(iter(scn.zone_means))
    assert s.zone_z[first] == math.inf                    # a zone the fit did not report is missed
    assert all(s.zone_z[n] == pytest.approx(2.0) for n in list(scn.zone_means)[1:])
    assert s.power_z == pytest.approx(-3.0) and not s.aside_ok
    met = {g.split()[0] + " " + g.split()[1]: m for g, m, _ in sm.goals([s])}
    assert met["relative RMS"] and not met["every total"] and not met["every broken"]


def test_face_weights_are_cell_areas():
    """The display grid's cells tile the face: their areas sum to pi a^2 (an end face), pi (a^2 -
    b^2) (an annulus) and 2 pi r L (a wall), elementary areas; a ring's share grows with r."""
    th = np.linspace(0, 2 * np.pi, 72, endpoint=False)
    for r0, a in ((0.0, 0.15), (0.04, 0.07)):
        R, TH = np.meshgrid(np.linspace(r0, a, 41), th, indexing="ij")
        w = sm.face_weights(pd.DataFrame({"r_m": R.ravel(), "theta_rad": TH.ravel(), "z_m": 0.0}))
        assert w.sum() == pytest.approx(np.pi * (a ** 2 - r0 ** 2), rel=1e-12)  # elementary area
        ring = w.reshape(41, 72).sum(axis=1)
        assert np.all(np.diff(ring[1:-1]) > 0)
    TH, Z = np.meshgrid(th, np.linspace(0.0, 0.4, 33), indexing="ij")
    w = sm.face_weights(pd.DataFrame({"r_m": 0.04, "theta_rad": TH.ravel(), "z_m": Z.ravel()}))
    assert w.sum() == pytest.approx(2 * np.pi * 0.04 * 0.4, rel=1e-12)        # elementary area


# ------------------------------------------------------------------ the goals (issue 9)
@pytest.mark.parametrize("name, goal", _goal_params())
def test_goal(name, goal):
    s = scored(name)
    assert s.error is None, s.error
    if goal == "rel_rms":
        assert s.rel_rms <= s.rms_goal, s.rel_rms                         # issue 9 goal
    elif goal == "coverage":
        assert s.coverage >= sm.COVERAGE_EACH, s.coverage                 # issue 9 goal
    elif goal == "sharpness":
        assert s.sharpness <= sm.SHARPNESS, s.sharpness                   # issue 9 goal
    elif goal == "zones":
        within = [abs(z) <= sm.WITHIN_SD for z in s.zone_z.values()]
        assert np.mean(within) >= sm.ZONE_SHARE, s.zone_z                 # issue 9 goal
    elif goal == "power":
        assert abs(s.power_z) <= sm.WITHIN_SD, s.power_z                  # issue 9 goal
    else:
        assert s.aside_ok, (s.broken, s.set_aside)                        # issue 9 goal


def test_pooled_coverage():
    pooled = np.mean([scored(n).coverage for n in FAST])
    assert sm.COVERAGE_POOLED[0] <= pooled <= sm.COVERAGE_POOLED[1], pooled  # issue 9 goal


def test_bench_script_prints_table_and_goals():
    bench = Path(__file__).resolve().parent.parent / "bench" / "scenarios.py"
    out = subprocess.run([sys.executable, str(bench), "--only", "top_temperature", "--scale", "0.3",
                          "--fit", "harmonics=4"], capture_output=True, text=True, timeout=300,
                         env=dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1"))
    assert out.returncode == 0, out.stderr
    assert "[1/1] top_temperature seed 0" in out.stdout
    assert "{'harmonics': 4}" in out.stdout
    lines = [ln for ln in out.stdout.splitlines() if ln.startswith(("MET", "NOT MET"))]
    assert len(lines) == 7


def test_a_kept_broken_sensor_is_one_the_others_cannot_check():
    """Why wall_temperature's broken TC07 (6 K high) stays in the fit (an issue 9 goal not
    met, DEVELOPERS.md): the check against the others would catch its offset only beyond
    its caught offset, which the fit reports (44 K), far above the scenario's offset.  (The
    tube bore's TC07 is now set aside in seeds 0 and 2, by the zone model.)"""
    with threadpool_limits(1):
        s = sm.run(sc.make("wall_temperature", seed=0, scale=SCALE), seed=0)
    assert "TC07" not in s.set_aside
    assert s.extra["caught_offset"]["TC07"] > sc.BROKEN_OFFSET
    assert "TC07" in scored("tube_bore_temperature").set_aside
