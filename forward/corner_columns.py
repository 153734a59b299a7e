"""Corner columns of the unknown face's basis: exact fields that carry what the face's own
eigenfunctions cannot where the face meets a neighbour.

A basis column is a field that solves Laplace's equation, has a face function Phi on the
unknown face (its temperature [K] or inflow flux [W/m^2] there) and is homogeneous on
every other face.  The eigenfunction columns have Phi = an eigenfunction of the face, which
obeys the neighbours' homogeneous conditions at the shared edge; a profile that does not
(it has a *defect* there) is then represented only slowly or not uniformly.  A corner
column has a polynomial Phi, chosen per harmonic Theta_m, that carries the defect, so the
eigen-series only holds a compatible remainder.

Construction (both kinds): w = rho^m Theta_m P(rho, zeta), a harmonic polynomial
(`corners.PolynomialLifting`, terms alpha..delta), gives Phi exactly; each other face F
then gets a known-data series (`series.KnownSeries`) with data -B_F[w] (B_F: the face's
boundary operator), homogeneous elsewhere.  Those series' face functions vanish on the
unknown face (their eigenfunctions obey its homogeneous kind: T = 0 for an unknown
temperature, dT/dn = 0 for an unknown flux), so the column's Phi is the polynomial trace,
and the sum solves the column's problem.  Near the corner the series converge slowly (the
field has a weak r log r corner singularity wherever Phi's defect is not zero; the true
field has it too), but the face function itself is exact.

1. Unknown end face beside a temperature-kind side (`end_rim_columns`): the radial
   eigenfunctions J_m(j_mn r / a) all vanish at the rim.  An unknown flux there may be
   anything, so per harmonic one column with Phi = (r/a)^m Theta_m (unit rim flux; the far
   end's rim condition homogeneous).  (An unknown temperature's rim value is the side's
   temperature, carried by the lifting.)

2. Unknown side (`wall_columns`), axial eigenfunctions Z_n(z) with the ends' homogeneous
   conditions.  With s the outward normal at an end, the defect of a wall profile p(z) at
   an end is the end's operator applied to it,

       'D' (temperature end)         d = p(end)
       'N' (flux or insulated end)   d = k dp/ds(end)
       'R' (convection end)          d = k dp/ds(end) + h p(end).

   Expansions in Z_n converge like sum 1/n^2 (uniformly, but slowly) where d != 0 at an 'N'
   or 'R' end, and not uniformly at all (Gibbs) where d != 0 at a 'D' end; with both defects
   zero the coefficients fall like 1/n^4.  Per harmonic and per end with a free defect there
   is one column whose Phi = p(zeta) Theta_m has unit defect at that end and zero defect at
   the other (the lowest-degree such polynomial among 1, zeta, zeta^2 - c, zeta^3 - 3 c zeta
   for a temperature wall; the inflow flux k dw/dr at r = a for a flux wall).  Any smooth
   wall profile is then (columns x its defects) + a compatible remainder.  Which ends have a
   free defect:
     unknown-temperature wall: 'N' and 'R' ends.  At a 'D' end the wall's value is the end's
       temperature there (continuity), already carried by the corner lifting, so the
       remainder vanishes and no column is added (one would allow a temperature jump).
     unknown-flux wall: every end ('D', 'N' and 'R'): the wall's inflow flux at the corner
       is not set by the end's data.
   For m = 0, when the uniform profile p = 1 has zero defect at every end without a column
   and a nonzero one at a free end, it takes the place of that end's column (same span) and
   comes first: the basis then holds the uniform wall exactly, and the fit uses it as the
   nominal shape (`UnknownBasis.uniform_column`) instead of the fundamental eigenfunction,
   which is pulled towards the homogeneous condition at a cooled end (sin(atan(mu_0 / Bi))
   there: about 0.2 for Bi = 6).
   Every other wall column then has its L2 projection on the retained eigenfunctions of its
   harmonic subtracted (`orthogonalize`): Phi = p Theta_m - sum_n b_n Z_n Theta_m, b_n =
   <p, Z_n> / <Z_n, Z_n> (a combination of exact columns, so still exact).  The span is the
   same, but the column now holds only what the eigenfunctions cannot (a profile
   concentrated at the corner, with a large gradient), so a prior that is diagonal in the
   columns (size and gradient through the norm and surface eigenvalue below) charges a
   corner step what it costs instead of letting a smooth column and eigenfunctions cancel.
   A semi-infinite part has no discrete axial spectrum; an unknown side needs a finite
   height (`CylinderModel` refuses it).

Per-column figures for the prior: norm = integral of Phi^2 over the face [m^2]; surface
eigenvalue [1/m^2] = (m/a)^2 for the end columns, the Rayleigh quotient integral
|grad_face Phi|^2 / integral Phi^2 = integral q'^2 dz / integral q^2 dz + (m/a)^2 for a
wall column with profile q (Gauss-Legendre); power = heat into the part through the unknown
face per unit coefficient [W] (m = 0 cos only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as npoly

from .corners import PolynomialLifting, curvature_coefficient, end_rows, solve_rim
from .face_data import OperatorData
from .faces import EndCondition
from .series import KnownSeries

ENDS = ("bottom", "top")


@dataclass
class CornerColumn:
    """One corner column: Phi = profile(s) Theta_m on the unknown face, s = r / a on an end
    face, z / L on the side; field = lifting + fixes."""

    m: int
    is_sin: bool
    lifting: PolynomialLifting
    fixes: list
    profile: np.ndarray  # polynomial coefficients of Phi's profile in s, lowest first
    norm: float
    surface_eigenvalue: float
    power: float
    uniform: bool = False  # Phi = Theta_0 = 1: the wall's nominal shape (kept unorthogonalized)

    def fields(self, r, theta, z, gradient=False):
        """Temperature (P,) [K per unit coefficient] and gradient (3, P) [K/m] (zeros unless
        gradient)."""
        if gradient:
            t, g = self.lifting.field_values(r, theta, z)
        else:
            t = self.lifting.temperature(r, theta, z)
            g = np.zeros((3, t.size))
        for s in self.fixes:
            ts, gs, _ = s.evaluate(r, theta, z, gradient=gradient)
            t = t + ts
            if gradient:
                g = g + gs
        return t, g

    def face_values(self, s, theta):
        """Phi at the face's scaled coordinate s and angle theta (Q,)."""
        ang = np.sin(self.m * theta) if self.is_sin else np.cos(self.m * theta)
        return npoly.polyval(s, self.profile) * ang

    def face_values_grid(self, s, theta):
        """Phi on the grid of lines s x theta, (S, T): the profile once per s line, the angle
        once per theta line."""
        ang = np.sin(self.m * np.asarray(theta, float)) if self.is_sin else np.cos(self.m * np.asarray(theta, float))
        return np.multiply.outer(npoly.polyval(np.asarray(s, float), self.profile), ang)


