"""Layout planning (inverse.plan): exact rank-one updates, greedy choice, drilling rules.

The part is a stainless platen (a = 150 mm, L = 40 mm, k = 16 W/(m K), typical value from
memory) with an unknown bottom heat flux, a convection-cooled top and an insulated rim, seen
by ten thermocouples all inside one 80-degree sector.  The readings come from the series of
a known tilted flux: the posterior covariance of a linear-Gaussian model does not depend on
the readings (only the learned hyperparameters do), so what is under test here is algebra and
geometry, not recovery accuracy.
"""

import math
import types

import numpy as np
import pytest

import heatsight.forward as fw
from heatsight import inverse
from heatsight.inverse import plan as pl
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.noise import noise_covariance
from heatsight.inverse.plan_rules import PlanRules, admissible, candidate_grid, drill_face, hole_clearance
from heatsight.inverse.problem import Problem, Zone

A, L, K = 0.15, 0.04, 16.0
SECTOR = (0.0, math.radians(80.0))
ZONES = [Zone("seen sector", "bottom", SECTOR, r=(0.03, 0.13)),
         Zone("far side", "bottom", (math.radians(160), math.radians(250)), r=(0.03, 0.13)),
         Zone("ring", "bottom", (0.0, 2 * math.pi), r=(0.03, 0.13))]


def _case():
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(250.0, 313.15), "side": fw.Insulated()}
    return types.SimpleNamespace(cylinder=fw.Cylinder(A, L, K), faces=faces, zones=ZONES,
                                 fit=types.SimpleNamespace())


def _readings(common_sd=0.0):
    r = np.array([0.02, 0.05, 0.08, 0.11, 0.135] * 2)
    th = np.radians([5, 25, 45, 65, 80, 15, 35, 55, 75, 0])
    z = np.array([0.005] * 5 + [0.012] * 5)
    case = _case()
    faces = dict(case.faces, bottom=fw.Flux(lambda r, th: 8000.0 + 3000.0 * (r / A) * np.cos(th - 3.0)))
    T = fw.CylinderModel(case.cylinder, faces, tolerance=1e-7).evaluate(r, th, z).temperature
    T = T + 0.1 * np.random.default_rng(3).standard_normal(r.size)
    return inverse.SensorReadings([f"TC{i + 1:02d}" for i in range(r.size)], r, th, z, T, 0.1,
                                  np.linspace(0.0, 0.3, r.size), 0.0)


# a coarse display grid: the fit's bands are not under test. The exactness checks need
# independent reading noise: the learned prior's left-out-mode tail (inverse/truncation.py)
# correlates the readings, and planning keeps only each reading's own share of it, so these
# fits use the fixed prior (no tail; the planner's dominant component is then a strength of
# the alpha mixture) and the smooth model (the planner's exact path)
FIT = dict(harmonics=6, terms=6, grid=(4, 8), prior="fixed", model="smooth")


@pytest.fixture(scope="module")
def fitted():
    case = _case()
    res = inverse.fit(case, _readings(), **FIT)
    return case, res


def _candidates(state, rules=PlanRules()):
    face = drill_face(rules, "bottom", fw.Cylinder(A, L, K))
    ex = state.existing
    return candidate_grid(rules, face, fw.Cylinder(A, L, K), (ex["r"], ex["theta"], ex["z"])), face


def _refit_sd(pb, alpha, G_new, var_new, F, common_sd=0.0, sigma=None, tau=None):
    """Target sds from a new LinearGaussianProblem with the new rows appended (one SVD, no
    rank-one update): C = (G^T S^-1 G + alpha P)^-1."""
    G = np.vstack([pb.G, G_new])
    n = G.shape[0]
    if common_sd:
        noise = noise_covariance(sigma, tau, common_sd)
    else:
        noise = np.concatenate([pb.noise.sd ** 2, var_new])
    new = LinearGaussianProblem(G, np.zeros(n), np.zeros(n), noise, pb.prior_diag, pb.c0)
    C = new.posterior_covariance(alpha)
    return np.sqrt(np.einsum("qk,kl,ql->q", F, C, F))


