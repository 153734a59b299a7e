"""Finite-element readings for the scenario suite (tests/scenario_cases.py).

A scenario prescribes a TRUE profile f(u, v) on its unknown face (u, v = r, theta on an
end face; theta, z on the side or the bore of a hollow part), in SI units (K for a temperature, W/m^2 into the part for
a heat flux).  The readings come from the independent scikit-fem solver
(tests/fem_cylinder.py), one azimuthal harmonic at a time, as demo_data/generate_demo.py
does:

    f(s, theta) = a_0(s) + sum_m [a_m(s) cos(m theta) + b_m(s) sin(m theta)],
    a_m(s) = (2 / N) sum_j f(s, theta_j) cos(m theta_j)   (trapezoidal rule, N points),

each harmonic solved with the unknown face as a temperature ('D') or flux ('N') face
carrying a_m or b_m, and the known faces homogeneous for m >= 1 (their data are
axisymmetric: numbers, or for m = 0 callables of the face coordinate s).
Harmonics whose amplitude stays below REL_TOL of the truth's range are left out; the sum of
the left-out amplitudes is kept as an upper bound of the truncated face data.

Nothing here uses the fit's Bessel-Fourier basis (no inverse crime).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fem_cylinder import solve_harmonic

N_THETA = 512          # trapezoidal points in theta for the harmonic amplitudes
REL_TOL = 1e-4         # harmonics below this fraction of the truth's range are left out


WALLS = ("side", "bore")


# ------------------------------------------------------------------ heater shapes
def step(x, width):
    """Smooth unit step, 0 -> 1 over about 2 `width` around x = 0 (tanh edge)."""
    return 0.5 * (1.0 + np.tanh(np.asarray(x, float) / width))


def band(s, lo, hi, width):
    """Smooth indicator of lo < s < hi (no lower edge when lo <= 0)."""
    rise = 1.0 if lo <= 0 else step(s - lo, width)
    return rise * step(hi - s, width)


def sector(theta, centre, half, width):
    """Smooth indicator of |theta - centre| < half (angles in rad, periodic)."""
    d = np.abs(np.angle(np.exp(1j * (np.asarray(theta, float) - centre))))
    return step(half - d, width)


def face_coords(face, r, theta, z):
    """Face coordinates (u, v) of points on a face: (r, theta) on the ends, (theta, z) on
    the side and the bore."""
    return (theta, z) if face in WALLS else (r, theta)


@dataclass
class Physics:
    """Geometry, known faces and the unknown face of a scenario, for the FEM solver.

    known: face -> FEM spec of the axisymmetric data: ('D', T [K]) | ('N', q_in [W/m^2]) |
    ('R', h [W/(m^2 K)], T_amb [K]), each value a number or a callable of the face
    coordinate s (r on the ends, z on side and bore).  unknown: face name; kind
    'temperature' | 'flux'.  inner_radius a_i [m] > 0 makes the part a tube whose faces
    include 'bore' (r = a_i).
    A semi-infinite part (height = inf) is solved on fem_height with the far face fem_far.
    mesh: solve_harmonic's nr, nz and grade at level 1; m_cap: highest harmonic solved.
    """

    radius: float
    height: float
    conductivity: float
    known: dict
    unknown: str
    kind: str
    mesh: dict
    m_cap: int = 24
    fem_height: float | None = None
    fem_far: tuple | None = None
    inner_radius: float = 0.0

    @property
    def span(self):
        """Length of the face's non-angular coordinate [m] (measured from 0: the ends of a
        tube use s in [inner_radius, radius])."""
        if self.unknown in WALLS:
            return self.fem_height if math.isinf(self.height) else self.height
        return self.radius


def _values(truth, face, s, theta):
    return truth(theta, s) if face in WALLS else truth(s, theta)


def harmonics(truth, phys: Physics, m_cap: int):
    """[(m, kind)] of the truth above REL_TOL of its range, and the bound of the rest."""
    s0 = 0.0 if phys.unknown in WALLS else phys.inner_radius
    s = np.linspace(s0, phys.span, 241)
    th = 2.0 * np.pi * np.arange(N_THETA) / N_THETA
    F = _values(truth, phys.unknown, s[:, None], th[None, :])
    spec = np.fft.rfft(F, axis=1) / N_THETA
    amp = {(0, "cos"): np.abs(spec[:, 0].real).max()}
    for m in range(1, N_THETA // 2):
        amp[(m, "cos")] = 2 * np.abs(spec[:, m].real).max()
        amp[(m, "sin")] = 2 * np.abs(spec[:, m].imag).max()
    scale = float(np.ptp(F)) or 1.0
    keep = [k for k, a in amp.items() if k[0] <= m_cap and (k[0] == 0 or a > REL_TOL * scale)]
    omitted = float(sum(a for k, a in amp.items() if k not in keep))
    return keep, omitted


def amplitude(truth, face, m, kind):
    """Vectorized s -> amplitude of cos/sin(m theta) of the truth at face coordinate s."""
    th = 2.0 * np.pi * np.arange(N_THETA) / N_THETA
    w = np.cos(m * th) if kind == "cos" else np.sin(m * th)
    w = w * (1.0 if m == 0 else 2.0) / N_THETA

    def amp(s):
        s = np.asarray(s, float)
        return (_values(truth, face, s.reshape(-1, 1), th[None, :]) @ w).reshape(s.shape)
    return amp


def _homogeneous(spec):
    return {"D": ("D", 0.0), "N": ("N", 0.0)}.get(spec[0]) or ("R", spec[1], 0.0)


@dataclass
class FemReadings:
    """Noise-free FEM temperatures [K] at the sensors, heat in through the unknown face [W]
    and the solve's facts (mesh, harmonics, degrees of freedom, left-out face data)."""

    temperature: np.ndarray
    heat_in: float
    facts: dict


