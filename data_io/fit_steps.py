"""The steps of a fit shared by `heatsight fit` and `heatsight.fit(...)`: read the case and
its tables, fit, build every output file, write them all or none.

    case, readings_path = load_fit_case(path, readings)
    result, points = fit_case(case, readings_path, at=...)
    files = output_files(result, case, readings_path, points)
    write_outputs(folder, create, files)
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd

from ..forward.errors import ForwardModelError
from ..inverse.errors import InverseError
from ..inverse.readings import MIN_READINGS

from .errors import InputError


def load_fit_case(case_path, readings=None, *, how_to_give="give --readings FILE"):
    """The case (checked for a fit) and the path of its snapshot readings (`readings`
    overrides the case's [sensors] readings)."""
    from .case import load_case

    from .limits import check_case

    case = load_case(case_path, purpose="fit", readings_given=bool(readings))
    case.require("fit")
    check_case(case)
    readings_path = Path(readings) if readings else case.sensors.readings
    if readings_path is None:
        raise InputError(f"no readings: add [sensors] readings = \"readings.csv\" or {how_to_give}",
                         file=case.path, where="sensors.readings")
    return case, readings_path


def check_keep_sensors(case, layout) -> None:
    """[fit] keep_sensors names sensors of the layout Table `layout` (InputError otherwise)."""
    unknown = [n for n in case.fit.keep_sensors if n not in set(layout.frame.index.astype(str))]
    if unknown:
        raise InputError(f"names {', '.join(unknown)}, not in the sensor layout; expected sensor ids of the layout",
                         file=case.path, where="fit.keep_sensors")


def log_not_snapshot(path) -> str:
    """Why fit and plan refuse a file that reads as a log, with its header as found."""
    from .log_header import header_names

    names = header_names(path, as_written=True)
    return (f"reads as a log (its first column '{names[0]}' the time, then one column per sensor: "
            f"{', '.join(names[1:4])}{', ...' if len(names) > 4 else ''}); fit and plan take a snapshot with "
            f"columns sensor, temperature (follow a log with heatsight trend)")


def usable_readings(snapshot, path):
    """The snapshot Table's SensorReadings; InputError when fewer than MIN_READINGS are usable."""
    from ..inverse import SensorReadings

    rd = SensorReadings.from_frame(snapshot.frame)
    if rd.n < MIN_READINGS:
        raise InputError(f"only {rd.n} usable sensor reading(s); a fit needs at least {MIN_READINGS}", file=path)
    return rd


def fit_case(case, readings_path, *, at=None, **options):
    """Read the layout, the snapshot readings and the query points `at` (or None), and fit;
    the readers' warnings lead the result's.  options: those of ``heatsight.inverse.fit``.
    Returns (FitResult, points Table or None)."""
    from .. import inverse

    from .tables import read_layout, read_points, read_snapshot, readings_form

    layout = read_layout(case.sensors.layout, case.cylinder)
    check_keep_sensors(case, layout)
    if Path(readings_path).suffix.lower() == ".toml":
        raise InputError("is a case file (TOML), not readings; give a snapshot table with columns sensor, "
                         "temperature", file=readings_path)
    if readings_form(readings_path) == "log":
        raise InputError(log_not_snapshot(readings_path), file=readings_path)
    snapshot = read_snapshot(readings_path, layout)
    points = read_points(at, case.cylinder) if at else None
    rd = usable_readings(snapshot, readings_path)
    try:
        result = inverse.fit(case, rd, **options)
    except (InverseError, ForwardModelError) as exc:
        raise InputError(str(exc), file=case.path) from None
    reader_warnings = layout.warnings + snapshot.warnings + (points.warnings if points else [])
    result.warnings[:0] = reader_warnings
    result.summary["warnings"][:0] = reader_warnings
    return result, points


def case_text(case, readings_path) -> list:
    """(label, value) lines describing the case as the user wrote it, for the report."""
    part = ", ".join(f"{k} {v}" for k, v in case.part_text.items())
    lines = [("case file", str(case.path)), ("part", part)]
    for face in case.faces:
        text = case.face_text.get(face, {})
        cond = text.get("condition", case.faces[face].condition)
        extra = ", ".join(f"{k} = {v}" for k, v in text.items() if k != "condition")
        lines.append((f"{face} face", cond + (f" ({extra})" if extra else "")))
    lines.append(("sensor layout", str(case.sensors.layout)))
    lines.append(("readings", str(readings_path)))
    return lines


def output_files(result, case, readings_path, points=None) -> list[tuple[str, object]]:
    """(file name, text or bytes) of every output of a fit, in writing order: estimate.csv,
    sensors.csv, summary.json, points.csv (with points), the PNG figures, report.html."""
    from .csv_columns import estimate_columns, points_columns, sensor_columns
    from .csv_out import OUTPUT_FILES_KEY, csv_text, json_text
    from .fit_outputs import estimate_frame, points_frame, summary_dict
    from .figure_pngs import figure_pngs
    from .plots import all_figures
    from .report import render_report

    summary = summary_dict(result, case_path=case.path, readings_path=readings_path)
    figures = figure_pngs(all_figures(result, zones=case.zones))
    html = render_report(result, case_text=case_text(case, readings_path), figures=figures,
                         title=f"heatsight fit: {case.path.name}")
    names = ["estimate.csv", "sensors.csv", "summary.json"] + (["points.csv"] if points is not None else []) + \
        [f"{name}.png" for name in figures] + ["report.html"]
    summary[OUTPUT_FILES_KEY] = names
    files = [("estimate.csv", csv_text(estimate_columns(estimate_frame(result), result.quantity))),
             ("sensors.csv", csv_text(sensor_columns(pd.DataFrame(summary["sensors"])))),
             ("summary.json", json_text(summary))]
    if points is not None:
        files.append(("points.csv", csv_text(points_columns(points_frame(result, points)))))
    files += [(f"{name}.png", png) for name, png in figures.items()]
    files.append(("report.html", html))
    assert [n for n, _ in files] == names
    return files


def write_outputs(folder: Path, create: bool, files) -> None:
    """Write every file into `folder` or none (a folder created here is removed on failure)."""
    from .csv_out import OutputSet

    if create:
        folder.mkdir()
    try:
        with OutputSet(folder) as outset:
            for name, content in files:
                outset.add(name, content)
    except BaseException:
        if create:
            shutil.rmtree(folder, ignore_errors=True)
        raise