def _fixes(model, w, faces, size, span=None):
    """Known-data series with data -B_F[w] on each face F, homogeneous elsewhere; size: the
    temperature size of w [K] over the length span [m] (for the series' tolerance)."""
    a, L, k = model.cylinder.radius, model.cylinder.height, model.k
    out = []
    for face in faces:
        cond = model.kinds[face]
        data = OperatorData(model, w, face, cond)
        span_f = span or (a if face != "side" else min(a, L))
        series = KnownSeries(face, data, (a, L), model.kinds, k, tol=model.tolerance,
                             scale=cond.datum_scale(k, span_f) * size, n_cap=model.max_terms,
                             max_harmonic=model.max_harmonic)
        if series.modes is not None:
            out.append(series)
    return out


def _theta_weight(m):
    """integral of Theta_m^2 over a turn: 2 pi (m = 0) or pi."""
    return 2.0 * math.pi if m == 0 else math.pi


def _harmonics(harmonics):
    for m in range(harmonics + 1):
        for is_sin in ((False,) if m == 0 else (False, True)):
            yield m, is_sin


def end_rim_columns(model, face, harmonics):
    """Rim-flux columns for an unknown-flux end beside a temperature-kind side (item 1 of the
    module docstring); [] in every other case."""
    cyl = model.cylinder
    cond = model.faces[face]
    if (face == "side" or cond.kind != "N" or model.kinds["side"].kind != "D"
            or cyl.semi_infinite):
        return []
    a, L, k = cyl.radius, cyl.height, model.k
    far = "top" if face == "bottom" else "bottom"
    out = []
    for m, is_sin in _harmonics(harmonics):
        c = float(curvature_coefficient(m, a, L))
        rows = [end_rows(face, EndCondition("N"), k, L, c), end_rows(far, model.kinds[far], k, L, c)]
        w = PolynomialLifting.from_terms(a, L, [(m, is_sin, solve_rim(rows, [1.0, 0.0]))])
        fixes = _fixes(model, w, ("side", far), L / k, span=L)
        profile = np.zeros(m + 1)
        profile[m] = 1.0
        norm = _theta_weight(m) * a * a / (2.0 * m + 2.0)
        power = math.pi * a * a if (m == 0 and not is_sin) else 0.0
        out.append(CornerColumn(m, is_sin, w, fixes, profile, norm, (m / a) ** 2,
                                power if model.has_conductivity else math.nan))
    return out


