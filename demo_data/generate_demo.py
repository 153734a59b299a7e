"""Generate the bundled demo: a heated stainless-steel platen with a weakened heater sector.

Scenario (our own): a 300 mm stainless-steel platen, 40 mm thick, is heated from below by
three concentric heater zones (inner set 8 % higher); the platen's top carries a water-cooled process load,
modelled as convection; its rim is insulated.  The outer zone has a weak sector around
theta = 150 deg (its output down by 45 % at the centre of the sector).  Twenty
thermocouples sit in holes drilled from the top face, 34, 25 and 8 mm deep (depth from the
face drilled from; their tips are 6, 15 and 32 mm above the heater face, the z of
layout.csv), eight of them around the outer zone; TC19, in a shallow hole, has a poor
junction and reads 6 K high.

The readings come from an independent finite-element solution (scikit-fem, P2, through
tests/fem_cylinder.py) of the same conduction problem, harmonic by harmonic, plus seeded
noise -- not from the fit's own Bessel series.  Run:  python demo_data/generate_demo.py
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

A, L, K = 0.150, 0.040, 16.0          # m, m, W/(m K): stainless steel (from memory, ~16)
H_TOP, T_LOAD = 250.0, 273.15 + 40.0  # W/(m^2 K), K
RINGS = [(0.0, 0.050), (0.050, 0.100), (0.100, 0.250)]  # m, heater zones; the outer runs past the rim
Q_ZONE = [13_000.0, 12_000.0, 12_000.0]  # W/m^2 set points of the zones
EDGE = 0.006                          # m, width of the smooth zone transitions
WEAK_DEPTH, WEAK_CENTRE, WEAK_WIDTH = 0.45, 5 * np.pi / 6, 0.45  # fraction, rad, rad (Gaussian sd)
M_MAX = 12
SEED = 20261202
SIGMA = 0.15                          # K, random scatter of each reading
BAD_SENSOR, BAD_OFFSET = "TC19", 6.0  # K

SENSORS = [  # name, r [mm], theta [deg], z [mm] (height above the heater face; hole depth = 40 mm - z)
    ("TC01", 0, 0, 6), ("TC02", 37, 30, 6), ("TC03", 37, 210, 6), ("TC04", 82, 90, 6),
    ("TC05", 82, 270, 6), ("TC06", 127, 0, 6), ("TC07", 127, 45, 6), ("TC08", 127, 90, 6),
    ("TC09", 127, 135, 6), ("TC10", 127, 180, 6), ("TC11", 127, 225, 6), ("TC12", 127, 270, 6),
    ("TC13", 127, 315, 6), ("TC14", 60, 150, 15), ("TC15", 105, 200, 15), ("TC16", 105, 330, 15),
    ("TC17", 140, 110, 15), ("TC18", 50, 0, 32), ("TC19", 110, 120, 32), ("TC20", 110, 240, 32),
]


def _zone(r, lo, hi):
    """Smooth indicator of lo < r < hi (an r = 0 start is no edge)."""
    rise = 1.0 if lo <= 0 else 0.5 * (1 + np.tanh((r - lo) / EDGE))
    return rise * 0.5 * (1 + np.tanh((hi - r) / EDGE))


def ring_profile(r):
    """Radial heater profile [W/m^2]: three adjacent zones with smooth transitions."""
    r = np.asarray(r, float)
    return sum(q * _zone(r, lo, hi) for q, (lo, hi) in zip(Q_ZONE, RINGS))


def outer_ring(r):
    return Q_ZONE[-1] * _zone(np.asarray(r, float), *RINGS[-1])


def weakness(theta):
    """Fractional loss of the outer ring vs theta (periodic Gaussian bump)."""
    d = np.angle(np.exp(1j * (np.asarray(theta, float) - WEAK_CENTRE)))
    return WEAK_DEPTH * np.exp(-0.5 * (d / WEAK_WIDTH) ** 2)


def heat_flux(r, theta):
    """True bottom heat flux into the platen [W/m^2]."""
    return ring_profile(r) - outer_ring(r) * weakness(theta)


def weakness_harmonics():
    """a_m, b_m of weakness(theta) = sum a_m cos(m theta) + b_m sin(m theta)."""
    n = 256
    th = 2 * np.pi * np.arange(n) / n
    spec = np.fft.rfft(weakness(th)) / n
    a = 2 * spec.real[: M_MAX + 1]
    b = -2 * spec.imag[: M_MAX + 1]
    a[0] *= 0.5
    return a, b


def solve():
    # The independent FEM solver lives beside the tests; this script runs from a checkout.
    sys.path.insert(0, str(HERE.parent / "tests"))
    from fem_cylinder import solve_harmonic
    a_m, b_m = weakness_harmonics()
    top = ("R", H_TOP, T_LOAD)
    side = ("N", 0.0)
    mesh = dict(nr=90, nz=30, grade={"bottom": 3.0})
    sols = []
    q0 = lambda r: ring_profile(r) - a_m[0] * outer_ring(r)  # noqa: E731
    sols.append((0, "cos", 1.0, solve_harmonic(A, L, K, 0, {"bottom": ("N", q0), "top": top, "side": side}, **mesh)))
    for m in range(1, M_MAX + 1):
        for kind, coef in (("cos", a_m[m]), ("sin", b_m[m])):
            if abs(coef) < 1e-6:
                continue
            faces = {"bottom": ("N", lambda r, c=coef: -c * outer_ring(r)), "top": ("R", H_TOP, 0.0),
                     "side": side}
            sols.append((m, kind, 1.0, solve_harmonic(A, L, K, m, faces, **mesh)))
    return sols


def field(sols, r, theta, z):
    T = np.zeros(np.broadcast(r, theta, z).shape)
    for m, kind, _, s in sols:
        ang = np.cos(m * theta) if kind == "cos" else np.sin(m * theta)
        T = T + s.temperature(r, z) * ang
    return T


def zone_mean(r_lo, r_hi, th_lo, th_hi, n=400):
    r = np.linspace(r_lo, r_hi, n)
    th = np.linspace(th_lo, th_hi, n)
    R, TH = np.meshgrid(r, th, indexing="ij")
    q = heat_flux(R, TH)
    w = R
    return float((q * w).sum() / w.sum())


def main():
    sols = solve()
    rng = np.random.default_rng(SEED)
    names = [s[0] for s in SENSORS]
    r = np.array([s[1] for s in SENSORS]) * 1e-3
    th = np.radians([s[2] for s in SENSORS])
    z = np.array([s[3] for s in SENSORS]) * 1e-3
    T = field(sols, r, th, z) + rng.normal(0.0, SIGMA, r.size)
    T[names.index(BAD_SENSOR)] += BAD_OFFSET
    lines = ["sensor,r [mm],theta [deg],z [mm],sigma [K]"]
    lines += [f"{n},{s[1]},{s[2]},{s[3]},{SIGMA}" for n, s in zip(names, SENSORS)]
    (HERE / "layout.csv").write_text("\n".join(lines) + "\n")
    lines = ["sensor,temperature [degC]"] + [f"{n},{t - 273.15:.3f}" for n, t in zip(names, T)]
    (HERE / "readings.csv").write_text("\n".join(lines) + "\n")
    # truth for the end-to-end check
    x, w = np.polynomial.legendre.leggauss(400)
    rq = 0.5 * A * (x + 1)
    thq = 2 * np.pi * np.arange(256) / 256
    R, TH = np.meshgrid(rq, thq, indexing="ij")
    power = float(((heat_flux(R, TH) * R) * (0.5 * A * w)[:, None]).sum() * 2 * np.pi / 256)
    lo, hi = RINGS[-1][0], A  # the outer zone ends at the rim
    zones = {
        "inner": zone_mean(*RINGS[0], 0, 2 * np.pi),
        "middle": zone_mean(*RINGS[1], 0, 2 * np.pi),
        "outer 300-60": zone_mean(lo, hi, -np.pi / 3, np.pi / 3),
        "outer 60-180": zone_mean(lo, hi, np.pi / 3, np.pi),
        "outer 180-300": zone_mean(lo, hi, np.pi, 5 * np.pi / 3),
    }
    truth = {
        "story": (f"outer heater zone weakened around theta = 150 deg (up to {WEAK_DEPTH:.0%} low); "
                  f"{BAD_SENSOR} reads {BAD_OFFSET:g} K high"),
        "total_power_W": power, "zone_mean_W_m2": zones, "bad_sensor": BAD_SENSOR,
        "weak_centre_deg": float(np.degrees(WEAK_CENTRE)),
        "note": "generated by demo_data/generate_demo.py with scikit-fem (independent of the fit)",
    }
    (HERE / "truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    print(json.dumps(truth, indent=2))


if __name__ == "__main__":
    main()