def test_planned_sd_equals_refit(fitted):
    """Sherman-Morrison (textbook closed form; Golub & Van Loan, Matrix Computations, from
    memory) against a full refit at the same hyperparameters: equal to round-off."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones, covariance="dominant")
    (r, th, z), _ = _candidates(state)
    rows = state.rows(r, th, z)
    plan = pl.greedy(state, rows, 3, (r, th, z), 0.005)
    pb, alpha, _, text = pl.dominant_component(res.posterior, res.problem)
    assert "strength" in text
    F = np.vstack([t.F for t in state.targets])
    for k in range(1, 4):
        picks = plan.picks[:k]
        sd = _refit_sd(pb, alpha, rows[picks], np.full(k, state.new_variance), F)
        np.testing.assert_allclose(plan.sd[k], sd, rtol=1e-8)
    # and before any pick, the state's C is the fit component's posterior covariance
    np.testing.assert_allclose(plan.sd[0], np.sqrt(np.einsum("qk,kl,ql->q", F, pb.posterior_covariance(alpha), F)),
                               rtol=1e-8)


def test_planned_sd_equals_refit_with_common_offset():
    """A common offset couples every reading; the state then carries it, and the planned sds
    still equal a refit with the full noise covariance (offset marginalized)."""
    case = _case()
    rd = _readings()
    res = inverse.fit(case, rd, common_offset_sd=0.4, **FIT)
    state = pl.state_from_fit(res, ["zones", "power"], case.zones, new_sigma=0.1, new_offset_sd=0.2)
    assert state.common_offset
    (r, th, z), _ = _candidates(state)
    rows = state.rows(r, th, z)
    plan = pl.greedy(state, rows, 2, (r, th, z), 0.005)
    pb, alpha, _, _ = pl.dominant_component(res.posterior, res.problem)
    F = np.vstack([t.F[:, :-1] for t in state.targets])
    G_new = rows[plan.picks, :-1]
    sigma = np.concatenate([rd.sigma, [0.1, 0.1]])
    tau = np.concatenate([rd.offset_sd, [0.2, 0.2]])
    sd = _refit_sd(pb, alpha, G_new, None, F, 0.4, sigma, tau)
    np.testing.assert_allclose(plan.sd[2], sd, rtol=1e-7)


def test_moment_matched_plan_starts_from_the_fit_and_conditions_exactly(fitted):
    """covariance = "mixture" (the default): the sds now are the fit's own reported sds, and
    the picks update that Gaussian as block conditioning does (C - C G^T (G C G^T + S)^-1 G C,
    the textbook Gaussian conditional; here all picks at once against one at a time)."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    assert "moment-matched" in state.source
    reported = [z["sd"] for z in res.summary["zones"]] + [res.summary["total_power_sd_W"]]
    np.testing.assert_allclose(state.target_sd(), reported, rtol=1e-8)
    (r, th, z), _ = _candidates(state)
    rows = state.rows(r, th, z)
    plan = pl.greedy(state, rows, 3, (r, th, z), 0.005)
    G = rows[plan.picks]
    C = state.C
    block = C - C @ G.T @ np.linalg.solve(G @ C @ G.T + state.new_variance * np.eye(3), G @ C)
    np.testing.assert_allclose(plan.sd[-1], state.target_sd(block), rtol=1e-8)


def test_losing_a_sensor_equals_refit_without_it(fitted):
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones, covariance="dominant")
    value = pl.sensor_value(state)
    pb, alpha, _, _ = pl.dominant_component(res.posterior, res.problem)
    F = np.vstack([t.F for t in state.targets])
    for i in (0, 4, 9):
        name = state.existing["names"][i]
        keep = np.delete(np.arange(pb.n), i)
        C = pb.subset(keep).posterior_covariance(alpha)
        sd = np.sqrt(np.einsum("qk,kl,ql->q", F, C, F))
        row = value[value["sensor"] == name].iloc[0]
        got = [row[f"sd_if_lost:{t.name}"] for t in state.targets]
        np.testing.assert_allclose(got, sd, rtol=1e-7)
    assert sorted(value["rank"]) == list(range(1, pb.n + 1))
    assert value["largest_ratio"].is_monotonic_decreasing