def solve(truth, phys: Physics, r, theta, z, level: int = 1, scale: float = 1.0) -> FemReadings:
    """FEM readings at (r, theta, z) [m, rad, m].  level 2 doubles the cells in r and z and
    solves 1.5x the harmonics (the refinement used to show the readings have converged);
    scale multiplies the level-1 cell counts (cheap meshes for the fast tests)."""
    factor = scale * (2.0 if level == 2 else 1.0)
    m_cap = phys.m_cap if level == 1 else int(math.ceil(1.5 * phys.m_cap))
    mesh = dict(phys.mesh)
    mesh["nr"] = max(4, int(round(mesh["nr"] * factor)))
    mesh["nz"] = max(4, int(round(mesh["nz"] * factor)))
    keep, omitted = harmonics(truth, phys, m_cap)
    height = phys.fem_height if math.isinf(phys.height) else phys.height
    known = dict(phys.known)
    if math.isinf(phys.height):
        known["top"] = phys.fem_far
    T = np.zeros(np.shape(r))
    heat = 0.0
    ndofs = 0
    for m, kind in keep:
        faces = {f: (spec if m == 0 else _homogeneous(spec)) for f, spec in known.items()}
        faces[phys.unknown] = ("D" if phys.kind == "temperature" else "N",
                               amplitude(truth, phys.unknown, m, kind))
        sol = solve_harmonic(phys.radius, height, phys.conductivity, m, faces,
                             inner_radius=phys.inner_radius, **mesh)
        ang = np.cos(m * theta) if kind == "cos" else np.sin(m * theta)
        T = T + sol.temperature(r, z) * ang
        ndofs = sol.ndofs
        if m == 0:
            heat = sol.heat_in(phys.unknown)
    facts = {"nr": mesh["nr"], "nz": mesh["nz"], "ndofs": ndofs, "harmonics": len(keep),
             "m_max": max(m for m, _ in keep), "omitted_amplitude": omitted}
    return FemReadings(T, heat, facts)


def two_levels(readings_at, sigma) -> tuple:
    """The mesh check of a scenario: (largest |T(level 2) - T(level 1)| [K] of the noise-free
    readings, sigma [K], level 1's facts, level 2's facts, each with its FEM heat in);
    readings_at(level) -> FemReadings (level 2: twice the cells in r and z, 1.5x the harmonics)."""
    lvl1, lvl2 = readings_at(1), readings_at(2)
    diff = float(np.abs(lvl2.temperature - lvl1.temperature).max())
    return (diff, float(sigma), dict(lvl1.facts, fem_heat_in=lvl1.heat_in),
            dict(lvl2.facts, fem_heat_in=lvl2.heat_in))


def face_average(truth, face, radius, height, mask_fn=None, n=600, inner_radius=0.0):
    """Area average of the truth over the face, or over the part where mask_fn(u, v) holds:
    midpoint rule on n x 2n cells, weight r on end faces (dA = r dr dtheta over
    inner_radius <= r <= radius; a dtheta dz on the side, a_i dtheta dz on the bore).
    Returns (average, area [m^2])."""
    th = 2.0 * np.pi * (np.arange(2 * n) + 0.5) / (2 * n)
    lo, hi = (0.0, height) if face in WALLS else (inner_radius, radius)
    ds = (hi - lo) / n
    s = lo + ds * (np.arange(n) + 0.5)
    S, TH = np.meshgrid(s, th, indexing="ij")
    U, V = (TH, S) if face in WALLS else (S, TH)
    wall_r = inner_radius if face == "bore" else radius
    w = np.full(S.shape, wall_r) if face in WALLS else S.copy()
    if mask_fn is not None:
        w = w * np.asarray(mask_fn(U, V), dtype=bool)
    cell = (2.0 * np.pi / (2 * n)) * ds  # dtheta x ds
    area = float(w.sum()) * cell
    return float((truth(U, V) * w).sum() / w.sum()), area
