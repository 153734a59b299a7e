"""The independent scenario suite: realistic heater patterns, readings from finite elements.

Each scenario function returns a Scenario: the case for heatsight.inverse.fit (cylinder,
faces, zones), the sensor readings (scikit-fem readings through tests/scenario_fem.py plus
seeded noise, deliberate faults and, where declared, thermocouple offsets), the TRUE
unknown-face profile as a function on the face, the true total power and zone means, and
which sensors are broken.  The truths are heater patterns of our own (ring and band
heaters with smooth or sharp edges, weak sectors, cos(theta) tilts), NOT draws from any
prior, and the fit's basis never makes a reading (no inverse crime).  All numbers are
invented for these scenarios; material conductivities are typical values (from memory).

    make(name, seed=0, scale=1.0)   one scenario; scale < 1 gives cheaper FEM meshes
    NAMES                           all scenario names, in table order
"""

from __future__ import annotations

import math
import types
import zlib
from dataclasses import dataclass, field, replace

import numpy as np

import heatsight.forward as fw
from heatsight import inverse
from heatsight.data_io.case import Zone
from heatsight.data_io.tables import offset_sd

import scenario_fem as sf
from scenario_fem import band, sector, step  # noqa: F401  (the heater shapes)

TWO_PI = 2.0 * math.pi
BROKEN_OFFSET = 6.0  # K, a poor junction reading high (invented)
#: layouts that do not resolve the face (no sharpness goal): one sector seen; offsets as
#: large as the signal
UNRESOLVED = frozenset({"sparse_sector", "chuck_class2"})


# ------------------------------------------------------------------ the scenario object
@dataclass
class Scenario:
    """A case, its readings and its truth (SI units, radians)."""

    name: str
    story: str
    case: object
    readings: inverse.SensorReadings
    truth: object               # f(u, v) on the unknown face: (r, theta) ends, (theta, z) side
    face: str
    power: float                # true heat into the part through the unknown face [W]
    zone_means: dict            # zone name -> true area average on the face
    broken: tuple = ()
    fit_kwargs: dict = field(default_factory=dict)
    rms_goal: float = 0.5       # relative RMS error goal (issue 9)
    resolves: bool = True       # does the layout resolve the face (sharpness goal applies)?
    fem: dict = field(default_factory=dict)

    def truth_on(self, grid):
        """Truth at the rows of a FitResult.grid (columns r_m, theta_rad, z_m)."""
        u, v = sf.face_coords(self.face, grid["r_m"].to_numpy(), grid["theta_rad"].to_numpy(),
                              grid["z_m"].to_numpy())
        return np.asarray(self.truth(u, v), float)


def _forward_faces(phys, overrides):
    out = {}
    for face, spec in phys.known.items():
        if spec[0] == "D":
            out[face] = fw.Temperature(spec[1])
        elif spec[0] == "N":
            out[face] = fw.Insulated() if spec[1] == 0 else fw.Flux(spec[1])
        else:
            out[face] = fw.Convection(spec[1], spec[2])
    out[phys.unknown] = fw.UnknownTemperature() if phys.kind == "temperature" else fw.UnknownFlux()
    out.update(overrides)
    return out


_FEM_CACHE: dict = {}
_PHYSICS: dict = {}   # name -> (truth, physics, sensor positions) of the last scenario built


def fem_readings(name, truth, phys, pos, scale=1.0, level=1):
    """Noise-free FEM readings of a scenario, computed once per (name, scale, level)."""
    key = (name, scale, level)
    if key not in _FEM_CACHE:
        _FEM_CACHE[key] = sf.solve(truth, phys, *pos, level=level, scale=scale)
    return _FEM_CACHE[key]