def test_greedy_first_pick_is_the_best_single_pick(fitted):
    """N = 1: the pick's weighted variance is the smallest over every candidate, each
    candidate's posterior computed independently by inverting the updated precision."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones, covariance="dominant")
    (r, th, z), _ = _candidates(state)
    rows = state.rows(r, th, z)
    plan = pl.greedy(state, rows, 1)
    F = np.vstack([t.F for t in state.targets])
    var0 = np.einsum("qk,kl,ql->q", F, state.C, F)
    H0 = np.linalg.inv(state.C)
    sub = np.unique(np.concatenate([np.arange(0, rows.shape[0], 7), plan.picks]))
    score = []
    for j in sub:
        C = np.linalg.inv(H0 + np.outer(rows[j], rows[j]) / state.new_variance)
        score.append(np.sum(np.einsum("qk,kl,ql->q", F, C, F) / var0))
    best = sub[int(np.argmin(score))]
    assert best == plan.picks[0]


def test_one_sector_layout_gets_picks_on_the_other_side_first(fitted):
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    (r, th, z), _ = _candidates(state)
    plan = pl.greedy(state, state.rows(r, th, z), 2, (r, th, z), 0.005)
    centre = np.mean(SECTOR)
    away = np.abs(np.angle(np.exp(1j * (th[plan.picks] - centre))))
    assert away[0] > math.radians(90), np.degrees(th[plan.picks])        # the first: the other side
    assert np.all(away > math.radians(40)), np.degrees(th[plan.picks])   # none inside the seen sector
    # the same without readings (the default prior at a stated scale)
    rd = _readings()
    prior = pl.state_from_prior(Problem.from_case(case, **FIT), ["power", "face"], 1000.0,
                                (rd.names, rd.r, rd.theta, rd.z, rd.sigma, rd.offset_sd), zones=case.zones)
    (r, th, z), _ = _candidates(prior)
    plan = pl.greedy(prior, prior.rows(r, th, z), 1)
    assert abs(np.angle(np.exp(1j * (th[plan.picks[0]] - centre)))) > math.radians(90)


def test_rule_breaking_candidates_are_never_chosen(fitted):
    """The far side is excluded, holes at most 20 mm deep, 30 mm from the existing sensors:
    the best candidates of the unrestricted plan break these rules, and none is chosen."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    cyl = fw.Cylinder(A, L, K)
    free = PlanRules()
    (r, th, z), face = _candidates(state, free)
    rules = PlanRules(exclude_theta=((math.radians(120), math.radians(300)),), depth_max=0.02, spacing=0.03)
    ok, _ = admissible(rules, face, cyl, r, th, z, (state.existing["r"], state.existing["theta"], state.existing["z"]))
    assert (~ok).sum() > 100
    unrestricted = pl.greedy(state, state.rows(r, th, z), 3, (r, th, z), free.spacing)
    assert not ok[unrestricted.picks].all()            # the rules do bite
    rows = state.rows(r[ok], th[ok], z[ok])
    plan = pl.greedy(state, rows, 4, (r[ok], th[ok], z[ok]), rules.spacing)
    pr, pt, pz = r[ok][plan.picks], th[ok][plan.picks], z[ok][plan.picks]
    good, why = admissible(rules, face, cyl, pr, pt, pz,
                           (state.existing["r"], state.existing["theta"], state.existing["z"]))
    assert good.all(), why
    xyz = np.column_stack([pr * np.cos(pt), pr * np.sin(pt), pz])
    gaps = np.linalg.norm(xyz[:, None] - xyz[None], axis=2)[np.triu_indices(len(pr), 1)]
    assert gaps.min() >= rules.spacing
    # depth from the top face within the limit
    assert np.all(L - pz <= 0.02 + 1e-12)


