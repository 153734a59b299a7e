"""Which smoothing-strength rule should be the default?  Accuracy and band coverage of the
four rules on seeded synthetic scenarios whose readings come from the independent
finite-element solver (tests/fem_cylinder.py), not from the fit's basis.

Scenarios: platen bottom flux (20 sensors), side-wall temperature (20 sensors), and a
class-2 chuck (12 sensors whose declared offsets rival the signal; one heater sector weak).
Prints, per rule: RMS error of the face estimate, that error relative to the posterior RMS
sd, the fraction of face grid points whose truth lies inside the 95 % band, how often the
truth of the total power lies inside its 95 % band, and the sharpness (mean half width of
the 95 % band / the truth's sd over the face).  'learned' is the evidence with the learned
prior (inverse.hyperprior, the default); 'evidence' keeps the fixed prior (length scale =
radius, gradient order) and averages over alpha only.  The last column (chuck) is the weak
sector's zone-mean error in its own sd.  Run:  python bench/strength_choice.py
"""

from __future__ import annotations

import sys
import types
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != HERE]
sys.path.insert(0, str(HERE.parent / "tests"))

import numpy as np  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

import heatsight.forward as fw  # noqa: E402
from heatsight import inverse  # noqa: E402
from fem_cylinder import solve_field  # noqa: E402

A, L, K, H, TAMB = 0.10, 0.04, 20.0, 100.0, 300.0


def flux(r, t):
    return 1.0e4 * (1 + 0.3 * (r / A) ** 2) + 3.0e3 * (r / A) * np.cos(t) + 1.5e3 * (r / A) ** 2 * np.sin(2 * t)


WA, WL, WK, T0, AMP, BMP = 0.05, 0.20, 20.0, 400.0, 30.0, 10.0


def wall(t, z):
    return T0 + (AMP + BMP * np.cos(t)) * np.sin(np.pi * z / WL)


def platen_scenario():
    """Unknown bottom heat flux of a platen (non-axisymmetric), convection top, insulated rim."""
    fem = solve_field(A, L, K, {
        (0, "cos"): {"bottom": ("N", lambda s: 1.0e4 * (1 + 0.3 * (s / A) ** 2)), "top": ("R", H, TAMB),
                     "side": ("N", 0.0)},
        (1, "cos"): {"bottom": ("N", lambda s: 3.0e3 * s / A), "top": ("R", H, 0.0), "side": ("N", 0.0)},
        (2, "sin"): {"bottom": ("N", lambda s: 1.5e3 * (s / A) ** 2), "top": ("R", H, 0.0), "side": ("N", 0.0)},
    }, nr=40, nz=20)
    power = 2 * np.pi * 1.0e4 * (A * A / 2 + 0.3 * A * A / 4)
    case = types.SimpleNamespace(cylinder=fw.Cylinder(A, L, K), zones=[],
                                 faces={"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB),
                                        "side": fw.Insulated()})

    def readings(rng, n=20):
        r, th = A * np.sqrt(rng.uniform(0, 0.95, n)), rng.uniform(0, 2 * np.pi, n)
        z = rng.choice([0.004, 0.01, 0.02], n)
        T = fem.temperature(r, th, z) + 0.3 * rng.standard_normal(n)
        return inverse.SensorReadings([f"S{i}" for i in range(n)], r, th, z, T, 0.3, 0.0, 0.0)

    truth = lambda g: flux(g["r_m"].to_numpy(), g["theta_rad"].to_numpy())  # noqa: E731
    return "platen bottom flux", case, readings, truth, power, None


def wall_scenario():
    """Unknown side-wall temperature of a tall part with fixed-temperature ends."""
    fem = solve_field(WA, WL, WK, {
        (0, "cos"): {"bottom": ("D", T0), "top": ("D", T0), "side": ("D", lambda z: T0 + AMP * np.sin(np.pi * z / WL))},
        (1, "cos"): {"bottom": ("D", 0.0), "top": ("D", 0.0), "side": ("D", lambda z: BMP * np.sin(np.pi * z / WL))},
    }, nr=30, nz=60)
    case = types.SimpleNamespace(cylinder=fw.Cylinder(WA, WL, WK), zones=[],
                                 faces={"bottom": fw.Temperature(T0), "top": fw.Temperature(T0),
                                        "side": fw.UnknownTemperature()})
    from scipy.special import iv
    beta = np.pi / WL
    power = 4 * np.pi * WA * WK * AMP * beta * iv(1, beta * WA) / iv(0, beta * WA) * WL / np.pi  # closed form

    def readings(rng, n=20):
        r, th = WA * rng.uniform(0.3, 0.85, n), rng.uniform(0, 2 * np.pi, n)
        z = rng.uniform(0.02, 0.18, n)
        T = fem.temperature(r, th, z) + 0.1 * rng.standard_normal(n)
        return inverse.SensorReadings([f"S{i}" for i in range(n)], r, th, z, T, 0.1, 0.0, 0.0)

    truth = lambda g: wall(g["theta_rad"].to_numpy(), g["z_m"].to_numpy())  # noqa: E731
    return "side-wall temperature", case, readings, truth, power, None


