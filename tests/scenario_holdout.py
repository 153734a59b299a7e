"""A second set of finite-element scenarios, kept apart from the suite (scenario_cases.py).

Eleven scenarios written in session 37 by an independent check of the fit (six solid, five
hollow), after the suite's defaults were chosen: no default has been tuned on them.  Use them
to see whether a change to the statistics that helps the suite holds elsewhere
(`python bench/scenarios.py --set second`); their measured table is in DEVELOPERS.md ("The
second scenario set").  Same construction as the suite: heater and process patterns of our
own (never prior draws), readings from scikit-fem (tests/scenario_fem.py) plus seeded noise
and deliberate faults, scored by tests/scenario_metrics.py.  All numbers are invented;
material conductivities are typical values (from memory).

Checks on the set-up (session 37, scale 0.5): heatsight's series with the true face
prescribed gives the FEM readings to 0.005-1.9 mK (noise 50-100 mK), a mesh with twice the
cells and 1.5x the harmonics moves no reading by more than 1.8 mK, and the true power agrees
with the FEM's heat balance to about 1e-6.

    make(name, seed=0, scale=1.0)   one scenario (a scenario_cases.Scenario)
    NAMES                           the set's names
"""

from __future__ import annotations

import math

import numpy as np

from heatsight.data_io.case import Zone

import scenario_cases as sc
import scenario_fem as sf
import scenario_hollow as sh
from scenario_fem import band, sector, step
from scenario_hollow import WallZone

TWO_PI = 2.0 * math.pi
DEG = math.pi / 180.0
D = math.radians


def _hollow_build(*args, **kwargs):
    """scenario_hollow._build, wrapped as a suite Scenario."""
    return sc.from_hollow(sh._build(*args, **kwargs))


# ------------------------------------------------------------------ solid parts
def hotplate_disc(seed=0, scale=1.0):
    """Thin cast-aluminium hot-plate disc (a = 120 mm, L = 12 mm, L/a = 0.1), unknown bottom
    flux from a 3-zone ring heater with the MIDDLE ring switched off; the outer ring's spiral
    lead makes it +-12 % uneven along a spiral; pan load on top (h = 150), weak side loss;
    14 thermocouples in shallow holes 3 and 7 mm deep from the top."""
    a, L, k = 0.12, 0.012, 150.0     # cast aluminium ~150 W/(m K) (from memory)

    def q(r, th):
        inner = 16000.0 * band(r, 0.0, 0.03, 0.0015)
        outer = 14000.0 * band(r, 0.075, 0.11, 0.0015) * (1.0 + 0.12 * np.cos(th - TWO_PI * r / 0.06))
        return inner + outer
    phys = sf.Physics(a, L, k, {"top": ("R", 150.0, 330.0), "side": ("R", 10.0, 298.15)}, "bottom", "flux",
                      dict(nr=96, nz=16, grade={"bottom": 2.0}), m_cap=6)
    layout = (sc._circle(0.095, L - 0.003, 6, 15) + sc._circle(0.055, L - 0.003, 4, 50)
              + [(0.0, 0.0, L - 0.003)] + sc._circle(0.02, L - 0.007, 3, 100))
    zones = [Zone("inner heater", "bottom", (0.0, TWO_PI), r=(0.0, 0.03)),
             Zone("middle (off)", "bottom", (0.0, TWO_PI), r=(0.035, 0.07)),
             Zone("outer heater", "bottom", (0.0, TWO_PI), r=(0.075, 0.11))]
    return sc._build("hotplate_disc", hotplate_disc.__doc__, q, phys, layout, seed=seed, scale=scale,
                     sigma=0.05, zones=zones)