def test_rules_arithmetic():
    cyl = fw.Cylinder(A, L, K)
    rules = PlanRules(exclude_theta=((math.radians(350), math.radians(10)),), exclude_r=((0.06, 0.07),),
                      face_distance=0.003, depth_min=0.01, depth_max=0.03)
    r = np.array([0.05, 0.05, 0.065, 0.05, 0.149, 0.05])
    th = np.radians([90, 355, 90, 90, 90, 5])
    z = np.array([0.02, 0.02, 0.02, 0.035, 0.02, 0.02])
    ok, why = admissible(rules, "top", cyl, r, th, z)
    assert list(ok) == [True, False, False, False, False, False]
    assert why[1] == why[5] == "in an excluded angular range"          # the range wraps through 0
    assert why[2] == "in an excluded radial range"
    assert why[3] == "depth outside the allowed range"                 # 5 mm deep from the top
    assert why[4] == "too close to a face"                             # 1 mm from the rim
    g = candidate_grid(rules, "top", cyl)
    assert np.all(admissible(rules, "top", cyl, *g)[0]) and g[0].size > 0
    assert drill_face(PlanRules(), "bottom", fw.Cylinder(A, math.inf, K)) == "side"
    assert drill_face(PlanRules(), "side", cyl) == "top"


def test_a_new_hole_may_not_run_down_an_existing_one():
    """A tip 19 mm above an existing one at the same (r, theta), drilled from the same face,
    lies in that sensor's hole (tips 19 mm apart passed the spacing rule); radial holes from
    the side come closest where the shallower one ends.  Plain geometry (distance between
    parallel lines; from a point to a line)."""
    cyl = fw.Cylinder(A, L, K)
    rules = PlanRules(spacing=0.005)
    existing = (np.array([0.127, 0.0]), np.array([0.0, 0.0]), np.array([0.006, 0.006]))
    r, th = np.array([0.127, 0.0, 0.127, 0.127]), np.radians([0.0, 0.0, 3.0, 10.0])
    z = np.array([0.025, 0.030, 0.025, 0.025])
    ok, why = admissible(rules, "top", cyl, r, th, z, existing)
    # 127 mm x 3 deg: 6.6 mm off the hole's axis (clear); 10 deg: 22 mm
    assert list(ok) == [False, False, True, True]
    assert why[0].startswith("on the path of an existing sensor's hole")
    d = hole_clearance("side", cyl, np.array([0.12]), np.radians([2.0]), np.array([0.02]),
                       (np.array([0.10]), np.array([0.0]), np.array([0.02])))
    # the shallower tip (r = 120 mm) to the other hole's axis: 0.12 sin(2 deg)
    assert d[0] == pytest.approx(0.12 * math.sin(math.radians(2.0)), rel=1e-12)


def test_bad_requests():
    case = _case()
    rd = _readings()
    prior = pl.state_from_prior(Problem.from_case(case, **FIT), ["power"], 1000.0,
                                (rd.names, rd.r, rd.theta, rd.z, rd.sigma, rd.offset_sd), zones=case.zones)
    with pytest.raises(inverse.InverseError, match="at least 1"):
        pl.greedy(prior, np.zeros((3, prior.C.shape[0])), 0)
    with pytest.raises(inverse.InverseError, match="unknown target 'nowhere'"):
        pl.target_list(prior.design, case.zones, ["nowhere"])
    with pytest.raises(inverse.InverseError, match="expected variation"):
        pl.state_from_prior(Problem.from_case(case, **FIT), ["power"], -1.0)


@pytest.mark.parametrize("kind", ["side wall", "semi-infinite"])
def test_other_parts_plan_inside_the_rules(kind):
    """An unknown side wall (holes from the top) and a semi-infinite part (holes from the
    side): picks obey the rules and never raise a target's sd."""
    if kind == "side wall":
        cyl = fw.Cylinder(0.08, 0.1, 20.0)
        faces = {"side": fw.UnknownTemperature(), "top": fw.Convection(15.0, 300.0), "bottom": fw.Convection(1500.0, 300.0)}
        unknown, variation = "side", 5.0
    else:
        cyl = fw.Cylinder(0.05, math.inf, 20.0)
        faces = {"bottom": fw.UnknownFlux(), "side": fw.Temperature(300.0)}
        unknown, variation = "bottom", 1000.0
    case = types.SimpleNamespace(cylinder=cyl, faces=faces, zones=[], fit=types.SimpleNamespace())
    sensors = (["A", "B"], np.array([0.03, 0.01]), np.array([0.0, 1.0]), np.array([0.05, 0.01]), np.full(2, 0.2),
               np.zeros(2))
    state = pl.state_from_prior(Problem.from_case(case, harmonics=6, terms=6), ["power", "face"], variation, sensors)
    rules = PlanRules(spacing=0.01)
    face = drill_face(rules, unknown, cyl)
    assert face == ("top" if kind == "side wall" else "side")
    existing = (state.existing["r"], state.existing["theta"], state.existing["z"])
    cand = candidate_grid(rules, face, cyl, existing)
    plan = pl.greedy(state, state.rows(*cand), 3, cand, rules.spacing)
    assert len(plan.picks) == 3 and np.all(np.diff(plan.sd, axis=0) <= 1e-9 * plan.sd[0])
    assert admissible(rules, face, cyl, *(c[plan.picks] for c in cand), existing)[0].all()


