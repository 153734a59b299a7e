"""`heatsight fit` and `heatsight demo`: read, fit, write every output or none."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from .arguments import count
from .errors import InputError


def _progress(done, total):
    width = 30
    filled = int(width * done / total)
    end = "\n" if done == total else ""
    print(f"\r  drawing {done}/{total} [{'#' * filled}{'.' * (width - filled)}]", end=end,
          file=sys.stderr, flush=True)


def run_fit(case_path, *, readings=None, at=None, out=None, overwrite=False, monte_carlo=0, seed=0,
            echo=print):
    """Fit a case and write its outputs; returns (result, output folder)."""
    from .csv_out import output_folder
    from .fit_outputs import console_summary
    from .fit_steps import fit_case, load_fit_case, output_files, write_outputs

    case, readings_path = load_fit_case(case_path, readings)
    folder, create = output_folder(Path(out) if out else case.folder / f"{case.path.stem}-fit", case, overwrite)
    result, points = fit_case(case, readings_path, at=at, monte_carlo=monte_carlo, seed=seed,
                              progress=_progress if monte_carlo else None)
    write_outputs(folder, create, output_files(result, case, readings_path, points))
    echo(console_summary(result, folder))
    return result, folder


def _run_fit(args) -> int:
    run_fit(args.case, readings=args.readings, at=args.at, out=args.out, overwrite=args.overwrite,
            monte_carlo=args.monte_carlo, seed=args.seed)
    return 0


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
    p.add_argument("--monte-carlo", type=count, default=0, metavar="N",
                   help="N seeded draws that also move the sensors within their position_tolerance")
    p.add_argument("--seed", type=count, default=0, help="seed of the Monte Carlo draws (default 0)")
    p.set_defaults(run=_run_fit)


def _demo_folder() -> Path:
    """The demo data shipped inside the installed package (heatsight.demo_data)."""
    from importlib.resources import files
    return Path(str(files("heatsight.demo_data")))


def _run_demo(args) -> int:
    import json

    from .report_format import power_pm

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
                  f"({weakest['deviation_from_face_mean']:+.0f} W/m^2 from the face mean); "
                  f"total power {power_pm(s['total_power_W'], s['total_power_sd_W'])} "
                  f"(truth {truth['total_power_W']:.0f} W); set aside: {', '.join(s['set_aside']) or 'none'}")
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
