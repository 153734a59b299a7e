"""Hollow scenarios: a thick-walled steel process tube whose bore is the unknown face.

Same shape as the scenarios of tests/scenario_cases.py (a case, readings from the
independent scikit-fem solver plus seeded noise, the TRUE bore profile as a function on
the face, the true heat into the part through the bore and zone means), but built without
``heatsight`` at all, so that the finite-element reference stays independent of the series
model being fitted (no inverse crime):

    case.cylinder   radius, inner_radius, height [m], conductivity [W/(m K)]
    case.faces      face -> condition in the words of the case file:
                    ('temperature', T [K] | f(s)), ('flux', q_in [W/m^2] | f(theta, z)),
                    ('insulated',), ('convection', h [W/(m^2 K)], T_amb [K]),
                    ('unknown-temperature',) or ('unknown-flux',)
    case.zones      WallZone windows on the bore (fields as heatsight.inverse.Zone)
    readings        Readings with the fields of heatsight.inverse.SensorReadings

The truths are heater and process patterns of our own (a cooler streak, a warmer end, a
weak sector of heat removal), NOT draws from any prior.  All numbers are invented for
these scenarios; the steel conductivity is a typical value (from memory).

    make(name, seed=0, scale=1.0)   one hollow scenario; scale < 1 gives cheaper meshes
    NAMES                           ("tube_bore_temperature", "tube_bore_flux")
    mesh_check(name, scale=1.0)     FEM convergence at the sensors (level 2 vs level 1)
"""

from __future__ import annotations

import math
import types
import zlib
from dataclasses import dataclass, field

import numpy as np

import scenario_fem as sf
from scenario_fem import band, sector, step

TWO_PI = 2.0 * math.pi
BROKEN_OFFSET = 6.0  # K, a poor junction reading high (invented)

# the tube of both scenarios (SI)
B_OUT, A_IN, LENGTH = 0.070, 0.040, 0.400   # outer radius, bore radius, length [m]
K_STEEL = 45.0                              # carbon steel ~45 W/(m K) (from memory)
HEATERS = ((0.060, 0.160), (0.240, 0.340))  # band heaters on the outer wall, z windows [m]
Q_HEATER = 15_000.0                         # W/m^2 delivered by each band (invented)
HEATER_EDGE = 0.003                         # m, smooth edge width of a band
END_LOSS = (10.0, 298.15)                   # flange losses h [W/(m^2 K)], ambient [K]


def heater_flux(z):
    """Heat into the outer wall [W/m^2] from the two band heaters (insulated elsewhere)."""
    z = np.asarray(z, float)
    return sum(Q_HEATER * band(z, lo, hi, HEATER_EDGE) for lo, hi in HEATERS)


# ------------------------------------------------------------------ objects
@dataclass(frozen=True)
class WallZone:
    """A theta/z window on a wall (fields and meaning as heatsight.inverse.Zone; SI)."""

    name: str
    face: str
    theta: tuple
    r: tuple | None = None
    z: tuple | None = None

    def contains(self, u, v):
        """Mask of wall points (theta = u [rad], z = v [m]) inside the window."""
        u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
        start, end = self.theta
        span = end - start
        inside = np.mod(u - start + 1e-12, TWO_PI) <= span + 2e-12 if span < TWO_PI - 1e-12 \
            else np.ones(u.shape, bool)
        return inside & (v >= self.z[0] - 1e-12) & (v <= self.z[1] + 1e-12)


@dataclass
class Readings:
    """Sensor readings with the fields of heatsight.inverse.SensorReadings (SI)."""

    names: list
    r: np.ndarray
    theta: np.ndarray
    z: np.ndarray
    temperature: np.ndarray
    sigma: np.ndarray
    offset_sd: np.ndarray
    position_tolerance: np.ndarray


@dataclass
class HollowScenario:
    """A tube case, its readings and its truth (SI units, radians)."""

    name: str
    story: str
    case: object
    readings: Readings
    truth: object               # f(theta, z) on the bore
    face: str
    power: float                # true heat INTO the part through the bore [W] (< 0: into the fluid)
    zone_means: dict            # zone name -> true area average on the bore
    broken: tuple = ()
    fit_kwargs: dict = field(default_factory=dict)
    rms_goal: float = 0.5
    resolves: bool = True
    fem: dict = field(default_factory=dict)

    def truth_on(self, grid):
        """Truth at the rows of a FitResult.grid (columns r_m, theta_rad, z_m)."""
        return np.asarray(self.truth(grid["theta_rad"].to_numpy(), grid["z_m"].to_numpy()), float)