def test_hollow_part_candidates_lie_in_the_wall():
    """An unknown bore is planned from holes drilled radially from the outer wall; every
    candidate sits in the wall, at least the face distance from both walls; a long part is
    drilled from its outer wall only."""
    tube = fw.Cylinder(0.08, 0.6, 45.0, inner_radius=0.05)
    rules = PlanRules()
    face = drill_face(rules, "bore", tube)
    assert face == "side"
    r, theta, z = candidate_grid(rules, face, tube)
    assert r.size > 0
    assert np.all(r >= 0.05 + rules.face_distance - 1e-12) and np.all(r <= 0.08 - rules.face_distance + 1e-12)
    ok, why = admissible(rules, face, tube, [0.045, 0.065], [0.0, 0.0], [0.3, 0.3])
    assert list(ok) == [False, True] and why[0] == "outside the part"
    long = fw.Cylinder(0.08, math.inf, 45.0, inner_radius=0.05, long=True)
    assert drill_face(rules, "bore", long) == "side"
    with pytest.raises(inverse.InverseError, match="outer wall"):
        drill_face(PlanRules(drill_face="top"), "bore", long)
    r, theta, z = candidate_grid(rules, "side", long)
    assert r.size > 0 and np.all(z == 0.0)


def test_losing_a_sensor_from_a_moment_matched_covariance_stays_near_a_refit():
    """The default state's covariance is moment-matched over the learned hyperparameters and
    the two models, wider than any one Gaussian with these sensors; taking a sensor out of it
    divided by a predictive variance beyond the sensor's own noise.  On the bundled platen
    demo the plan said losing TC09 takes the outer 60-180 zone's sd from 151 to 2,757 W/m^2 and
    the total power's from 0.90 to 11.6 W; a refit without TC09 (the fit itself, the reference
    here) gives 175 W/m^2 and 1.15 W.  Now the loss is taken in the Gaussian consistent with the
    state (plan.consistent_covariance): within 1.5x of the refit."""
    from pathlib import Path

    from heatsight.data_io.case import load_case
    from heatsight.data_io.tables import read_layout, read_snapshot

    case = load_case(Path(__file__).resolve().parent.parent / "demo_data" / "platen.toml", purpose="fit")
    layout = read_layout(case.sensors.layout, case.cylinder)
    rd = inverse.SensorReadings.from_frame(read_snapshot(case.sensors.readings, layout).frame)
    res = inverse.fit(case, rd)
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    value = pl.sensor_value(state)
    row = value[value["sensor"] == "TC09"].iloc[0]
    keep = np.array([n != "TC09" for n in rd.names])
    refit = inverse.fit(case, rd.subset(np.flatnonzero(keep))).summary
    zone = next(z for z in refit["zones"] if z["name"] == "outer 60-180")
    for planned, reference in ((row["sd_if_lost:outer 60-180"], zone["sd"]),
                               (row["sd_if_lost:total_power"], refit["total_power_sd_W"])):
        assert reference / 1.5 <= planned <= 1.5 * reference, (planned, reference)


