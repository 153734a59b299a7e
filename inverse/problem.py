"""What inverse.fit is asked, in one place: fit options (defaults and choice lists), zones
of a face, and the problem (part, faces, zones, options).  SI units and radians.

data_io parses the case file into these objects; `Problem.from_case` is the one adapter
for anything else that carries .cylinder, .faces and optionally .zones and .fit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields, replace

import numpy as np

from ..forward.geometry import is_wall
from .errors import InverseError
from .strength import METHODS as STRENGTH_METHODS  # rules chosen from the data; "fixed" takes a number
#: prior smoothness order s of P_k = (N_k / A) (1 + a^2 ev_k)^s
SMOOTHING_ORDER = {"size": 0, "gradient": 1, "curvature": 2}
#: sensor misfit: Gaussian, or scipy's robust losses (lmfit path)
LOSSES = ("linear", "soft_l1", "huber")
#: convection-face parameters that can be calibrated with the face
CALIBRATABLE = ("h", "ambient")
#: face model: smooth eigenfunction series only; one level per declared zone plus a smooth
#: remainder; or let the evidence choose between the two
MODELS = ("smooth", "zones", "auto")
#: smooth prior: "learned" (strength, length scale and order averaged over with the evidence,
#: hyperprior.py) or "fixed" (length scale = radius, order from `smoothing`; alpha averaged)
PRIORS = ("learned", "fixed")
SOLVERS = ("auto", "lmfit")
FACE_NAMES = ("bottom", "top", "side", "bore")
#: basis size when the options leave it automatic
DEFAULT_HARMONICS = 6
DEFAULT_TERMS = 10


def _fail(key, problem):
    return InverseError(f"fit option {key}: {problem}")


@dataclass(frozen=True)
class FitOptions:
    """Options of a fit (each default written here only).

    strength_method: "evidence" (marginal likelihood; the posterior is averaged over the
        strength), "gcv", "lcurve", "discrepancy", or "fixed" (then `strength` holds alpha).
    strength: the fixed smoothing strength alpha (> 0); None unless strength_method == "fixed".
    smoothing: prior order, "size" | "gradient" | "curvature" (SMOOTHING_ORDER).
    keep_all_sensors: True skips the screening (no sensor is set aside).
    keep_sensors: names of sensors the leave-one-out screening never sets aside and the answer
        never weighs as possibly broken (thermocouples known good; also the other fit of a
        sensor weighed back, sensor_doubt.py); a gross fault (an overflow code, a reading no
        part can produce) is still set aside.
    terms, harmonics: radial/axial terms and angular harmonics of the unknown face's
        basis; None = DEFAULT_TERMS / DEFAULT_HARMONICS.
    loss: sensor misfit (LOSSES).  common_offset_sd: prior sd [K] of one offset shared by
        all sensors, or None.
    calibrate: ((face, parameter), ...) convection parameters fitted with the face;
        calibration_priors: ((face, parameter, mean, sd), ...) Gaussian priors on some of them.
    model: "smooth" | "zones" | "auto" (MODELS).
    prior: "learned" | "fixed" (PRIORS); the learned prior applies with the evidence.
    threshold: outlier threshold on |standardized LOO| (None: Bonferroni default).
    solver: "auto" (closed form unless calibrating) | "lmfit".  tolerance: series tolerance.
    grid: (radial or axial, angular) size of the display grid.
    monte_carlo: number of seeded draws with perturbed sensor positions (0 = off); seed.
    """

    strength_method: str = "evidence"
    strength: float | None = None
    smoothing: str = "gradient"
    keep_all_sensors: bool = False
    keep_sensors: tuple = ()
    terms: int | None = None
    harmonics: int | None = None
    loss: str = "linear"
    common_offset_sd: float | None = None
    calibrate: tuple = ()
    calibration_priors: tuple = ()
    model: str = "auto"
    prior: str = "learned"
    threshold: float | None = None
    solver: str = "auto"
    tolerance: float = 1e-8
    grid: tuple = (41, 72)
    monte_carlo: int = 0
    seed: int = 0

    def __post_init__(self):
        def choice(key, options):
            value = getattr(self, key)
            if value not in options:
                raise _fail(key, f"got {value!r}; expected one of: {', '.join(options)}")

        choice("strength_method", STRENGTH_METHODS + ("fixed",))
        if self.strength_method == "fixed":
            if not (isinstance(self.strength, (int, float)) and math.isfinite(self.strength)
                    and self.strength > 0):
                raise _fail("strength", f"a fixed strength must be a positive number, got {self.strength!r}")
        elif self.strength is not None:
            raise _fail("strength", f"a number is only taken with strength_method 'fixed', "
                                    f"not {self.strength_method!r}")
        choice("smoothing", tuple(SMOOTHING_ORDER))
        choice("loss", LOSSES)
        choice("model", MODELS)
        choice("prior", PRIORS)
        choice("solver", SOLVERS)
        if not isinstance(self.keep_all_sensors, (bool, np.bool_)):
            raise _fail("keep_all_sensors", f"expected True or False, got {self.keep_all_sensors!r}")
        if isinstance(self.keep_sensors, list):
            object.__setattr__(self, "keep_sensors", tuple(self.keep_sensors))
        if not isinstance(self.keep_sensors, tuple) or not all(isinstance(x, str) for x in self.keep_sensors):
            raise _fail("keep_sensors", f"expected a tuple of sensor names, got {self.keep_sensors!r}")
        for key, low in (("terms", 1), ("harmonics", 0)):
            v = getattr(self, key)
            if v is not None and not _whole_at_least(v, low):
                raise _fail(key, f"expected a whole number >= {low}, got {v!r}")
        for key in ("common_offset_sd", "threshold"):
            v = getattr(self, key)
            if v is not None and not (math.isfinite(v) and v > 0):
                raise _fail(key, f"expected a positive number, got {v!r}")
        if not self.tolerance > 0:
            raise _fail("tolerance", f"expected a positive number, got {self.tolerance!r}")
        if len(self.grid) != 2 or min(self.grid) < 2:
            raise _fail("grid", f"expected two sizes >= 2, got {self.grid!r}")
        if not _whole_at_least(self.monte_carlo, 0):
            raise _fail("monte_carlo", f"expected a whole number >= 0, got {self.monte_carlo!r}")
        keys = []
        for item in self.calibrate:
            if (not isinstance(item, tuple) or len(item) != 2 or item[0] not in FACE_NAMES
                    or item[1] not in CALIBRATABLE):
                raise _fail("calibrate", f"{item!r}: expected (face, parameter) with face one of "
                                         f"{', '.join(FACE_NAMES)} and parameter {' or '.join(CALIBRATABLE)}")
            keys.append(item)
        if len(set(keys)) != len(keys):
            raise _fail("calibrate", "a parameter is listed twice")
        for face, what, mean, sd in self.calibration_priors:
            if (face, what) not in keys or not sd > 0:
                raise _fail("calibration_priors", f"{face}.{what}: needs a calibrated parameter and a positive sd")

    # ------------------------------------------------------------------ derived settings
    @property
    def learned_prior(self) -> bool:
        """Is the answer the learned prior's (hyperprior.py): the evidence, prior "learned", no
        Monte Carlo draws?"""
        return self.strength_method == "evidence" and self.prior == "learned" and not self.monte_carlo

    @property
    def strength_request(self):
        """What the strength rule is asked: a method name or the fixed alpha."""
        return float(self.strength) if self.strength_method == "fixed" else self.strength_method

    @property
    def basis_size(self) -> tuple[int, int]:
        """(harmonics, terms) of the unknown face's basis."""
        h = DEFAULT_HARMONICS if self.harmonics is None else int(self.harmonics)
        t = DEFAULT_TERMS if self.terms is None else int(self.terms)
        return h, t

    @property
    def calibration(self) -> dict:
        """{(face, parameter): (prior mean, prior sd) or None} of the calibrated parameters."""
        priors = {(f, w): (m, s) for f, w, m, s in self.calibration_priors}
        return {key: priors.get(key) for key in self.calibrate}

    def with_overrides(self, **overrides) -> "FitOptions":
        """A copy with keyword overrides as inverse.fit takes them: strength may be a method
        name, "auto" (= evidence) or a number; calibrate may be {(face, parameter): prior}."""
        names = {f.name for f in fields(self)}
        new = {}
        for key, value in overrides.items():
            if value is None:
                continue
            if key == "strength":
                new.update(_strength_fields(value))
            elif key == "calibrate":
                new.update(_calibration_fields(value))
            elif key in names:
                new[key] = value
            else:
                raise TypeError(f"unknown fit option {key!r}; expected one of: "
                                + ", ".join(fit_option_names()))
        return replace(self, **new) if new else self

    def as_dict(self) -> dict:
        return {"strength_method": self.strength_method, "strength": self.strength,
                "smoothing": self.smoothing, "keep_all_sensors": self.keep_all_sensors,
                "terms": self.terms, "harmonics": self.harmonics, "loss": self.loss,
                "common_offset_sd": self.common_offset_sd, "calibrate": list(self.calibrate),
                "model": self.model, "prior": self.prior}


