"""Which smoothing-strength rule should be the default?  Accuracy and band coverage of the
four rules on seeded synthetic scenarios whose readings come from the independent
finite-element solver (tests/fem_cylinder.py), not from the fit's basis.

Prints, per rule: RMS error of the face estimate relative to the posterior RMS sd, the
fraction of face grid points whose truth lies inside the 95 % band, and how often the
truth of the total power lies inside its 95 % band.  Run:  python bench/strength_choice.py
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

import forward as fw  # noqa: E402
import inverse  # noqa: E402
from fem_cylinder import solve_field  # noqa: E402

A, L, K, H, TAMB = 0.10, 0.04, 20.0, 100.0, 300.0


def flux(r, t):
    return 1.0e4 * (1 + 0.3 * (r / A) ** 2) + 3.0e3 * (r / A) * np.cos(t) + 1.5e3 * (r / A) ** 2 * np.sin(2 * t)


def main(replicates=12):
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
    rules = ["evidence", "gcv", "lcurve", "discrepancy"]
    stats = {k: [] for k in rules}
    for seed in range(replicates):
        rng = np.random.default_rng(seed)
        n = 20
        r, th = A * np.sqrt(rng.uniform(0, 0.95, n)), rng.uniform(0, 2 * np.pi, n)
        z = rng.choice([0.004, 0.01, 0.02], n)
        T = fem.temperature(r, th, z) + 0.3 * rng.standard_normal(n)
        rd = inverse.SensorReadings([f"S{i}" for i in range(n)], r, th, z, T, 0.3, 0.0, 0.0)
        for rule in rules:
            try:
                with threadpool_limits(1):
                    res = inverse.fit(case, rd, strength=rule, keep_all_sensors=True)
            except inverse.InverseError as exc:
                print(f"seed {seed} {rule}: {exc}")
                continue
            g = res.grid
            truth = flux(g["r_m"].to_numpy(), g["theta_rad"].to_numpy())
            err = np.sqrt(np.mean((g["estimate"] - truth) ** 2))
            sd = np.sqrt(np.mean(g["std"] ** 2))
            cover = np.mean((truth >= g["lower"]) & (truth <= g["upper"]))
            s = res.summary
            pin = abs(s["total_power_W"] - power) <= 1.96 * s["total_power_sd_W"]
            stats[rule].append((err, err / sd, cover, pin))
    print(f"{replicates} seeded replicates, 20 sensors, scikit-fem readings, sigma 0.3 K")
    print(f"{'rule':<12} {'RMS error':>10} {'error/sd':>9} {'coverage':>9} {'power in band':>14}")
    for rule in rules:
        a = np.array(stats[rule], dtype=float)
        if a.size == 0:
            continue
        print(f"{rule:<12} {a[:, 0].mean():10.0f} {a[:, 1].mean():9.2f} {a[:, 2].mean():9.2f} {a[:, 3].mean():14.2f}")


if __name__ == "__main__":
    main()
