"""The case file (TOML): the part, its faces, the sensor tables, fit options and zones.

Schema (design §3; every dimensional value is a string with its unit)::

    [part]                         # data_io.case_part
    radius = "150 mm"              # required, > 0
    inner_radius = "50 mm"         # optional: a hollow part (0 or absent = solid)
    height = "40 mm"               # required, > 0, or "infinite" (semi-infinite solid part)
                                   # or "long" (hollow only: nothing varies along z)
    conductivity = "16 W/(m*K)"    # required when a flux, convection or unknown-flux face exists

    [faces.bottom]                 # z = 0      (also [faces.top], z = height; [faces.side], r = radius;
                                   # hollow parts [faces.bore], r = inner_radius)
    condition = "..."              # temperature | flux | insulated | convection
                                   # | unknown-temperature | unknown-flux
    value = "25 degC"              # temperature: absolute temperature; flux: heat flux INTO the part
    profile = "bottom.csv"         # instead of value (temperature, flux) or of ambient (convection)
    h = "12 W/(m^2*K)"             # convection only
    ambient = "25 degC"            # convection only

    [sensors]                      # needed by fit; file paths relative to the case file
    layout = "layout.csv"
    readings = "readings.csv"      # optional here (fit --readings may give it)

    [fit]                          # optional; every key optional (case_options.FIT_SCHEMA,
                                   # inverse.problem.FitOptions)
    strength = "auto"              # "auto" (= "auto:evidence"), "auto:gcv", "auto:lcurve",
                                   # "auto:discrepancy", or a positive number (fixed alpha)
    smoothing = "gradient"         # prior on the unknown face: "size" | "gradient" | "curvature"
    keep_all_sensors = false       # true keeps sensors flagged as suspect in the fit
    terms = 12                     # radial (end face) / axial (side) terms; default automatic
    harmonics = 6                  # angular harmonics m = 0..harmonics; default automatic
    model = "auto"                 # "auto" (default: the evidence chooses) | "smooth" | "zones" (a level per zone + smooth remainder)
    prior = "learned"              # "learned" (default) | "fixed" (length scale = radius, order from smoothing)
    keep_sensors = ["TC07"]        # known good: never set aside nor weighed (a gross fault still goes)
    loss = "linear"                # "linear" (default) | "soft_l1" | "huber" (robust)
    common_offset = "0.5 K"        # prior sd of an offset shared by every sensor
    calibrate = ["top.h"]          # convection parameters fitted with the face (h, ambient)

    [[zones]]                      # optional, any number; regions of the unknown face
    name = "inner"                 # required, unique
    face = "bottom"                # optional, default: the unknown face
    r = ["0 mm", "50 mm"]          # end faces only; default the whole radius (hollow: inner_radius..radius)
    theta = ["0 deg", "120 deg"]   # optional, default the full turn; start < end, span <= 360 deg
    z = ["0 mm", "20 mm"]          # walls (side, bore) only; default the whole height (none on a long part)
    nominal = "400 W"              # optional: the zone's nominal power (delivered fraction reported; not a prior)
    edge = "5 mm"                  # optional: edge width in the zone model; default unknown (averaged over
                                   # widths; sharp with prior = "fixed" or Monte Carlo)

Every face of the part must be given: bottom, side and (finite parts) top, and the bore
of a hollow part.  A semi-infinite part (height = "infinite") has no top face; a long part
(height = "long") only the side and the bore.  Unknown keys are refused with
the nearest valid key suggested.
"""

from __future__ import annotations

import difflib
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..forward.errors import ForwardModelError
from ..forward.faces import (Convection, FaceCondition, Flux, Insulated, Temperature,
                           UnknownFlux, UnknownTemperature)
from ..forward.geometry import FACE_NAMES as ALL_FACES, Cylinder
from ..inverse.problem import FACE_NAMES, FitOptions, Zone  # noqa: F401  (re-exported)

from .case_context import _Ctx
from .case_part import PART_KEYS, absent_face, parse_part
from .case_options import FIT_SCHEMA, ZONE_KEYS, PlanOptions, _parse_fit, _parse_plan, _parse_zones  # noqa: F401
from .errors import InputError
from .textfile import read_text
from .profiles import TableProfile, load_profile
from .units import parse_quantity

CONDITION_NAMES = ("temperature", "flux", "insulated", "convection",
                   "unknown-temperature", "unknown-flux")
FACE_KEYS = ("condition", "value", "profile", "h", "ambient")
_KEYS_OF_CONDITION = {
    "temperature": ("value", "profile"),
    "flux": ("value", "profile"),
    "insulated": (),
    "convection": ("h", "ambient", "profile"),
    "unknown-temperature": (),
    "unknown-flux": (),
}
_NEEDS_CONDUCTIVITY = ("flux", "convection", "unknown-flux")
TOP_KEYS = ("part", "faces", "sensors", "fit", "zones", "plan")
SENSOR_KEYS = ("layout", "readings")


# ---------------------------------------------------------------------------- objects