def _trace_matrix(m, c, temperature, k, a):
    """Map (alpha, beta, gamma, delta) -> coefficients of the wall profile in zeta^0..3:
    the temperature w(a, zeta) or the inflow flux k dw/dr(a, zeta) of the polynomial term."""
    t = np.array([[1.0, 0.0, -c, 0.0],
                  [0.0, 1.0, 0.0, -3.0 * c],
                  [0.0, 0.0, 1.0, 0.0],
                  [0.0, 0.0, 0.0, 1.0]])
    if temperature:
        return t
    # d/drho [rho^m (...)] at rho = 1: m (...) - 2 c gamma - 6 c delta zeta
    extra = np.zeros((4, 4))
    extra[0, 2] = -2.0 * c
    extra[1, 3] = -6.0 * c
    return (k / a) * (m * t + extra)


def _defect_row(end, cond, k, L):
    """Defect of a profile sum_j p_j zeta^j at an end, as a row on (p_0..p_3)."""
    j = np.arange(4.0)
    if end == "bottom":  # zeta = 0, outward -z
        value = (j == 0).astype(float)
        dn = -(j == 1).astype(float) / L
    else:
        value = np.ones(4)
        dn = j / L
    return cond.operator(value, dn, k)


def _solve_lowest(rows, targets):
    """Coefficient vectors x with rows @ x = target for each target, using the fewest leading
    coefficients (alpha, beta, then gamma, delta) that make the rows independent; minimum
    norm within them."""
    rows = np.asarray(rows, float)
    scale = max(np.abs(rows).max(), 1e-300)
    for n in range(2, 5):
        A = rows[:, :n]
        if np.linalg.matrix_rank(A, tol=1e-10 * scale) == rows.shape[0]:
            out = []
            for t in targets:
                x = np.zeros(4)
                x[:n] = np.linalg.lstsq(A, np.asarray(t, float), rcond=None)[0]
                out.append(x)
            return out
    raise ValueError("internal: no polynomial wall profile meets the corner defects")


def wall_columns(model, harmonics):
    """Corner columns of an unknown side (item 2 of the module docstring)."""
    cyl = model.cylinder
    cond = model.faces["side"]
    if not cond.unknown or cyl.semi_infinite:
        return []
    temperature = cond.kind == "D"
    a, L, k = cyl.radius, cyl.height, model.k
    kinds = {e: model.kinds[e] for e in ENDS}
    free = [e for e in ENDS if not (temperature and kinds[e].kind == "D")]
    if not free:
        return []
    zeta = np.linspace(0.0, 1.0, 201)
    out = []
    for m, is_sin in _harmonics(harmonics):
        c = float(curvature_coefficient(m, a, L))
        T = _trace_matrix(m, c, temperature, k, a)
        rows = np.array([_defect_row(e, kinds[e], k, L) @ T for e in ENDS])
        targets = [[1.0 if e == own else 0.0 for e in ENDS] for own in free]
        xs = _solve_lowest(rows, targets)
        uniform = _uniform_replacing(xs, T, rows, free) if m == 0 else None
        for i, x in enumerate(xs if uniform is None else uniform):
            profile = T @ x
            size = np.abs(npoly.polyval(zeta, profile)).max()
            x, profile = x / size, profile / size
            w = PolynomialLifting.from_terms(a, L, [(m, is_sin, tuple(x))])
            th0 = np.full(zeta.size, 0.5 * math.pi / m if is_sin else 0.0)  # Theta_m = 1 there
            t_size = np.abs(w.temperature(np.full(zeta.size, a), th0, zeta * L)).max()
            fixes = _fixes(model, w, ENDS, max(t_size, 1e-300))
            power = _wall_power(model, w, fixes, profile, m, is_sin, temperature)
            # norm and surface eigenvalue are set by `orthogonalize`
            out.append(CornerColumn(m, is_sin, w, fixes, profile, math.nan, math.nan, power,
                                    uniform=uniform is not None and i == 0))
    return out


