"""Timing of the forward model (not run by pytest).

    python bench/forward.py [--repeat N] [--only bessel,lookup,roots,fullfield,accuracy,demofit]

bessel    mode-point evaluations per second of forward.bessel.besselj (one call on the
          batched table) vs scipy.special.jv called once per (m, n) pair at the same
          points; goal >= 10x.
lookup    ns per mode-point of the table lookup: before (one gather of the six coefficients
          of each pair from a (pairs, 6) array, one Horner sum over the whole batch: the
          former layout, rebuilt here from the same table) vs after (one array per power,
          blocks of forward.bessel.BLOCK pairs); same numbers required.
roots     root-table reuse: a sector heater (87 harmonics, convection rim: Robin roots) and an
          unknown-face basis at 10/20/40 terms, built with the root cache cleared vs reused,
          and a rebuild at an h between two cached ones (+-0.2 %, as calibration steps), cache
          cleared vs warm.
fullfield full-field map at 1e5 points (grid r x theta x z) to 1e-4 of the temperature span:
          series (CylinderModel build + evaluate_grid, temperature only) vs a scikit-fem P2
          solve refined until it reaches the same accuracy (mesh + assemble + solve +
          evaluation at the grid, evaluated per (r, z) pair and combined with the angles, its
          faster way); also the series' pointwise evaluate at the same points.  Goal >= 3x.
accuracy  accuracy per time on a platen (non-uniform bottom heat flux, convection top,
          insulated side): time for the Bessel-Fourier series (CylinderModel build +
          evaluate) to reach 1e-4 of the temperature span at 50 interior points, vs a
          scikit-fem P2 solve (tests/fem_cylinder.py) refined until it reaches the same
          accuracy.  Reference: the series at tolerance 1e-12, itself checked against the
          finest FE solve.  Goal >= 100x.
demofit   the demo's fit (heatsight.fit, warm) with the face display grid and quadrature
          rule evaluated on grid lines vs point by point, the change of its answers, and
          where its time goes (exclusive time of the wrapped steps).

Ratios are measured in one run on whatever machine runs this; the machine note printed
first says what that was.  BLAS is limited to one thread (threadpoolctl) when available.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import platform
import sys
import time
from pathlib import Path

# Run as a script, this file's folder comes first on sys.path and its name would hide the
# forward package: drop the folder before importing it.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or os.getcwd()).resolve() != _HERE]

import numpy as np  # noqa: E402
import scipy  # noqa: E402
from scipy import special  # noqa: E402

import heatsight.forward as fw  # noqa: E402
from heatsight.forward.bessel import besselj  # noqa: E402
from heatsight.forward.roots import radial_eigenvalues  # noqa: E402


def best_of(fn, repeat):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def best_cold_fem(fn, repeat):
    """best_of for a scikit-fem solve timed whole: tests/fem_cylinder.py caches factorized
    systems between solves, so each run starts from an empty cache (mesh, assembly and
    factorization counted, not only a back-substitution)."""
    from fem_cylinder import clear_cache

    def run():
        clear_cache()
        return fn()
    return best_of(run, repeat)


def one_thread():
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # optional
        return contextlib.nullcontext()
    return threadpool_limits(limits=1)


def machine_note():
    load = os.getloadavg() if hasattr(os, "getloadavg") else ()
    print(f"machine: {platform.machine()} | {os.cpu_count()} logical CPUs | load average "
          f"{' '.join(f'{x:.2f}' for x in load)} | Python {platform.python_version()} | numpy {np.__version__} | "
          f"scipy {scipy.__version__} | BLAS 1 thread")


# ------------------------------------------------------------------------------ bessel
def bench_bessel(repeat, harmonics=10, terms=20, point_counts=(64, 2000, 8192)):
    """Radial factors J_m(lambda_mn r / a) of an end-face basis, (harmonics+1) x terms pairs,
    at 64 points (a sensor set), 2000 and 8192 points (face grids, quadrature rules)."""
    ms, lams = [], []
    for m in range(harmonics + 1):
        lam = radial_eigenvalues("N", m, terms, 0.0)           # insulated rim: J_m'(lambda) = 0
        ms.append(np.full(terms, m)), lams.append(lam)
    m = np.concatenate(ms)
    lam = np.concatenate(lams)
    pairs = m.size
    for points in point_counts:
        rho = np.random.default_rng(points).uniform(0.0, 1.0, points)   # r / a
        x = lam[:, None] * rho[None, :]                                 # (pairs, points)
        besselj(m[:, None], x)                                          # table built once (cached)
        t_table = best_of(lambda: besselj(m[:, None], x), repeat)

        def per_pair():
            out = np.empty_like(x)
            for i in range(pairs):
                out[i] = special.jv(m[i], x[i])
            return out

        t_pairs = best_of(per_pair, repeat)
        t_once = best_of(lambda: special.jv(m[:, None], x), repeat)
        err = np.abs(besselj(m[:, None], x) - special.jv(m[:, None], x)).max()
        evals = pairs * points
        print(f"J_m(lambda_mn r/a): {pairs} (m, n) pairs x {points} points = {evals} mode-point evaluations; "
              f"max |table - scipy.special.jv| = {err:.1e}")
        print(f"  forward.bessel.besselj (table)       {t_table * 1e3:8.2f} ms  {evals / t_table:10.3g} /s")
        print(f"  scipy.special.jv once per (m, n)     {t_pairs * 1e3:8.2f} ms  {evals / t_pairs:10.3g} /s")
        print(f"  ratio per-pair jv / table = {t_pairs / t_table:.1f}x (goal >= 10x); scipy.special.jv in one "
              f"broadcast call: {t_once * 1e3:.2f} ms ({t_once / t_table:.1f}x)")


# ---------------------------------------------------------------------------- accuracy
A, L, K, H, TAMB = 0.15, 0.04, 16.0, 25.0, 298.15     # m, m, W/(m K), W/(m^2 K), K


def smooth_case():
    """q = Q0 (1 + 0.3 (r/a)^2) + Q1 (r/a) cos(theta): harmonics m = 0 and m = 1."""
    q0, q1 = 5.0e3, 1.5e3
    flux = lambda r, th: q0 * (1.0 + 0.3 * (r / A) ** 2) + q1 * (r / A) * np.cos(th)  # noqa: E731
    harmonics = {(0, "cos"): lambda s: q0 * (1.0 + 0.3 * (s / A) ** 2), (1, "cos"): lambda s: q1 * s / A}
    return "smooth flux Q0 (1 + 0.3 (r/a)^2) + Q1 (r/a) cos(theta)", flux, harmonics


def ring_case():
    """A heater ring at r = 0.6 a (Gaussian width 0.08 a) with a three-fold pattern."""
    q0, qr, w = 2.0e3, 6.0e3, 0.08
    ring = lambda s: np.exp(-(((s / A) - 0.6) / w) ** 2)  # noqa: E731
    flux = lambda r, th: q0 + qr * ring(r) * (1.0 + 0.5 * np.cos(3 * th))  # noqa: E731
    harmonics = {(0, "cos"): lambda s: q0 + qr * ring(s), (3, "cos"): lambda s: 0.5 * qr * ring(s)}
    return "heater ring at 0.6 a with a cos(3 theta) pattern", flux, harmonics


def series_field(flux, tolerance, r, theta, z):
    faces = {"bottom": fw.Flux(flux), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
    return fw.CylinderModel(fw.Cylinder(A, L, K), faces, tolerance=tolerance).temperature(r, theta, z)


def fem_field(harmonics, nr, nz, r, theta, z):
    from fem_cylinder import solve_field
    spec = {key: {"bottom": ("N", q), "top": ("R", H, TAMB if key[0] == 0 else 0.0), "side": ("N", 0.0)}
            for key, q in harmonics.items()}
    return solve_field(A, L, K, spec, order=2, nr=nr, nz=nz).temperature(r, theta, z)


def sector_case():
    """A heater sector: q = Q0 + QS (1 - (r/a)^2 / 2) S(theta), S = (1 + tanh((cos(theta) -
    cos(pi/4)) / 0.15)) / 2 (a 90 deg sector with soft edges), harmonics from an FFT of S
    (those above 1e-7 of the largest)."""
    q0, qs, w = 2.0e3, 6.0e3, 0.15

    def shape(th):
        return 0.5 * (1.0 + np.tanh((np.cos(np.asarray(th, float)) - np.cos(np.pi / 4)) / w))

    radial = lambda s: 1.0 - 0.5 * (s / A) ** 2  # noqa: E731
    flux = lambda r, th: q0 + qs * radial(r) * shape(th)  # noqa: E731
    n = 512
    spec = np.fft.rfft(shape(2 * np.pi * np.arange(n) / n)) / n
    amp = 2.0 * spec.real
    amp[0] *= 0.5
    harmonics = {(0, "cos"): lambda s, a0=amp[0]: q0 + qs * a0 * radial(s)}
    for m in range(1, n // 2):
        if abs(amp[m]) > 1e-7 * abs(amp).max():
            harmonics[(m, "cos")] = lambda s, am=amp[m]: qs * am * radial(s)
    return f"heater sector 90 deg, soft edges ({len(harmonics)} harmonics)", flux, harmonics


def bench_accuracy(repeat, points=50, goal=1e-4):
    sys.path.insert(0, str(_HERE.parent / "tests"))
    rng = np.random.default_rng(1)
    r = A * np.sqrt(rng.uniform(0.0, 0.98, points))
    theta = rng.uniform(0.0, 2 * np.pi, points)
    z = L * rng.uniform(0.02, 0.98, points)
    fem_field(smooth_case()[2], 2, 2, r, theta, z)     # warm up scikit-fem
    for title, flux, harmonics in (ring_case(), sector_case()):
        ref = series_field(flux, 1e-12, r, theta, z)
        span = float(ref.max() - ref.min())
        target = goal * span
        print(f"{title}; platen a = {A} m, L = {L} m, k = {K} W/(m K), top h = {H} W/(m^2 K), "
              f"insulated rim; {points} interior points, span {span:.4g} K, target max error "
              f"{target:.3g} K ({goal:g} of the span); reference: series at tolerance 1e-12")
        chosen = None
        for tol in (1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
            err = np.abs(series_field(flux, tol, r, theta, z) - ref).max()
            print(f"  series tolerance {tol:7.0e}: max error {err:.2e} K")
            if err <= target:
                chosen = tol
                break
        t_series = best_of(lambda: series_field(flux, chosen, r, theta, z), repeat)
        reached, nr, nz = None, 4, 2
        for _ in range(8):
            t = time.perf_counter()
            err = np.abs(fem_field(harmonics, nr, nz, r, theta, z) - ref).max()
            dt = time.perf_counter() - t
            print(f"  scikit-fem P2 {nr:4d} x {nz:3d} cells, {len(harmonics)} harmonics: max error {err:.2e} K "
                  f"({dt * 1e3:.0f} ms)")
            if err <= target:
                reached = (nr, nz)
                break
            nr, nz = 2 * nr, 2 * nz
        print(f"  series at tolerance {chosen:g}: {t_series * 1e3:.2f} ms (CylinderModel build + evaluate; "
              f"root and Bessel tables warm from the builds above, as in repeated builds)")
        if reached is None:
            print("  scikit-fem did not reach the target within the refinements tried")
            continue
        t_fem = best_cold_fem(lambda: fem_field(harmonics, *reached, r, theta, z), repeat)
        print(f"  scikit-fem P2 at {reached[0]} x {reached[1]} cells: {t_fem * 1e3:.1f} ms "
              f"(mesh + assemble + solve + evaluate)")
        print(f"  ratio FE / series = {t_fem / t_series:.1f}x (goal >= 100x)")


# ------------------------------------------------------------------------------ lookup
def bench_lookup(repeat, harmonics=10, terms=20, points=8192):
    """ns per mode-point of the J_m table lookup, former layout vs current, same table."""
    from heatsight.forward import bessel
    ms, lams = [], []
    for m in range(harmonics + 1):
        ms.append(np.full(terms, m)), lams.append(radial_eigenvalues("N", m, terms, 0.0))
    m, lam = np.concatenate(ms), np.concatenate(lams)
    rho = np.random.default_rng(7).uniform(0.0, 1.0, points)
    x = np.multiply.outer(rho, lam)                  # (points, pairs) as the mode fields ask
    mm = np.broadcast_to(m, x.shape)
    besselj(mm, x)
    table = bessel._get_table(int(m.max()), float(x.max()))
    rows = np.stack(table.powers, axis=1)           # the former (pairs * nodes, 6) layout
    n_nodes = table.n_nodes

    def before():
        t = x * (1.0 / bessel.STEP)
        i = np.minimum(t.astype(np.intp), n_nodes - 2)
        t -= i
        c = rows[mm * n_nodes + i]
        return c[..., 0] + t * (c[..., 1] + t * (c[..., 2] + t * (c[..., 3] + t * (c[..., 4] + t * c[..., 5]))))

    after = lambda: table(mm, x)  # noqa: E731
    same = np.array_equal(before(), after())
    t_before, t_after = best_of(before, repeat), best_of(after, repeat)
    t_jv = best_of(lambda: special.j0(x), repeat)
    n = x.size
    print(f"J_m table lookup, {m.size} modes x {points} points: identical results: {same}")
    print(f"  before (one gather of 6 coefficients)   {t_before / n * 1e9:6.1f} ns per mode-point")
    print(f"  after (one array per power, blocks of {bessel.BLOCK}) {t_after / n * 1e9:6.1f} ns per mode-point")
    print(f"  scipy.special.j0 (one order only)        {t_jv / n * 1e9:6.1f} ns per point")
    print(f"  ratio before / after = {t_before / t_after:.2f}x")


# ------------------------------------------------------------------------------- roots
def bench_roots(repeat, harmonics=87):
    from heatsight.forward import roots
    _, flux, _ = sector_case()

    def sector_model(h_side):
        faces = {"bottom": fw.Flux(flux), "top": fw.Convection(H, TAMB), "side": fw.Convection(h_side, TAMB)}
        return fw.CylinderModel(fw.Cylinder(A, L, K), faces, tolerance=1e-6, max_harmonic=harmonics)

    def basis(h_side, terms):
        faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Convection(h_side, TAMB)}
        model = fw.CylinderModel(fw.Cylinder(A, L, K), faces)
        return [model.basis(harmonics, n) for n in terms]

    jobs = {f"sector heater, {harmonics} harmonics max, Robin rim (CylinderModel build)":
            lambda h: sector_model(h),
            f"unknown bottom, {harmonics} harmonics, basis at 10, 20 and 40 terms":
            lambda h: basis(h, (10, 20, 40))}
    for title, job in jobs.items():
        def cold(h=12.0):
            roots.ROOT_CACHE.clear()
            job(h)
        cold()
        t_cold = best_of(cold, repeat)
        job(12.0)
        t_warm = best_of(lambda: job(12.0), repeat)

        def new_h_between():
            """Calibration: roots cached for h = 12 and 12.048, then h = 12.024 (+0.2 %)."""
            roots.ROOT_CACHE.clear()
            job(12.0)
            job(12.048)
            t = time.perf_counter()
            job(12.024)
            return time.perf_counter() - t

        def new_h_no_cache():
            roots.ROOT_CACHE.clear()
            t = time.perf_counter()
            job(12.024)
            return time.perf_counter() - t

        t_new_h = min(new_h_between() for _ in range(repeat))
        t_new_h_cold = min(new_h_no_cache() for _ in range(repeat))
        print(title)
        print(f"  cache cleared {t_cold * 1e3:8.1f} ms | reused {t_warm * 1e3:8.1f} ms | ratio {t_cold / t_warm:.1f}x")
        print(f"  new h between two cached ones (+-0.2 %): no cache {t_new_h_cold * 1e3:8.1f} ms | from the neighbouring h's roots "
              f"{t_new_h * 1e3:8.1f} ms | ratio {t_new_h_cold / t_new_h:.1f}x")


# --------------------------------------------------------------------------- fullfield
def bench_fullfield(repeat, goal=1e-4, shape=(50, 50, 40), goal_ratio=3.0):
    sys.path.insert(0, str(_HERE.parent / "tests"))
    nr, nt, nz = shape
    r = np.linspace(0.0, A, nr)
    th = 2 * np.pi * np.arange(nt) / nt
    z = np.linspace(0.0, L, nz)
    R, TH, Z = np.meshgrid(r, th, z, indexing="ij")
    fem_field(smooth_case()[2], 2, 2, r[:3], th[:3], z[:3])     # warm up scikit-fem

    def series_grid(flux, tol):
        faces = {"bottom": fw.Flux(flux), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
        model = fw.CylinderModel(fw.Cylinder(A, L, K), faces, tolerance=tol)
        return model.evaluate_grid(r, th, z).temperature

    def fem_grid(harmonics, nrc, nzc):
        """FE solve, evaluated once per (r, z) pair and combined with the angles."""
        from fem_cylinder import solve_field
        spec = {key: {"bottom": ("N", q), "top": ("R", H, TAMB if key[0] == 0 else 0.0), "side": ("N", 0.0)}
                for key, q in harmonics.items()}
        field = solve_field(A, L, K, spec, order=2, nr=nrc, nz=nzc)
        rr, zz = np.repeat(r, nz), np.tile(z, nr)
        out = np.zeros((nr, nt, nz))
        for (m, kind), sol in field.harmonics.items():
            ang = np.cos(m * th) if kind == "cos" else np.sin(m * th)
            out += sol.temperature(rr, zz).reshape(nr, 1, nz) * ang[None, :, None]
        return out, field

    for title, flux, harmonics in (ring_case(), sector_case()):
        ref = series_grid(flux, 1e-12)
        span = float(np.ptp(ref))
        target = goal * span
        print(f"{title}; {R.size} points on an {nr} x {nt} x {nz} grid (r x theta x z, faces included), "
              f"span {span:.4g} K, target {target:.3g} K; reference: series at tolerance 1e-12")
        chosen = None
        for tol in (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
            err = np.abs(series_grid(flux, tol) - ref).max()
            print(f"  series tolerance {tol:7.0e}: max error {err:.2e} K")
            if err <= target:
                chosen = tol
                break
        if chosen is None:
            print("  the series did not reach the target")
            continue
        t_series = best_of(lambda: series_grid(flux, chosen), repeat)  # root/Bessel tables warm
        faces = {"bottom": fw.Flux(flux), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
        t_points = None
        if len(harmonics) <= 4:  # pointwise at 1e5 points with many harmonics takes minutes
            t_points = best_of(lambda: fw.CylinderModel(fw.Cylinder(A, L, K), faces, tolerance=chosen)
                               .temperature(R, TH, Z), 1)
        reached, nrc, nzc = None, 8, 4
        for _ in range(7):
            t = time.perf_counter()
            out, _ = fem_grid(harmonics, nrc, nzc)
            err = np.abs(out - ref).max()
            print(f"  scikit-fem P2 {nrc:4d} x {nzc:3d} cells: max error {err:.2e} K ({(time.perf_counter() - t) * 1e3:.0f} ms)")
            if err <= target:
                reached = (nrc, nzc)
                break
            nrc, nzc = 2 * nrc, 2 * nzc
        print(f"  series, grid evaluation (build + evaluate_grid): {t_series * 1e3:8.1f} ms")
        if t_points is not None:
            print(f"  series, pointwise evaluate at the same points:   {t_points * 1e3:8.1f} ms "
                  f"(grid is {t_points / t_series:.1f}x faster)")
        if reached is None:
            print("  scikit-fem did not reach the target within the refinements tried")
            continue
        t_fem = best_cold_fem(lambda: fem_grid(harmonics, *reached), repeat)
        t_pts = best_cold_fem(lambda: fem_field(harmonics, *reached, R.ravel(), TH.ravel(), Z.ravel()), 1)
        print(f"  scikit-fem P2 at {reached[0]} x {reached[1]} cells: {t_fem * 1e3:8.1f} ms evaluated per (r, z) "
              f"pair, {t_pts * 1e3:8.1f} ms per point")
        best_fem = min(t_fem, t_pts)
        verdict = "MET" if best_fem / t_series >= goal_ratio else "NOT MET"
        print(f"  ratio FE (its faster way) / series grid = {best_fem / t_series:.1f}x (goal >= {goal_ratio:g}x: {verdict})")


# ----------------------------------------------------------------------------- demofit
class _Split:
    """Exclusive time per category of wrapped functions (nested calls are not counted twice)."""

    def __init__(self):
        self.total, self.stack = {}, []

    def wrap(self, owner, name, category):
        fn = getattr(owner, name)

        def timed(*args, **kwargs):
            self.stack.append([category, 0.0])
            t = time.perf_counter()
            try:
                return fn(*args, **kwargs)
            finally:
                dt = time.perf_counter() - t
                cat, inner = self.stack.pop()
                self.total[cat] = self.total.get(cat, 0.0) + dt - inner
                if self.stack:
                    self.stack[-1][1] += dt
        setattr(owner, name, timed)
        return lambda: setattr(owner, name, fn)


def bench_demofit(repeat):
    """The demo's fit (heatsight.fit, warm) with the face display grid and quadrature rule
    evaluated on grid lines (face_grid.face_on, face_sums -> Design.face_grid) and point by point (the
    same fit with Design.face_grid hidden), and where its time goes."""
    from importlib import resources
    import heatsight
    from heatsight.inverse import design as design_mod, functionals, result, zone_columns
    path = str(resources.files("heatsight.demo_data") / "platen.toml")
    # the zone model's design has its own grid path (its smooth design's plus indicators)
    owners = (design_mod.Design, zone_columns.ZoneDesign)
    grid_methods = [owner.face_grid for owner in owners]

    def run(grid):
        for owner, method in zip(owners, grid_methods):
            owner.face_grid = method if grid else None
        try:
            return heatsight.fit(path)
        finally:
            for owner, method in zip(owners, grid_methods):
                owner.face_grid = method

    fits = {"grid": run(True), "pointwise": run(False)}
    a, b = (fits[k].raw.summary for k in ("grid", "pointwise"))
    nums = [(x, y) for x, y in ((a[k], b[k]) for k in a) if isinstance(x, float)]
    worst = max(abs(x - y) / max(abs(y), 1e-300) for x, y in nums)
    est = np.abs(fits["grid"].raw.grid["estimate"] - fits["pointwise"].raw.grid["estimate"]).max()
    print(f"demo fit: largest relative change of the summary's top-level numbers, grid vs pointwise "
          f"{worst:.1e}; face map estimate {est:.1e} W/m^2")
    times = {"grid": [], "pointwise": []}
    for _ in range(repeat):  # alternate, so both see the same load
        for key in times:
            t = time.perf_counter()
            run(key == "grid")
            times[key].append(time.perf_counter() - t)
    for key in times:
        split = _Split()
        undo = [split.wrap(result, "face_on", "face values (display grid, quadrature)"),
                split.wrap(functionals, "face_sums", "face values (display grid, quadrature)"),
                split.wrap(design_mod.Design, "__init__", "model + basis build"),
                split.wrap(design_mod.Design, "at", "fields at the sensors"),
                split.wrap(result.Posterior, "figures", "bands of the figures (posterior.figures)"),
                split.wrap(result.Posterior, "draws", "posterior draws (extremes)")]
        t = time.perf_counter()
        run(key == "grid")
        whole = time.perf_counter() - t
        for u in undo:
            u()
        print(f"  {key:9s}: fit {min(times[key]):.3f} s (best of {repeat}); split of one instrumented run "
              f"({whole:.3f} s):")
        for cat, dt in sorted(split.total.items(), key=lambda kv: -kv[1]):
            print(f"      {cat:<42} {dt * 1e3:8.1f} ms ({100 * dt / whole:4.1f} %)")
        rest = whole - sum(split.total.values())
        print(f"      {'everything else':<42} {rest * 1e3:8.1f} ms ({100 * rest / whole:4.1f} %)")
    print(f"  ratio pointwise / grid = {min(times['pointwise']) / min(times['grid']):.2f}x")


# ------------------------------------------------------------------------------ annulus
TUBE = (0.04, 0.10, 0.20, 15.0)  # bore radius, outer radius, length [m], k [W/(m K)] (invented)


def _tube_band(z):
    """A band heater on the outer wall [W/m^2], soft edges (tanh, 4 mm)."""
    return 1.2e4 * 0.5 * (np.tanh((z - 0.05) / 0.004) - np.tanh((z - 0.15) / 0.004))


def tube_series(tolerance, r, theta, z):
    """Outer band heater (m = 0) plus a cos(2 theta) part, bore convection, ends insulated."""
    ai, b, L, k = TUBE
    faces = {"side": fw.Flux(lambda t, zz: _tube_band(zz) * (1.0 + 0.4 * np.cos(2 * t))),
             "bore": fw.Convection(800.0, TAMB), "bottom": fw.Insulated(), "top": fw.Insulated()}
    return fw.CylinderModel(fw.Cylinder(b, L, k, inner_radius=ai), faces, tolerance=tolerance).temperature(r, theta, z)


def tube_fem(nr, nz, r, theta, z):
    from fem_cylinder import solve_field
    ai, b, L, k = TUBE
    spec = {(m, "cos"): {"side": ("N", (lambda s: _tube_band(s)) if m == 0 else (lambda s: 0.4 * _tube_band(s))),
                         "bore": ("R", 800.0, TAMB if m == 0 else 0.0), "bottom": ("N", 0.0), "top": ("N", 0.0)}
            for m in (0, 2)}
    return solve_field(b, L, k, spec, order=2, nr=nr, nz=nz, inner_radius=ai).temperature(r, theta, z)


def bench_annulus(repeat, points=50, goal=1e-4):
    """The hollow part: radial eigenfunctions vs scipy per (m, n) pair (bench/annulus_radial.py),
    then accuracy per time of the series against scikit-fem on a tube with a band heater."""
    sys.path.insert(0, str(_HERE))
    from annulus_radial import bench_radial
    bench_radial(harmonics=30, roots=256, points=64, repeat=repeat)
    sys.path.insert(0, str(_HERE.parent / "tests"))
    ai, b, L, k = TUBE
    rng = np.random.default_rng(2)
    r = ai + (b - ai) * rng.uniform(0.02, 0.98, points)
    theta = rng.uniform(0.0, 2 * np.pi, points)
    z = L * rng.uniform(0.02, 0.98, points)
    ref = tube_series(1e-12, r, theta, z)
    span = float(ref.max() - ref.min())
    target = goal * span
    print(f"tube a_i = {ai} m, a = {b} m, L = {L} m, k = {k} W/(m K): outer band heater with a cos(2 theta) "
          f"part, bore h = 800 W/(m^2 K), insulated ends; {points} interior points, span {span:.4g} K, "
          f"target {target:.3g} K ({goal:g} of the span); reference: series at tolerance 1e-12")
    chosen = None
    for tol in (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
        err = np.abs(tube_series(tol, r, theta, z) - ref).max()
        print(f"  series tolerance {tol:7.0e}: max error {err:.2e} K")
        if err <= target:
            chosen = tol
            break
    t_series = best_of(lambda: tube_series(chosen, r, theta, z), repeat)
    reached, nr, nz = None, 2, 4
    for _ in range(8):
        t = time.perf_counter()
        err = np.abs(tube_fem(nr, nz, r, theta, z) - ref).max()
        print(f"  scikit-fem P2 {nr:4d} x {nz:3d} cells, 2 harmonics: max error {err:.2e} K "
              f"({(time.perf_counter() - t) * 1e3:.0f} ms)")
        if err <= target:
            reached = (nr, nz)
            break
        nr, nz = 2 * nr, 2 * nz
    print(f"  series at tolerance {chosen:g}: {t_series * 1e3:.2f} ms (model build + evaluate, tables warm)")
    if reached is None:
        print("  scikit-fem did not reach the target within the refinements tried")
        return
    t_fem = best_cold_fem(lambda: tube_fem(*reached, r, theta, z), repeat)
    print(f"  scikit-fem P2 at {reached[0]} x {reached[1]} cells: {t_fem * 1e3:.1f} ms")
    print(f"  ratio FE / series = {t_fem / t_series:.1f}x (accuracy per time at {goal:g} of the span)")


SECTIONS = {"bessel": bench_bessel, "lookup": bench_lookup, "roots": bench_roots,
            "fullfield": bench_fullfield, "accuracy": bench_accuracy, "demofit": bench_demofit,
            "annulus": bench_annulus}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", default=",".join(SECTIONS), help="comma-separated: " + ", ".join(SECTIONS))
    args = ap.parse_args(argv)
    machine_note()
    with one_thread():
        for name in args.only.split(","):
            print(f"\n[{name.strip()}]")
            SECTIONS[name.strip()](args.repeat)


if __name__ == "__main__":
    main()
