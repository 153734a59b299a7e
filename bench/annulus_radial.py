"""Timing of the annulus radial eigenfunctions (not run by pytest).

    python bench/annulus_radial.py [--harmonics 30] [--roots 256] [--points 64] [--repeat 3]

bench_radial: AnnulusRadial.values (R, dR/dr and m R / r for every mode at every radius, one
call) vs scipy's jv / yv called once per (m, n) pair at the same radii (orders m and m + 1,
the same three outputs); the largest difference is printed.  The first call, which builds
the modulus-phase tables (forward/modulus_phase.py), is timed apart.  Also prints the cold and warm cost
of the root tables.  Goal >= 10x.  Ratios are measured in one run on whatever machine runs this.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
from scipy import special

from heatsight.forward.annulus_radial import AnnulusRadial, annulus_eigenvalues
from heatsight.forward.faces import EndCondition
from heatsight.forward import modulus_phase
from heatsight.forward.roots import ROOT_CACHE

A, B, K = 0.04, 0.10, 15.0  # m, m, W/(m K): a thick tube wall (invented)
BORE, SIDE = EndCondition("R", 2000.0), EndCondition("N")


def _best(fn, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def bench_radial(harmonics: int = 30, roots: int = 256, points: int = 64, repeat: int = 3):
    """Print the per-pair / batched time ratio of the radial factors and ns per mode-point."""
    ROOT_CACHE.clear()
    t0 = time.perf_counter()
    kappa = [annulus_eigenvalues(BORE, SIDE, m, roots, A, B, K) for m in range(harmonics)]
    cold = time.perf_counter() - t0
    t0 = time.perf_counter()
    kappa = [annulus_eigenvalues(BORE, SIDE, m, roots, A, B, K) for m in range(harmonics)]
    warm = time.perf_counter() - t0
    m = np.repeat(np.arange(harmonics), roots)
    kappa = np.concatenate(kappa)
    r = np.linspace(A, B, points)
    modes = AnnulusRadial(BORE, SIDE, m, kappa, A, B, K)
    c_j, c_y = modes._c_j, modes._c_y  # the same combination, for the per-pair loop

    def per_pair():
        val = np.empty((points, m.size))
        der = np.empty_like(val)
        for i in range(m.size):
            z = kappa[i] * r
            j, y = special.jv(m[i], z), special.yv(m[i], z)
            j1, y1 = special.jv(m[i] + 1, z), special.yv(m[i] + 1, z)
            val[:, i] = c_j[i] * j + c_y[i] * y
            der[:, i] = kappa[i] * (c_j[i] * (m[i] / z * j - j1) + c_y[i] * (m[i] / z * y - y1))
        return val, der, m * val / r[:, None]

    modulus_phase._tables.clear()
    t0 = time.perf_counter()
    modes.values(r)
    first = time.perf_counter() - t0  # includes building the modulus-phase tables
    t_batch, got = _best(lambda: modes.values(r), repeat)
    t_pair, ref = _best(per_pair, repeat)
    worst = max(float(np.abs(g - f).max() / max(np.abs(f).max(), 1e-300)) for g, f in zip(got, ref))
    n_values = points * m.size
    print(f"machine: {os.cpu_count()} cores, load {os.getloadavg()[0]:.1f}")
    print(f"root tables, {harmonics} harmonics x {roots} roots: cold {cold:.2f} s, warm {warm * 1e3:.2f} ms")
    print(f"radial factors, {points} radii x {m.size} modes: batched {t_batch * 1e3:.1f} ms, "
          f"per (m, n) pair {t_pair * 1e3:.1f} ms, ratio {t_pair / t_batch:.2f}x (goal >= 10x); "
          f"largest difference {worst:.1e} of the largest value")
    print(f"first call, modulus-phase tables built: {first * 1e3:.1f} ms ({t_pair / first:.1f}x)")
    print(f"time per 1e6 mode-points (R, dR/dr, m R / r): batched {t_batch / n_values * 1e6:.3f} s, "
          f"per pair {t_pair / n_values * 1e6:.3f} s")
    return t_pair / t_batch


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--harmonics", type=int, default=30)
    p.add_argument("--roots", type=int, default=256)
    p.add_argument("--points", type=int, default=64)
    p.add_argument("--repeat", type=int, default=3)
    args = p.parse_args()
    bench_radial(args.harmonics, args.roots, args.points, args.repeat)


if __name__ == "__main__":
    main()
