"""`heatsight fit` and `heatsight demo`: read, fit, write every output or none."""

from __future__ import annotations

import argparse
import os
import shutil
import sys
from pathlib import Path

import pandas as pd

from ..forward.errors import ForwardModelError
from ..inverse import SensorReadings
from ..inverse.errors import InverseError

from .errors import InputError

OUTPUT_NAMES = ("estimate.csv", "sensors.csv", "summary.json", "points.csv", "report.html")


def _progress(done, total):
    width = 30
    filled = int(width * done / total)
    end = "\n" if done == total else ""
    print(f"\r  drawing {done}/{total} [{'#' * filled}{'.' * (width - filled)}]", end=end,
          file=sys.stderr, flush=True)


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


def _output_folder(args, case) -> tuple[Path, bool]:
    """The output folder and whether it must be created; refuses a non-empty one."""
    out = Path(args.out) if args.out else case.folder / f"{case.path.stem}-fit"
    if out.exists() and not out.is_dir():
        raise InputError("exists and is not a folder; --out names a folder", file=out)
    if out.is_dir() and any(out.iterdir()) and not args.overwrite:
        raise InputError("the output folder is not empty; choose another --out or add --overwrite",
                         file=out)
    if not out.parent.is_dir():
        raise InputError(f"the folder {out.parent} does not exist", file=out)
    inputs = {p.resolve() for p in case.input_files()}
    for name in OUTPUT_NAMES:
        if (out / name).resolve() in inputs:
            raise InputError(f"{name} in the output folder is an input of this run; choose another --out",
                             file=out)
    return out, not out.exists()


def run_fit(case_path, *, readings=None, at=None, out=None, overwrite=False, monte_carlo=0, seed=0,
            echo=print):
    """Fit a case and write its outputs; returns (result, output folder)."""
    from .. import inverse

    from .case import load_case
    from .csv_out import OutputSet, csv_text, json_text
    from .fit_outputs import console_summary, estimate_frame, points_frame, summary_dict
    from .plots import all_figures, figure_png
    from .report import render_report
    from .tables import read_layout, read_points, read_snapshot, readings_form

    case = load_case(case_path, purpose="fit")
    case.require("fit")
    readings_path = Path(readings) if readings else case.sensors.readings
    if readings_path is None:
        raise InputError("no readings: add [sensors] readings = \"readings.csv\" or give --readings FILE",
                         file=case.path, where="sensors.readings")
    args = argparse.Namespace(out=out, overwrite=overwrite)
    folder, create = _output_folder(args, case)
    layout = read_layout(case.sensors.layout, case.cylinder)
    if readings_form(readings_path) == "log":
        raise InputError("is a log (a time column, then one column per sensor); fit takes a snapshot "
                         "with columns sensor, temperature", file=readings_path)
    snapshot = read_snapshot(readings_path, layout)
    points = read_points(at, case.cylinder) if at else None
    rd = SensorReadings.from_frame(snapshot.frame)
    if rd.n < 3:
        raise InputError(f"only {rd.n} usable sensor reading(s); a fit needs at least 3",
                         file=readings_path)
    try:
        result = inverse.fit(case, rd, monte_carlo=monte_carlo, seed=seed,
                             progress=_progress if monte_carlo else None)
    except (InverseError, ForwardModelError) as exc:
        raise InputError(str(exc), file=case.path) from None
    reader_warnings = layout.warnings + snapshot.warnings + (points.warnings if points else [])
    result.warnings[:0] = reader_warnings
    result.summary["warnings"][:0] = reader_warnings

    summary = summary_dict(result, case_path=case.path, readings_path=readings_path)
    figures = {name: figure_png(fig) for name, fig in all_figures(result).items()}
    html = render_report(result, case_text=case_text(case, readings_path), figures=figures,
                         title=f"heatsight fit: {case.path.name}")
    if create:
        folder.mkdir()
    try:
        with OutputSet(folder) as outset:
            outset.add("estimate.csv", csv_text(estimate_frame(result)))
            outset.add("sensors.csv", csv_text(pd.DataFrame(summary["sensors"])))
            outset.add("summary.json", json_text(summary))
            if points is not None:
                outset.add("points.csv", csv_text(points_frame(result, points)))
            for name, png in figures.items():
                outset.add(f"{name}.png", png)
            outset.add("report.html", html)
    except BaseException:
        if create:
            shutil.rmtree(folder, ignore_errors=True)
        raise
    echo(console_summary(result, folder))
    return result, folder