def fit_option_names() -> list[str]:
    """The keyword options inverse.fit takes (FitOptions fields as overrides name them)."""
    internal = {"strength_method", "calibration_priors"}
    return ["strength"] + [f.name for f in fields(FitOptions) if f.name not in internal]


def _whole_at_least(v, low) -> bool:
    """Is v a whole number (not a bool, not text) >= low?"""
    return (isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))
            and math.isfinite(v) and int(v) == v and v >= low)


def _strength_fields(value) -> dict:
    if isinstance(value, str):
        try:
            return {"strength_method": "fixed", "strength": float(value)}     # "1e-6": a number as text
        except ValueError:
            pass
        s = value.strip().lower()
        s = "evidence" if s == "auto" else s[5:] if s.startswith("auto:") else s
        return {"strength_method": s, "strength": None}
    return {"strength_method": "fixed", "strength": float(value)}


def _calibration_fields(value) -> dict:
    if isinstance(value, dict):
        keys = tuple(_calibration_key(k) for k in value)
        priors = tuple((*_calibration_key(k), float(p[0]), float(p[1])) for k, p in value.items() if p is not None)
        return {"calibrate": keys, "calibration_priors": priors}
    return {"calibrate": tuple(_calibration_key(k) for k in value), "calibration_priors": ()}


