"""`heatsight plan`: where the next thermocouples help most (read the case, plan, write
every output or none).  Every statistical decision is inverse.plan's; this module reads the
case, the layout, the readings and the candidates file, and hands SI arrays down.

    run = compute_plan(case, add=4, candidates=None, targets=None, readings=None)
    files = plan_outputs.output_files(run)
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..forward.errors import ForwardModelError
from ..inverse.errors import InverseError

from .arguments import whole
from .errors import InputError
from .limits import MAX_CANDIDATES

#: expected variation of the unknown face when the case has no readings and [plan] gives none
#: (common practice, no source): 5 K on a temperature face, 1 kW/m^2 on a heat-flux face
DEFAULT_VARIATION = {"temperature": 5.0, "heat_flux": 1000.0}
#: temperature at which a thermocouple class tolerance is evaluated when there are no readings [K]
NO_READINGS_TEMPERATURE_K = 373.15


@dataclass
class PlanRun:
    """Everything a plan's outputs need (SI): the case, the inverse.plan state, the greedy
    Plan, the candidates (r, theta, z), the drill face, the sensor value table, the face's
    display units (a data_io.display.Display), the prior's description and warnings; `fit`
    is the FitResult when readings were used, else None."""

    case: object
    state: object
    plan: object
    candidates: tuple
    face: str
    value: object
    display: object
    quantity: str
    warnings: list = field(default_factory=list)
    fit: object = None
    readings_path: Path | None = None
    candidates_path: Path | None = None
    variation_note: str = ""


def default_targets(case) -> list[str]:
    """zones and power when zones are declared on the unknown face, else power and face."""
    face = case.unknown_face
    if any((z.face or face) == face for z in case.zones):
        return ["zones", "power"]
    return ["power", "face"]


def _quantity(case) -> str:
    return "temperature" if case.faces[case.unknown_face].condition == "unknown-temperature" else "heat_flux"


def _layout_sensors(case, warnings):
    """(names, r, theta, z, sigma, offset_sd) of the layout without readings, or None."""
    from ..inverse.readings import DEFAULT_SIGMA_K

    from .tables import offset_sd, read_layout

    if case.sensors.layout is None:
        return None
    layout = read_layout(case.sensors.layout, case.cylinder)
    warnings += layout.warnings
    f = layout.frame
    sigma = np.where(np.isfinite(f["sigma"].to_numpy(float)), f["sigma"].to_numpy(float), DEFAULT_SIGMA_K)
    tau, _ = offset_sd(f, NO_READINGS_TEMPERATURE_K)
    if np.any(tau > 0):
        warnings.append("no readings: thermocouple class tolerances are taken at 100 degC")
    return (list(map(str, f.index)), f["r"].to_numpy(float), f["theta"].to_numpy(float), f["z"].to_numpy(float),
            sigma, tau)


def _state(case, which, readings_path, warnings, result=None, say=None):
    """(PlanState, FitResult or None, expected-variation note); `result`: a fit already made;
    say(text): the fit's steps as they begin."""
    from ..inverse.plan import state_from_fit, state_from_prior
    from ..inverse.problem import Problem

    from .fit_steps import fit_case

    opts = case.plan

    def from_fit(result):
        state = state_from_fit(result, which, case.zones, opts.sigma, opts.offset_sd, opts.covariance)
        if opts.covariance == "dominant" and "dominant" not in state.source:
            warnings.append("[plan] covariance = \"dominant\" serves a fit answered by the smooth model alone; "
                            f"this fit's answer is not, so the plan uses {state.source}")
        return state, result, ""

    if result is not None:
        return from_fit(result)
    if readings_path is not None:
        if case.sensors.layout is None:
            raise InputError("readings need the sensor layout: add [sensors] layout = \"layout.csv\"",
                             file=case.path, where="sensors.layout")
        result, _ = fit_case(case, readings_path,
                             stage=None if say is None else (lambda k, n, text: say(f"fitting [{k}/{n}]: {text}")))
        warnings += result.warnings
        return from_fit(result)
    quantity = _quantity(case)
    variation = opts.expected_variation
    note = ""
    if variation is None:
        variation = DEFAULT_VARIATION[quantity]
        unit = "K" if quantity == "temperature" else "W/m^2"
        note = (f"no readings and no [plan] expected_variation: the prior assumes the face varies by about "
                f"{variation:g} {unit}")
        warnings.append(note)
    sensors = _layout_sensors(case, warnings)
    state = state_from_prior(Problem.from_case(case), which, variation, sensors, opts.sigma,
                             opts.offset_sd or 0.0, case.zones)
    return state, None, note


