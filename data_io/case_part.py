"""The case file's [part] table: radius, height, conductivity and, for a hollow part,
inner_radius (the bore) and height = "long" (a tube where nothing varies along the axis).

    [part]
    radius = "150 mm"            # outer radius, > 0
    inner_radius = "50 mm"       # optional: 0 or absent = solid; else 0 < inner_radius < radius
    height = "40 mm"             # > 0; "infinite" (solid only: semi-infinite);
                                 # "long" (hollow only: plane r-theta problem, powers per metre)
    conductivity = "16 W/(m*K)"

A face table the part does not have is refused with the reason (a bore on a solid part, an
end face on a long part, a top on a semi-infinite part).
"""

from __future__ import annotations

import math

from ..forward.errors import ForwardModelError
from ..forward.geometry import Cylinder

from .case_context import _Ctx
from .limits import RADIUS_RANGE
from .units import format_quantity, in_display_unit, number_as_written, parse_quantity

PART_KEYS = ("radius", "inner_radius", "height", "conductivity")
LONG = "long"


def _length(ctx: _Ctx, part: dict, key: str, **kw) -> float:
    return parse_quantity(part[key], "length", f"part.{key}", file=ctx.path, **kw)


def parse_part(ctx: _Ctx, part: dict) -> tuple[Cylinder, dict[str, str]]:
    """The [part] table -> (forward.Cylinder, {key: text as written}).  Raises InputError
    naming the key for anything missing, mistaken or ill-posed."""
    ctx.check_keys(part, PART_KEYS, "part")
    for key in ("radius", "height"):
        if key not in part:
            raise ctx.error(f"part.{key}", f"missing key '{key}', e.g. {key} = \"150 mm\""
                            + (" (or \"infinite\", or \"long\" for a tube)" if key == "height" else ""))
    radius = _length(ctx, part, "radius")
    if not radius > 0:
        raise ctx.error("part.radius", f"the radius must be positive, got {part['radius']!r}")
    lo, hi = RADIUS_RANGE
    if not lo <= radius <= hi:
        number = number_as_written(part["radius"])
        meant = in_display_unit(number, "length") if number is not None else math.nan
        hint = f": {number:g} mm would be" if lo <= meant <= hi else ""
        raise ctx.error("part.radius", f"{part['radius']!r} is outside {format_quantity(lo, 'length')} to "
                                       f"{format_quantity(hi, 'length', 'm')}, not a plausible part's radius "
                                       f"(check the unit{hint})")
    inner = 0.0
    if "inner_radius" in part:
        inner = _length(ctx, part, "inner_radius")
        if not inner >= 0:
            raise ctx.error("part.inner_radius", f"the inner radius must be 0 (solid) or a positive "
                                                 f"length, got {part['inner_radius']!r}")
        if inner >= radius:
            raise ctx.error("part.inner_radius", f"the inner radius {part['inner_radius']!r} must be below "
                                                 f"the radius {part['radius']!r} (the bore lies inside "
                                                 f"the outer wall)")
    long = isinstance(part["height"], str) and part["height"].strip().lower() == LONG
    if long:
        if inner == 0:
            raise ctx.error("part.height", "height = \"long\" is for a hollow part (a tube where nothing "
                                           "varies along the axis); give part.inner_radius, or a "
                                           "finite height")
        height = math.inf
    else:
        height = _length(ctx, part, "height", allow_infinite=True)
        if not height > 0:
            raise ctx.error("part.height", f"the height must be positive, got {part['height']!r}")
        if inner > 0 and math.isinf(height):
            raise ctx.error("part.height", "a hollow part has no semi-infinite form; give a finite height, "
                                           "or height = \"long\" for a tube where nothing varies along "
                                           "the axis")
    conductivity = None
    if "conductivity" in part:
        conductivity = parse_quantity(part["conductivity"], "conductivity", "part.conductivity", file=ctx.path)
        if not conductivity > 0:
            raise ctx.error("part.conductivity", f"the conductivity must be positive, got {part['conductivity']!r}")
    try:
        cylinder = Cylinder(radius=radius, height=height, conductivity=conductivity,
                            inner_radius=inner, long=long)
    except ForwardModelError as exc:
        raise ctx.error("part", str(exc)) from None
    text = {k: part[k] for k in PART_KEYS if k in part}
    return cylinder, text


def absent_face(cylinder: Cylinder, name: str) -> str:
    """Why a known face name is not a face of this part (message for faces.<name>)."""
    if name == "bore":
        return ("the part is solid (part.inner_radius is absent or 0), so it has no bore; give a positive "
                "inner_radius = \"...\" in [part] for a hollow part, or remove [faces.bore]")
    if cylinder.long:
        return (f"a long part (height = \"long\") has no end faces, only the side (outer wall) and "
                f"the bore; remove [faces.{name}] or give a finite height")
    return ("the part is semi-infinite (height = \"infinite\"), so it has no top face; remove "
            "[faces.top] or give a finite height")


def part_words(cylinder: Cylinder) -> str:
    """'solid', 'hollow, wall 25 mm thick' or 'long hollow (a tube; nothing varies along z)'."""
    if not cylinder.hollow:
        return "solid"
    wall = f"wall {format_quantity(cylinder.thickness, 'length')} thick"
    if cylinder.long:
        return f"long hollow tube ({wall}; nothing varies along z, powers are per metre of length)"
    return f"hollow ({wall})"
