"""The command line: ``heatsight <command> ...``.

Exit status: 0 success, 2 bad input (one line ``heatsight: error: <message>`` on stderr, no
traceback), 1 internal error.  Warnings go to stderr as ``heatsight: warning: ...``.

Commands register themselves in COMMANDS: each entry is (name, function adding its
subparser).  The subparser sets ``run=<function(args) -> int>``.  `fit`, `demo` and `trend`
are to be added here the same way.
"""

from __future__ import annotations

import argparse
import os
import signal
import sys
import traceback
import warnings as py_warnings
from pathlib import Path
from typing import TYPE_CHECKING

from .arguments import positive_float
from .console import Console, use
from .errors import InputError

if TYPE_CHECKING:       # pandas loads on first use, not at start-up (`heatsight --help`)
    import pandas as pd

PROG = "heatsight"
#: relative truncation tolerance of the series, unless --tolerance is given
DEFAULT_TOLERANCE = 1e-8
#: series tolerance used by `check`, which only needs the model's set-up checks
CHECK_TOLERANCE = 1e-4
#: warn when the estimated series truncation error exceeds this [K] (common practice, no source)
TRUNCATION_WARNING_K = 0.01


class UsageError(Exception):
    """Bad command-line usage (argparse), reported like InputError with exit status 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        raise UsageError(f"{message} (see '{self.prog} --help')")


def _warn(message: str) -> None:
    from .console import current
    current().warn(message)


# ---------------------------------------------------------------------------- simulate

SIMULATE_COLUMNS = ["r_mm", "theta_deg", "z_mm", "temperature_degC", "qr_W_m2", "qtheta_W_m2", "qz_W_m2"]


def simulate_frame(case, points, tolerance: float = DEFAULT_TOLERANCE) -> tuple[pd.DataFrame, list[str]]:
    """The field of a fully known case at query points (a points Table): the simulate
    output columns, and warnings."""
    import numpy as np
    import pandas as pd

    from .units import from_si

    warnings: list[str] = []
    model = case.build_model(tolerance)
    p = points.frame
    ev = model.evaluate(p["r"].to_numpy(float), p["theta"].to_numpy(float), p["z"].to_numpy(float))
    q = np.asarray(ev.heat_flux, float) + 0.0   # + 0.0 turns -0.0 into 0.0
    frame = pd.DataFrame({
        "r_mm": from_si(p["r"].to_numpy(float), "length", "mm"),
        "theta_deg": from_si(p["theta"].to_numpy(float), "angle", "deg"),
        "z_mm": from_si(p["z"].to_numpy(float), "length", "mm"),
        "temperature_degC": from_si(np.asarray(ev.temperature, float), "temperature", "degC"),
        "qr_W_m2": q[0], "qtheta_W_m2": q[1], "qz_W_m2": q[2],
    }, columns=SIMULATE_COLUMNS)
    if case.cylinder.conductivity is None:
        warnings.append(f"{case.path}: part.conductivity is not given, so the heat-flux columns "
                        f"are left empty")
    err = np.asarray(ev.truncation_error, float)
    if err.size and np.nanmax(err) > TRUNCATION_WARNING_K:
        i = int(np.nanargmax(err))
        capped = any(s.n_terms >= s.n_cap for s in model.series)
        cure = ("the series already stops at its cap of terms, so a smaller --tolerance changes nothing: "
                "read such points a little inside the part, and where a face's data jump (a temperature "
                "step, or two faces held at different temperatures where they meet) expect the field "
                "right beside the jump to be off by about that much" if capped else
                "lower --tolerance to reduce it")
        warnings.append(f"the series truncation error reaches {err[i]:.3g} K at point {i + 1} of "
                        f"{points.path} (points on or very near a face with data need many terms; {cure})")
    return frame, warnings


def _run_simulate(args) -> int:
    from .case import load_case
    from .csv_out import check_output_path, write_csv
    from .tables import read_points

    from ..forward.errors import ForwardModelError
    from .console import current
    from .limits import check_tolerance

    check_tolerance(args.tolerance)
    case = load_case(args.case, purpose="simulate")
    at = Path(args.at)
    if args.out is not None:
        check_output_path(args.out, case.input_files() + [at], overwrite=args.overwrite)
    points = read_points(at, case.cylinder)
    current().step(f"simulating {len(points.frame)} points of {case.path}")
    try:
        frame, warnings = simulate_frame(case, points, args.tolerance)
    except ForwardModelError as exc:
        raise InputError(str(exc), file=case.path) from None
    for w in points.warnings + warnings:
        _warn(w)
    if args.out is None and current().json:
        current().answer("", {"columns": list(frame.columns), "rows": frame.to_dict(orient="records")})
        return 0
    write_csv(frame, None if args.out is None else Path(args.out))
    if args.out is not None and current().json:
        current().answer("", {"out": str(args.out), "rows": len(frame)})
    return 0


def _add_simulate(sub, help) -> None:
    p = sub.add_parser(
        "simulate", help=help,
        description="Compute the steady temperature and heat-flux vector (q = -k grad T) of a case "
                    "whose faces are all known, at the points of a CSV table (columns r, theta, z; "
                    "units in header brackets, default m and deg). One output row per point: "
                    "r_mm, theta_deg, z_mm, temperature_degC, qr_W_m2, qtheta_W_m2, qz_W_m2.",
        epilog="example:\n  heatsight simulate plate.toml --at points.csv --out field.csv\n\n"
               "points.csv could read:\n  r [mm],theta [deg],z [mm]\n  0,0,20\n  75,90,20",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", help="case file (TOML)")
    p.add_argument("--at", required=True, metavar="POINTS.csv", help="query points: r, theta, z")
    p.add_argument("--out", metavar="FILE", help="output CSV file (default: standard output)")
    p.add_argument("--overwrite", action="store_true", help="allow replacing an existing --out file")
    p.add_argument("--tolerance", type=positive_float, default=DEFAULT_TOLERANCE, metavar="REL",
                   help=f"relative truncation tolerance of the series (default {DEFAULT_TOLERANCE:g})")
    p.set_defaults(run=_run_simulate)


# ---------------------------------------------------------------------------- check


def _run_check(args) -> int:
    from ..forward.errors import ForwardModelError
    from .case import load_case
    from .console import current
    from .limits import check_case
    from .describe import describe_case, describe_readings, describe_sensors, layout_notes, sensor_depths
    from .fit_steps import MIN_READINGS, check_keep_sensors, usable_readings
    from .tables import read_layout, read_snapshot, readings_form

    case = load_case(args.case)
    check_case(case)
    warnings: list[str] = []
    lines = describe_case(case)
    if case.unknown_face is not None:
        case.require("fit")
    layout = None
    if case.sensors.layout is not None:
        layout = read_layout(case.sensors.layout, case.cylinder)
        check_keep_sensors(case, layout)
        warnings += layout.warnings
        lines += describe_sensors(layout)
        lines += sensor_depths(case, layout)
    form = None
    if case.sensors.readings is not None:
        form = readings_form(case.sensors.readings)
        if form == "snapshot":
            readings = read_snapshot(case.sensors.readings, layout)
            if case.unknown_face is not None:       # what fit refuses, check refuses
                usable_readings(readings, case.sensors.readings)
        else:       # streamed, keeping counts: memory does not grow with the log
            from .logs import summarize_log
            readings = summarize_log(case.sensors.readings, layout)
            if case.unknown_face is not None and len(readings.sensors) < MIN_READINGS:
                raise InputError(f"the log has {len(readings.sensors)} sensor column(s) of the layout; trend's "
                                 f"reference fit needs at least {MIN_READINGS}", file=case.sensors.readings)
        warnings += readings.warnings
        lines += describe_readings(readings)
    if layout is not None and case.unknown_face is not None:
        notes = layout_notes(case, layout.frame)
        if notes:
            lines.append("layout notes:")
            lines += [f"  - {n}" for n in notes]
    if case.unknown_face is not None:
        warnings += plan_and_zone_notes(case, layout)
    # the forward model's own set-up checks (well-posedness); a coarse tolerance keeps it quick
    try:
        case.build_model(CHECK_TOLERANCE)
    except ForwardModelError as exc:
        raise InputError(str(exc), file=case.path) from None
    if case.unknown_face is not None:
        from ..inverse.pinned_edges import pinned_edge_notes_for_case

        edges = pinned_edge_notes_for_case(case)
        if edges:
            lines.append("series notes:")
            lines += [f"  - {n}" for n in edges]
        if form == "log":     # fit and plan take a snapshot; a log is trend's
            lines.append(f"ready for: trend (unknown face: {case.unknown_face}); the readings are a log, and fit "
                         f"and plan take a snapshot: give one with --readings")
        else:
            extra = "" if form is not None else " (give the readings with --readings)"
            lines.append(f"ready for: fit (unknown face: {case.unknown_face}){extra}")
    else:
        lines.append("ready for: simulate (every face is known)")
    for w in warnings:
        _warn(w)
    current().answer("\n".join(lines), {"case": str(case.path), "lines": lines, "warnings": warnings})
    return 0


def plan_and_zone_notes(case, layout) -> list[str]:
    """What fit and plan would skip or refuse in a case that reads well: zones off the unknown
    face or covering none of it (fit skips them), and the case's own [plan] rules when they
    leave no position of the candidate grid (plan refuses)."""
    from ..inverse.errors import InverseError
    from ..inverse.plan_rules import candidate_grid, drill_face
    from ..inverse.result import valid_zones

    notes: list[str] = []
    valid_zones(case.zones, case.unknown_face, case.cylinder, notes)
    if case.plan.rules == type(case.plan.rules)():
        return notes        # plan's default rules: `plan` itself says what they leave, if it is run
    f = None if layout is None else layout.frame
    existing = None if f is None else tuple(f[k].to_numpy(float) for k in ("r", "theta", "z"))
    try:
        candidate_grid(case.plan.rules, drill_face(case.plan.rules, case.unknown_face, case.cylinder),
                       case.cylinder, existing)
    except InverseError as exc:
        notes.append(f"{case.path}: plan's own grid (without --candidates) holds no position: {exc}")
    return notes


def _add_check(sub, help) -> None:
    p = sub.add_parser(
        "check", help=help,
        description="Read the case file and every table it names (profiles, sensor layout, "
                    "readings), check them, and print what was understood: geometry, face "
                    "conditions with their units, sensors, and notes on blind spots of the layout.",
        epilog="example:\n  heatsight check plate.toml",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", help="case file (TOML)")
    p.set_defaults(run=_run_check)


# ---------------------------------------------------------------------------- parser

def _add_fit(sub, help) -> None:
    from .fit_command import add_fit
    add_fit(sub, help)


def _add_demo(sub, help) -> None:
    from .demos import add_demo
    add_demo(sub, help)


def _add_trend(sub, help) -> None:
    from .trend_command import add_trend
    add_trend(sub, help)


def _add_plan(sub, help) -> None:
    from .plan_command import add_plan
    add_plan(sub, help)


#: (name, one-line help, function adding the full subparser).  Only the chosen command's
#: subparser is built in full, so `heatsight --help` and `--version` import nothing heavy.
COMMANDS = [
    ("fit", "estimate the unknown face from thermocouple readings", _add_fit),
    ("simulate", "temperature and heat flux of a fully known case at given points", _add_simulate),
    ("check", "validate a case and its tables, and say what was understood", _add_check),
    ("demo", "run a bundled example end to end (--list names them)", _add_demo),
    ("trend", "follow the unknown face over a logged record (steady windows or every Nth row)", _add_trend),
    ("plan", "where new thermocouples would most reduce the uncertainty (layout planning)", _add_plan),
]


def _version() -> str:
    try:
        from importlib.metadata import version
        return version("heatsight")
    except Exception:  # noqa: BLE001 - not installed
        return "unknown"


def _add_console_options(p) -> None:
    g = p.add_argument_group("console")
    loud = g.add_mutually_exclusive_group()          # one or the other, never both
    loud.add_argument("-q", "--quiet", action="store_true", help="print nothing but warnings and errors")
    loud.add_argument("-v", "--verbose", action="store_true",
                      help="also print the steps of the run and Python's own warnings (on stderr)")
    g.add_argument("--json", action="store_true", help="print the summary as JSON on stdout (for scripts)")


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The parser; `only` names the one command built in full (None: all of them; "": none)."""
    parser = _Parser(
        prog=PROG,
        description="Infer the unseen face of a heated cylinder, solid or hollow, from thermocouple readings.",
        epilog="examples:\n  heatsight demo\n  heatsight check plate.toml\n"
               "  heatsight fit plate.toml --readings readings.csv --out plate-fit\n"
               "  heatsight simulate plate.toml --at points.csv --out field.csv\n\n"
               "Every command takes --quiet, --verbose and --json. "
               "Estimates support engineering judgement; they do not replace direct measurement, "
               "interlocks or inspection.",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"{PROG} {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name, help, add in COMMANDS:
        if only is None or name == only:
            add(sub, help)
            _add_console_options(sub.choices[name])
        else:
            sub.add_parser(name, help=help, add_help=False)
    return parser


def _chosen(argv) -> str:
    names = {name for name, _, _ in COMMANDS}
    for arg in argv:
        if not arg.startswith("-"):
            return arg if arg in names else ""
    return ""


class Terminated(BaseException):
    """SIGTERM or SIGHUP: unwinds like Ctrl-C, so partial outputs are removed."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _on_signal(signum, frame):
    raise Terminated(signum)


def _os_message(exc: OSError) -> str:
    import errno

    what = exc.filename if exc.filename is not None else "a file"
    reason = exc.strerror or str(exc)
    advice = {errno.ENOSPC: "free some space or write elsewhere with --out",
              errno.EDQUOT: "free some space or write elsewhere with --out",
              errno.EACCES: "choose a folder you may write to with --out",
              errno.EPERM: "choose a folder you may write to with --out",
              errno.EROFS: "the file system is read-only; choose another folder with --out"}.get(
        exc.errno, "check the path and try again")
    return f"{what}: {reason}; {advice}"


def _limit_blas_threads():
    """Before numpy loads: BLAS pools of this process (and of the fleet's workers, which
    inherit the environment) start with inverse.threads.BLAS_THREADS threads unless the user
    set them; works without threadpoolctl.  No effect once numpy is loaded (a caller's own
    process)."""
    from ..inverse.threads import BLAS_THREADS
    if BLAS_THREADS is None or "numpy" in sys.modules:
        return
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, str(BLAS_THREADS))


def main(argv=None) -> int:
    """Run the command line; returns the exit status (0, 1 or 2)."""
    argv = sys.argv[1:] if argv is None else list(argv)
    _limit_blas_threads()
    if argv in (["--version"], ["-V"]):
        print(f"{PROG} {_version()}")
        return 0
    parser = build_parser(_chosen(argv))
    previous = {}
    for sig in (signal.SIGTERM, getattr(signal, "SIGHUP", None)):
        if sig is not None:
            try:
                previous[sig] = signal.signal(sig, _on_signal)
            except ValueError:       # not the main thread
                pass
    try:
        with py_warnings.catch_warnings(record=True) as caught:
            py_warnings.simplefilter("always")
            try:
                return _main(parser, argv)
            finally:
                verbose = "-v" in argv or "--verbose" in argv
                if verbose:
                    for w in caught:
                        print(f"{PROG}: warning: ({w.category.__name__}) {' '.join(str(w.message).split())}",
                              file=sys.stderr)
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)


def _main(parser, argv) -> int:
    try:
        args = parser.parse_args(argv)
        use(Console(quiet=args.quiet, verbose=args.verbose, json=args.json))
        return int(args.run(args) or 0)
    except SystemExit as exc:        # --help, --version
        return int(exc.code or 0) if isinstance(exc.code, int) or exc.code is None else 2
    except KeyboardInterrupt as exc:
        print(f"{PROG}: interrupted" + (f"; {exc}" if str(exc) else ""), file=sys.stderr)
        return 130
    except Terminated as exc:
        print(f"{PROG}: stopped by signal {exc.signum}; no output was written", file=sys.stderr)
        return 128 + exc.signum
    except BrokenPipeError:
        try:
            sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at exit
        except OSError:
            pass
        return 1
    except Exception as exc:  # noqa: BLE001 - sorted below
        return _failure(exc)
    finally:
        use(Console())


def _failure(exc: Exception) -> int:
    """Exit status and message of a failed command: 2 for the user's or the machine's
    problems (bad input, a folder we may not write, a full disk, too little memory), 1 for
    our own bugs."""
    from ..forward.errors import ForwardModelError
    from ..inverse.errors import InverseError

    if isinstance(exc, (InputError, ForwardModelError, InverseError, UsageError)):
        message = str(exc)
    elif isinstance(exc, OSError):
        message = _os_message(exc)
    elif isinstance(exc, MemoryError):
        message = ("not enough memory for this run; lower --monte-carlo, the [fit] terms or harmonics, or use "
                   "--every with a larger N")
    else:
        if os.environ.get("HEATSIGHT_TRACEBACK"):
            traceback.print_exception(exc)
        from .console import printable

        print(f"{PROG}: internal error: {type(exc).__name__}: {printable(exc)} "
              f"(please report this, with the case and tables if possible; set HEATSIGHT_TRACEBACK=1 "
              f"for details)", file=sys.stderr)
        return 1
    from .console import printable

    print(f"{PROG}: error: {printable(message)}", file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main())
