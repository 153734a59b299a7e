"""Plain-text explanation of a case for `heatsight check`: what was understood, with units,
and simple notes on blind spots of the sensor layout."""

from __future__ import annotations

import math
from collections import Counter

import numpy as np
import pandas as pd

from ..forward.geometry import is_wall
from ..inverse.layout import FAR_FRACTION, angular_note, edge_gap_note
from . import thermocouples as tc
from .case import Case
from .units import format_quantity, from_si

FACE_PLACE = {"bottom": "z = 0", "top": "z = height", "side": "outer wall, r = radius",
              "bore": "inner wall, r = inner_radius"}


def _both(written: str, si: str) -> str:
    """The value as written, and in SI when that reads differently."""
    return written if " ".join(written.split()) == si else f"{written} ({si})"


def _face_line(case: Case, name: str) -> str:
    face = case.faces[name]
    text = case.face_text[name]
    cond = face.condition
    head = f"  {name} ({FACE_PLACE[name]}): {cond}"
    if face.unknown:
        what = "temperature, degC" if cond == "unknown-temperature" else "heat flux into the part, W/m^2"
        return f"{head} -> to be estimated ({what})"
    prof = case.profiles.get(name)
    if prof is not None:
        unit, dim = ("W/m^2", "heat_flux") if prof.quantity == "heat_flux" else ("degC", "temperature")
        lo, hi = from_si(prof.min, dim, unit), from_si(prof.max, dim, unit)
        ptxt = (f"profile {prof.path} ({prof.n_points} points, {prof.description}; "
                f"{lo:.6g} to {hi:.6g} {unit})")
    if cond == "temperature":
        return f"{head}, " + (ptxt if prof is not None else
                              f"value = {text['value']} ({format_quantity(face.value, 'temperature', 'K')})")
    if cond == "flux":
        return f"{head} (into the part), " + (ptxt if prof is not None else
                                              f"value = {text['value']} ({format_quantity(face.value, 'heat_flux')})")
    if cond == "convection":
        amb = f"ambient {ptxt}" if prof is not None else \
            f"ambient = {text['ambient']} ({format_quantity(face.ambient, 'temperature', 'K')})"
        return f"{head}, h = {_both(text['h'], format_quantity(face.h, 'heat_transfer_coefficient'))}, {amb}"
    return head


def layout_notes(case: Case, layout: pd.DataFrame) -> list[str]:
    """Simple blind-spot notes on a sensor layout relative to the unknown face."""
    notes: list[str] = []
    face = case.unknown_face
    cyl = case.cylinder
    a = cyl.radius
    r, th, z = (layout[c].to_numpy(float) for c in ("r", "theta", "z"))
    n = r.size
    if face is None or n == 0:
        return notes
    if n < 3:
        notes.append(f"only {n} sensor{'s' if n > 1 else ''}: the fit can estimate little more "
                     f"than the mean of the {face} face")
    notes += [note for note in (angular_note(face, a, r, th), edge_gap_note(face, cyl, r, z)) if note]
    if is_wall(face):
        dist = cyl.depth(face, r, z)
        if n >= 2 and np.ptp(z) < 1e-6 * max(a, 1e-300) and not math.isinf(cyl.height):
            notes.append(f"all sensors at one height (z = {format_quantity(z[0], 'length')}): the axial "
                         f"shape of the {face} face is poorly resolved")
    else:
        dist = z if face == "bottom" else cyl.height - z
        if n >= 2 and np.ptp(r) < 1e-6 * a:
            notes.append(f"all sensors at one radius (r = {format_quantity(r[0], 'length')}): the radial "
                         f"shape of the {face} face is poorly resolved")
    dmin = float(dist.min())
    i = int(np.argmin(dist))
    # on a hollow part distances are measured against the wall thickness (the radius when solid)
    span, span_words = (cyl.thickness, "the wall thickness") if cyl.hollow else (a, "the radius")
    notes.append(f"nearest sensor to the {face} face: {layout.index[i]} at "
                 f"{format_quantity(dmin, 'length')} ({100 * dmin / span:.0f} % of {span_words}); "
                 f"features of the face much smaller than a few times this distance are smoothed out")
    if dmin > FAR_FRACTION * span:
        notes.append(f"every sensor is farther than {100 * FAR_FRACTION:.0f} % of {span_words} from the "
                     f"{face} face: only its broad shape can be estimated")
    pts = np.round(np.column_stack([r * np.cos(th), r * np.sin(th), z]) / (1e-6 * a))
    dup = Counter(map(tuple, pts))
    same = [k for k, c in dup.items() if c > 1]
    if same:
        notes.append(f"{sum(dup[k] for k in same)} sensors share positions with another sensor "
                     f"(they add no new information about the shape, only averaging)")
    return notes


