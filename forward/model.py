"""The cylinder model: superposition of one sub-problem per face with data, plus a lifting.

T = w + sum_F u_F, where u_F carries the residual data of face F (data minus B_F[w])
with the other faces homogeneous of their own kinds, and an unknown face (if any) is
homogeneous in all of them: T = 0 (unknown-temperature) or dT/dn = 0 (unknown-flux).
Its own field is the basis `CylinderModel.basis(...)`, one column per eigenfunction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import ForwardModelError, IllPosedError
from .faces import EndCondition, FaceCondition, Flux, Temperature
from .geometry import Cylinder, is_wall
from .harmonics import harmonic_amplitudes, theta_nodes
from .corners import PolynomialLifting, curvature_coefficient, end_rows, solve_rim
from .families import families_for
from .series import KnownSeries, _gauss
from .face_data import OperatorData, uniform_operator
from .basis import UnknownBasis  # re-exported: forward.model.UnknownBasis


@dataclass
class FieldValues:
    """Field at points: temperature [K] (P,), gradient [K/m] (3, P) as (d/dr, (1/r) d/dtheta,
    d/dz), heat_flux = -k grad T [W/m^2] (3, P) (NaN when no conductivity is given; both None
    when only the temperature was asked for) and the truncation estimate [K] (P,)."""

    temperature: np.ndarray
    gradient: np.ndarray
    heat_flux: np.ndarray
    truncation_error: np.ndarray


def _needs_conductivity(cond: FaceCondition) -> bool:
    return cond.kind == "R" or cond.condition in ("flux", "unknown-flux")


class CylinderModel:
    """Exact steady field of a solid cylinder for given face conditions.

    tolerance: relative truncation tolerance: each known face's harmonics below tolerance x
    its own largest datum are dropped, and its terms grow until the truncation estimate is
    below tolerance x `temperature_scale` (the data's size in kelvin), at any data scale.
    """

    def __init__(self, cylinder: Cylinder, faces: dict, tolerance: float = 1e-8,
                 max_terms: int = 1024, max_harmonic: int = 64):
        self.cylinder = cylinder
        self.tolerance = float(tolerance)
        self.max_terms = int(max_terms)
        self.max_harmonic = int(max_harmonic)
        expected = set(cylinder.faces)
        given = set(faces)
        if given != expected:
            missing, extra = sorted(expected - given), sorted(given - expected)
            parts = []
            if missing:
                parts.append("missing face(s) " + ", ".join(missing))
            if extra:
                parts.append("face(s) " + ", ".join(extra) + " not on this part"
                             + (" (a semi-infinite part has no top face)" if "top" in extra else ""))
            raise ForwardModelError("; ".join(parts))
        for name, cond in faces.items():
            if not isinstance(cond, FaceCondition):
                raise ForwardModelError(f"face {name}: not a face condition: {cond!r}")
        self.faces = dict(faces)
        unknown = [f for f, c in faces.items() if c.unknown]
        if len(unknown) > 1:
            raise ForwardModelError(
                f"only one face can be unknown at a time, got {', '.join(unknown)}")
        self.unknown_face = unknown[0] if unknown else None
        needs_k = [f for f, c in faces.items() if _needs_conductivity(c)]
        if needs_k and cylinder.conductivity is None:
            raise ForwardModelError(
                f"conductivity is needed for the {', '.join(needs_k)} face condition(s)")
        self.has_conductivity = cylinder.conductivity is not None
        self.k = cylinder.conductivity if self.has_conductivity else 1.0
        self.kinds = {f: c.homogeneous for f, c in faces.items()}
        self._check_well_posed()
        self._build()

    # --- checks ---------------------------------------------------------------------------
    def _face_integral(self, face, fn):
        """integral of fn(face coords) over a face [unit * m^2] (Gauss in r or z, trapezoid in
        theta; per metre of length on a long part's walls)."""
        cyl = self.cylinder
        th = theta_nodes(64)
        if is_wall(face):
            s, w = _gauss(64, cyl.axial_length)
            vals = fn(*np.meshgrid(th, s, indexing="xy"))  # (len(s), len(th))
            return float((w[:, None] * vals).sum() * (2 * np.pi / th.size) * cyl.wall_radius(face))
        s, w = _gauss(64, cyl.thickness, cyl.inner_radius)
        vals = fn(*np.meshgrid(s, th, indexing="ij"))
        return float(((w * s)[:, None] * vals).sum() * (2 * np.pi / th.size))

    def _check_well_posed(self):
        cyl, faces = self.cylinder, self.faces
        if all(c.kind == "N" for c in faces.values()):
            known = [f for f, c in faces.items() if isinstance(c, Flux)]
            net = sum(self._face_integral(f, faces[f].data) for f in known) if not cyl.semi_infinite \
                else None
            if self.unknown_face is not None:
                why = (f"the {self.unknown_face} heat flux is unknown and every other face is "
                       "flux or insulated, so no face fixes the temperature level")
            elif net is not None and abs(net) > 1e-9 * max(1.0, sum(
                    abs(self._face_integral(f, lambda u, v, f=f: np.abs(faces[f].data(u, v))))
                    for f in known)):
                why = (f"the net heat input is {net:.6g} W and every face is flux or insulated, "
                       "so it has nowhere to go and no steady state exists")
            else:
                why = "every face is flux or insulated, so no face fixes the temperature level"
            raise IllPosedError(
                why + "; make at least one face a temperature or convection condition")
        if cyl.long:
            self._check_long_data()
        if cyl.semi_infinite:
            side = faces["side"]
            if side.unknown:
                raise ForwardModelError(
                    "an unknown side needs a finite height: give part.height as a length")
            a = cyl.radius
            zs = np.linspace(0.0, 20.0 * a, 9)
            th = theta_nodes(32)
            TH, Z = np.meshgrid(th, zs)
            vals = side.data(TH, Z)
            scale = max(float(np.abs(vals).max()), 1e-300)
            if np.ptp(vals, axis=0).max() > 1e-9 * scale:
                raise ForwardModelError(
                    "the side data vary along z; on a semi-infinite part they must be uniform in z "
                    "(give part.height as a length to use such a profile)")
            if side.kind == "N":
                a_m, _ = harmonic_amplitudes(vals[0], axis=-1)
                if abs(a_m[0]) > 1e-12 * scale:
                    raise IllPosedError(
                        "a net heat flux into the side of a semi-infinite part adds unbounded power; "
                        "give part.height as a length or make the side insulated, temperature or "
                        "convection")

    def _check_long_data(self):
        """A long part's wall data must not vary along z (nothing does)."""
        th = theta_nodes(32)
        for face, cond in self.faces.items():
            if cond.unknown:
                continue
            vals = np.array([cond.data(th, np.full_like(th, z)) for z in (0.0, 0.37, 1.0, 10.0)])
            scale = max(float(np.abs(vals).max()), 1e-300)
            if np.ptp(vals, axis=0).max() > 1e-9 * scale:
                raise ForwardModelError(
                    f"the {face} data vary along z; on a long part they must depend on theta only")

    # --- construction ---------------------------------------------------------------------------
    def _rim_row(self, end, th):
        """Rim condition of one end (kind, h, values on theta nodes) for the corner lifting,
        or None when the end sets none (an unknown-flux end: its rim flux is fitted)."""
        faces, cyl = self.faces, self.cylinder
        side, cond = faces["side"], faces[end]
        z = 0.0 if end == "bottom" else cyl.height
        if cond.kind == "D":
            if isinstance(side, Temperature):
                return "D", 0.0, side.data(th, np.full_like(th, z))
            if isinstance(cond, Temperature):
                return "D", 0.0, cond.data(np.full_like(th, cyl.radius), th)
            return None
        if cond.unknown:
            return None
        return cond.kind, cond.h, cond.data(np.full_like(th, cyl.radius), th)

    def _reference_lifting(self):
        """A constant T_ref when no face pins the rim temperature (side not 'D'), so data are
        expanded as differences from it rather than in absolute kelvin: the side's uniform
        ambient (a convection side then needs no series), else a uniform end temperature,
        else a uniform end ambient."""
        cyl, faces = self.cylinder, self.faces
        ref = None
        for wall in ("side", "bore"):
            cond = faces.get(wall)
            if ref is None and cond is not None and cond.kind == "R" and not callable(cond.ambient):
                ref = float(cond.ambient)
        for end in ("bottom", "top"):
            cond = faces.get(end)
            if ref is None and isinstance(cond, Temperature) and not callable(cond.value):
                ref = float(cond.value)
        for end in ("bottom", "top"):
            cond = faces.get(end)
            if ref is None and cond is not None and cond.kind == "R" and not callable(cond.ambient):
                ref = float(cond.ambient)
        if ref is None:
            return PolynomialLifting.empty_lifting(cyl.radius, cyl.height)
        return PolynomialLifting.from_terms(cyl.radius, cyl.height, [(0, False, (ref, 0.0, 0.0))])

    def _corner_lifting(self):
        """PolynomialLifting meeting the rim conditions of both ends (side of kind 'D')."""
        cyl, tol, k = self.cylinder, self.tolerance, self.k
        a, L = cyl.radius, cyl.height
        th = theta_nodes(2 * self.max_harmonic + 2)
        ends = [(e, self._rim_row(e, th)) for e in ("bottom", "top")]
        ends = [(e, row) for e, row in ends if row is not None]
        if not ends:
            return PolynomialLifting.empty_lifting(a, L)
        amps = {e: harmonic_amplitudes(row[2], axis=-1) for e, row in ends}
        ref = max(max(np.abs(ac).max(), np.abs(bc).max()) for ac, bc in amps.values())
        terms = []
        for m in range(self.max_harmonic + 1):
            for is_sin in ((False,) if m == 0 else (False, True)):
                vals = [amps[e][1 if is_sin else 0][m] for e, _ in ends]
                if max(abs(v) for v in vals) <= tol * max(ref, 1e-300):
                    continue
                c = float(curvature_coefficient(m, a, L))
                rows = [end_rows(e, EndCondition(row[0], row[1]), k, L, c) for e, row in ends]
                terms.append((m, is_sin, solve_rim(rows, vals)))
        return PolynomialLifting.from_terms(a, L, terms)

    def _build(self):
        cyl, faces, tol = self.cylinder, self.faces, self.tolerance
        a, L, k = cyl.radius, cyl.height, self.k
        side = faces["side"]
        self.families = families_for(cyl, self.kinds, k)
        if cyl.hollow:
            self.lifting = self._reference_lifting()
        elif cyl.semi_infinite and not side.unknown:
            th = theta_nodes(2 * self.max_harmonic + 2)
            am, bm = harmonic_amplitudes(side.data(th, np.zeros_like(th)), axis=-1)
            terms = []
            for m in range(am.size):
                for is_sin, amp in ((False, am[m]), (True, bm[m])):
                    if (is_sin and m == 0) or abs(amp) <= tol * max(np.abs(am).max(), 1e-300):
                        continue
                    # B_side[(r/a)^m] = 1 ('D'), k m / a ('N'), k m / a + h ('R')
                    b = side.operator(1.0, m / a, k)
                    terms.append((m, is_sin, (amp / b, 0.0, 0.0)))
            # z-independent: carries the (z-uniform) side data of a semi-infinite part exactly
            self.lifting = PolynomialLifting.from_terms(a, L, terms)
        elif side.kind == "D":
            self.lifting = self._corner_lifting()
        else:
            self.lifting = self._reference_lifting()
        sizes = self._data_sizes()
        self.temperature_scale = self._temperature_scale(sizes)
        self.series = []
        for face, cond in faces.items():
            if cond.unknown:
                continue
            if face == "side" and cyl.semi_infinite:
                continue  # carried exactly by the two-dimensional lifting
            if cond.is_uniform and uniform_operator(self.lifting, cond, self.k) == cond.uniform_datum:
                # a uniform datum the constant lifting meets exactly (an insulated face, a
                # convection face at the reference ambient): no data beyond the lifting, no
                # series, and no sampling to find that out
                continue
            data = self._residual_data(face, cond)
            span = cyl.datum_span(face)
            # harmonics relative to this face's own data (a tiny flux beside a large ambient
            # is kept); the truncation estimate relative to the field's temperature scale
            scale = sizes[face] or cond.homogeneous.datum_scale(k, span) * self.temperature_scale
            n_cap = self.families.complete_terms(face) or self.max_terms
            s = KnownSeries(face, data, self.families, self.families.kinds, k, tol=tol,
                            scale=scale, field_scale=self.temperature_scale, n_start=min(32, n_cap),
                            n_cap=n_cap, max_harmonic=self.max_harmonic)
            if s.modes is not None:
                self.series.append(s)

    def _data_sizes(self):
        """Largest |data| of each known face on a coarse sample [data units: K, W/m^2]."""
        cyl = self.cylinder
        a, L = cyl.radius, cyl.height
        th = theta_nodes(16)
        sizes = {}
        for face, cond in self.faces.items():
            if cond.unknown:
                continue
            if cond.is_uniform:
                sizes[face] = abs(cond.uniform_datum)
                continue
            wall = is_wall(face)
            s = (np.linspace(0.0, L if math.isfinite(L) else a, 9) if wall
                 else np.linspace(cyl.inner_radius, a, 9))
            u, v = (np.meshgrid(th, s) if wall else np.meshgrid(s, th))
            sizes[face] = float(np.abs(cond.data(u, v)).max())
        return sizes

    def _temperature_scale(self, sizes):
        """Temperature size of the data [K]: the largest of |g|, |T_amb| and |q| a / k over
        the known faces (relative to the data: no floor in kelvin; 1 K only when every
        datum is zero)."""
        ref = 0.0
        for face, size in sizes.items():
            span = self.cylinder.datum_span(face)
            ref = max(ref, size / self.faces[face].homogeneous.datum_scale(self.k, span))
        return ref if ref > 0 else 1.0

    def _face_points(self, face, u, v):
        """(r, theta, z) of face coordinates (r, theta) on end faces or (theta, z) on a wall."""
        cyl = self.cylinder
        u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
        if is_wall(face):
            return np.full(u.shape, cyl.wall_radius(face)), u, v
        z = 0.0 if face == "bottom" else cyl.height
        return u, v, np.full(u.shape, z)

    def face_operator(self, field, face, condition, u, v):
        """B_F[field] on a face at face coordinates (u, v), by the face's condition (its
        boundary operator); field: a PolynomialLifting (its `on_face`: the value and the normal
        derivative only where the operator uses them)."""
        r, th, z = self._face_points(face, u, v)
        shape = r.shape
        # only what the operator uses: T ('D'), dT/dn ('N'), both in one pass ('R')
        kind = condition.kind
        w, dn = field.on_face(face, r.ravel(), th.ravel(), z.ravel(), value=kind != "N", normal=kind != "D")
        zero = np.zeros(r.size)
        return condition.operator(zero if w is None else w, zero if dn is None else dn, self.k).reshape(shape)

    def face_operator_grid(self, field, face, condition, s, theta):
        """`face_operator` on the grid of lines s x theta of a face, (S, T): s = r on an end
        face, z on a wall [m] (the field's factors once per line: `on_face_grid`)."""
        kind = condition.kind
        cyl = self.cylinder
        fixed = cyl.wall_radius(face) if is_wall(face) else (0.0 if face == "bottom" else cyl.height)
        w, dn = field.on_face_grid(face, s, theta, fixed, value=kind != "N", normal=kind != "D")
        zero = np.zeros((np.size(s), np.size(theta)))
        return condition.operator(zero if w is None else w, zero if dn is None else dn, self.k)

    def _lifting_operator(self, face, cond, u, v):
        """B_F[w] of the lifting w on a face."""
        if self.lifting.empty:
            return np.zeros(self._face_points(face, u, v)[0].shape)
        return self.face_operator(self.lifting, face, cond, u, v)

    def _residual_data(self, face, cond):
        return OperatorData(self, self.lifting, face, cond, given=cond.data)

    # --- evaluation -------------------------------------------------------------------------
    def _check_points(self, r, theta, z):
        r, theta, z = np.broadcast_arrays(*(np.asarray(x, float) for x in (r, theta, z)))
        if not (np.all(np.isfinite(r)) and np.all(np.isfinite(theta)) and np.all(np.isfinite(z))):
            raise ForwardModelError("points must have finite coordinates")
        inside = self.cylinder.contains(r, z)
        if not inside.all():
            i = int(np.flatnonzero(~inside.ravel())[0])
            raise ForwardModelError(
                f"point {i + 1} (r = {r.ravel()[i]:.6g} m, z = {z.ravel()[i]:.6g} m) is outside the part")
        a, L = self.cylinder.radius, self.cylinder.height
        r = np.clip(r, self.cylinder.inner_radius, a)
        z = np.clip(z, 0.0, L) if math.isfinite(L) else np.maximum(z, 0.0)
        return r, theta, z

    def _check_lines(self, r, theta, z):
        """Grid lines (1-D arrays) checked like points: finite, inside the part."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)).ravel() for x in (r, theta, z))
        if 0 in (r.size, theta.size, z.size):
            raise ForwardModelError("grid lines must not be empty")
        if not np.all(np.isfinite(theta)):
            raise ForwardModelError("points must have finite coordinates")
        r, _, _ = self._check_points(r, np.zeros_like(r), np.full_like(r, z[0]))
        _, _, z = self._check_points(np.full_like(z, r[0]), np.zeros_like(z), z)
        return r, theta, z

    def evaluate(self, r, theta, z, gradient=True) -> FieldValues:
        """The known field (everything but the unknown face's own part) at points (m, rad, m);
        gradient=False: temperature only (gradient and heat_flux are None)."""
        r, theta, z = self._check_points(r, theta, z)
        shape = r.shape
        r, theta, z = r.ravel(), theta.ravel(), z.ravel()
        if gradient:
            t, g = self.lifting.field_values(r, theta, z)
        else:
            t, g = self.lifting.temperature(r, theta, z), 0.0
        tail = np.zeros_like(t)
        for s in self.series:
            ts, gs, es = s.evaluate(r, theta, z, gradient=gradient)
            t, tail = t + ts, tail + es
            if gradient:
                g = g + gs
        return self._field_values(t, g if gradient else None, tail, shape)

    def _field_values(self, t, g, tail, shape):
        if g is None:
            return FieldValues(t.reshape(shape), None, None, tail.reshape(shape))
        q = -self.k * g if self.has_conductivity else np.full_like(g, np.nan)
        return FieldValues(t.reshape(shape), g.reshape((3,) + shape), q.reshape((3,) + shape),
                           tail.reshape(shape))

    def evaluate_grid(self, r, theta, z, gradient=False) -> FieldValues:
        """The known field on the tensor grid of lines r x theta x z (1-D arrays; m, rad, m):
        arrays of shape (R, T, Z) (gradient (3, R, T, Z), None unless asked for), the same
        numbers as `evaluate` at the grid's points to round-off.  Each series evaluates its
        radial factor once per r line, its axial factor once per z line and the angle once
        per theta line (forward/grid.py): a face map is (R, T, 1) or (1, T, Z)."""
        r, theta, z = self._check_lines(r, theta, z)
        shape = (r.size, theta.size, z.size)
        t, g = self.lifting.grid(r, theta, z, gradient=gradient)
        tail = np.zeros(shape)
        for s in self.series:
            ts, gs, es = s.evaluate_grid(r, theta, z, gradient=gradient)
            t, tail = t + ts, tail + es
            if gradient:
                g = g + gs
        return self._field_values(t, g, tail, shape)

    def temperature(self, r, theta, z):
        return self.evaluate(r, theta, z, gradient=False).temperature

    def face_power(self, face: str) -> float:
        """Heat INTO the part [W] through a face, from the known field (NaN without a
        conductivity, like the heat flux)."""
        if not self.has_conductivity:
            return math.nan
        total = self.lifting.power(face, self.k)
        for s in self.series:
            total += s.powers().get(face, 0.0)
        return total

    # --- the unknown face's basis -------------------------------------------------------------------
    def basis(self, harmonics: int, terms: int, corners: bool = True) -> UnknownBasis:
        """Fields of the unknown face's eigenfunctions: m = 0..harmonics (cos and sin), `terms`
        radial (end face) or axial (side) functions for each; corners=False leaves out the
        corner columns (for uses that need the eigenfunctions alone)."""
        if self.unknown_face is None:
            raise ForwardModelError("this case has no unknown face")
        return UnknownBasis(self, int(harmonics), int(terms), corners)