def vessel_hotspot(seed=0, scale=1.0):
    """Cast-iron vessel bottom (a = 100 mm, L = 30 mm) standing on a hot plate; unknown bottom
    TEMPERATURE with an off-centre hot spot (2-D Gaussian, +28 K, sd 18 mm, centred at
    r = 45 mm, theta = 300 deg) over a 430 K plate that is 6 K cooler at the rim; the liquid
    above (h = 600, 360 K), lagged side (h = 5); 16 thermocouples at 8 and 20 mm."""
    a, L, k = 0.10, 0.03, 50.0       # grey cast iron ~50 W/(m K) (from memory)
    xc, yc, s = 0.045 * math.cos(300 * DEG), 0.045 * math.sin(300 * DEG), 0.018

    def t(r, th):
        x, y = r * np.cos(th), r * np.sin(th)
        return 430.0 - 6.0 * (r / a) ** 2 + 28.0 * np.exp(-((x - xc) ** 2 + (y - yc) ** 2) / (2 * s * s))
    phys = sf.Physics(a, L, k, {"top": ("R", 600.0, 360.0), "side": ("R", 5.0, 298.15)}, "bottom",
                      "temperature", dict(nr=70, nz=30, grade={"bottom": 2.0}), m_cap=20)
    layout = (sc._circle(0.075, 0.008, 7, 10) + sc._circle(0.035, 0.008, 5, 40) + [(0.0, 0.0, 0.008)]
              + sc._circle(0.055, 0.020, 3, 80))
    zones = sc._quadrant_zones("bottom", "quadrant") + [Zone("rim", "bottom", (0.0, TWO_PI), r=(0.085, 0.10))]
    return sc._build("vessel_hotspot", vessel_hotspot.__doc__, t, phys, layout, seed=seed, scale=scale,
                     sigma=0.1, zones=zones)


def copper_billet(seed=0, scale=1.0):
    """Tall copper billet (a = 40 mm, L = 240 mm), unknown SIDE temperature: two band heaters
    (z = 40-95 and 145-200 mm, +30 and +24 K over a 415 K wall, the upper one 4 K hotter at
    theta = 30 deg) with a 50 mm gap between them; the top cooled by convection (h = 40),
    the bottom on an insulating block; 18 thermocouples at depths 5, 15 and 40 mm (the axis)."""
    a, L, k = 0.04, 0.24, 390.0      # copper ~390 W/(m K) (from memory)

    def t(th, z):
        lower = 30.0 * band(z, 0.04, 0.095, 0.003)
        upper = (24.0 + 4.0 * np.cos(th - 30 * DEG)) * band(z, 0.145, 0.20, 0.003)
        return 415.0 + lower + upper - 5.0 * (z / L) ** 2
    phys = sf.Physics(a, L, k, {"top": ("R", 40.0, 298.15), "bottom": ("N", 0.0)}, "side", "temperature",
                      dict(nr=40, nz=320, grade=None), m_cap=3)
    depths = [0.005, 0.015, 0.040]
    zs = np.linspace(0.02, 0.225, 18)
    layout = [(a - depths[i % 3], (i * 83.0) % 360, float(zs[i])) for i in range(18)]
    zones = [Zone("lower heater", "side", (0.0, TWO_PI), z=(0.04, 0.095)),
             Zone("gap", "side", (0.0, TWO_PI), z=(0.10, 0.14)),
             Zone("upper heater", "side", (0.0, TWO_PI), z=(0.145, 0.20)),
             Zone("upper heater 0-180", "side", (0.0, math.pi), z=(0.145, 0.20))]
    return sc._build("copper_billet", copper_billet.__doc__, t, phys, layout, seed=seed, scale=scale,
                     sigma=0.1, zones=zones)


