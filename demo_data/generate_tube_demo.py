"""Generate the bundled tube demo: a steel process tube with a fouled side.

Scenario (our own): a thick-walled carbon-steel process tube, outer radius 80 mm, bore
50 mm, 600 mm long, carries a hot process liquid that enters at the bottom end at 190 degC
and leaves the top end at 205 degC.  Two band heaters on the outer wall (z = 80-260 mm at
11 kW/m^2 and 340-520 mm at 9 kW/m^2, 4 mm ramps at their edges) keep the wall hot; the
outer wall is insulated between and beyond them, and the end flanges lose a little heat to
the 25 degC room.  On one side of the bore (around theta = 200 deg) a fouling layer has
built up: the liquid-side heat transfer coefficient, 600 W/(m^2 K) on clean steel, falls to
about 240 W/(m^2 K) under the deposit (fouling resistance 2.5e-3 m^2 K/W at its centre),
so the wall runs warmer there and less heat reaches the liquid.  Twenty thermocouples sit
in holes drilled radially from the outside, 10 and 20 mm deep, at four heights; TC13 has a
poor junction and reads 5 K high.

The unknown face of the demo is the bore TEMPERATURE: the bore then fixes the temperature
level itself (with an unknown bore heat flux the level would rest on the weak flange
losses alone), the fouled side shows as a warm streak on the unrolled bore map, and the
heat into the liquid is the bore's total power (negative: heat leaves the part).

The readings come from an independent finite-element solution (scikit-fem, P2, through
tests/fem_cylinder.py), not from the fit's own series.  The liquid-side coefficient varies
with theta, which couples the azimuthal harmonics; the generator solves that by a
fixed-point iteration: with h0 the mean of the largest and smallest coefficient, the bore
is a convection face (h0, T_eff) with

    T_eff = T_liquid + (h(theta) - h0) / h0 * (T_liquid - u_previous),

harmonic by harmonic (factor of convergence at most (h_max - h_min) / (h_max + h_min)),
until the bore temperature changes by less than 1e-6 K.  Run from a checkout:

    python demo_data/generate_tube_demo.py           # writes demo_data/tube/
    python demo_data/generate_tube_demo.py --check   # also solves on a finer mesh with more
                                                     # harmonics and prints the change at the sensors
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
OUT = HERE / "tube"

B, A, L, K = 0.080, 0.050, 0.600, 45.0    # m, m, m, W/(m K): carbon steel (from memory, ~45)
C2K = 273.15
HEATER_POINTS_MM = [0, 78, 82, 258, 262, 338, 342, 518, 522, 600]   # side profile, z [mm]
HEATER_VALUES = [0, 0, 11e3, 11e3, 0, 0, 9e3, 9e3, 0, 0]           # W/m^2 into the wall
H_END, T_ROOM = 8.0, 25.0 + C2K           # W/(m^2 K) insulated flanges (invented), K
T_IN, T_OUT = 190.0 + C2K, 205.0 + C2K    # liquid temperature at z = 0 and z = L [K]
H_CLEAN = 600.0                           # W/(m^2 K) liquid side, clean steel (invented)
R_FOUL = 2.5e-3                           # m^2 K/W fouling resistance at the centre (invented)
FOUL_CENTRE, FOUL_HALF, FOUL_EDGE = np.radians(200.0), np.radians(40.0), np.radians(12.0)
FOUL_Z = (0.060, 0.560)                   # m, axial extent of the deposit
N_THETA = 256                             # trapezoidal points in theta
SEED = 20261203
SIGMA = 0.10                              # K, random scatter of each reading
BAD_SENSOR, BAD_OFFSET = "TC13", 5.0      # K
STATIONS_MM = (120, 250, 370, 480)        # heights of the four thermocouple stations
DEPTHS_MM = (10, 20)                      # hole depths from the outer wall

ZONES = [  # name, theta [deg] (start, end), z [mm] (lo, hi): windows on the bore
    ("fouled side 160-240", (160, 240), (60, 560)),
    ("sector 240-340", (240, 340), (60, 560)),
    ("sector 340-60", (-20, 60), (60, 560)),
    ("sector 60-160", (60, 160), (60, 560)),
    ("lower heater", (0, 360), (80, 260)),
    ("upper heater", (0, 360), (340, 520)),
]


def sensors():
    """[(name, r [mm], theta [deg], z [mm])]: five holes per station, depths alternating."""
    out = []
    for s, z in enumerate(STATIONS_MM):
        for j in range(5):
            i = len(out)
            depth = DEPTHS_MM[(s + j) % 2]
            out.append((f"TC{i + 1:02d}", 80 - depth, (72 * j + 36 * (s % 2) + 10) % 360, z))
    return out


def heater_flux(z):
    """Heat into the outer wall [W/m^2] at z [m]: the piecewise linear side profile."""
    return np.interp(np.asarray(z, float) * 1e3, HEATER_POINTS_MM, HEATER_VALUES)


def t_liquid(z):
    """Liquid temperature [K] along the tube (linear from inlet to outlet)."""
    return T_IN + (T_OUT - T_IN) * np.asarray(z, float) / L


def _step(x, w):
    return 0.5 * (1.0 + np.tanh(np.asarray(x, float) / w))


def h_liquid(theta, z):
    """Liquid-side coefficient [W/(m^2 K)]: clean steel in series with the deposit."""
    d = np.abs(np.angle(np.exp(1j * (np.asarray(theta, float) - FOUL_CENTRE))))
    foul = _step(FOUL_HALF - d, FOUL_EDGE) * _step(z - FOUL_Z[0], 0.01) * _step(FOUL_Z[1] - z, 0.01)
    return 1.0 / (1.0 / H_CLEAN + R_FOUL * foul)


def _harmonics(values, m_max):
    """(m, kind) -> amplitude rows of values[theta_j, :] (trapezoidal rule in theta)."""
    spec = np.fft.rfft(values, axis=0) / values.shape[0]
    out = {(0, "cos"): spec[0].real.copy()}
    for m in range(1, m_max + 1):
        out[(m, "cos")] = 2.0 * spec[m].real
        out[(m, "sin")] = -2.0 * spec[m].imag
    return out


def solve(nr=12, nz=300, m_max=16, tol=1e-6, max_iter=200):
    """Fixed-point FEM solution: {(m, kind): FemSolution}, bore z grid, iterations."""
    sys.path.insert(0, str(HERE.parent / "tests"))
    from fem_cylinder import solve_harmonic
    zb = np.linspace(0.0, L, 2 * nz + 1)          # the bore's P2 nodes (uniform mesh in z)
    th = 2 * np.pi * np.arange(N_THETA) / N_THETA
    H = h_liquid(th[:, None], zb[None, :])
    h0 = 0.5 * (H.max() + H.min())
    TL = t_liquid(zb)[None, :]
    end = ("R", H_END, T_ROOM)
    u_bore = np.broadcast_to(TL, H.shape).copy()
    mesh = dict(nr=nr, nz=nz, inner_radius=A)
    for it in range(1, max_iter + 1):
        t_eff = TL + (H - h0) / h0 * (TL - u_bore)
        amps = _harmonics(t_eff, m_max)
        sols = {}
        for (m, kind), amp in amps.items():
            if m > 0 and np.abs(amp).max() < 1e-9:
                continue
            tamb = (lambda z, a=amp: np.interp(z, zb, a))
            faces = {"bore": ("R", h0, tamb),
                     "side": ("N", heater_flux if m == 0 else 0.0),
                     "bottom": end if m == 0 else ("R", H_END, 0.0),
                     "top": end if m == 0 else ("R", H_END, 0.0)}
            sols[(m, kind)] = solve_harmonic(B, L, K, m, faces, **mesh)
        new = bore_field(sols, th, zb)
        change = float(np.abs(new - u_bore).max())
        u_bore = new
        if change < tol:
            return sols, zb, it, h0
    raise RuntimeError(f"fixed point not converged after {max_iter} iterations (change {change:.3g} K)")


def field(sols, r, theta, z):
    """Temperature [K] of the summed harmonics at r [m], theta [rad], z [m]."""
    T = np.zeros(np.broadcast(r, theta, z).shape)
    for (m, kind), s in sols.items():
        ang = np.cos(m * theta) if kind == "cos" else np.sin(m * theta)
        T = T + s.temperature(r, z) * ang
    return T


def bore_field(sols, theta, z):
    """Bore temperature [K] on the grid theta[:, None], z[None, :] from the FE nodal values
    on r = A (z at P2 nodes: exact there; linear in between)."""
    out = np.zeros((theta.size, z.size))
    for (m, kind), s in sols.items():
        locs = s.basis.doflocs
        on = np.nonzero(np.abs(locs[0] - A) < 1e-12)[0]
        order = np.argsort(locs[1, on])
        trace = np.interp(z, locs[1, on][order], s.u[on][order])
        ang = np.cos(m * theta) if kind == "cos" else np.sin(m * theta)
        out += ang[:, None] * trace[None, :]
    return out


def bore_truth(sols, zb, n_theta=360):
    """Bore temperature [K] and heat flux INTO the part [W/m^2] on a (theta, z) grid."""
    th = 2 * np.pi * (np.arange(n_theta) + 0.5) / n_theta
    Tb = bore_field(sols, th, zb)
    TH, Z = np.meshgrid(th, zb, indexing="ij")
    q_in = h_liquid(TH, Z) * (t_liquid(Z) - Tb)      # Robin law on the bore
    return th, zb, Tb, q_in


def _trapezoid(z):
    """Trapezoidal-rule weights on the nodes z [m]."""
    w = np.zeros(z.size)
    w[1:] += 0.5 * np.diff(z)
    w[:-1] += 0.5 * np.diff(z)
    return w


def zone_means(th, z, values):
    """Area means of values[theta, z] over the ZONES windows (bore radius constant)."""
    w = _trapezoid(z)[None, :] * np.ones((th.size, 1))
    out = {}
    for name, (t0, t1), (z0, z1) in ZONES:
        inside = (np.mod(np.degrees(th) - t0, 360.0) <= (t1 - t0))[:, None] & \
            ((z >= z0 * 1e-3) & (z <= z1 * 1e-3))[None, :]
        out[name] = float((values * w * inside).sum() / (w * inside).sum())
    return out


def write_files(sols, T_sensors, names, layout):
    OUT.mkdir(exist_ok=True)
    lines = ["sensor,r [mm],theta [deg],z [mm],sigma [K]"]
    lines += [f"{n},{r},{t},{z},{SIGMA}" for n, r, t, z in layout]
    (OUT / "layout.csv").write_text("\n".join(lines) + "\n")
    lines = ["sensor,temperature [degC]"] + [f"{n},{t - C2K:.3f}" for n, t in zip(names, T_sensors)]
    (OUT / "readings.csv").write_text("\n".join(lines) + "\n")
    lines = ["theta [deg],z [mm],value [W/m^2]"]
    lines += [f"0,{z:g},{q:g}" for z, q in zip(HEATER_POINTS_MM, HEATER_VALUES)]
    (OUT / "side_heaters.csv").write_text("\n".join(lines) + "\n")
    zones = "\n".join(
        f'[[zones]]\nname = "{n}"\ntheta = ["{t0} deg", "{t1} deg"]\nz = ["{z0} mm", "{z1} mm"]\n'
        for n, (t0, t1), (z0, z1) in ZONES)
    (OUT / "tube.toml").write_text(f'''# heatsight demo: thick-walled steel process tube with a fouled side (a scenario of our own;
# see demo_data/generate_tube_demo.py).
[part]
radius = "80 mm"
inner_radius = "50 mm"
height = "600 mm"
conductivity = "45 W/(m*K)"

[faces.bore]            # process side, not reachable: estimate the bore temperature
condition = "unknown-temperature"

[faces.side]            # two band heaters, insulated between and beyond them
condition = "flux"
profile = "side_heaters.csv"

[faces.bottom]          # flanges: insulated, a little loss to the room
condition = "convection"
h = "{H_END:g} W/(m^2*K)"
ambient = "{T_ROOM - C2K:g} degC"

[faces.top]
condition = "convection"
h = "{H_END:g} W/(m^2*K)"
ambient = "{T_ROOM - C2K:g} degC"

[sensors]
layout = "layout.csv"
readings = "readings.csv"

[fit]
strength = "auto"

{zones}''')


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    t0 = time.perf_counter()
    sols, zb, iters, h0 = solve()
    layout = sensors()
    names = [s[0] for s in layout]
    r = np.array([s[1] for s in layout]) * 1e-3
    th = np.radians([s[2] for s in layout])
    z = np.array([s[3] for s in layout]) * 1e-3
    T_clean = field(sols, r, th, z)
    rng = np.random.default_rng(SEED)
    T = T_clean + rng.normal(0.0, SIGMA, r.size)
    T[names.index(BAD_SENSOR)] += BAD_OFFSET
    write_files(sols, T, names, layout)

    tq, zq, Tb, q_in = bore_truth(sols, zb)
    area = 2 * np.pi * A * L
    power = float(q_in.mean(axis=0) @ _trapezoid(zq)) * 2 * np.pi * A   # heat INTO the part [W]
    fem_power = sols[(0, "cos")].heat_in("bore")
    heaters = sols[(0, "cos")].heat_in("side")
    ends = sols[(0, "cos")].heat_in("bottom") + sols[(0, "cos")].heat_in("top")
    zm_T = zone_means(tq, zq, Tb)
    zm_q = zone_means(tq, zq, -q_in)
    truth = {
        "story": (f"fouling on the bore around theta = 200 deg (liquid-side h {H_CLEAN:g} -> "
                  f"{1 / (1 / H_CLEAN + R_FOUL):.0f} W/(m^2 K)): the wall runs warmer there and less "
                  f"heat reaches the liquid; {BAD_SENSOR} reads {BAD_OFFSET:g} K high"),
        "unknown_face": "bore", "condition": "unknown-temperature",
        "total_power_W": fem_power,
        "heat_into_fluid_W": -fem_power,
        "heater_power_W": heaters, "flange_loss_W": -ends,
        "bore_temperature_degC": {"min": float(Tb.min() - C2K), "max": float(Tb.max() - C2K),
                                  "mean": float(Tb.mean() - C2K)},
        "zone_mean_degC": {k: v - C2K for k, v in zm_T.items()},
        "zone_mean_flux_into_fluid_W_m2": zm_q,
        "bad_sensor": BAD_SENSOR,
        "fouled_centre_deg": float(np.degrees(FOUL_CENTRE)),
        "bore_area_m2": area,
        "note": (f"generated by demo_data/generate_tube_demo.py with scikit-fem (independent of "
                 f"the fit): {len(sols)} harmonics, fixed point in {iters} iterations (h0 = {h0:.1f}); "
                 f"bore power by the Robin law on a grid {power:.3f} W"),
    }
    (OUT / "truth.json").write_text(json.dumps(truth, indent=2) + "\n")
    print(json.dumps(truth, indent=2))
    print(f"energy balance: heaters {heaters:.4f} W + bore {fem_power:.4f} W + flanges {ends:.4f} W "
          f"= {heaters + fem_power + ends:.3g} W; {time.perf_counter() - t0:.1f} s")
    if "--check" in argv:
        fine, *_ = solve(nr=24, nz=600, m_max=24)
        d = np.abs(field(fine, r, th, z) - T_clean).max()
        print(f"finer mesh (24 x 600 cells, m <= 24): largest change at the sensors {d:.2e} K "
              f"(sigma {SIGMA} K); bore power {fine[(0, 'cos')].heat_in('bore'):.4f} W")


if __name__ == "__main__":
    main()