def _build(name, story, truth, phys, layout, *, seed, scale, sigma, zones=(), broken=(),
           tc_class=None, fit_kwargs=None, fit_faces=None, rms_goal=0.5):
    """Assemble a Scenario: FEM readings + seeded noise (+ class offsets, + faults)."""
    names = [f"TC{i + 1:02d}" for i in range(len(layout))]
    lay = np.asarray(layout, float)
    r, theta, z = lay[:, 0], np.radians(lay[:, 1]), lay[:, 2]
    fem = fem_readings(name, truth, phys, (r, theta, z), scale)
    _PHYSICS[name] = (truth, phys, (r, theta, z))
    rng = np.random.default_rng([zlib.crc32(name.encode()), seed])
    sig = np.full(r.size, float(sigma))
    T = fem.temperature + sig * rng.standard_normal(r.size)
    off_sd = np.zeros(r.size)
    if tc_class is not None:
        # IEC 60584-1 class tolerance (heatsight.data_io.thermocouples, from memory) declared
        # through the layout's type/class columns; the true offset of each sensor is drawn once,
        # uniform in +-tolerance, and ADDED to its reading
        import pandas as pd
        frame = pd.DataFrame({"type": tc_class[0], "class": tc_class[1]}, index=names)
        off_sd, _ = offset_sd(frame, T)
        tol = off_sd * math.sqrt(3.0)   # standard uncertainty = tol / sqrt(3) (GUM 4.3.7)
        T = T + rng.uniform(-1.0, 1.0, r.size) * tol
    for b in broken:
        T[names.index(b)] += BROKEN_OFFSET
    rd = inverse.SensorReadings(names, r, theta, z, T, sig, off_sd, 0.0)
    cyl = fw.Cylinder(phys.radius, phys.height, phys.conductivity)
    case = types.SimpleNamespace(cylinder=cyl, faces=_forward_faces(phys, fit_faces or {}),
                                 zones=list(zones), fit=types.SimpleNamespace())
    span_h = phys.fem_height if math.isinf(phys.height) else phys.height
    if phys.kind == "flux":
        mean, area = sf.face_average(truth, phys.unknown, phys.radius, span_h)
        power = mean * area
    else:
        power = fem.heat_in
    zmeans = {zn.name: sf.face_average(truth, phys.unknown, phys.radius, span_h, zn.contains)[0]
              for zn in zones}
    facts = dict(fem.facts, mesh_grade=phys.mesh.get("grade"), fem_heat_in=fem.heat_in)
    return Scenario(name, story, case, rd, truth, phys.unknown, float(power), zmeans,
                    tuple(broken), dict(fit_kwargs or {}), rms_goal, name not in UNRESOLVED, facts)


def _circle(radius, z, n, start=0.0):
    """n sensors equally spaced on a circle of radius [m] at height z [m] (above the bottom face), first at `start` deg."""
    return [(radius, start + 360.0 * i / n, z) for i in range(n)]


def _quadrant_zones(face, name, r=None, z=None, start=0.0):
    out = []
    for i in range(4):
        lo = math.radians(start + 90 * i)
        out.append(Zone(f"{name} {int(start + 90 * i)}-{int(start + 90 * (i + 1))}", face,
                        (lo, lo + math.pi / 2), r=r, z=z))
    return out


# ------------------------------------------------------------------ the scenarios
def platen_flux(seed=0, scale=1.0):
    """Unknown bottom heat flux of a stainless platen: two ring heaters (smooth edges) with a
    cos(theta) tilt; convection-cooled top, insulated rim; one sensor reads 6 K high.  The
    outer zones are declared to the rim, 10 mm past the heater."""
    a, L, k = 0.15, 0.04, 16.0     # stainless steel ~16 W/(m K) (from memory)

    def q(r, th):
        rings = 3000.0 + 9000.0 * band(r, 0.0, 0.06, 0.004) + 11000.0 * band(r, 0.08, 0.14, 0.004)
        return rings * (1.0 + 0.06 * (r / a) * np.cos(th - 0.7))
    phys = sf.Physics(a, L, k, {"top": ("R", 250.0, 313.15), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=90, nz=24, grade={"bottom": 3.0}), m_cap=8)
    layout = (_circle(0.125, 0.005, 8) + _circle(0.07, 0.005, 4, 20) + [(0.0, 0.0, 0.005)]
              + _circle(0.10, 0.012, 4, 65) + [(0.04, 100, 0.025), (0.09, 220, 0.025), (0.13, 340, 0.025)])
    return _build("platen_flux", platen_flux.__doc__, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.15, zones=_platen_zones(0.15), broken=("TC18",))


def _platen_zones(outer_end):
    return [Zone("inner", "bottom", (0.0, TWO_PI), r=(0.0, 0.06)),
            Zone("outer 0-180", "bottom", (0.0, math.pi), r=(0.08, outer_end)),
            Zone("outer 180-360", "bottom", (math.pi, TWO_PI), r=(0.08, outer_end))]