def lamp_spot(seed=0, scale=1.0):
    """Low-alloy steel block (a = 50 mm, L = 60 mm) on a water-cooled base (h = 2000, 293 K),
    unknown TOP heat flux: a lamp spot (Gaussian, 55 kW/m^2 peak, sd 12 mm, centred 15 mm off
    the axis at theta = 70 deg) with a 300 W/m^2 radiative loss elsewhere; side h = 10;
    15 thermocouples at 5, 15 and 40 mm below the top."""
    a, L, k = 0.05, 0.06, 40.0       # low-alloy steel ~40 W/(m K) (from memory)
    xc, yc, s = 0.015 * math.cos(70 * DEG), 0.015 * math.sin(70 * DEG), 0.012

    def q(r, th):
        x, y = r * np.cos(th), r * np.sin(th)
        return 55000.0 * np.exp(-((x - xc) ** 2 + (y - yc) ** 2) / (2 * s * s)) - 300.0
    phys = sf.Physics(a, L, k, {"bottom": ("R", 2000.0, 293.15), "side": ("R", 10.0, 298.15)}, "top", "flux",
                      dict(nr=50, nz=60, grade={"top": 3.0}), m_cap=16)
    layout = (sc._circle(0.035, L - 0.005, 6, 0) + sc._circle(0.015, L - 0.005, 4, 25) + [(0.0, 0.0, L - 0.005)]
              + sc._circle(0.025, L - 0.015, 3, 60) + [(0.02, 150, L - 0.040)])
    zones = [Zone("spot", "top", (40 * DEG, 100 * DEG), r=(0.0, 0.03)),
             Zone("centre", "top", (0.0, TWO_PI), r=(0.0, 0.02)),
             Zone("far half", "top", (160 * DEG, 340 * DEG), r=(0.02, 0.05))]
    return sc._build("lamp_spot", lamp_spot.__doc__, q, phys, layout, seed=seed, scale=scale,
                     sigma=0.1, zones=zones)


def quadrant_chuck(seed=0, scale=1.0):
    """Alumina chuck (a = 100 mm, L = 20 mm), unknown bottom flux from four quadrant heaters
    (r < 95 mm, 9 kW/m^2, SHARP edges ~1 mm) with the 180-270 deg quadrant at 50 %; top to the
    wafer and gas (h = 300, 300 K), insulated rim; zones declared as the four quadrants;
    17 thermocouples at 5 and 12 mm."""
    a, L, k = 0.10, 0.02, 30.0       # dense alumina ~30 W/(m K) (from memory)

    def q(r, th):
        weak = sector(th, 225 * DEG, 45 * DEG, 0.01)
        return 9000.0 * band(r, 0.0, 0.095, 0.0005) * (1.0 - 0.5 * weak)
    phys = sf.Physics(a, L, k, {"top": ("R", 300.0, 300.0), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=100, nz=20, grade={"bottom": 2.0}), m_cap=40)
    layout = (sc._circle(0.075, 0.005, 8, 22.5) + sc._circle(0.035, 0.005, 4, 45) + [(0.0, 0.0, 0.005)]
              + sc._circle(0.055, 0.012, 4, 0))
    zones = sc._quadrant_zones("bottom", "quadrant", r=(0.0, 0.095))
    return sc._build("quadrant_chuck", quadrant_chuck.__doc__, q, phys, layout, seed=seed, scale=scale,
                     sigma=0.1, zones=zones)


def uniform_bath(seed=0, scale=1.0):
    """Brass cylinder (a = 50 mm, L = 80 mm) standing in a stirred bath: unknown bottom
    TEMPERATURE that is nearly uniform (365 K, 2 K cooler at the rim, a 0.6 K tilt); top and
    side lose heat to 295 K air (h = 25 and 8); 14 thermocouples; TC05 reads 6 K high."""
    a, L, k = 0.05, 0.08, 110.0      # brass ~110 W/(m K) (from memory)

    def t(r, th):
        rho = r / a
        return 365.0 - 2.0 * rho ** 2 + 0.6 * rho * np.cos(th - 1.0)
    phys = sf.Physics(a, L, k, {"top": ("R", 25.0, 295.15), "side": ("R", 8.0, 295.15)}, "bottom",
                      "temperature", dict(nr=40, nz=60, grade={"bottom": 2.0}), m_cap=3)
    layout = (sc._circle(0.04, 0.006, 6, 0) + sc._circle(0.02, 0.006, 3, 30) + [(0.0, 0.0, 0.006)]
              + sc._circle(0.03, 0.025, 3, 60) + [(0.0, 0.0, 0.05)])
    zones = [Zone("centre", "bottom", (0.0, TWO_PI), r=(0.0, 0.02)),
             Zone("rim 0-180", "bottom", (0.0, math.pi), r=(0.04, 0.05)),
             Zone("rim 180-360", "bottom", (math.pi, TWO_PI), r=(0.04, 0.05))]
    return sc._build("uniform_bath", uniform_bath.__doc__, t, phys, layout, seed=seed, scale=scale,
                     sigma=0.1, zones=zones, broken=("TC05",))