def _case_faces(phys):
    words = {}
    for face, spec in phys.known.items():
        if spec[0] == "D":
            words[face] = ("temperature", spec[1])
        elif spec[0] == "N":
            if callable(spec[1]):
                words[face] = ("flux", lambda th, z, f=spec[1]: f(np.broadcast_arrays(th, z)[1]))
            else:
                words[face] = ("insulated",) if spec[1] == 0 else ("flux", spec[1])
        else:
            words[face] = ("convection", spec[1], spec[2])
    words[phys.unknown] = ("unknown-" + phys.kind,)
    return words


_FEM_CACHE: dict = {}
_PHYSICS: dict = {}


def _fem(name, truth, phys, pos, scale, level=1):
    key = (name, scale, level)
    if key not in _FEM_CACHE:
        _FEM_CACHE[key] = sf.solve(truth, phys, *pos, level=level, scale=scale)
    return _FEM_CACHE[key]


def _build(name, story, truth, phys, layout, zones, *, seed, scale, sigma, broken=()):
    names = [f"TC{i + 1:02d}" for i in range(len(layout))]
    lay = np.asarray(layout, float)
    r, theta, z = lay[:, 0], np.radians(lay[:, 1]), lay[:, 2]
    fem = _fem(name, truth, phys, (r, theta, z), scale)
    _PHYSICS[name] = (truth, phys, (r, theta, z))
    rng = np.random.default_rng([zlib.crc32(name.encode()), seed])
    sig = np.full(r.size, float(sigma))
    T = fem.temperature + sig * rng.standard_normal(r.size)
    for b in broken:
        T[names.index(b)] += BROKEN_OFFSET
    zero = np.zeros(r.size)
    rd = Readings(names, r, theta, z, T, sig, zero, zero.copy())
    cyl = types.SimpleNamespace(radius=phys.radius, inner_radius=phys.inner_radius,
                                height=phys.height, conductivity=phys.conductivity)
    case = types.SimpleNamespace(cylinder=cyl, faces=_case_faces(phys), zones=list(zones),
                                 fit=types.SimpleNamespace())
    if phys.kind == "flux":
        mean, area = sf.face_average(truth, "bore", phys.radius, phys.height,
                                     inner_radius=phys.inner_radius)
        power = mean * area
    else:
        power = fem.heat_in
    zmeans = {zn.name: sf.face_average(truth, "bore", phys.radius, phys.height, zn.contains,
                                       inner_radius=phys.inner_radius)[0] for zn in zones}
    facts = dict(fem.facts, mesh_grade=phys.mesh.get("grade"), fem_heat_in=fem.heat_in)
    return HollowScenario(name, story, case, rd, truth, "bore", float(power), zmeans,
                          tuple(broken), {}, 0.5, True, facts)


def _layout(depths, n, z_lo, z_hi, turn=137.5, start=10.0):
    """n thermocouples drilled radially from the outer wall, alternating the given depths
    [m], spread along z in [z_lo, z_hi] [m] and around by a golden-angle-like turn [deg]."""
    zs = np.linspace(z_lo, z_hi, n)
    return [(B_OUT - depths[i % len(depths)], (start + turn * i) % 360.0, float(zs[i]))
            for i in range(n)]


def _quadrants(z):
    return [WallZone(f"bore {90 * i}-{90 * (i + 1)} deg", "bore",
                     (math.radians(90 * i), math.radians(90 * (i + 1))), z=z) for i in range(4)]


# ------------------------------------------------------------------ the scenarios
def tube_bore_temperature(seed=0, scale=1.0):
    """Unknown bore temperature of a thick-walled steel process tube (bore 80 mm, wall 30 mm,
    400 mm long) heated by two band heaters (15 kW/m^2, insulated between them), flanges
    losing heat by weak convection: the bore runs warmer toward the top end, with a cooler
    streak along one side (theta ~ 250 deg) where a cold return stream hugs the wall; 20
    thermocouples 10 and 20 mm deep; TC07 reads 6 K high."""
    def t(th, z):
        return (463.15 + 14.0 * step(z - 0.30, 0.03)
                - 9.0 * sector(th, math.radians(250), math.radians(30), 0.2) * band(z, 0.05, 0.33, 0.02))
    end = ("R",) + END_LOSS
    phys = sf.Physics(B_OUT, LENGTH, K_STEEL, {"bottom": end, "top": end, "side": ("N", heater_flux)},
                      "bore", "temperature", dict(nr=16, nz=120), m_cap=20, inner_radius=A_IN)
    layout = _layout((0.010, 0.020), 20, 0.02, 0.38)
    zones = ([WallZone("cool streak", "bore", (math.radians(220), math.radians(280)), z=(0.05, 0.33)),
              WallZone("warm end", "bore", (0.0, TWO_PI), z=(0.32, 0.40))]
             + _quadrants((0.0, 0.30)))
    return _build("tube_bore_temperature", tube_bore_temperature.__doc__, t, phys, layout, zones,
                  seed=seed, scale=scale, sigma=0.1, broken=("TC07",))