def platen_heater_zones(seed=0, scale=1.0):
    """The platen's readings with its zones declared as the heaters themselves (inner 0-60
    mm, outer 80-140 mm in two halves), as an engineer who knows the heater drawing would:
    the zone model then leads, and the heaters' edges (tanh, about 9 mm from 10 to 90 %) are
    softer than a sharp step."""
    scn = platen_flux(seed=seed, scale=scale)
    truth, phys, pos = _PHYSICS["platen_heater_zones"] = _PHYSICS["platen_flux"]
    zones = _platen_zones(0.14)
    case = types.SimpleNamespace(**{**vars(scn.case), "zones": zones})
    zmeans = {zn.name: sf.face_average(truth, phys.unknown, phys.radius, phys.height, zn.contains)[0]
              for zn in zones}
    return replace(scn, name="platen_heater_zones", story=platen_heater_zones.__doc__, case=case,
                   zone_means=zmeans)


def top_temperature(seed=0, scale=1.0):
    """Unknown top temperature of a steel die standing on a hot plate (bottom held at 473 K):
    cooler rim, a warm contact ring and a tilt; side cooled by natural convection."""
    a, L, k = 0.08, 0.05, 45.0     # carbon steel ~45 W/(m K) (from memory)

    def t(r, th):
        rho = r / a
        return 440.0 - 25.0 * rho ** 2 + 8.0 * np.exp(-((rho - 0.5) / 0.12) ** 2) \
            + 6.0 * rho * np.cos(th - 2.1)
    phys = sf.Physics(a, L, k, {"bottom": ("D", 473.15), "side": ("R", 15.0, 298.15)}, "top",
                      "temperature", dict(nr=60, nz=40, grade={"top": 3.0}), m_cap=6)
    layout = (_circle(0.06, L - 0.004, 6, 10) + _circle(0.03, L - 0.004, 4, 55) + [(0.0, 0.0, L - 0.004)]
              + _circle(0.05, L - 0.010, 3, 100) + [(0.02, 30, L - 0.020), (0.07, 250, L - 0.020)])
    zones = [Zone("centre", "top", (0.0, TWO_PI), r=(0.0, 0.03)),
             Zone("contact ring", "top", (0.0, TWO_PI), r=(0.03, 0.05))] + \
        _quadrant_zones("top", "rim", r=(0.06, 0.08))
    return _build("top_temperature", top_temperature.__doc__, t, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones)


def wall_temperature(seed=0, scale=1.0):
    """Unknown side-wall temperature of a tool-steel die with both ends held at 330 K: a band
    heater around mid-height with a 25 %-weak sector (smooth edges); one sensor reads 6 K high."""
    a, L, k = 0.06, 0.15, 25.0     # tool steel ~25 W/(m K) (from memory)

    def t(th, z):
        return 330.0 + 90.0 * band(z, 0.04, 0.11, 0.006) * (1.0 - 0.25 * sector(th, math.radians(200), math.radians(40), 0.15))
    phys = sf.Physics(a, L, k, {"bottom": ("D", 330.0), "top": ("D", 330.0)}, "side", "temperature",
                      dict(nr=36, nz=90), m_cap=30)
    rng = np.random.default_rng(11)
    layout = [(a - d, ang, zz) for d, ang, zz in zip(rng.choice([0.005, 0.010, 0.015], 20),
                                                     (np.arange(20) * 137.5) % 360, np.linspace(0.02, 0.13, 20))]
    zones = _quadrant_zones("side", "band", z=(0.04, 0.11)) + \
        [Zone("lower end", "side", (0.0, TWO_PI), z=(0.0, 0.03))]
    return _build("wall_temperature", wall_temperature.__doc__, t, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones, broken=("TC07",))


