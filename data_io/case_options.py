"""The case file's [fit] table and [[zones]] array, parsed into inverse's typed objects
(inverse.problem.FitOptions and Zone: the defaults and choice lists live there)."""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass
from typing import Any, Callable

from ..forward.geometry import FACE_NAMES as ALL_FACES, Cylinder, is_wall
from ..inverse.errors import InverseError
from ..inverse.plan_rules import COVARIANCES, DRILL_FACES, PlanRules, grid_size
from ..inverse.problem import (CALIBRATABLE, LOSSES, MODELS, PRIORS, SMOOTHING_ORDER,
                               STRENGTH_METHODS, FitOptions, Zone, default_ranges)

from .case_context import _Ctx, _show
from .csv_in import check_printable
from .limits import MAX_CANDIDATES
from .units import format_quantity, parse_quantity

ZONE_KEYS = ("name", "face", "r", "theta", "z", "nominal", "edge")
SMOOTHING_KINDS = tuple(SMOOTHING_ORDER)


# ---------------------------------------------------------------------------- [fit] schema


def _fit_strength(ctx: _Ctx, value, where: str) -> dict:
    if isinstance(value, bool):
        raise ctx.error(where, f"expected \"auto\", \"auto:<method>\" or a positive number, got {value!r}")
    number = None
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str):
        s = value.strip().lower()
        if s == "auto":
            return {"strength_method": "evidence", "strength": None}
        if s.startswith("auto:"):
            method = s[5:].strip()
            if method in STRENGTH_METHODS:
                return {"strength_method": method, "strength": None}
            close = difflib.get_close_matches(method, STRENGTH_METHODS, n=1)
            hint = f"did you mean 'auto:{close[0]}'? " if close else ""
            raise ctx.error(where, f"unknown method '{method}'; {hint}expected auto:"
                                   + ", auto:".join(STRENGTH_METHODS))
        try:
            number = float(s)
        except ValueError:
            raise ctx.error(where, f"expected \"auto\", \"auto:<method>\" (methods: "
                                   f"{', '.join(STRENGTH_METHODS)}) or a positive number; "
                                   f"got {value!r}") from None
    else:
        raise ctx.error(where, f"expected \"auto\", \"auto:<method>\" or a positive number, got {_show(value)}")
    if not (math.isfinite(number) and number > 0):
        raise ctx.error(where, f"a fixed strength must be a positive number, got {value!r}")
    return {"strength_method": "fixed", "strength": number}


def _fit_choice(choices: tuple[str, ...], out_key: str):
    def parse(ctx: _Ctx, value, where: str) -> dict:
        if not isinstance(value, str) or value.strip().lower() not in choices:
            close = difflib.get_close_matches(str(value), choices, n=1) if isinstance(value, str) else []
            hint = f"did you mean '{close[0]}'? " if close else ""
            raise ctx.error(where, f"got {_show(value)}; {hint}expected one of: {', '.join(choices)}")
        return {out_key: value.strip().lower()}
    return parse


def _fit_bool(out_key: str):
    def parse(ctx: _Ctx, value, where: str) -> dict:
        if not isinstance(value, bool):
            raise ctx.error(where, f"expected true or false (no quotes), got {_show(value)}")
        return {out_key: value}
    return parse


def _fit_count(out_key: str, minimum: int):
    def parse(ctx: _Ctx, value, where: str) -> dict:
        if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
            raise ctx.error(where, f"expected a whole number >= {minimum} (no quotes), got {_show(value)}")
        return {out_key: int(value)}
    return parse


def _fit_keep_sensors(ctx: _Ctx, value, where: str) -> dict:
    if not isinstance(value, list) or not all(isinstance(v, str) and v.strip() for v in value):
        raise ctx.error(where, f"expected a list of sensor ids like [\"TC07\"], got {_show(value)}")
    names = tuple(v.strip() for v in value)
    if len(set(names)) != len(names):
        raise ctx.error(where, "a sensor is listed twice")
    return {"keep_sensors": names}


def _fit_common_offset(ctx: _Ctx, value, where: str) -> dict:
    if not isinstance(value, str):
        raise ctx.error(where, f"expected a temperature difference with its unit, e.g. \"0.5 K\"; got {_show(value)}")
    sd = parse_quantity(value, "temperature_difference", where, file=ctx.path)
    if not sd > 0:
        raise ctx.error(where, f"the prior sd of a common offset must be positive, got {value!r}")
    return {"common_offset_sd": sd}