def check_targets(case, which) -> None:
    """Refuse an unknown target before any work: zones | power | mean | face | a zone name on
    the unknown face ('zones' needs at least one)."""
    face = case.unknown_face
    zone_names = [z.name for z in case.zones if (z.face or face) == face]
    allowed = ["zones", "power", "mean", "face"] + zone_names
    for item in which:
        if item not in allowed:
            raise InputError(f"unknown target {item!r}; expected one of: {', '.join(allowed)}")
        if item == "zones" and not zone_names:
            raise InputError(f"target 'zones' needs zones declared on the {face} face ([[zones]])", file=case.path)


def _read_candidates(case, path):
    """The candidates table (r, theta, z in SI) or None for the rules' grid."""
    from .tables import read_points

    if path is None:
        return None
    table = read_points(path, case.cylinder)
    if len(table.frame) > MAX_CANDIDATES:
        raise InputError(f"{len(table.frame)} candidate rows; at most {MAX_CANDIDATES} are planned at once",
                         file=path)
    return table.frame


def _candidates(case, state, frame, path, face, warnings):
    """(r, theta, z) of the admissible candidates: the file's rows passing the [plan] rules,
    or the grid the rules generate."""
    from ..inverse.plan_rules import admissible, candidate_grid

    rules = case.plan.rules
    ex = state.existing
    existing = (ex["r"], ex["theta"], ex["z"])
    if frame is None:
        return candidate_grid(rules, face, case.cylinder, existing)
    r, th, z = (frame[k].to_numpy(float) for k in ("r", "theta", "z"))
    ok, why = admissible(rules, face, case.cylinder, r, th, z, existing)
    if not ok.any():
        raise InputError(f"none of the {len(frame)} candidates meets the [plan] rules (row 2: {why[0]})",
                         file=path)
    if not ok.all():
        reasons = sorted(set(why[~ok]))
        warnings.append(f"{path}: {int((~ok).sum())} of {len(frame)} candidates break the [plan] rules and are "
                        f"left out ({'; '.join(reasons)})")
    return r[ok], th[ok], z[ok]


def heated_entries(case, face, positions, picks) -> str:
    """A warning naming the picks whose hole enters the drill face where the case gives that
    face a heat flux (a heater may cover it there), or ''."""
    from ..forward.faces import Flux
    from .plan_outputs import PICK_PREFIX
    from .report_format import eng

    cond = case.faces.get(face)
    if not isinstance(cond, Flux) or not len(picks):
        return ""
    r, th, z = (np.asarray(x, float)[list(picks)] for x in positions)
    q = np.broadcast_to(np.asarray(cond.data(th, z) if face == "side" else cond.data(r, th), float), r.shape)
    hot = np.flatnonzero(np.abs(q) > 0)
    if not hot.size:
        return ""
    names = ", ".join(f"{PICK_PREFIX}{i + 1}" for i in hot)
    return (f"{names} {'enters' if hot.size == 1 else 'enter'} the {face} face where the case gives it a heat flux (up to "
            f"{eng(float(np.max(np.abs(q[hot]))))} W/m^2): a heater or a cooler may cover it there; check that they "
            f"can be drilled, or keep the grid off it with [plan] exclude_theta / exclude_r / exclude_z")