def side_flux(seed=0, scale=1.0):
    """Unknown side heat flux of a steel bar clamped on a 300 K cooled plate, convection on top:
    a band heater (8 kW/m^2) with a 30 %-weak sector, mild loss elsewhere on the wall."""
    a, L, k = 0.05, 0.12, 50.0     # mild steel ~50 W/(m K) (from memory)

    def q(th, z):
        return 8000.0 * band(z, 0.05, 0.10, 0.004) * (1.0 - 0.3 * sector(th, math.radians(60), math.radians(45), 0.12)) - 150.0
    phys = sf.Physics(a, L, k, {"bottom": ("D", 300.0), "top": ("R", 20.0, 298.15)}, "side", "flux",
                      dict(nr=30, nz=80), m_cap=14)
    layout = [(a - d, ang, zz) for d, ang, zz in zip([0.004, 0.008, 0.012, 0.006] * 5,
                                                     (np.arange(20) * 97.0) % 360, np.linspace(0.015, 0.115, 20))]
    zones = _quadrant_zones("side", "band", z=(0.05, 0.10))
    return _build("side_flux", side_flux.__doc__, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones)


def semi_infinite(seed=0, scale=1.0):
    """Unknown bottom heat flux into a long stainless bar (semi-infinite) cooled along its side:
    a ring heater around a weaker centre, tilted by cos(theta)."""
    a, k = 0.04, 15.0

    def q(r, th):
        return (5000.0 + 15000.0 * band(r, 0.015, 0.035, 0.002)) * (1.0 + 0.1 * (r / a) * np.cos(th))
    conv = ("R", 30.0, 298.15)
    phys = sf.Physics(a, math.inf, k, {"side": conv}, "bottom", "flux",
                      dict(nr=40, nz=120, grade={"bottom": 60.0}), m_cap=6, fem_height=1.0, fem_far=conv)
    layout = (_circle(0.030, 0.004, 6) + _circle(0.012, 0.004, 3, 30) + [(0.0, 0.0, 0.004)]
              + _circle(0.025, 0.012, 4, 45) + [(0.02, 100, 0.03), (0.02, 280, 0.06)])
    zones = [Zone("centre", "bottom", (0.0, TWO_PI), r=(0.0, 0.012)),
             Zone("ring", "bottom", (0.0, TWO_PI), r=(0.017, 0.033))]
    return _build("semi_infinite", semi_infinite.__doc__, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones)


def sparse_sector(seed=0, scale=1.0):
    """Unknown bottom flux of a platen seen by 10 sensors all inside one 80-degree sector:
    a ring heater with a 35 %-weak sector on the far side."""
    a, L, k = 0.15, 0.04, 16.0

    def q(r, th):
        ring = 2000.0 + 10000.0 * band(r, 0.03, 0.13, 0.005)
        return ring * (1.0 - 0.35 * band(r, 0.03, 0.13, 0.005) * sector(th, math.radians(200), math.radians(35), 0.1))
    phys = sf.Physics(a, L, k, {"top": ("R", 250.0, 313.15), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=90, nz=24, grade={"bottom": 3.0}), m_cap=14)
    layout = [(rr, ang, zz) for rr, ang, zz in zip([0.02, 0.05, 0.08, 0.11, 0.135] * 2,
                                                   [5, 25, 45, 65, 80, 15, 35, 55, 75, 0],
                                                   [0.005] * 5 + [0.012] * 5)]
    zones = [Zone("seen sector", "bottom", (0.0, math.radians(80)), r=(0.03, 0.13)),
             Zone("ring", "bottom", (0.0, TWO_PI), r=(0.03, 0.13))]
    return _build("sparse_sector", sparse_sector.__doc__, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.15, zones=zones, rms_goal=0.8)


def chuck_class2(seed=0, scale=1.0):
    """Unknown bottom flux of an aluminium chuck: one heater ring whose 90-degree sector runs
    30 % weak; 12 type K class 2 thermocouples whose offsets (+-2.5 K) are as large as the
    spread of the readings, declared through their class."""
    return _chuck("chuck_class2", chuck_class2.__doc__, ("K", "2"), seed, scale)


def chuck_calibrated(seed=0, scale=1.0):
    """The same chuck with its thermocouples calibrated in place (no offsets, noise 0.1 K): the
    heater ends at 140 mm, 10 mm short of the rim, and no sensor lies beyond 110 mm."""
    return _chuck("chuck_calibrated", chuck_calibrated.__doc__, None, seed, scale)