def _fit_calibrate(ctx: _Ctx, value, where: str) -> dict:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ctx.error(where, f"expected a list like [\"top.h\", \"top.ambient\"], got {_show(value)}")
    out = []
    for item in value:
        face, _, param = item.strip().partition(".")
        if face not in ALL_FACES or param not in CALIBRATABLE:
            raise ctx.error(where, f"'{item}': expected <face>.<parameter> with face {', '.join(ALL_FACES)} "
                                   f"and parameter {' or '.join(CALIBRATABLE)} of a convection face")
        out.append((face, param))
    if len(set(out)) != len(out):
        raise ctx.error(where, "a parameter is listed twice")
    return {"calibrate": tuple(out)}


#: [fit] keys -> (parser, description).  To add an option: add an inverse.problem.FitOptions
#: field with its default, and a row here.
FIT_SCHEMA: dict[str, tuple[Callable[[Any, Any, str], dict], str]] = {
    "strength": (_fit_strength, '"auto" (= "auto:evidence"), "auto:<method>" with method '
                                'evidence | gcv | lcurve | discrepancy, or a positive number'),
    "smoothing": (_fit_choice(SMOOTHING_KINDS, "smoothing"),
                  'prior on the unknown face: "size", "gradient" (default) or "curvature"'),
    "keep_all_sensors": (_fit_bool("keep_all_sensors"), "true keeps suspect sensors in the fit (default false)"),
    "keep_sensors": (_fit_keep_sensors, 'sensors the screening never sets aside nor weighs as possibly broken, '
                                        'e.g. ["TC07"] (thermocouples known good; a gross fault still goes)'),
    "terms": (_fit_count("terms", 1), "number of radial/axial terms of the unknown face (default: automatic)"),
    "harmonics": (_fit_count("harmonics", 0), "number of angular harmonics (default: automatic)"),
    "loss": (_fit_choice(LOSSES, "loss"),
             'sensor misfit: "linear" (Gaussian, default) or the robust "soft_l1" / "huber"'),
    "common_offset": (_fit_common_offset, "prior sd of an offset shared by all sensors, e.g. \"0.5 K\""),
    "calibrate": (_fit_calibrate, 'convection parameters fitted with the face, e.g. ["top.h"]'),
    "model": (_fit_choice(MODELS, "model"),
              'face model: "auto" (default: where zones are declared, the smooth and the zone model '
              'averaged with their evidence probabilities), "smooth" or "zones" (one level per zone plus '
              'a smooth remainder)'),
    "prior": (_fit_choice(PRIORS, "prior"),
              'smooth prior: "learned" (default: strength, length scale and smoothness order learned '
              'from the readings) or "fixed" (length scale = radius, order from smoothing)'),
}


def _parse_fit(ctx: _Ctx, table: dict | None) -> FitOptions:
    if table is None:
        return FitOptions()
    ctx.check_keys(table, tuple(FIT_SCHEMA), "fit")
    values: dict = {}
    for key, value in table.items():
        values.update(FIT_SCHEMA[key][0](ctx, value, f"fit.{key}"))
    try:
        return FitOptions(**values)
    except InverseError as exc:
        raise ctx.error("fit", str(exc)) from None


# ---------------------------------------------------------------------------- zones


def _range(ctx: _Ctx, zone: dict, key: str, where: str, dimension: str) -> tuple[float, float]:
    value = zone[key]
    if not (isinstance(value, list) and len(value) == 2):
        unit = "mm" if dimension == "length" else "deg"
        raise ctx.error(where, f"expected a list of two values with units, e.g. [\"0 {unit}\", \"50 {unit}\"], "
                               f"got {_show(value)}")
    lo = parse_quantity(value[0], dimension, f"{where}[0]", file=ctx.path)
    hi = parse_quantity(value[1], dimension, f"{where}[1]", file=ctx.path)
    if not lo < hi:
        hint = ""
        if dimension == "angle":       # a sector across theta = 0 is written from below 0
            hint = (f"; a sector across 0 deg starts below 0, e.g. [\"{math.degrees(lo) - 360:g} deg\", "
                    f"\"{math.degrees(hi):g} deg\"]")
        raise ctx.error(where, f"the first value must be below the second, got {value!r}{hint}")
    return lo, hi