def describe_case(case: Case) -> list[str]:
    """Lines describing the geometry, faces (with units), fit options and zones."""
    cyl = case.cylinder
    lines = [f"case: {case.path}"]
    k = "not given" if cyl.conductivity is None else _both(case.part_text['conductivity'],
                                                           format_quantity(cyl.conductivity, 'conductivity'))
    if cyl.long:
        height = "long (nothing varies along z; powers per metre of length, W/m)"
    elif cyl.semi_infinite:
        height = "infinite (semi-infinite part)"
    else:
        height = f"{case.part_text['height']} ({format_quantity(cyl.height, 'length', 'm')})"
    bore = ""
    if cyl.hollow:
        bore = (f", inner radius {case.part_text['inner_radius']} "
                f"({format_quantity(cyl.inner_radius, 'length', 'm')})")
    lines.append(f"part: radius {case.part_text['radius']} ({format_quantity(cyl.radius, 'length', 'm')})"
                 f"{bore}, height {height}, conductivity {k}")
    if cyl.hollow:
        lines += wall_lines(case)
    lines.append("faces:")
    for name in cyl.faces:
        lines.append(_face_line(case, name))
    f = case.fit
    strength = f"{f.strength:g} (fixed)" if f.strength_method == "fixed" else f"auto ({f.strength_method})"
    extra = "".join(f", {key} {getattr(f, key)}" for key in ("terms", "harmonics") if getattr(f, key) is not None)
    if case.unknown_face:
        learned = getattr(f, "prior", "learned") == "learned" and f.strength_method == "evidence"
        prior = ("prior learned (strength, length scale and smoothness order from the readings)" if learned
                 else f"prior fixed (strength {strength}, smoothing {f.smoothing})")
        lines.append(f"fit: {prior}, model {getattr(f, 'model', 'auto')}, keep_all_sensors "
                     f"{'true' if f.keep_all_sensors else 'false'}{extra}")
        more = []
        if f.calibrate:
            more.append("calibrated with the face: " + ", ".join(f"{face}.{p}" for face, p in f.calibrate))
        if f.common_offset_sd is not None:
            more.append(f"an offset shared by all sensors, sd {format_quantity(f.common_offset_sd, 'temperature_difference')}")
        if f.loss != "linear":
            more.append(f"loss {f.loss}")
        if more:
            lines.append("fit: " + "; ".join(more))
    for z in case.zones:
        th = f"theta {math.degrees(z.theta[0]):.4g} to {math.degrees(z.theta[1]):.4g} deg"
        if z.r is not None:
            where = f"r {format_quantity(z.r[0], 'length')} to {format_quantity(z.r[1], 'length')}, {th}"
        elif cyl.long:
            where = f"{th}, the whole length (nothing varies along z)"
        else:
            where = f"{th}, z {format_quantity(z.z[0], 'length')} to {format_quantity(z.z[1], 'length')}"
        lines.append(f"zone {z.name}: {z.face or 'the unknown'} face, {where}")
    return lines


def wall_lines(case: Case) -> list[str]:
    """A hollow part's wall: thickness, which face is unknown, and (for a long part) that z
    plays no part."""
    cyl = case.cylinder
    lines = [f"wall: {format_quantity(cyl.thickness, 'length')} thick, from the bore (r = "
             f"{format_quantity(cyl.inner_radius, 'length')}) to the outside (r = "
             f"{format_quantity(cyl.radius, 'length')})"]
    face = case.unknown_face
    if face is not None:
        where = {"bore": "the inner wall (bore)", "side": "the outer wall"}.get(face, f"the {face} end face")
        lines.append(f"  unknown face: {where}")
    if cyl.long:
        lines.append("  long part: nothing varies along z, so the sensors' and points' z is ignored")
    return lines


def sensor_depths(case: Case, layout) -> list[str]:
    """Each sensor's depth in a hollow part's wall as a fraction of the thickness, measured
    from the unknown wall (from the bore when no wall is unknown)."""
    cyl = case.cylinder
    if not cyl.hollow:
        return []
    wall_unknown = case.unknown_face in ("side", "bore")
    face = case.unknown_face if wall_unknown else "bore"
    origin = "the bore (inner wall)" if face == "bore" else "the outside (outer wall)"
    fr = layout.frame
    depth = cyl.depth(face, fr["r"].to_numpy(float), fr["z"].to_numpy(float))
    # an unknown end face is seen across z; the wall's radial position is then where the
    # sensor sits across the face, not its depth under it
    what = "sensor depth in the wall" if wall_unknown else "sensor position across the wall"
    lines = [f"{what}, from {origin}, as a fraction of the "
             f"{format_quantity(cyl.thickness, 'length')} thickness:"]
    for name, d in zip(fr.index, depth):
        lines.append(f"  {name}: {format_quantity(float(d), 'length')} = {d / cyl.thickness:.2f}")
    return lines


def describe_sensors(layout) -> list[str]:
    """Lines summarizing a layout Table: count, types and classes, sigma sources."""
    fr = layout.frame
    n = len(fr)
    kinds = Counter(f"type {t} {tc.class_name(c)}" if t else "no type" for t, c in zip(fr["type"], fr["class"]))
    kinds_txt = ", ".join(f"{v} x {k}" for k, v in sorted(kinds.items()))
    n_sigma = int(np.isfinite(fr["sigma"].to_numpy(float)).sum())
    sig = f"sigma given for {n_sigma} of {n}" if n_sigma else \
        f"no sigma given (readings' sigma, else {tc.DEFAULT_SIGMA_K} K)"
    return [f"sensors: {n} in {layout.path} ({kinds_txt}); {sig}"]


def describe_readings(readings) -> list[str]:
    """The readings line of `check`: a snapshot Table, or a log (a logs.LogSummary)."""
    if not hasattr(readings, "frame"):
        return [f"readings: {readings.path}, log of {readings.rows} times over "
                f"{readings.last - readings.first:g} s, {len(readings.sensors)} sensors"]
    fr = readings.frame
    if readings.kind == "snapshot":
        t = from_si(fr["temperature"].to_numpy(float), "temperature", "degC")
        return [f"readings: {readings.path}, snapshot of {len(fr)} sensors, "
                f"{t.min():.6g} to {t.max():.6g} degC"]
    span = float(fr.index[-1] - fr.index[0]) if len(fr) else 0.0
    return [f"readings: {readings.path}, log of {len(fr)} times over {span:g} s, "
            f"{fr.shape[1]} sensors"]