@dataclass(frozen=True)
class SensorFiles:
    """Paths of the sensor tables (resolved against the case file's folder), or None."""

    layout: Path | None = None
    readings: Path | None = None


@dataclass
class Case:
    """A validated case: forward objects in SI, plus what the user wrote, for display.

    path, folder: the case file and its folder.
    cylinder: forward.Cylinder.  faces: face name -> forward FaceCondition.
    face_text: face name -> {key: text as written} (condition, value, h, ambient, profile).
    profiles: face name -> TableProfile for faces given by a profile.
    sensors: SensorFiles.  fit: FitOptions.  zones: tuple of Zone.
    """

    path: Path
    folder: Path
    cylinder: Cylinder
    faces: dict[str, FaceCondition]
    face_text: dict[str, dict[str, str]]
    profiles: dict[str, TableProfile]
    sensors: SensorFiles
    fit: FitOptions
    zones: tuple[Zone, ...] = ()
    part_text: dict[str, str] = field(default_factory=dict)
    plan: PlanOptions = PlanOptions()     # [plan]: drilling rules for `heatsight plan`

    @property
    def unknown_faces(self) -> list[str]:
        return [name for name, f in self.faces.items() if f.unknown]

    @property
    def unknown_face(self) -> str | None:
        """Name of the unknown face, or None for a fully known case."""
        names = self.unknown_faces
        return names[0] if names else None

    def input_files(self) -> list[Path]:
        """Every file this case reads (never to be overwritten by an output)."""
        files = [self.path] + [p.path for p in self.profiles.values()]
        files += [p for p in (self.sensors.layout, self.sensors.readings) if p is not None]
        return files

    def require(self, purpose: str) -> None:
        """Check the case suits `purpose`: "fit" (exactly one unknown face and a layout) or
        "simulate" (no unknown face).  Raises InputError."""
        unknown = self.unknown_faces
        if purpose == "simulate":
            if unknown:
                raise InputError(f"simulate needs a fully known case, but faces.{unknown[0]} is "
                                 f"'{self.faces[unknown[0]].condition}'; give that face a known "
                                 f"condition, or use fit", file=self.path, where=f"faces.{unknown[0]}.condition")
        elif purpose == "fit":
            if not unknown:
                raise InputError("fit needs one face with condition 'unknown-temperature' or "
                                 "'unknown-flux'; every face is known (use simulate for a known case)",
                                 file=self.path, where="faces")
            if self.sensors.layout is None:
                raise InputError("fit needs the sensor layout: add [sensors] layout = \"layout.csv\"",
                                 file=self.path, where="sensors.layout")
        elif purpose is not None:
            raise ValueError(f"unknown purpose {purpose!r}")

    def build_model(self, tolerance: float = 1e-8):
        """The forward.CylinderModel of this case (built, not solved here)."""
        from ..forward import CylinderModel

        return CylinderModel(self.cylinder, dict(self.faces), tolerance=tolerance)


# ---------------------------------------------------------------------------- faces


def _parse_face(ctx: _Ctx, name: str, table: dict, cylinder: Cylinder) -> tuple[FaceCondition, dict, TableProfile | None]:
    where = f"faces.{name}"
    ctx.check_keys(table, FACE_KEYS, where)
    if "condition" not in table:
        raise ctx.error(f"{where}.condition", f"missing key 'condition'; expected one of: "
                                              f"{', '.join(CONDITION_NAMES)}")
    cond = ctx.text(table, "condition", f"{where}.condition").strip().lower()
    if cond not in CONDITION_NAMES:
        close = difflib.get_close_matches(cond.replace("_", "-"), CONDITION_NAMES, n=1, cutoff=0.5)
        hint = f"did you mean '{close[0]}'? " if close else ""
        raise ctx.error(f"{where}.condition", f"unknown condition '{table['condition']}'; {hint}"
                                              f"expected one of: {', '.join(CONDITION_NAMES)}")
    allowed = _KEYS_OF_CONDITION[cond]
    for key in table:
        if key != "condition" and key not in allowed:
            raise ctx.error(f"{where}.{key}", f"'{key}' does not apply to condition '{cond}'"
                                              + (f" (it takes: {', '.join(allowed)})" if allowed else
                                                 " (it takes no data)"))
    text = {"condition": cond}
    for key in ("value", "h", "ambient", "profile"):
        if key in table:
            text[key] = table[key] if isinstance(table[key], str) else repr(table[key])

    profile = None
    if "profile" in table:
        for key in ("value", "ambient"):
            if key in table:
                raise ctx.error(f"{where}.profile", f"give either '{key}' or 'profile', not both")
        ppath = ctx.path_value(table, "profile", f"{where}.profile")
        quantity = "heat_flux" if cond == "flux" else "temperature"
        profile = load_profile(ppath, name, quantity, cylinder)

    def datum(key: str, dimension: str):
        if profile is not None:
            return profile
        if key not in table:
            raise ctx.error(f"{where}.{key}", f"condition '{cond}' needs '{key}' (or 'profile')")
        return parse_quantity(table[key], dimension, f"{where}.{key}", file=ctx.path)

    try:
        if cond == "temperature":
            face = Temperature(datum("value", "temperature"))
        elif cond == "flux":
            face = Flux(datum("value", "heat_flux"))
        elif cond == "insulated":
            face = Insulated()
        elif cond == "convection":
            if "h" not in table:
                raise ctx.error(f"{where}.h", "condition 'convection' needs 'h', e.g. h = \"12 W/(m^2*K)\"")
            h = parse_quantity(table["h"], "heat_transfer_coefficient", f"{where}.h", file=ctx.path)
            if not h > 0:
                raise ctx.error(f"{where}.h", f"h must be positive, got {table['h']!r}")
            face = Convection(h, datum("ambient", "temperature"))
        elif cond == "unknown-temperature":
            face = UnknownTemperature()
        else:
            face = UnknownFlux()
    except ForwardModelError as exc:
        raise ctx.error(where, str(exc)) from None
    return face, text, profile