# ------------------------------------------------------------------ hollow parts
def layout(b, depths, n, z_lo, z_hi, turn=137.5, start=0.0, zs=None):
    """n radial holes from the outer wall (radius b), alternating depths [m], spread along z
    (or at the given zs) and around by `turn` degrees per hole."""
    zs = np.linspace(z_lo, z_hi, n) if zs is None else np.asarray(zs, float)
    return [(b - depths[i % len(depths)], (start + turn * i) % 360.0, float(zs[i])) for i in range(n)]


def quads(z, start=0.0):
    return [WallZone(f"bore {int(start + 90 * i)}-{int(start + 90 * (i + 1))} deg", "bore",
                     (D(start + 90 * i), D(start + 90 * (i + 1))), z=z) for i in range(4)]


def ring(name, z):
    return WallZone(name, "bore", (0.0, TWO_PI), z=z)


# ------------------------------------------------------------------ 1 thin stainless pipe
def thin_pipe_stratified(seed=0, scale=1.0):
    """Thin-walled stainless pipe (bore 98 mm, OD 115 mm, ratio 0.852, 600 mm long), lagged
    outside (effective h = 4 W/m^2K to 20 degC), flanges h = 25 to 20 degC.  Unknown bore
    temperature of a stratified hot liquid: cooler along the lower side (cos pattern of
    +-5 K about theta = 250 deg, growing along the pipe) and 10 K cooler toward the outlet.
    12 thermocouples all 3 mm deep (one depth), z = 40..560 mm."""
    a, b, L, k = 0.049, 0.0575, 0.60, 16.0  # austenitic stainless ~16 W/(m K) (from memory)

    def t(th, z):
        return 353.15 - 10.0 * z / L + (2.0 + 3.0 * z / L) * np.cos(th - D(70))  # coolest at 250 deg
    conv = ("R", 25.0, 293.15)
    phys = sf.Physics(b, L, k, {"bottom": conv, "top": conv, "side": ("R", 4.0, 293.15)},
                      "bore", "temperature", dict(nr=8, nz=120), m_cap=8, inner_radius=a)
    lay = layout(b, (0.003,), 12, 0.04, 0.56, start=15.0)
    zones = ([WallZone("cool lower side", "bore", (D(210), D(300)), z=(0.0, L)),
              ring("inlet third", (0.0, 0.2)), ring("outlet third", (0.4, 0.6))] + quads((0.1, 0.5)))
    return _hollow_build("thin_pipe_stratified", thin_pipe_stratified.__doc__, t, phys, lay, zones,
                     seed=seed, scale=scale, sigma=0.1)


# ------------------------------------------------------------------ 2 thick extruder barrel
BARREL_HEATERS = ((0.04, 0.16, 14000.0), (0.24, 0.36, 9800.0), (0.44, 0.56, 14000.0))


def barrel_heaters(z):
    z = np.asarray(z, float)
    return sum(q * band(z, lo, hi, 0.004) for lo, hi, q in BARREL_HEATERS)