def tube_bore_flux(seed=0, scale=1.0):
    """Unknown bore heat flux of the same tube (heat INTO the part, negative where the wall
    heats the fluid): removal follows the two heater bands, 35 % weaker on a sector around
    theta = 110 deg (a fouled side); the bottom flange is bolted to a manifold held at
    180 degC, which fixes the temperature level; top flange by weak convection; 20
    thermocouples 10 and 20 mm deep."""
    def q(th, z):
        bands = sum(band(z, lo - 0.02, hi + 0.02, 0.015) for lo, hi in HEATERS)
        return -(4000.0 + 13000.0 * bands) * (1.0 - 0.35 * sector(th, math.radians(110), math.radians(35), 0.15))
    phys = sf.Physics(B_OUT, LENGTH, K_STEEL, {"bottom": ("D", 453.15), "top": ("R",) + END_LOSS,
                                               "side": ("N", heater_flux)},
                      "bore", "flux", dict(nr=16, nz=120), m_cap=20, inner_radius=A_IN)
    layout = _layout((0.010, 0.020), 20, 0.02, 0.38, start=40.0)
    zones = ([WallZone("fouled side", "bore", (math.radians(75), math.radians(145)), z=(0.04, 0.36)),
              WallZone("lower band", "bore", (0.0, TWO_PI), z=HEATERS[0]),
              WallZone("upper band", "bore", (0.0, TWO_PI), z=HEATERS[1])]
             + _quadrants((0.04, 0.36)))
    return _build("tube_bore_flux", tube_bore_flux.__doc__, q, phys, layout, zones,
                  seed=seed, scale=scale, sigma=0.1)


def tube_cooled_end(seed=0, scale=1.0):
    """Unknown bore temperature of the same tube standing on a water-cooled base (bottom
    convection h = 1500 W/(m^2 K) to 27 degC), weak convection at the top flange: the bore
    rises from near the coolant at the bottom to about 200 degC over the heaters, a little
    warmer on one side; 20 thermocouples 10 and 20 mm deep."""
    def t(th, z):
        return (320.0 + 150.0 * step(z - 0.06, 0.03) + 6.0 * np.cos(th - 1.0) * step(z - 0.1, 0.03))
    phys = sf.Physics(B_OUT, LENGTH, K_STEEL, {"bottom": ("R", 1500.0, 300.15), "top": ("R",) + END_LOSS,
                                               "side": ("N", heater_flux)},
                      "bore", "temperature", dict(nr=16, nz=120), m_cap=12,
                      inner_radius=A_IN)
    layout = _layout((0.010, 0.020), 20, 0.01, 0.38, start=25.0)
    zones = ([WallZone("cooled end", "bore", (0.0, TWO_PI), z=(0.0, 0.04)),
              WallZone("heated length", "bore", (0.0, TWO_PI), z=(0.12, 0.40))])
    return _build("tube_cooled_end", tube_cooled_end.__doc__, t, phys, layout, zones,
                  seed=seed, scale=scale, sigma=0.1)


SCENARIOS = {f.__name__: f for f in (tube_bore_temperature, tube_bore_flux, tube_cooled_end)}
NAMES = tuple(SCENARIOS)


def make(name, seed=0, scale=1.0) -> HollowScenario:
    """Hollow scenario `name` with noise seed `seed`; scale multiplies the FEM cell counts."""
    if name not in SCENARIOS:
        raise KeyError(f"unknown hollow scenario {name!r}; known: {', '.join(NAMES)}")
    return SCENARIOS[name](seed=seed, scale=scale)


def mesh_check(name, scale=1.0):
    """Largest |T(level 2) - T(level 1)| [K] of the noise-free readings (twice the cells in r
    and z, 1.5x the harmonics), the smallest sensor sigma [K] and both levels' facts."""
    scn = make(name, scale=scale)
    truth, phys, pos = _PHYSICS[name]
    return sf.two_levels(lambda level: _fem(name, truth, phys, pos, scale, level=level), scn.readings.sigma.min())