CA, CL, CK, CH, Q0, WEAK, HALF, TOL = 0.15, 0.02, 200.0, 20.0, 4000.0, 0.3, np.radians(30.0), 2.5


def sector_coef(m):
    """cos-series coefficients of q = Q0 (1 - WEAK 1[|theta| < HALF]) (Fourier series of a pulse)."""
    return Q0 * (1 - WEAK * HALF / np.pi) if m == 0 else -Q0 * WEAK * 2 * np.sin(m * HALF) / (m * np.pi)


def chuck_scenario():
    """Aluminium chuck, one 60 deg heater sector 30 % weak, 12 thermocouples whose class-2
    offsets (uniform in +-2.5 K, declared) exceed the signal the sector leaves at them."""
    fem = solve_field(CA, CL, CK, {(m, "cos"): {"bottom": ("N", sector_coef(m)),
                                                "top": ("R", CH, TAMB if m == 0 else 0.0), "side": ("N", 0.0)}
                                   for m in range(11)}, nr=24, nz=8)
    sector = lambda u, v: np.abs(np.angle(np.exp(1j * np.asarray(v)))) < HALF  # noqa: E731
    zones = [types.SimpleNamespace(name="weak sector", face="bottom", contains=sector)]
    case = types.SimpleNamespace(cylinder=fw.Cylinder(CA, CL, CK), zones=zones,
                                 faces={"bottom": fw.UnknownFlux(), "top": fw.Convection(CH, TAMB),
                                        "side": fw.Insulated()})
    n = 12
    th = 2 * np.pi * np.arange(n) / n + 0.1
    r = CA * np.where(np.arange(n) % 2 == 0, 0.45, 0.8)
    z = np.full(n, 0.012)
    t = fem.temperature(r, th, z)

    def readings(rng):
        d = t + rng.uniform(-TOL, TOL, n) + 0.1 * rng.standard_normal(n)
        return inverse.SensorReadings([f"T{i}" for i in range(n)], r, th, z, d, 0.1, TOL / np.sqrt(3), 0.0)

    truth = lambda g: sum(sector_coef(m) * np.cos(m * g["theta_rad"].to_numpy()) for m in range(11))  # noqa: E731
    power = np.pi * CA ** 2 * sector_coef(0)
    return "class-2 chuck", case, readings, truth, power, Q0 * (1 - WEAK)


def main(replicates=12):
    for scenario in (platen_scenario(), wall_scenario(), chuck_scenario()):
        run(*scenario, replicates=replicates)


RULES = {  # label: inverse.fit options
    "learned": dict(strength="evidence", prior="learned"),
    "evidence": dict(strength="evidence", prior="fixed"),
    "gcv": dict(strength="gcv"),
    "lcurve": dict(strength="lcurve"),
    "discrepancy": dict(strength="discrepancy"),
}


def run(name, case, readings, truth_of, power, zone_truth, replicates):
    rules = list(RULES)
    stats = {k: [] for k in rules}
    for seed in range(replicates):
        rng = np.random.default_rng(seed)
        rd = readings(rng)
        for rule in rules:
            try:
                with threadpool_limits(1):
                    res = inverse.fit(case, rd, keep_all_sensors=True, **RULES[rule])
            except inverse.InverseError as exc:
                print(f"seed {seed} {rule}: {exc}")
                continue
            g = res.grid
            truth = truth_of(g)
            err = np.sqrt(np.mean((g["estimate"] - truth) ** 2))
            sd = np.sqrt(np.mean(g["std"] ** 2))
            cover = np.mean((truth >= g["lower"]) & (truth <= g["upper"]))
            s = res.summary
            pin = abs(s["total_power_W"] - power) <= 1.96 * s["total_power_sd_W"]
            sharp = np.mean(g["upper"] - g["lower"]) / 2 / np.std(truth)
            zone = s["zones"][0] if zone_truth is not None else None
            zerr = abs(zone["mean"] - zone_truth) / zone["sd"] if zone else np.nan
            stats[rule].append((err, err / sd, cover, pin, sharp, zerr))
    print(f"{name}: {replicates} seeded replicates, scikit-fem readings")
    print(f"{'rule':<12} {'RMS error':>10} {'error/sd':>9} {'coverage':>9} {'power in band':>14} "
          f"{'half band/truth sd':>19} {'|zone error|/sd':>16}")
    for rule in rules:
        a = np.array(stats[rule], dtype=float)
        if a.size == 0:
            continue
        print(f"{rule:<12} {a[:, 0].mean():10.3g} {a[:, 1].mean():9.2f} {a[:, 2].mean():9.2f} {a[:, 3].mean():14.2f} "
              f"{a[:, 4].mean():19.2f} {np.nanmean(a[:, 5]) if zone_truth is not None else np.nan:16.2f}")


if __name__ == "__main__":
    main()