def extruder_barrel_flux(seed=0, scale=1.0):
    """Thick extruder barrel (bore 60 mm, OD 200 mm, ratio 0.30, 600 mm), three band heaters
    outside (14, 9.8 (70 %), 14 kW/m^2), insulated between; feed end water-cooled (h = 800
    to 30 degC), die end on the hot die (h = 300 to 220 degC).  Unknown bore heat flux (into
    the part; the melt takes heat out): removal rises past the feed zone and is 30 % stronger
    on one side (cos, max at theta = 130 deg).  18 thermocouples 15 and 45 mm deep."""
    a, b, L, k = 0.030, 0.100, 0.60, 38.0  # nitriding steel ~38 W/(m K) (from memory)

    def q(th, z):
        return -(2500.0 + 7000.0 * band(z, 0.10, 0.58, 0.05)) * (1.0 + 0.3 * np.cos(th - D(130)))
    phys = sf.Physics(b, L, k, {"bottom": ("R", 800.0, 303.15), "top": ("R", 300.0, 493.15),
                                "side": ("N", barrel_heaters)},
                      "bore", "flux", dict(nr=20, nz=120), m_cap=8, inner_radius=a)
    lay = layout(b, (0.015, 0.045), 18, 0.03, 0.57, start=40.0)
    zones = ([ring(f"heater {i + 1}", (lo, hi)) for i, (lo, hi, _) in enumerate(BARREL_HEATERS)]
             + [ring("feed zone", (0.0, 0.08))] + quads((0.1, 0.5), start=45.0))
    return _hollow_build("extruder_barrel_flux", extruder_barrel_flux.__doc__, q, phys, lay, zones,
                     seed=seed, scale=scale, sigma=0.1)


# ------------------------------------------------------------------ 3 heated roll, unseen ends
def roll_unseen_ends(seed=0, scale=1.0):
    """Oil-heated roll (bore 200 mm, OD 300 mm, 1000 mm face), the web taking 2.5 kW/m^2 off
    the outer wall over z = 0.1..0.9 m (insulated beyond), ends (journals) by convection
    h = 12 to 25 degC.  Unknown bore temperature: the oil enters hot at z = 0 and loses 14 K,
    a +-4 K side-to-side swirl, and both ends 12 K cooler over the last ~80 mm (oil
    bypasses at the rotary joints).  16 thermocouples 15 and 35 mm deep, ALL in the middle
    half z = 0.25..0.75 m: the ends are unseen."""
    a, b, L, k = 0.100, 0.150, 1.0, 48.0  # carbon steel ~48 W/(m K) (from memory)

    def t(th, z):
        ends = 12.0 * ((1.0 - step(z - 0.08, 0.025)) + step(z - 0.92, 0.025))
        return 455.15 - 14.0 * z / L + 4.0 * np.cos(th - D(40)) - ends
    web = lambda z: -2500.0 * band(np.asarray(z, float), 0.10, 0.90, 0.01)  # noqa: E731
    conv = ("R", 12.0, 298.15)
    phys = sf.Physics(b, L, k, {"bottom": conv, "top": conv, "side": ("N", web)},
                      "bore", "temperature", dict(nr=12, nz=200), m_cap=8, inner_radius=a)
    lay = layout(b, (0.015, 0.035), 16, 0.25, 0.75, start=5.0)
    zones = ([ring("drive end", (0.0, 0.1)), ring("tender end", (0.9, 1.0)), ring("middle half", (0.25, 0.75))]
             + quads((0.25, 0.75)))
    return _hollow_build("roll_unseen_ends", roll_unseen_ends.__doc__, t, phys, lay, zones,
                     seed=seed, scale=scale, sigma=0.1)