def _calibration_key(key) -> tuple:
    """(face, parameter) from a pair or from the case file's "face.parameter" text."""
    if isinstance(key, str):
        face, dot, what = key.strip().partition(".")
        return (face, what) if dot else (key,)
    return tuple(key)


# ---------------------------------------------------------------------------- zones


def _window(x, lo, hi, width, lo_edge=True, hi_edge=True):
    """1 inside [lo, hi], 0 outside; with width > 0 a linear ramp of that width centred on
    each edge that is an edge (not the axis, the rim or an end); sharp (width 0): 1/2 on
    such an edge itself (to round-off), so that neighbouring zones' windows sum to 1 there."""
    if width <= 0:
        scale = max(abs(hi), 1.0) * 1e-12
        f = ((x >= lo - scale) & (x <= hi + scale)).astype(float)
        on_edge = ((np.abs(x - lo) <= scale) & lo_edge) | ((np.abs(x - hi) <= scale) & hi_edge)
        return np.where(on_edge, 0.5, f)
    f = np.ones_like(x, dtype=float)
    if lo_edge:
        f *= np.clip((x - lo) / width + 0.5, 0.0, 1.0)
    if hi_edge:
        f *= np.clip((hi - x) / width + 0.5, 0.0, 1.0)
    return f


@dataclass(frozen=True)
class Zone:
    """A region of a face: r and theta on end faces, theta and z on the side (SI: m, rad).

    theta = (start, end) with start < end <= start + 2 pi, counter-clockwise.
    r is None on the side, z is None on end faces.  face is None only in a fully known
    case whose zone named no face (the zone is then meant for the face a fit will estimate).
    nominal: the zone's nominal power [W] (heater rating), or None.
    edge: width [m] of the zone's edges in the zone model (0 = sharp); across theta it is
    measured at the zone's mid radius (end faces) or at the radius (side), so that the
    indicator is a product of a radial (or axial) and an angular window.
    """

    name: str
    face: str | None
    theta: tuple[float, float]
    r: tuple[float, float] | None = None
    z: tuple[float, float] | None = None
    nominal: float | None = None
    edge: float = 0.0

    def contains(self, u, v) -> np.ndarray:
        """Mask of face points inside the zone: (r, theta) on end faces, (theta, z) on the side."""
        u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
        if self.z is not None:
            theta, other, rng = u, v, self.z
        else:
            theta, other, rng = v, u, self.r
        start, end = self.theta
        span = end - start
        eps = 1e-12
        inside = np.mod(theta - start + eps, 2 * math.pi) <= span + 2 * eps if span < 2 * math.pi - eps \
            else np.ones(theta.shape, bool)
        if rng is not None:
            scale = max(abs(rng[1]), 1.0) * 1e-12
            inside &= (other >= rng[0] - scale) & (other <= rng[1] + scale)
        return inside

    @property
    def full_turn(self) -> bool:
        return self.theta[1] - self.theta[0] >= 2 * math.pi - 1e-12

    def along(self, s, span_end: float, span_start: float = 0.0) -> np.ndarray:
        """Radial (end face) or axial (wall) window at s [m]; the face spans s = span_start..
        span_end (inner radius..radius, or 0..height); an edge at either end is no edge."""
        lo, hi = self.r if self.z is None else self.z
        lo_edge, hi_edge = lo > span_start * (1 + 1e-12), hi < span_end * (1 - 1e-12)
        return _window(np.asarray(s, float), lo, hi, self.edge, lo_edge, hi_edge)

    def around(self, theta, radius: float) -> np.ndarray:
        """Angular window at theta [rad]; radius: the side's radius (ignored on end faces)."""
        theta = np.asarray(theta, float)
        if self.full_turn:
            return np.ones_like(theta)
        start, end = self.theta
        span = end - start
        t = np.mod(theta - start, 2 * math.pi)
        t = np.where(t > span + 0.5 * (2 * math.pi - span), t - 2 * math.pi, t)
        if self.edge <= 0:
            inside = (np.mod(theta - start + 1e-12, 2 * math.pi) <= span + 2e-12).astype(float)
            on_edge = np.minimum(np.abs(t), np.abs(t - span)) <= 1e-12
            return np.where(on_edge, 0.5, inside)
        at = radius if self.z is not None else 0.5 * (self.r[0] + self.r[1])
        return _window(t, 0.0, span, self.edge / max(at, 1e-12))

    def indicator(self, u, v, radius: float, span_end: float, span_start: float = 0.0) -> np.ndarray:
        """The zone's share of each face point (0..1): (r, theta) on end faces, (theta, z)
        on a wall (radius: the wall's); for sharp edges `contains`, except 1/2 on an edge
        itself, so that zones sharing an edge sum to 1 there (a display point on a shared
        edge had both zones' levels: the zone model's map there was the background plus
        two levels, with a band of +-25,000 W/m^2 on the demo)."""
        u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
        if self.z is not None:
            return self.around(u, radius) * self.along(v, span_end, span_start)
        return self.along(u, span_end, span_start) * self.around(v, radius)


