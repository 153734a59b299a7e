"""Timing of the statistics core and of a full inverse.fit (not run by pytest).

    python bench/fit.py [--repeat N] [--only table,jacobian,alphas,full]

table     for a few sizes (sensors n, modes K) on synthetic arrays: building the problem
          (one SVD), choosing alpha by evidence, bands of 2000 face points, the
          alpha-averaged LOO scores, outlier screening and the lmfit solve.  The synthetic
          design has decaying modes like the eigenfunction fields of a cylinder face seen
          from inside the part.
jacobian  lmfit (least_squares) on the same 100-coefficient problem with the analytic
          Jacobian (inverse.fit_linear_lmfit) and with lmfit's finite-difference Jacobian
          (same residual, same tolerances); goal >= 10x.
alphas    choosing alpha by the evidence among 200 candidates from one SVD
          (LinearGaussianProblem) vs 200 separate Cholesky solves of the normal equations;
          goal >= 20x.
command   `heatsight fit` of the demo as a fresh process, end to end (goal <= 1.5 s), and
          `heatsight --help` (goal <= 0.3 s), then the split of one fit command's time.
threads   the demo's inverse.fit with the BLAS pool at the library default and at one thread.
full      inverse.fit with bands on a 50 x 90 face grid, 64 sensors, 210 coefficients
          (harmonics 10, terms 10), and the share of its time spent in the forward model
          (CylinderModel + basis construction, basis fields at the sensors, face values on
          the grid and on the face quadrature rule), each timed separately.

Ratios are measured in one run on whatever machine runs this; the machine note printed
first says what that was.  BLAS is limited to one thread (threadpoolctl) when available,
so that a shared, noisy machine gives steadier numbers.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import platform
import time
import types

import sys
from pathlib import Path

# Run as a script, this folder comes first on sys.path, and bench/forward.py would hide the
# forward package: drop the folder before importing.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or os.getcwd()).resolve() != _HERE]

import lmfit  # noqa: E402
import numpy as np  # noqa: E402
import scipy  # noqa: E402

from heatsight.inverse import (LinearGaussianProblem, StrengthAverage, averaged_loo, choose_strength,  # noqa: E402
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


def one_thread():
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # optional: the benchmark runs without it, less steadily
        return contextlib.nullcontext()
    return threadpool_limits(limits=1)


def machine_note():
    load = os.getloadavg() if hasattr(os, "getloadavg") else ("?",)
    print(f"machine: {platform.machine()} {platform.processor() or ''} | {os.cpu_count()} logical CPUs | "
          f"load average {' '.join(f'{x:.2f}' for x in load)} | Python {platform.python_version()} | "
          f"numpy {np.__version__} | scipy {scipy.__version__} | lmfit {lmfit.__version__} | BLAS 1 thread")


# ------------------------------------------------------------------------------ table
def bench_table(repeat):
    cols = ("n", "K", "svd", "evidence", "bands", "avg-bands", "loo", "screen", "lmfit")
    print(" ".join(f"{c:>9}" for c in cols), "  (seconds, best of", repeat, ")")
    for n, K in SIZES:
        G, d, p, B = synthetic(n, K)
        S = np.full(n, 0.25)
        prob = LinearGaussianProblem(G, d, 20.0, S, p)
        alpha = choose_strength(prob).alpha
        row = [
            best_of(lambda: LinearGaussianProblem(G, d, 20.0, S, p), repeat),
            best_of(lambda: choose_strength(prob), repeat),
            best_of(lambda: prob.predict(B, alpha), repeat),
            best_of(lambda: StrengthAverage(prob).band(B), repeat),
            best_of(lambda: averaged_loo(prob), repeat),
            best_of(lambda: screen_outliers(prob), repeat),
            best_of(lambda: fit_linear_lmfit(G, d, 20.0, S, p, alpha), repeat),
        ]
        print(f"{n:>9} {K:>9} " + " ".join(f"{t:>9.4f}" for t in row))


# --------------------------------------------------------------------------- jacobian
def lmfit_finite_difference(G, d, t0, S, p, alpha, tol):
    """The stacked residual of inverse.fit_lmfit, [S^-1/2 (G c + t0 - d); sqrt(alpha p) c],
    minimized by lmfit's least_squares with lmfit's 2-point finite-difference Jacobian
    (same tolerances and scaling as inverse.fit_lmfit); returns (c, function evaluations)."""
    sd = np.sqrt(S)
    sqrt_ap = np.sqrt(alpha * p)
    names = [f"c_{k}" for k in range(p.size)]
    params = lmfit.Parameters()
    for name in names:
        params.add(name, value=0.0)

    def residual(pars):
        c = np.array([pars[k].value for k in names])
        return np.concatenate([(G @ c + t0 - d) / sd, sqrt_ap * c])

    res = lmfit.Minimizer(residual, params, scale_covar=False).minimize(
        method="least_squares", ftol=tol, xtol=tol, gtol=tol, x_scale="jac")
    return np.array([res.params[k].value for k in names]), res.nfev


def scipy_direct(G, d, t0, S, p, alpha, tol, analytic):
    """The same residual through scipy.optimize.least_squares itself (no lmfit layer)."""
    from scipy.optimize import least_squares
    sd = np.sqrt(S)
    sqrt_ap = np.sqrt(alpha * p)
    J = np.vstack([G / sd[:, None], np.diag(sqrt_ap)])

    def residual(c):
        return np.concatenate([(G @ c + t0 - d) / sd, sqrt_ap * c])

    res = least_squares(residual, np.zeros(p.size), jac=(lambda c: J) if analytic else "2-point",
                        ftol=tol, xtol=tol, gtol=tol, x_scale="jac")
    return res.x, res.nfev


def bench_jacobian(repeat, n=64, K=100):
    tol = 1e-10
    for rows in (n, 16 * n):
        G, d, p, _ = synthetic(rows, K, seed=3)
        S = np.full(rows, 0.25)
        t0 = np.full(rows, 20.0)
        prob = LinearGaussianProblem(G, d, t0, S, p)
        alpha = choose_strength(prob).alpha
        exact = prob.coefficients(alpha)
        scale = np.abs(exact).max()
        out = {}

        def run(key, fn):
            return best_of(lambda: out.__setitem__(key, fn()), repeat)

        t_prod = run("prod", lambda: fit_linear_lmfit(G, d, t0, S, p, alpha, tol=tol))
        t_fd = run("fd", lambda: lmfit_finite_difference(G, d, t0, S, p, alpha, tol))
        t_san = run("san", lambda: scipy_direct(G, d, t0, S, p, alpha, tol, analytic=True))
        t_sfd = run("sfd", lambda: scipy_direct(G, d, t0, S, p, alpha, tol, analytic=False))
        err = {key: np.abs((v.coefficients if key == "prod" else v[0]) - exact).max() / scale
               for key, v in out.items()}
        label = "" if rows == n else f"  (scaling note: {rows // n} stacked snapshots of {n} sensors)"
        print(f"lmfit, {K} coefficients, {rows} readings{label}:")
        print(f"  inverse.fit_linear_lmfit, analytic Jacobian     {t_prod * 1e3:7.1f} ms, "
              f"{out['prod'].result.nfev:5d} evaluations, rel. error vs closed form {err['prod']:.1e}")
        print(f"  same residual, lmfit finite-difference Jacobian {t_fd * 1e3:7.1f} ms, "
              f"{out['fd'][1]:5d} evaluations, rel. error {err['fd']:.1e}")
        print(f"  ratio finite-difference / analytic = {t_fd / t_prod:.1f}x (goal >= 10x)")
        print(f"  for comparison, scipy.optimize.least_squares without the lmfit layer: analytic "
              f"{t_san * 1e3:.1f} ms, finite differences {t_sfd * 1e3:.1f} ms: ratio {t_sfd / t_san:.1f}x")


# ----------------------------------------------------------------------------- alphas
def evidence_by_separate_solves(G, d, t0, S, p, alphas):
    """log p(d | alpha) for each alpha by its own Cholesky solve (no shared factorization).

    A = S^-1/2 G P^-1/2, y = S^-1/2 (d - t0); M = A^T A + alpha I;
    log det(S + G (alpha P)^-1 G^T) = log det S + log det M - K log alpha  (Sylvester);
    y^T (I + A A^T / alpha)^-1 y = y.y - (A^T y) . M^-1 A^T y  (Woodbury).
    """
    n, K = G.shape
    A = G / np.sqrt(S)[:, None] / np.sqrt(p)[None, :]
    y = (d - t0) / np.sqrt(S)
    AtA, Aty = A.T @ A, A.T @ y
    out = np.empty(alphas.size)
    for i, a in enumerate(alphas):
        Lc = np.linalg.cholesky(AtA + a * np.eye(K))
        w = scipy.linalg.solve_triangular(Lc, Aty, lower=True)
        logdet = np.sum(np.log(S)) + 2.0 * np.sum(np.log(np.diag(Lc))) - K * math.log(a)
        quad = y @ y - w @ w
        out[i] = -0.5 * (n * math.log(2 * math.pi) + logdet + quad)
    return out


def bench_alphas(repeat, n=64, K=200, m=200):
    G, d, p, _ = synthetic(n, K, seed=4)
    S = np.full(n, 0.25)
    t0 = np.full(n, 20.0)
    alphas = np.logspace(-8, 4, m)
    out = {}

    def one_svd():
        prob = LinearGaussianProblem(G, d, t0, S, p)
        out["svd"] = prob.log_evidence(alphas)

    def separate():
        out["sep"] = evidence_by_separate_solves(G, d, t0, S, p, alphas)

    t_svd = best_of(one_svd, repeat)
    t_sep = best_of(separate, repeat)
    same = int(np.argmax(out["svd"])) == int(np.argmax(out["sep"]))
    diff = np.abs(out["svd"] - out["sep"]).max()
    print(f"evidence at {m} alphas, {n} sensors x {K} coefficients: one SVD {t_svd * 1e3:.2f} ms, "
          f"{m} separate solves {t_sep * 1e3:.1f} ms (same alpha chosen: {same}, max |log-evidence "
          f"difference| {diff:.1e})")
    print(f"  ratio separate / one SVD = {t_sep / t_svd:.1f}x (goal >= 20x)")


# ------------------------------------------------------------------------------- full
def bench_full(repeat, n=64, harmonics=10, terms=10, grid=(50, 90)):
    import heatsight.forward as fw
    from heatsight import inverse
    from heatsight.inverse.face_grid import display_grid, quadrature

    a, L, k, h, tamb = 0.15, 0.04, 16.0, 12.0, 298.15
    q = lambda r, th: 4000.0 * (1 + 0.3 * (r / a) ** 2) + 800.0 * (r / a) * np.cos(th)  # noqa: E731
    cyl = fw.Cylinder(a, L, k)
    known = {"bottom": fw.Flux(q), "top": fw.Convection(h, tamb), "side": fw.Insulated()}
    rng = np.random.default_rng(8)
    r = a * np.sqrt(rng.uniform(0, 0.95, n))
    th = rng.uniform(0, 2 * np.pi, n)
    z = rng.uniform(0.003, 0.03, n)
    sigma = 0.3
    temp = fw.CylinderModel(cyl, known).temperature(r, th, z) + sigma * rng.standard_normal(n)
    faces = dict(known, bottom=fw.UnknownFlux())
    case = types.SimpleNamespace(cylinder=cyl, faces=faces)
    rd = inverse.SensorReadings([f"s{i}" for i in range(n)], r, th, z, temp, sigma, 0.0, 0.0)

    res = inverse.fit(case, rd, harmonics=harmonics, terms=terms, grid=grid)  # warm caches
    K = res.summary["basis_size"]
    t_fit = best_of(lambda: inverse.fit(case, rd, harmonics=harmonics, terms=terms, grid=grid), repeat)

    # the forward parts of one fit, each timed on its own
    pts = display_grid("bottom", cyl, *grid)
    quad = quadrature("bottom", cyl)
    parts = {}
    holder = {}

    def build():
        m = fw.CylinderModel(cyl, faces, tolerance=1e-8)
        holder["basis"] = m.basis(harmonics, terms)
        holder["model"] = m

    parts["model + basis construction"] = best_of(build, repeat)
    basis, model = holder["basis"], holder["model"]
    parts["known field + basis fields at sensors"] = best_of(
        lambda: (model.evaluate(r, th, z), basis.fields(r, th, z, gradient=True)), repeat)
    parts[f"face values on the {grid[0]} x {grid[1]} grid"] = best_of(
        lambda: (basis.face_values(pts.u, pts.v), basis.known_face_values(pts.u, pts.v)), repeat)
    parts[f"face values on the quadrature rule ({quad.u.size} points)"] = best_of(
        lambda: (basis.face_values(quad.u, quad.v), basis.known_face_values(quad.u, quad.v)), repeat)
    fwd = sum(parts.values())
    print(f"inverse.fit, {n} sensors, {K} coefficients (harmonics {harmonics}, terms {terms}), "
          f"bands on {grid[0]} x {grid[1]} = {grid[0] * grid[1]} face points: {t_fit:.3f} s")
    for name, t in parts.items():
        print(f"  forward: {name:<48} {t * 1e3:8.1f} ms  ({100 * t / t_fit:4.1f} %)")
    print(f"  forward model share of the fit: {100 * fwd / t_fit:.0f} % ({fwd * 1e3:.0f} ms of "
          f"{t_fit * 1e3:.0f} ms); statistics and tables: {100 * (1 - fwd / t_fit):.0f} %")


def bench_command(repeat):
    """`heatsight fit` of the demo as a fresh process, end to end (goal <= 1.5 s), and
    `heatsight --help` (goal <= 0.3 s); then where one fit command spends its time, each
    step timed in this process (imports warm)."""
    import shutil
    import subprocess
    import tempfile

    root = _HERE.parent
    tmp = Path(tempfile.mkdtemp(prefix="heatsight-bench-fitcmd-"))
    try:
        for name in ("platen.toml", "layout.csv", "readings.csv"):
            shutil.copy(root / "demo_data" / name, tmp / name)
        env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
        runs = iter(range(1000))

        def process(argv):
            res = subprocess.run([sys.executable, "-m", "heatsight", *argv], cwd=tmp, env=env,
                                 capture_output=True, text=True)
            if res.returncode != 0:
                raise SystemExit(f"heatsight {' '.join(argv)} failed: {res.stderr}")

        t_help = best_of(lambda: process(["--help"]), max(repeat, 3))
        t_fit = best_of(lambda: process(["fit", "platen.toml", "--out", f"o{next(runs)}"]), repeat)
        print(f"heatsight --help as a process: {t_help:.2f} s (goal <= 0.3 s)")
        print(f"heatsight fit of the demo as a process, end to end: {t_fit:.2f} s (goal <= 1.5 s)")

        # the split, in this process
        from heatsight.data_io.case import load_case
        from heatsight.data_io.fit_steps import fit_case, output_files, write_outputs
        from heatsight.data_io.figure_pngs import figure_pngs
        from heatsight.data_io.plots import all_figures, figure_png

        t = time.perf_counter()
        res = subprocess.run([sys.executable, "-c", "import heatsight.data_io.fit_command, "
                              "heatsight.data_io.fit_outputs, heatsight.data_io.plots, heatsight.data_io.report, "
                              "heatsight.inverse.fitting, heatsight.inverse.hyperprior"], env=env)
        t_imp = time.perf_counter() - t
        case = load_case(tmp / "platen.toml", purpose="fit")
        steps = {}
        t = time.perf_counter()
        result, _ = fit_case(case, case.sensors.readings)
        steps["the fit (inverse.fit with the learned prior)"] = time.perf_counter() - t
        t = time.perf_counter()
        figs = all_figures(result, zones=case.zones)
        steps["figures built (incl. the bands they show)"] = time.perf_counter() - t
        t = time.perf_counter()
        for f in figs.values():
            figure_png(f)
        steps["figures drawn to PNG, one by one"] = time.perf_counter() - t
        figs = all_figures(result, zones=case.zones)
        t = time.perf_counter()
        figure_pngs(figs)
        steps["figures drawn to PNG as the command does (figure_pngs)"] = time.perf_counter() - t
        t = time.perf_counter()
        files = output_files(result, case, case.sensors.readings)
        steps["all outputs again (tables, summary, figures, report)"] = time.perf_counter() - t
        t = time.perf_counter()
        write_outputs(tmp / "split", True, files)
        steps["writing the files"] = time.perf_counter() - t
        print(f"  imports of the fit command's modules, fresh process: {t_imp:.2f} s")
        for name, sec in steps.items():
            print(f"  {name:<58} {sec:6.2f} s")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def bench_threads(repeat):
    """The demo's inverse.fit (warm) with the BLAS pools at the library's default and at one
    thread (inverse.threads.BLAS_THREADS: what every fit now runs with), one run each way."""
    import shutil
    import tempfile

    from threadpoolctl import threadpool_info, threadpool_limits

    from heatsight.data_io.case import load_case
    from heatsight.data_io.fit_steps import fit_case
    from heatsight.inverse import threads

    tmp = Path(tempfile.mkdtemp(prefix="heatsight-bench-threads-"))
    try:
        for name in ("platen.toml", "layout.csv", "readings.csv"):
            shutil.copy(_HERE.parent / "demo_data" / name, tmp / name)
        case = load_case(tmp / "platen.toml", purpose="fit")
        fit = lambda: fit_case(case, case.sensors.readings)  # noqa: E731
        fit()
        saved = threads.BLAS_THREADS
        try:
            with threadpool_limits(limits=os.cpu_count(), user_api="blas"):   # undo main()'s one thread
                default = max(p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas")
                threads.BLAS_THREADS = None
                t_default = best_of(fit, repeat)
                threads.BLAS_THREADS = 1
                t_one = best_of(fit, repeat)
        finally:
            threads.BLAS_THREADS = saved
        print(f"demo fit, BLAS pool at the library default ({default} threads) vs one thread: "
              f"{t_default:.2f} vs {t_one:.2f} s = {t_default / t_one:.2f}x")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


SECTIONS = {"table": bench_table, "jacobian": bench_jacobian, "alphas": bench_alphas, "full": bench_full,
            "command": bench_command, "threads": bench_threads}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", default=",".join(SECTIONS), help="comma-separated sections: " + ", ".join(SECTIONS))
    args = ap.parse_args(argv)
    machine_note()
    with one_thread():
        for name in args.only.split(","):
            print(f"\n[{name.strip()}]")
            SECTIONS[name.strip()](args.repeat)


if __name__ == "__main__":
    main()