def compute_plan(case, add: int, candidates=None, targets=None, readings=None, fit=None, stage=None) -> PlanRun:
    """Plan `add` new sensors for the case (a data_io Case): targets as in inverse.plan.target_list
    (default `default_targets`), readings: a snapshot path (default: the case's, if any); fit:
    a FitResult of these readings already made (not refitted); stage(text): each step as it
    begins (the command line's status line)."""
    say = stage or (lambda text: None)
    from ..inverse.plan import greedy, sensor_value
    from ..inverse.plan_rules import drill_face

    from .display import display_of, file_display

    if case.unknown_face is None:
        raise InputError("plan needs one face with condition 'unknown-temperature' or 'unknown-flux'",
                         file=case.path, where="faces")
    if isinstance(add, bool) or not isinstance(add, (int, np.integer)) or add < 1:
        raise InputError(f"the number of sensors to add must be a whole number >= 1, got {add!r}")
    which = list(targets) if targets else default_targets(case)
    readings_path = Path(readings) if readings else case.sensors.readings
    cand_path = Path(candidates) if candidates else None
    if cand_path is not None and not cand_path.is_file():
        raise InputError("candidates file not found", file=cand_path)
    check_targets(case, which)
    frame = _read_candidates(case, cand_path)
    warnings: list[str] = []
    try:
        face = drill_face(case.plan.rules, case.unknown_face, case.cylinder)
        state, fit, note = _state(case, which, readings_path, warnings, fit, say)
        pos = _candidates(case, state, frame, cand_path, face, warnings)
        say(f"choosing {add} of {np.size(pos[0])} candidate positions")
        rows = state.rows(*pos)
        plan = greedy(state, rows, add, pos, case.plan.rules.spacing, face=face, cylinder=case.cylinder)
        say("ranking the sensors by what their loss would cost")
        value = sensor_value(state)
    except (InverseError, ForwardModelError) as exc:
        raise InputError(str(exc), file=case.path) from None
    if face == case.unknown_face:
        warnings.append(f"the holes go in from the {face} face, the face being estimated: check that it can be "
                        "reached (a heater, a cooling plate or the fluid may cover it) and that the holes do not "
                        "change what it does ([plan] drill_from)")
    covered = heated_entries(case, face, pos, plan.picks)
    if covered:
        warnings.append(covered)
    if len(plan.picks) < add:
        warnings.append(f"only {len(plan.picks)} of the {add} sensors asked for fit the rules")
    if case.cylinder.hollow and len(plan.picks):      # the plan proposes holes in a wall
        from .report_text import HOLLOW_CAUTION
        warnings.append(HOLLOW_CAUTION)
    quantity = _quantity(case)
    display = display_of(quantity, case.unknown_face, fit.grid["estimate"]) if fit is not None else \
        file_display(quantity, case.unknown_face)
    return PlanRun(case, state, plan, pos, face, value, display, quantity, list(dict.fromkeys(warnings)), fit,
                   readings_path, cand_path, note)


# ------------------------------------------------------------------------------ the command
def _run_plan(args) -> int:
    from .case import load_case
    from .console import current
    from .csv_out import output_folder
    from .fit_steps import write_outputs
    from .limits import check_case
    from .plan_outputs import PLAN_OUTPUT_NAMES, console_line, output_files

    case = load_case(args.case, readings_given=bool(args.readings))
    check_case(case)
    targets = [t for group in (args.target or []) for t in group.split(",") if t.strip()]
    targets = [t.strip() for t in targets]
    if args.target and not targets:
        raise InputError("--target names nothing; give targets such as 'zones,power' (or leave it out for "
                         "the default)")
    cand = Path(args.candidates) if args.candidates else None
    if cand is not None and not cand.is_file():
        raise InputError("candidates file not found", file=cand)
    folder, create = output_folder(Path(args.out) if args.out else case.folder / f"{case.path.stem}-plan", case,
                                   args.overwrite, names=PLAN_OUTPUT_NAMES, inputs=[args.readings, cand])
    current().step(f"planning {args.add} new sensor(s) for {case.path}")
    status = current().status()
    try:
        run = compute_plan(case, args.add, cand, targets or None, args.readings, stage=status.show)
        status.show(f"drawing the figures and the report for {folder}")
        files, summary = output_files(run)
    finally:
        status.close()
    write_outputs(folder, create, files)
    for w in run.warnings:
        current().warn(w)
    line = console_line(run)
    current().answer(f"{line}\noutputs: {folder}", {**summary, "outputs": str(folder)})
    return 0


def add_plan(sub, help) -> None:
    p = sub.add_parser(
        "plan", help=help,
        description="Choose where N new thermocouples most reduce the uncertainty of the targets "
                    "(zone means, total power, the face map), from a candidates file or a grid "
                    "built from the case's [plan] rules; rank the existing sensors by what their "
                    "loss would cost.  Writes plan.csv, sensors_value.csv, summary.json, two "
                    "figures and plan.html.",
        epilog="example:\n  heatsight plan platen.toml --add 4 --target zones --target power\n"
               "  heatsight plan platen.toml --add 2 --candidates holes.csv --out platen-plan",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", help="case file (TOML)")
    p.add_argument("--add", type=whole, default=4, metavar="N", help="number of new sensors (default 4)")
    p.add_argument("--candidates", metavar="HOLES.csv",
                   help="drillable positions r, theta, z (default: a grid from the [plan] rules)")
    p.add_argument("--target", action="append", metavar="TARGET",
                   help="zones | power | mean | face | a zone name (repeat or comma-separate; "
                        "default: zones and power, or power and face without zones)")
    p.add_argument("--readings", metavar="FILE", help="snapshot readings (default: [sensors] readings, if any)")
    p.add_argument("--out", metavar="DIR", help="output folder (default: next to the case, <case>-plan)")
    p.add_argument("--overwrite", action="store_true", help="allow writing into a non-empty folder")
    p.set_defaults(run=_run_plan)