def default_ranges(zone, wall: bool, cylinder):
    """The zone with the range it leaves out filled in: r = inner radius..radius on an end
    face, z = 0..height on a wall (0..the per-metre span on a long part); a zone on the wall
    of a semi-infinite part must give its own z range.  Other zone objects pass unchanged."""
    if not isinstance(zone, Zone):
        return zone
    if wall:
        if zone.z is not None:
            return zone
        if cylinder.long:
            return replace(zone, z=(0.0, cylinder.axial_length))
        if not math.isfinite(cylinder.height):
            raise InverseError(f"zone {zone.name}: a zone on the wall of a semi-infinite part needs a z range")
        return replace(zone, z=(0.0, cylinder.height))
    return zone if zone.r is not None else replace(zone, r=(cylinder.inner_radius, cylinder.radius))


# ---------------------------------------------------------------------------- problem


@dataclass(frozen=True, eq=False)
class Problem:
    """Part (forward.Cylinder), face conditions {face: FaceCondition}, zones (Zone or any
    object with .name, .contains(u, v) and optionally .face) and FitOptions."""

    cylinder: object
    faces: dict
    zones: tuple = ()
    options: FitOptions = field(default_factory=FitOptions)

    @property
    def unknown_face(self) -> str:
        unknown = [f for f, c in self.faces.items() if c.unknown]
        if len(unknown) != 1:
            raise InverseError("fit needs exactly one unknown face (unknown-temperature or unknown-flux)")
        return unknown[0]

    @classmethod
    def from_case(cls, case, **overrides) -> "Problem":
        """The adapter: a Problem as is, or anything with .cylinder and .faces (and
        optionally .zones and .fit, a FitOptions or an object with some of its fields);
        keyword overrides as FitOptions.with_overrides takes them."""
        if isinstance(case, Problem):
            base, opts = case, case.options
        else:
            base = None
            given = getattr(case, "fit", None)
            if given is None or isinstance(given, FitOptions):
                opts = given or FitOptions()
            else:
                opts = FitOptions(**{f.name: getattr(given, f.name) for f in fields(FitOptions)
                                     if getattr(given, f.name, None) is not None})
        opts = opts.with_overrides(**overrides)
        cylinder, faces = case.cylinder, dict(case.faces)
        unknown = [f for f, c in faces.items() if getattr(c, "unknown", False)]
        zones = []
        for zone in getattr(case, "zones", None) or ():
            face = getattr(zone, "face", None) or (unknown[0] if len(unknown) == 1 else None)
            zones.append(zone if face is None else default_ranges(zone, is_wall(face), cylinder))
        if base is not None:
            return replace(base, zones=tuple(zones), options=opts)
        return cls(cylinder, faces, tuple(zones), opts)