# ------------------------------------------------------------------ 4 short thick ring
def short_ring_flux(seed=0, scale=1.0):
    """Short thick ring (bearing housing: bore 100 mm, OD 240 mm, wall 70 mm, height 40 mm <
    wall).  Unknown bore heat flux from a rubbing bushing (into the part): 11 kW/m^2 all round,
    +14 kW/m^2 in the load zone around theta = 270 deg (~+-45 deg), weaker toward both faces.
    Outer wall fan-cooled (h = 40 to 27 degC), bottom bolted to the frame (h = 200 to 32 degC),
    top h = 15 to 27 degC.  14 thermocouples drilled radially 20 and 45 mm deep at z = 12 / 28 mm;
    TC05 reads 6 K high."""
    a, b, L, k = 0.050, 0.120, 0.040, 36.0  # ductile iron ~36 W/(m K) (from memory)

    def q(th, z):
        return ((11000.0 + 14000.0 * sector(th, D(270), D(45), 0.15))
                * (1.0 - 0.3 * ((np.asarray(z, float) - 0.02) / 0.02) ** 2))
    phys = sf.Physics(b, L, k, {"bottom": ("R", 200.0, 305.15), "top": ("R", 15.0, 300.15),
                                "side": ("R", 40.0, 300.15)},
                      "bore", "flux", dict(nr=40, nz=24), m_cap=16, inner_radius=a)
    zs = [0.012 if (i // 2) % 2 == 0 else 0.028 for i in range(14)]
    lay = layout(b, (0.020, 0.045), 14, 0, 0, turn=360.0 / 14 * 5, start=8.0, zs=zs)
    zones = [WallZone("load zone", "bore", (D(225), D(315)), z=(0.0, L)),
             WallZone("unloaded side", "bore", (D(45), D(135)), z=(0.0, L))] + quads((0.0, L), start=0.0)
    return _hollow_build("short_ring_flux", short_ring_flux.__doc__, q, phys, lay, zones,
                     seed=seed, scale=scale, sigma=0.1, broken=("TC05",))


# ------------------------------------------------------------------ 5 tube with a hot spot
def tube_hot_spot(seed=0, scale=1.0):
    """Nickel-alloy tube (bore 60 mm, OD 90 mm, 450 mm) in a cross-flow of air (known outer
    convection h = 60 to 27 degC), ends h = 20 to 27 degC.  Unknown bore temperature ~700 K
    falling 30 K along the tube, with a sharp hot spot (+45 K) at z = 200..260 mm and
    theta = 37..77 deg (edges ~6 mm and ~3 deg): a local deposit burning off.  18
    thermocouples 5 and 10 mm deep (wall 15 mm)."""
    a, b, L, k = 0.030, 0.045, 0.45, 15.0  # nickel alloy ~15 W/(m K) (from memory)

    def t(th, z):
        return 700.0 - 30.0 * z / L + 45.0 * band(z, 0.20, 0.26, 0.006) * sector(th, D(57), D(20), 0.05)
    conv = ("R", 20.0, 300.15)
    phys = sf.Physics(b, L, k, {"bottom": conv, "top": conv, "side": ("R", 60.0, 300.15)},
                      "bore", "temperature", dict(nr=12, nz=300), m_cap=40, inner_radius=a)
    lay = layout(b, (0.005, 0.010), 18, 0.02, 0.43, start=20.0)
    zones = ([WallZone("hot sector band", "bore", (D(0), D(120)), z=(0.15, 0.30)),
              ring("band 150-300 mm", (0.15, 0.30))] + quads((0.0, L)))
    return _hollow_build("tube_hot_spot", tube_hot_spot.__doc__, t, phys, lay, zones,
                     seed=seed, scale=scale, sigma=0.1)


SOLID = (hotplate_disc, vessel_hotspot, copper_billet, lamp_spot, quadrant_chuck, uniform_bath)
HOLLOW = (thin_pipe_stratified, extruder_barrel_flux, roll_unseen_ends, short_ring_flux, tube_hot_spot)
SCENARIOS = {f.__name__: f for f in SOLID + HOLLOW}
NAMES = tuple(SCENARIOS)


def make(name, seed=0, scale=1.0):
    """Scenario `name` of this set with noise seed `seed`; scale multiplies the FEM cell counts."""
    if name not in SCENARIOS:
        raise KeyError(f"unknown scenario {name!r} of the second set; known: {', '.join(NAMES)}")
    return SCENARIOS[name](seed=seed, scale=scale)


def fem_of(name):
    """(truth, physics, sensor positions, solve(name, truth, phys, pos, scale, level=)) of a
    scenario of this set built in this process (the solid and hollow builders keep them apart)."""
    if name in {f.__name__ for f in HOLLOW}:
        return (*sh._PHYSICS[name], sh._fem)
    return (*sc._PHYSICS[name], sc.fem_readings)


def mesh_check(name, scale=1.0):
    """As scenario_cases.mesh_check: the largest change of a noise-free reading [K] with twice
    the cells and 1.5x the harmonics, the smallest sensor sigma [K] and both levels' facts."""
    scn = make(name, scale=scale)
    truth, phys, pos, solve = fem_of(name)
    return sf.two_levels(lambda level: solve(name, truth, phys, pos, scale, level=level), scn.readings.sigma.min())