def _chuck(name, story, tc_class, seed, scale):
    a, L, k = 0.15, 0.025, 170.0    # aluminium alloy ~170 W/(m K) (from memory)

    def q(r, th):
        return 5000.0 * band(r, 0.0, 0.14, 0.004) * (1.0 - 0.3 * sector(th, math.radians(135), math.radians(45), 0.08))
    phys = sf.Physics(a, L, k, {"top": ("R", 300.0, 300.0), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=90, nz=16, grade={"bottom": 2.0}), m_cap=16)
    layout = _circle(0.11, 0.010, 8, 22.5) + _circle(0.05, 0.010, 4, 0)
    zones = _quadrant_zones("bottom", "heater", r=(0.0, 0.14), start=0.0)
    return _build(name, story, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones, tc_class=tc_class)


def calibrated_convection(seed=0, scale=1.0):
    """Unknown bottom flux of a stainless plate whose top convection coefficient is calibrated
    by the fit: nominal 46, true 60 W/(m^2 K); a central heater with a smooth shoulder and tilt."""
    a, L, k = 0.10, 0.05, 16.0

    def q(r, th):
        return (1500.0 + 2500.0 * band(r, 0.0, 0.07, 0.008)) * (1.0 + 0.08 * (r / a) * np.cos(th - 1.2))
    phys = sf.Physics(a, L, k, {"top": ("R", 60.0, 298.15), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=60, nz=30, grade={"bottom": 2.0}), m_cap=6)
    layout = (_circle(0.08, 0.005, 5) + _circle(0.035, 0.005, 3, 40) + [(0.0, 0.0, 0.005)]
              + _circle(0.06, 0.025, 4, 20) + _circle(0.05, 0.045, 4, 65) + [(0.0, 0.0, 0.045), (0.09, 300, 0.045)])
    zones = [Zone("centre", "bottom", (0.0, TWO_PI), r=(0.0, 0.06)),
             Zone("edge", "bottom", (0.0, TWO_PI), r=(0.08, 0.10))]
    return _build("calibrated_convection", calibrated_convection.__doc__, q, phys, layout, seed=seed,
                  scale=scale, sigma=0.1, zones=zones, fit_faces={"top": fw.Convection(46.0, 298.15)},
                  fit_kwargs={"calibrate": {("top", "h"): None}})


def three_rings(seed=0, scale=1.0):
    """Unknown bottom flux of a platen with three sharp ring heaters; the middle ring is made
    of four 90-degree segments, one of them (90-180 deg) delivering 60 %; 28 sensors."""
    a, L, k = 0.15, 0.04, 16.0
    rings = [(0.0, 0.045), (0.055, 0.095), (0.105, 0.145)]

    def q(r, th):
        w = 0.0005
        inner = band(r, *rings[0], w)
        middle = band(r, *rings[1], w) * (1.0 - 0.4 * sector(th, 0.75 * math.pi, 0.25 * math.pi, 0.01))
        outer = band(r, *rings[2], w)
        return 1500.0 + 11000.0 * (inner + middle + outer)
    phys = sf.Physics(a, L, k, {"top": ("R", 250.0, 313.15), "side": ("N", 0.0)}, "bottom", "flux",
                      dict(nr=150, nz=24, grade={"bottom": 3.0}), m_cap=32)
    layout = (_circle(0.125, 0.005, 10, 10) + _circle(0.075, 0.005, 8, 25) + _circle(0.025, 0.005, 3, 60)
              + [(0.0, 0.0, 0.005)] + _circle(0.10, 0.012, 4, 70) + _circle(0.05, 0.025, 2, 160))
    zones = ([Zone("inner", "bottom", (0.0, TWO_PI), r=rings[0])]
             + _quadrant_zones("bottom", "middle", r=rings[1])
             + [Zone("outer", "bottom", (0.0, TWO_PI), r=rings[2])])
    return _build("three_rings", three_rings.__doc__, q, phys, layout, seed=seed, scale=scale,
                  sigma=0.15, zones=zones)


def three_rings_zones(seed=0, scale=1.0):
    """The three-ring platen fitted with the heater-zone model (`[fit] model = "zones"`): the
    engineer declares the heaters as zones, which is what the zone model is for."""
    scn = three_rings(seed=seed, scale=scale)
    _PHYSICS["three_rings_zones"] = _PHYSICS["three_rings"]
    return replace(scn, name="three_rings_zones", story=three_rings_zones.__doc__,
                   fit_kwargs={**scn.fit_kwargs, "model": "zones"})


