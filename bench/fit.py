"""Timing of the statistics core on synthetic arrays (no case files, no physics).

    python bench/fit.py [--repeat N]

For a few sizes (sensors n, modes K) it times: building the problem (one SVD), choosing
alpha by evidence, bands of 2000 face points, the alpha-averaged LOO scores, outlier
screening and the lmfit solve. The synthetic design has decaying modes like the
eigenfunction fields of a cylinder face seen from inside the part.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from inverse import (LinearGaussianProblem, StrengthAverage, averaged_loo, choose_strength,
                     fit_linear_lmfit, screen_outliers)

SIZES = ((16, 40), (64, 120), (256, 400))


def synthetic(n, K, seed=0):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.02, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    d = 20.0 + G @ (rng.normal(size=K) / np.sqrt(0.01 * p)) + 0.5 * rng.normal(size=n)
    B = np.cos(np.pi * k * rng.uniform(0, 1, 2000)[:, None])
    return G, d, p, B


def best_of(fn, repeat):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    cols = ("n", "K", "svd", "evidence", "bands", "avg-bands", "loo", "screen", "lmfit")
    print(" ".join(f"{c:>9}" for c in cols), "  (seconds, best of", args.repeat, ")")
    for n, K in SIZES:
        G, d, p, B = synthetic(n, K)
        S = np.full(n, 0.25)
        prob = LinearGaussianProblem(G, d, 20.0, S, p)
        alpha = choose_strength(prob).alpha
        row = [
            best_of(lambda: LinearGaussianProblem(G, d, 20.0, S, p), args.repeat),
            best_of(lambda: choose_strength(prob), args.repeat),
            best_of(lambda: prob.predict(B, alpha), args.repeat),
            best_of(lambda: StrengthAverage(prob).band(B), args.repeat),
            best_of(lambda: averaged_loo(prob), args.repeat),
            best_of(lambda: screen_outliers(prob), args.repeat),
            best_of(lambda: fit_linear_lmfit(G, d, 20.0, S, p, alpha), args.repeat),
        ]
        print(f"{n:>9} {K:>9} " + " ".join(f"{t:>9.4f}" for t in row))


if __name__ == "__main__":
    main()