def _parse_zones(ctx: _Ctx, zones, cylinder: Cylinder, unknown: str | None) -> tuple[Zone, ...]:
    if zones is None:
        return ()
    if not isinstance(zones, list) or not all(isinstance(z, dict) for z in zones):
        raise ctx.error("zones", "zones must be an array of tables: write each zone under [[zones]]")
    out = []
    names: set[str] = set()
    for i, zone in enumerate(zones, start=1):
        where = f"zones[{i}]"
        ctx.check_keys(zone, ZONE_KEYS, where)
        if "name" not in zone:
            raise ctx.error(f"{where}.name", "missing key 'name'")
        name = ctx.text(zone, "name", f"{where}.name").strip()
        if not name:
            raise ctx.error(f"{where}.name", "empty zone name")
        check_printable(name, ctx.path, f"{where}.name")      # it reaches the console, report and columns
        if name in names:
            raise ctx.error(f"{where}.name", f"zone name '{name}' is used twice")
        names.add(name)
        if "face" in zone:
            face = ctx.text(zone, "face", f"{where}.face").strip().lower()
            if face not in cylinder.faces:
                raise ctx.error(f"{where}.face", f"expected one of: {', '.join(cylinder.faces)}, got {zone['face']!r}")
        elif unknown is not None:
            face = unknown
        elif "r" in zone and "z" in zone:
            raise ctx.error(f"{where}.z", "a zone takes r and theta (end faces) or theta and z (walls: "
                                          "side, bore), not both r and z")
        else:
            # fully known case (simulate): the zone is on the face that will be unknown; infer
            # the kind of face from its keys, only to check the ranges
            face = None
        wall = is_wall(face) if face is not None else ("z" in zone or cylinder.long)
        on = f"the {face} face" if face else ("a wall" if wall else "an end face")
        if wall and "r" in zone:
            takes = "theta only" if cylinder.long else "theta and z"
            raise ctx.error(f"{where}.r", f"a zone on {on}{' (a wall)' if face else ''} takes {takes}, not r")
        if not wall and "z" in zone:
            raise ctx.error(f"{where}.z", f"a zone on {on} takes r and theta, not z")
        if wall and cylinder.long and "z" in zone:
            raise ctx.error(f"{where}.z", "a long part (height = \"long\") does not vary along z; "
                                          "a zone on its wall takes theta only")
        theta = (0.0, 2 * math.pi)
        if "theta" in zone:
            theta = _range(ctx, zone, "theta", f"{where}.theta", "angle")
            if theta[1] - theta[0] > 2 * math.pi * (1 + 1e-12):
                raise ctx.error(f"{where}.theta", "the angle range spans more than 360 deg")
        r = z = None      # a range left out: the whole span (inverse.problem.default_ranges)
        if wall and not cylinder.long:
            if "z" in zone:
                z = _range(ctx, zone, "z", f"{where}.z", "length")
                if z[0] < 0 or z[1] > cylinder.height * (1 + 1e-9):
                    raise ctx.error(f"{where}.z", f"the range must lie within 0 and the height "
                                                  f"({format_quantity(cylinder.height, 'length')})")
            elif cylinder.semi_infinite:
                raise ctx.error(f"{where}.z", "a side zone of a semi-infinite part needs a z range")
        elif not wall:
            a, b = cylinder.inner_radius, cylinder.radius
            if "r" in zone:
                r = _range(ctx, zone, "r", f"{where}.r", "length")
                if cylinder.hollow and r[0] < a * (1 - 1e-9):
                    raise ctx.error(f"{where}.r", f"the range reaches into the bore: it must lie within the "
                                                  f"inner radius ({format_quantity(a, 'length')}) and the "
                                                  f"radius ({format_quantity(b, 'length')})")
                if r[0] < 0 or r[1] > b * (1 + 1e-9):
                    raise ctx.error(f"{where}.r", f"the range must lie within 0 and the radius "
                                                  f"({format_quantity(b, 'length')})")
        nominal = edge = None
        if "nominal" in zone:
            # a long part's powers are per metre of length (the plane problem), so is its zones' nominal
            kind, example = ("power_per_length", "3 kW/m") if cylinder.long else ("power", "400 W")
            nominal = parse_quantity(ctx.text(zone, "nominal", f"{where}.nominal"), kind,
                                     f"{where}.nominal", file=ctx.path)
            if not (math.isfinite(nominal) and nominal != 0):
                raise ctx.error(f"{where}.nominal", f"expected a non-zero power, e.g. \"{example}\"; "
                                                    f"got {zone['nominal']!r}")
        if "edge" in zone:
            edge = parse_quantity(ctx.text(zone, "edge", f"{where}.edge"), "length", f"{where}.edge",
                                  file=ctx.path)
            if not (math.isfinite(edge) and edge >= 0):
                raise ctx.error(f"{where}.edge", f"expected an edge width >= 0, e.g. \"5 mm\"; got {zone['edge']!r}")
        out.append(default_ranges(Zone(name=name, face=face, theta=theta, r=r, z=z, nominal=nominal,
                                       edge=edge or 0.0), wall, cylinder))
    return tuple(out)


# ---------------------------------------------------------------------------- [plan]

PLAN_KEYS = ("drill_from", "existing_from", "depth_min", "depth_max", "face_distance", "spacing", "exclude_theta",
             "exclude_r", "exclude_z", "angle_step", "positions", "depths", "expected_variation",
             "sigma", "offset_sd", "covariance")