def wall_cooled_end(seed=0, scale=1.0):
    """Unknown side-wall temperature of a steel die heated by a band heater, standing on a
    water-cooled base (bottom convection h = 1500 W/(m^2 K)), insulated top; 20 thermocouples in
    holes drilled from the top."""
    a, L, k = 0.08, 0.12, 25.0

    def t(th, z):
        return 320.0 + 170.0 * step(z - 0.035, 0.012) + 10.0 * np.cos(th - 1.0) * step(z - 0.05, 0.02)
    phys = sf.Physics(a, L, k, {"bottom": ("R", 1500.0, 300.0), "top": ("N", 0.0)}, "side", "temperature",
                      dict(nr=40, nz=90, grade={"bottom": 3.0, "side": 4.0}), m_cap=4)
    depths = (0.015, 0.035, 0.060, 0.085, 0.105)   # hole depths below the top [m]
    layout = [((0.05, 0.065, 0.072, 0.075)[i // 5], (i * 47.0) % 360, L - depths[i % 5]) for i in range(20)]
    zones = [Zone("lower wall", "side", (0.0, TWO_PI), z=(0.0, 0.03)),
             Zone("heated wall", "side", (0.0, TWO_PI), z=(0.06, 0.12))]
    return _build("wall_cooled_end", wall_cooled_end.__doc__, t, phys, layout, seed=seed, scale=scale,
                  sigma=0.1, zones=zones)


# ------------------------------------------------------------------ hollow parts (issue 11)
def _hollow_condition(words):
    """A forward face condition from scenario_hollow's case-file words."""
    kind = words[0]
    if kind == "temperature":
        return fw.Temperature(words[1])
    if kind == "flux":
        return fw.Flux(words[1])
    if kind == "insulated":
        return fw.Insulated()
    if kind == "convection":
        return fw.Convection(words[1], words[2])
    return fw.UnknownTemperature() if kind == "unknown-temperature" else fw.UnknownFlux()


def from_hollow(hs) -> Scenario:
    """A Scenario of heatsight objects from a tests/scenario_hollow.HollowScenario (which,
    like the FEM, imports nothing of heatsight)."""
    c = hs.case.cylinder
    cyl = fw.Cylinder(c.radius, c.height, c.conductivity, inner_radius=c.inner_radius)
    faces = {face: _hollow_condition(words) for face, words in hs.case.faces.items()}
    zones = [Zone(z.name, z.face, tuple(z.theta), z=tuple(z.z)) for z in hs.case.zones]
    case = types.SimpleNamespace(cylinder=cyl, faces=faces, zones=zones)
    rd = hs.readings
    readings = inverse.SensorReadings(list(rd.names), rd.r, rd.theta, rd.z, rd.temperature, rd.sigma,
                                      rd.offset_sd, rd.position_tolerance)
    return Scenario(hs.name, hs.story, case, readings, hs.truth, hs.face, hs.power, hs.zone_means,
                    hs.broken, dict(hs.fit_kwargs), hs.rms_goal, hs.resolves, hs.fem)


def _hollow(name):
    def make_hollow(seed=0, scale=1.0):
        import scenario_hollow

        return from_hollow(scenario_hollow.make(name, seed=seed, scale=scale))
    make_hollow.__name__ = name
    return make_hollow


# ------------------------------------------------------------------ the bundled tube demo
_TUBE_DEMO: dict = {}


def _tube_demo_fem(fine=False):
    """The tube demo's FEM solution (demo_data/generate_tube_demo.py: scikit-fem, a
    fixed point over the fouled bore's coupled harmonics), once per process; fine: twice the
    cells and harmonics up to 24 (its own convergence check)."""
    from heatsight.demo_data import generate_tube_demo as gen

    if fine not in _TUBE_DEMO:
        _TUBE_DEMO[fine] = gen.solve(nr=24, nz=600, m_max=24)[0] if fine else gen.solve()[0]
    return gen, _TUBE_DEMO[fine]


def tube_demo(seed=0, scale=1.0):
    """The bundled tube demo (demo_data/tube): a steel process tube's bore temperature
    under two band heaters, fouled around 200 deg, the liquid entering at the bottom at
    190 degC; four stations of five thermocouples at z = 120-480 mm of 600 (none near the
    ends, the stations level with the heaters' edges); TC13 reads 5 K high.  Seed 0 is the
    bundled readings' noise; the FEM's own mesh (scale is not used)."""
    from heatsight.data_io.case import load_case

    gen, sols = _tube_demo_fem()
    demo = load_case(gen.OUT / "tube.toml", purpose="fit")
    layout = gen.sensors()
    names = [x[0] for x in layout]
    r, theta, z = (np.array([x[i] for x in layout], float) for i in (1, 2, 3))
    r, theta, z = r * 1e-3, np.radians(theta), z * 1e-3
    T = gen.field(sols, r, theta, z) + np.random.default_rng(gen.SEED + seed).normal(0.0, gen.SIGMA, r.size)
    T[names.index(gen.BAD_SENSOR)] += gen.BAD_OFFSET
    rd = inverse.SensorReadings(names, r, theta, z, T, gen.SIGMA, 0.0, 0.0)
    case = types.SimpleNamespace(cylinder=demo.cylinder, faces=dict(demo.faces), zones=list(demo.zones),
                                 fit=types.SimpleNamespace())

    def truth(u, v):
        u, v = np.asarray(u, float), np.asarray(v, float)
        angles, ia = np.unique(u, return_inverse=True)
        heights, iz = np.unique(v, return_inverse=True)
        return gen.bore_field(sols, angles, heights)[ia.reshape(u.shape), iz.reshape(v.shape)]
    th, zb, Tb, _ = gen.bore_truth(sols, np.linspace(0.0, gen.L, 1201))
    means = gen.zone_means(th, zb, Tb)
    return Scenario("tube_demo", tube_demo.__doc__, case, rd, truth, "bore",
                    float(sols[(0, "cos")].heat_in("bore")), means, (gen.BAD_SENSOR,), {}, 0.5, True,
                    {"fem": "demo_data/generate_tube_demo.py"})


SCENARIOS = {f.__name__: f for f in (platen_flux, platen_heater_zones, top_temperature, wall_temperature, side_flux,
                                     semi_infinite, sparse_sector, chuck_class2, chuck_calibrated,
                                     calibrated_convection, three_rings, three_rings_zones,
                                     wall_cooled_end, _hollow("tube_bore_temperature"),
                                     _hollow("tube_bore_flux"), _hollow("tube_cooled_end"), tube_demo)}
NAMES = tuple(SCENARIOS)


def make(name, seed=0, scale=1.0) -> Scenario:
    """Scenario `name` (the suite's, or the second set's: scenario_holdout.py) with noise seed
    `seed`; scale multiplies the FEM cell counts."""
    if name not in SCENARIOS:
        import scenario_holdout

        if name in scenario_holdout.SCENARIOS:
            return scenario_holdout.make(name, seed=seed, scale=scale)
        raise KeyError(f"unknown scenario {name!r}; known: {', '.join(NAMES + scenario_holdout.NAMES)}")
    return SCENARIOS[name](seed=seed, scale=scale)


def mesh_check(name, scale=1.0):
    """FEM convergence at the sensors: largest |T(level 2) - T(level 1)| [K] of the noise-free
    readings, level 2 having twice the cells in r and z and 1.5x the harmonics; with the
    smallest sensor sigma [K] and both levels' facts (including the heat in, "fem_heat_in")."""
    import scenario_holdout
    import scenario_hollow

    if name in scenario_hollow.NAMES:
        return scenario_hollow.mesh_check(name, scale)
    if name in scenario_holdout.NAMES:
        return scenario_holdout.mesh_check(name, scale)
    if name == "tube_demo":
        scn = make(name)
        gen, coarse = _tube_demo_fem()
        _, fine = _tube_demo_fem(fine=True)
        rd = scn.readings
        diff = float(np.abs(gen.field(fine, rd.r, rd.theta, rd.z) - gen.field(coarse, rd.r, rd.theta, rd.z)).max())
        facts = [dict(nr=nr, nz=nz, m_max=m, fem_heat_in=sols[(0, "cos")].heat_in("bore"))
                 for (nr, nz, m), sols in (((12, 300, 16), coarse), ((24, 600, 24), fine))]
        return diff, float(rd.sigma.min()), facts[0], facts[1]
    scn = make(name, scale=scale)
    truth, phys, pos = _PHYSICS[name]
    return sf.two_levels(lambda level: fem_readings(name, truth, phys, pos, scale, level=level),
                         scn.readings.sigma.min())