def test_picks_do_not_share_a_hole(fitted):
    """Six picks from the rules' grid within a 40-degree window (four depths at each (r,
    theta), drilled from the top): no pick's hole may pass within the spacing of another's
    (parallel holes from one face, sqrt(r1^2 + r2^2 - 2 r1 r2 cos(dtheta)) apart: plain
    geometry).  Before, only the tips' distance was checked: two picks at r = 6.2 mm, 15 deg,
    12 mm and 38 mm deep, shared one hole."""
    case, res = fitted
    state = pl.state_from_fit(res, ["zones", "power"], case.zones)
    rules = PlanRules(exclude_theta=((math.radians(40.0), 2 * math.pi),))
    cyl = fw.Cylinder(A, L, K)
    (r, th, z), face = _candidates(state, rules)
    plan = pl.greedy(state, state.rows(r, th, z), 6, (r, th, z), rules.spacing, face=face, cylinder=cyl)
    pr, pt, pz = r[plan.picks], th[plan.picks], z[plan.picks]
    assert len(plan.picks) == 6
    for i in range(len(pr)):
        others = np.arange(len(pr)) != i
        gap = hole_clearance(face, cyl, pr[i:i + 1], pt[i:i + 1], pz[i:i + 1], (pr[others], pt[others], pz[others]))
        assert gap[0] >= rules.spacing


def test_present_holes_drilled_from_another_face():
    """Holes drilled radially from the side beside thermocouples whose holes came down from
    the top: a radial hole at theta = 0, z = 20 mm to r = 40 mm passes through the vertical
    hole of the sensor at r = 127 mm, theta = 0 (z from 6 to 40 mm) and is refused once
    [plan] existing_from says so; assumed drilled from the side as well, the two were 14 mm
    apart and it passed.  Segment distances against plain geometry: two perpendicular
    segments, one through the other (0), and a point beside a segment (its offset)."""
    cyl = fw.Cylinder(A, L, K)
    existing = (np.array([0.127]), np.array([0.0]), np.array([0.006]))
    r, th, z = np.array([0.040, 0.040]), np.radians([0.0, 20.0]), np.array([0.020, 0.020])
    same, _ = admissible(PlanRules(drill_face="side"), "side", cyl, r, th, z, existing)
    ok, why = admissible(PlanRules(drill_face="side", existing_face="top"), "side", cyl, r, th, z, existing)
    assert list(same) == [True, True] and list(ok) == [False, True]
    assert "drilled from the top" in why[0]
    d = hole_clearance("side", cyl, r[:1], th[:1], z[:1], existing, "top")
    assert d[0] == pytest.approx(0.0, abs=1e-15)
    # at 20 deg the radial hole passes the vertical one at 127 sin(20 deg) = 43.4 mm
    d20 = hole_clearance("side", cyl, r[1:], th[1:], z[1:], existing, "top")
    assert d20[0] == pytest.approx(0.127 * math.sin(math.radians(20.0)), rel=1e-12)
    with pytest.raises(inverse.InverseError, match="no top face"):
        drill_face(PlanRules(existing_face="top"), "side", fw.Cylinder(A, math.inf, K))


def test_segment_distance_against_sampling():
    """segment_distance against the closest pair of 2001 points on each segment (brute force),
    random segments in 3-D, a quarter of them with the second one a point, a quarter the
    first, a quarter both; and a sensor at the side surface (a hole of no length from the
    side) beside a top-drilled hole at r = 146 mm of a 150 mm platen: 4 mm apart (the point's
    case gave the distance to the hole's start, 20 mm)."""
    from heatsight.inverse.plan_rules import segment_distance

    rng = np.random.default_rng(0)
    t = np.linspace(0.0, 1.0, 2001)
    for trial in range(200):
        p0, p1, q0, q1 = (rng.normal(size=3) for _ in range(4))
        if trial % 4 in (1, 3):
            q1 = q0.copy()
        if trial % 4 in (2, 3):
            p1 = p0.copy()
        P, Q = p0 + t[:, None] * (p1 - p0), q0 + t[:, None] * (q1 - q0)
        brute = np.sqrt(((Q[None] - P[:, None]) ** 2).sum(axis=2)).min()
        got = segment_distance(p0[None], p1[None], q0[None], q1[None])[0, 0]
        assert brute - 2e-3 <= got <= brute + 1e-12
    cyl = fw.Cylinder(A, L, K)
    d = hole_clearance("top", cyl, np.array([0.146]), np.array([0.0]), np.array([0.02]),
                       (np.array([0.150]), np.array([0.0]), np.array([0.02])), "side")
    assert d[0] == pytest.approx(0.004, abs=1e-12)
