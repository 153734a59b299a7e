"""`heatsight demo`: the registry of bundled scenarios (our own, invented) and running one.

    heatsight demo                 # the default scenario (platen)
    heatsight demo NAME [--out DIR]
    heatsight demo --list          # name and one line each

Each scenario is a case file inside the installed package data (heatsight.demo_data), with
an optional truth.json beside it (``story``; ``total_power_W`` when known) that the run
prints next to what the fit found.
"""

from __future__ import annotations

import argparse
import difflib
import json
import os
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError


@dataclass(frozen=True)
class Demo:
    name: str
    case: str          # path of the case file inside heatsight.demo_data
    line: str          # what the scenario is, in one line


#: the bundled scenarios; the first is the default
DEMOS = (
    Demo("platen", "platen.toml",
         "a heated stainless-steel platen with a weakened heater sector and one thermocouple reading high"),
    Demo("tube", "tube/tube.toml",
         "a thick-walled steel process tube: the bore's temperature and heat into the fluid from "
         "thermocouples in the wall"),
)
DEFAULT = DEMOS[0].name


def demo_folder() -> Path:
    """The demo data shipped inside the installed package (heatsight.demo_data)."""
    from importlib.resources import files
    return Path(str(files("heatsight.demo_data")))


def find(name: str, folder: Path | None = None) -> Path:
    """The case file of demo `name`; InputError for an unknown name or a missing file."""
    names = [d.name for d in DEMOS]
    demo = next((d for d in DEMOS if d.name == name.strip().lower()), None)
    if demo is None:
        close = difflib.get_close_matches(name.strip().lower(), names, n=1)
        hint = f"did you mean '{close[0]}'? " if close else ""
        raise InputError(f"unknown demo '{name}'; {hint}expected one of: {', '.join(names)} "
                         f"(heatsight demo --list)")
    case = (folder or demo_folder()) / demo.case
    if not case.is_file():
        raise InputError(f"the bundled demo '{demo.name}' is missing from this installation; "
                         f"reinstall heatsight", file=case)
    return case


def listing(folder: Path | None = None) -> list[str]:
    """One line per demo: name, what it is, and whether this installation holds it."""
    folder = folder or demo_folder()
    width = max(len(d.name) for d in DEMOS)
    out = []
    for d in DEMOS:
        note = " (default)" if d.name == DEFAULT else ""
        if not (folder / d.case).is_file():
            note += " (not in this installation)"
        out.append(f"{d.name:<{width}}  {d.line}{note}")
    return out


def against_truth(truth: float, mean: float, sd: float) -> str:
    """How far the scenario's truth lies from the fit's answer mean +- sd (same unit): in sd,
    and whether the 95 % band (mean +- Z95 sd) holds it, so the demo checks itself in the open."""
    from ..inverse.bands import Z95

    if not sd > 0:
        return "no band to compare"
    z = (truth - mean) / sd
    return f"{abs(z):.1f} sd away, {'inside' if abs(z) <= Z95 else 'OUTSIDE'} the 95 % band"


def _truth_lines(case: Path, summary: dict, power_unit: str) -> list[str]:
    """What the scenario's truth.json says next to what the fit found (nothing without it)."""
    from .report_format import _decimals_for, half95, pm95, pm95_of, power_pm
    from .units import from_si

    truth_file = case.parent / "truth.json"
    if not truth_file.is_file():
        return []
    truth = json.loads(truth_file.read_text())
    lines = [f"demo truth: {truth['story']}"] if "story" in truth else []
    zones = summary.get("zones") or []
    found = []
    if zones and summary.get("quantity") == "heat_flux":
        weakest = min(zones, key=lambda z: z["mean"])
        true_q = (truth.get("zone_mean_W_m2") or {}).get(weakest["name"])
        found.append(f"weakest zone {weakest['name']} ({weakest['deviation_from_face_mean']:+.0f} W/m^2 "
                     f"from the face mean" + (f"; fit {pm95_of(weakest['mean'], weakest['sd'], 'W/m^2')}, "
                                              f"truth {true_q:.0f} W/m^2: "
                                              f"{against_truth(true_q, weakest['mean'], weakest['sd'])})"
                                              if true_q is not None else ")"))
    elif zones:
        warmest = max(zones, key=lambda z: z["mean"])
        true_c = (truth.get("zone_mean_degC") or {}).get(warmest["name"])
        fit_c = from_si(warmest["mean"], "temperature", "degC")
        shown = f"{fit_c:.{_decimals_for(half95(warmest['sd']))}f}"     # to its band's last digit, as the report
        found.append(f"warmest zone {warmest['name']} ({warmest['deviation_from_face_mean']:+.1f} K from the "
                     f"face mean" + (f"; fit {pm95(shown, warmest['sd'], 'degC')}, truth {true_c:.1f} "
                                     f"degC: {against_truth(true_c, fit_c, warmest['sd'])})"
                                     if true_c is not None else ")"))
    power, sd = summary.get("total_power_W"), summary.get("total_power_sd_W")
    if "total_power_W" in truth and power is not None:
        if summary.get("face") == "bore" and power < 0:     # said from the fluid's side
            found.append(f"heat into the fluid {power_pm(-power, sd, power_unit)} "
                         f"(truth {-truth['total_power_W']:.0f} {power_unit}: "
                         f"{against_truth(truth['total_power_W'], power, sd)})")
        else:
            found.append(f"total power {power_pm(power, sd, power_unit)} "
                         f"(truth {truth['total_power_W']:.0f} {power_unit}: "
                         f"{against_truth(truth['total_power_W'], power, sd)})")
    if found:
        bad = f" (the scenario's faulty sensor: {truth['bad_sensor']})" if "bad_sensor" in truth else ""
        found.append(f"set aside: {', '.join(summary.get('set_aside') or []) or 'none'}{bad}")
        lines.append("fit found: " + "; ".join(found))
    return lines


def _run_demo(args) -> int:
    from .console import current
    from .display import power_unit
    from .fit_command import run_fit

    if args.list:
        current().answer("\n".join(listing()), {"demos": [{"name": d.name, "case": d.case, "about": d.line}
                                                          for d in DEMOS]})
        return 0
    case = find(args.name or DEFAULT)
    out = Path(args.out) if args.out else Path("heatsight-demo")
    lines: list[str] = []
    # overwrite=True: a rerun replaces the demo's own earlier outputs, never other files
    result, folder = run_fit(case, out=out, overwrite=True, echo=lines.append)
    lines += _truth_lines(case, result.summary, power_unit(result.cylinder))
    report = os.path.abspath(folder / "report.html")
    lines.append(f"report: {report}")
    current().answer("\n".join(lines), {**result.summary, "outputs": str(folder), "report": report})
    return 0


def add_demo(sub, help) -> None:
    p = sub.add_parser(
        "demo", help=help,
        description="Fit a bundled scenario (invented, our own) and print where the report is. "
                    "Without NAME the heated platen (a weakened heater sector, one thermocouple "
                    "reading high); --list names the others.",
        epilog="examples:\n  heatsight demo --out /tmp/demo\n  heatsight demo --list\n"
               "  heatsight demo tube --out /tmp/tube",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("name", nargs="?", metavar="NAME", help=f"which scenario (default: {DEFAULT})")
    p.add_argument("--list", action="store_true", help="list the bundled scenarios, one line each")
    p.add_argument("--out", metavar="DIR", help="output folder (default: ./heatsight-demo)")
    p.set_defaults(run=_run_demo)