@dataclass(frozen=True)
class PlanOptions:
    """The case's [plan] table: drilling rules (inverse.plan_rules.PlanRules), the expected
    variation of the unknown face [K or W/m^2] for a plan without readings (None: not given),
    a new sensor's sigma / offset sd [K] (None: the existing sensors' medians) and which
    covariance of a fit is planned on (inverse.plan.state_from_fit)."""

    rules: PlanRules = PlanRules()
    expected_variation: float | None = None
    sigma: float | None = None
    offset_sd: float | None = None
    covariance: str = "mixture"


def _plan_length(ctx, table, key, minimum=0.0):
    value = parse_quantity(table[key], "length", f"plan.{key}", file=ctx.path)
    if not (math.isfinite(value) and value >= minimum):
        raise ctx.error(f"plan.{key}", f"expected a length >= {minimum * 1e3:g} mm, got {table[key]!r}")
    return value


def _plan_ranges(ctx, table, key, dimension):
    value = table[key]
    if not isinstance(value, list) or not all(isinstance(v, list) for v in value):
        unit = "deg" if dimension == "angle" else "mm"
        raise ctx.error(f"plan.{key}", f"expected a list of ranges, e.g. [[\"80 {unit}\", \"100 {unit}\"]], "
                                       f"got {_show(value)}")
    return tuple(_range(ctx, {key: v}, key, f"plan.{key}[{i}]", dimension) for i, v in enumerate(value, 1))


def _parse_plan(ctx: _Ctx, table: dict | None, unknown: str | None) -> PlanOptions:
    if table is None:
        return PlanOptions()
    ctx.check_keys(table, PLAN_KEYS, "plan")
    rules: dict = {}
    for key, rule in (("drill_from", "drill_face"), ("existing_from", "existing_face")):
        if key in table:
            face = str(table[key]).strip().lower()
            if face not in DRILL_FACES:
                raise ctx.error(f"plan.{key}", f"expected one of: {', '.join(DRILL_FACES)}, got {table[key]!r}")
            rules[rule] = face
    for key in ("depth_min", "depth_max", "face_distance", "spacing"):
        if key in table:
            rules[key] = _plan_length(ctx, table, key)
    if "exclude_theta" in table:
        rules["exclude_theta"] = _plan_ranges(ctx, table, "exclude_theta", "angle")
    for key in ("exclude_r", "exclude_z"):
        if key in table:
            rules[key] = _plan_ranges(ctx, table, key, "length")
    if "angle_step" in table:
        step = parse_quantity(table["angle_step"], "angle", "plan.angle_step", file=ctx.path)
        if not 0 < step <= math.pi:
            raise ctx.error("plan.angle_step", f"expected an angle in (0, 180] deg, got {table['angle_step']!r}")
        rules["angle_step"] = step
    for key, name in (("positions", "along"), ("depths", "depths")):
        if key in table:
            rules.update(_fit_count(name, 1)(ctx, table[key], f"plan.{key}"))
    if rules.get("depth_max") is not None and rules.get("depth_min", 0.0) > rules["depth_max"]:
        raise ctx.error("plan.depth_max", "depth_max must not be below depth_min")
    out: dict = {}
    if "expected_variation" in table:
        dim = "temperature_difference" if unknown == "unknown-temperature" else "heat_flux"
        value = parse_quantity(table["expected_variation"], dim, "plan.expected_variation", file=ctx.path)
        if not (math.isfinite(value) and value > 0):
            raise ctx.error("plan.expected_variation", f"expected a positive value, got {table['expected_variation']!r}")
        out["expected_variation"] = value
    for key in ("sigma", "offset_sd"):
        if key in table:
            value = parse_quantity(table[key], "temperature_difference", f"plan.{key}", file=ctx.path)
            if not (math.isfinite(value) and (value > 0 if key == "sigma" else value >= 0)):
                raise ctx.error(f"plan.{key}", f"expected a {'positive' if key == 'sigma' else 'non-negative'} "
                                               f"temperature difference, got {table[key]!r}")
            out[key] = value
    if "covariance" in table:
        out.update(_fit_choice(COVARIANCES, "covariance")(ctx, table["covariance"], "plan.covariance"))
    plan_rules = PlanRules(**rules)
    if grid_size(plan_rules) > MAX_CANDIDATES:
        raise ctx.error("plan", f"positions x angles x depths makes {grid_size(plan_rules)} candidate positions, more "
                                f"than {MAX_CANDIDATES}; lower plan.positions or plan.depths, or widen plan.angle_step")
    return PlanOptions(plan_rules, **out)