# ---------------------------------------------------------------------------- load


def _check_calibrated_faces(ctx, calibrate, faces) -> None:
    """[fit] calibrate names what the fit can calibrate (inverse.calibration.calibration_refusal),
    said at load so that `check` refuses what `fit` would."""
    from ..inverse.calibration import calibration_refusal

    for face, what in calibrate:
        refusal = calibration_refusal(faces, face, what)
        if refusal:
            raise ctx.error("fit.calibrate", refusal)


def load_case(path, purpose: str | None = None, readings_given: bool = False) -> Case:
    """Read and validate a case file; `purpose` "fit" or "simulate" adds that command's checks;
    `readings_given`: the command line gives the readings (--readings, --log), so the case's
    own `[sensors] readings` file need not exist (it is then left out: sensors.readings None).

    Raises InputError (file, key, what is expected) for anything wrong.  Builds the forward
    objects (Cylinder, face conditions) but solves nothing.
    """
    path = Path(path)
    text = read_text(path, "a case file (TOML)", missing="case file not found")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", file=path) from None
    ctx = _Ctx(path)
    ctx.check_keys(doc, TOP_KEYS, "")

    # [part]
    part = ctx.table(doc, "part", "part", required=True)
    cylinder, part_text = parse_part(ctx, part)
    conductivity = cylinder.conductivity

    # [faces]
    faces_t = ctx.table(doc, "faces", "faces", required=True)
    ctx.check_keys(faces_t, ALL_FACES, "faces")
    for name in faces_t:
        if name not in cylinder.faces:
            raise ctx.error(f"faces.{name}", absent_face(cylinder, name))
    faces: dict[str, FaceCondition] = {}
    face_text: dict[str, dict[str, str]] = {}
    profiles: dict[str, TableProfile] = {}
    for name in cylinder.faces:
        table = ctx.table(faces_t, name, f"faces.{name}", required=False)
        if table is None:
            raise ctx.error(f"faces.{name}", f"missing [faces.{name}] table; every face of the part "
                                             f"needs a condition ({', '.join(CONDITION_NAMES)})")
        face, ftext, profile = _parse_face(ctx, name, table, cylinder)
        faces[name] = face
        face_text[name] = ftext
        if profile is not None:
            profiles[name] = profile
    unknown = [n for n, f in faces.items() if f.unknown]
    if len(unknown) > 1:
        raise ctx.error("faces", f"faces {' and '.join(unknown)} are both unknown; at most one face "
                                 f"can be estimated, the others need known conditions")
    if conductivity is None:
        for name, f in faces.items():
            if f.condition in _NEEDS_CONDUCTIVITY:
                raise ctx.error("part.conductivity", f"missing key 'conductivity', needed because "
                                                     f"faces.{name} is '{f.condition}'; e.g. "
                                                     f"conductivity = \"16 W/(m*K)\"")

    # [sensors]
    sens = ctx.table(doc, "sensors", "sensors", required=False)
    sensors = SensorFiles()
    if sens is not None:
        ctx.check_keys(sens, SENSOR_KEYS, "sensors")
        layout = ctx.path_value(sens, "layout", "sensors.layout") if "layout" in sens else None
        readings = ctx.path_value(sens, "readings", "sensors.readings") \
            if "readings" in sens and not readings_given else None
        if readings is not None and layout is None:
            raise ctx.error("sensors.layout", "readings are given without a layout; add layout = \"layout.csv\"")
        sensors = SensorFiles(layout, readings)

    fit = _parse_fit(ctx, ctx.table(doc, "fit", "fit", required=False))
    _check_calibrated_faces(ctx, fit.calibrate, faces)
    zones = _parse_zones(ctx, doc.get("zones"), cylinder, unknown[0] if unknown else None)
    plan = _parse_plan(ctx, ctx.table(doc, "plan", "plan", required=False),
                       faces[unknown[0]].condition if unknown else None)
    case = Case(path=path, folder=path.parent, cylinder=cylinder, faces=faces, face_text=face_text,
                profiles=profiles, sensors=sensors, fit=fit, zones=zones, part_text=part_text, plan=plan)
    case.require(purpose)
    return case