def _uniform_replacing(xs, T, rows, free):
    """[uniform profile] + the other columns, when p = 1 has zero defect at every end without
    a column and a nonzero one at a free end (then the span is the same); else None."""
    x_u = np.linalg.lstsq(T, np.array([1.0, 0.0, 0.0, 0.0]), rcond=None)[0]
    if not np.allclose(T @ x_u, [1.0, 0.0, 0.0, 0.0], atol=1e-9 * max(np.abs(T).max(), 1.0)):
        return None
    d = rows @ x_u
    tol = 1e-12 * max(np.abs(rows).max(), 1e-300)
    if any(abs(d[i]) > tol for i, e in enumerate(ENDS) if e not in free):
        return None
    hit = [i for i, e in enumerate(free) if abs(d[ENDS.index(e)]) > tol]
    if not hit:
        return None
    return [x_u] + [x for i, x in enumerate(xs) if i != hit[0]]


def orthogonalize(columns, modes, n_eigen):
    """Mixing matrix B (n_eigen, len(columns)): wall column j becomes its polynomial column
    minus sum_k B[k, j] (eigen column k), with B[k, j] = <p_j, Z_k> / <Z_k, Z_k> for the
    eigen columns of the same harmonic and parity (zero otherwise); also sets each column's
    norm and surface eigenvalue for the orthogonalized profile q_j = p_j - sum_k B[k, j] Z_k."""
    a, L = modes.radius, modes.height
    x, wq = np.polynomial.legendre.leggauss(256)
    zeta = 0.5 * (x + 1.0)
    wq = 0.5 * wq
    zz, dzz = modes.axial(zeta * L)  # (Q, K): Z_k and dZ_k/dz
    norms_z = (wq[:, None] * zz * zz).sum(axis=0)  # integral over zeta of Z_k^2
    B = np.zeros((n_eigen, len(columns)))
    for j, col in enumerate(columns):
        same = (modes.m == col.m) & (modes.is_sin == col.is_sin)
        p = npoly.polyval(zeta, col.profile)
        dp = npoly.polyval(zeta, npoly.polyder(col.profile)) / L
        if not col.uniform:
            B[same, j] = (wq * p) @ zz[:, same] / norms_z[same]
        q = p - zz @ B[:, j]
        dq = dp - dzz @ B[:, j]
        int_q2 = float(wq @ (q * q))
        col.norm = _theta_weight(col.m) * a * L * int_q2
        col.surface_eigenvalue = float(wq @ (dq * dq)) / int_q2 + (col.m / a) ** 2
    return B


def _wall_power(model, w, fixes, profile, m, is_sin, temperature):
    """Heat INTO the part through the side [W] per unit coefficient (m = 0 cos only)."""
    cyl = model.cylinder
    if not model.has_conductivity:
        return math.nan
    if m != 0 or is_sin:
        return 0.0
    if not temperature:  # the face function is the inflow flux itself
        mean = float(npoly.polyval(1.0, npoly.polyint(profile)))
        return 2.0 * math.pi * cyl.radius * cyl.height * mean
    return w.power("side", model.k) + sum(s.powers().get("side", 0.0) for s in fixes)