def _run_fit(args) -> int:
    run_fit(args.case, readings=args.readings, at=args.at, out=args.out, overwrite=args.overwrite,
            monte_carlo=args.monte_carlo, seed=args.seed)
    return 0


def _count(text):
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 0, got {text!r}")
    return v


def add_fit(sub) -> None:
    p = sub.add_parser(
        "fit", help="estimate the unknown face from thermocouple readings",
        description="Fit the case's unknown face (temperature or heat flux) to a snapshot of "
                    "readings and write estimate.csv, summary.json, figures and report.html "
                    "(and points.csv with --at) into the output folder.",
        epilog="example:\n  heatsight fit platen.toml --readings shift2.csv --out platen-shift2\n"
               "  heatsight fit platen.toml --at probes.csv   # also the field at probes.csv points",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", help="case file (TOML)")
    p.add_argument("--readings", metavar="FILE", help="snapshot readings (default: [sensors] readings)")
    p.add_argument("--at", metavar="POINTS.csv", help="also report the field at these points (r, theta, z)")
    p.add_argument("--out", metavar="DIR", help="output folder (default: next to the case, <case>-fit)")
    p.add_argument("--overwrite", action="store_true", help="allow writing into a non-empty folder")
    p.add_argument("--monte-carlo", type=_count, default=0, metavar="N",
                   help="N seeded draws that also move the sensors within their position_tolerance")
    p.add_argument("--seed", type=_count, default=0, help="seed of the Monte Carlo draws (default 0)")
    p.set_defaults(run=_run_fit)


def _demo_folder() -> Path:
    """The demo data shipped inside the installed package (heatsight.demo_data)."""
    from importlib.resources import files
    return Path(str(files("heatsight.demo_data")))


def _run_demo(args) -> int:
    import json

    demo_folder = _demo_folder()
    case = demo_folder / "platen.toml"
    if not case.is_file():
        raise InputError("the bundled demo is missing from this installation; reinstall heatsight",
                         file=case)
    out = Path(args.out) if args.out else Path("heatsight-demo")
    result, folder = run_fit(case, out=out, overwrite=True)
    truth_file = demo_folder / "truth.json"
    if truth_file.is_file():
        truth = json.loads(truth_file.read_text())
        print(f"demo truth: {truth['story']}")
        s = result.summary
        weakest = min(s["zones"], key=lambda z: z["mean"]) if s["zones"] else None
        if weakest is not None:
            print(f"fit found: weakest zone {weakest['name']} "
                  f"({weakest['deviation_from_face_mean']:+.3g} W/m^2 from the face mean); "
                  f"total power {s['total_power_W']:.4g} +- {s['total_power_sd_W']:.2g} W "
                  f"(truth {truth['total_power_W']:.4g} W); set aside: {', '.join(s['set_aside']) or 'none'}")
    print(f"report: {os.path.abspath(folder / 'report.html')}")
    return 0


def add_demo(sub) -> None:
    p = sub.add_parser(
        "demo", help="run the bundled example end to end",
        description="Fit the bundled demo (a heated platen with a weakened heater sector and one "
                    "thermocouple reading high) and print where the report is.",
        epilog="example:\n  heatsight demo --out /tmp/demo",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--out", metavar="DIR", help="output folder (default: ./heatsight-demo)")
    p.set_defaults(run=_run_demo)
