"""`heatsight trend`: follow the unknown face over a logged record.

    heatsight trend CASE.toml --log LOG.csv [--every N] [--out DIR] [--format csv|parquet]
                   [--window SECONDS] [--drift K] [--sigma-floor K] [--overwrite]

The log is streamed in chunks (data_io.logs, the one log reader, shared with `check`) and
cut into windows of --window seconds; a window is steady when no sensor drifts by --drift K
or more over it (inverse.steady).  The statistics (reference window, strengths, change
flags) are inverse.trend's; data_io.trend_run feeds it the stream and writes the rows; then
every steady window (default) or every Nth logged row (--every N) is inverted by one batch
solver (inverse.batch).

Noise of a row: a window mean has the random sd of inverse.steady (scatter / sqrt(n_eff)
with the --sigma-floor); a single logged row has the layout's sigma (or the default).  The
offsets (from type and class) and placement tolerances widen the sd of absolute values.

Outputs (all or none, in DIR, default <case>-trend next to the case): trend.csv, or
trend.parquet with --format parquet (data_io.trend_sink, streamed block by block, so a long
log never sits in memory; every numeric column names its unit), trend.png, summary.json and
report.html (the reference window's fit report with a trend section).  The log is parsed
ahead in a reader thread while rows are inverted; BLAS runs on one thread meanwhile
(inverse.threads.blas_threads).
"""

from __future__ import annotations

import argparse
import math
import os
import shutil
from pathlib import Path

from ..inverse.steady import DEFAULT_DRIFT_K, DEFAULT_FLOOR_K, DEFAULT_WINDOW_S

from .arguments import positive_float, time_zone, whole
from .errors import InputError

OUTPUT_NAMES = ("trend.csv", "trend.png", "summary.json", "report.html")


def output_names(fmt: str = "csv") -> tuple:
    """The files a trend writes: the rows (trend.csv or trend.parquet), figure, summary, report."""
    from .trend_sink import FORMATS

    return (FORMATS[fmt],) + OUTPUT_NAMES[1:]


def _output_folder(case, out, overwrite, log_path, names=OUTPUT_NAMES):
    from .csv_out import output_folder

    folder = Path(out) if out else case.folder / f"{case.path.stem}-trend"
    return output_folder(folder, case, overwrite, names=names, inputs=[log_path])


def run_trend(case_path, *, log=None, every=None, out=None, window=DEFAULT_WINDOW_S, drift=DEFAULT_DRIFT_K,
              sigma_floor=DEFAULT_FLOOR_K, overwrite=False, chunk_rows=None,
              progress=True, tz=None, echo=None, fmt="csv"):
    """Run a trend and write its outputs; returns (summary dict, output folder).
    chunk_rows: rows per chunk of the log (default logs.DEFAULT_CHUNK_ROWS); fmt: "csv"
    (trend.csv) or "parquet" (trend.parquet)."""
    from .case import load_case
    from .csv_out import OUTPUT_FILES_KEY, OutputSet, json_text, named_os_errors
    from .fit_steps import case_text
    from .logs import DEFAULT_CHUNK_ROWS, LogReader, count_rows, open_log
    from .figure_pngs import figure_pngs
    from .plots import face_map, sensor_health
    from .report import render_report
    from .trend_plot import trend_figure
    from .tables import read_layout, readings_form
    from .trend_run import Progress, TrendRun
    from .trend_sink import open_sink, require_format
    from .trend_text import console_lines, trend_html, trend_lead

    from .limits import MAX_EVERY, check_case, check_count

    fmt = require_format(fmt)
    names = output_names(fmt)
    case = load_case(case_path, purpose="fit", readings_given=bool(log))
    case.require("fit")
    check_case(case)
    if every is not None:
        check_count(every, MAX_EVERY, "--every", "rows")
    log_path = Path(log) if log else case.sensors.readings
    if log_path is None:
        raise InputError("no log: give --log LOG.csv", file=case.path)
    if not log and readings_form(log_path) != "log":
        raise InputError("the case's readings are a snapshot; give the log with --log LOG.csv", file=log_path)
    if every is not None and every < 1:
        raise InputError(f"--every needs a whole number >= 1, got {every}")
    folder, create = _output_folder(case, out, overwrite, log_path, names)
    layout = read_layout(case.sensors.layout, case.cylinder)
    columns = open_log(log_path, layout)
    lines = count_rows(log_path)
    expected = max(lines - columns.header_line, 1)
    chunk_rows = DEFAULT_CHUNK_ROWS if chunk_rows is None else chunk_rows
    reader = LogReader(columns, layout, chunk_rows, tz=tz)
    run = TrendRun(case, layout, columns, reader, window=window, drift=drift, sigma_floor=sigma_floor, every=every)
    bar = Progress(math.ceil(expected / max(int(chunk_rows), 1)), progress)
    if create:
        folder.mkdir()
    try:
        with OutputSet(folder) as outset:
            with named_os_errors(folder / names[0]), outset.stream(names[0]) as fh:
                sink = open_sink(fmt, fh)
                run.run(sink, bar, expected)
                sink.close()
                fh.flush()
                os.fsync(fh.fileno())
            summary = run.summary(case.path, log_path)
            summary["first_row"], summary["last_row"] = run.first_row, run.last_row
            summary[OUTPUT_FILES_KEY] = list(names)
            pngs = figure_pngs({"trend": trend_figure(run.figure_data()),
                                "face_map": face_map(run.result, zones=case.zones),
                                "sensors": sensor_health(run.result)})
            png = pngs.pop("trend")
            html = render_report(
                run.result, title=f"heatsight trend: {case.path.name}",
                case_text=case_text(case, log_path) + [("reference window", f"t = {run.ref_window[0]:.6g} to "
                                                                            f"{run.ref_window[1]:.6g} s")],
                figures=pngs,
                extra_sections=[("Trend over the log", trend_html(summary, png, reader.timestamps))],
                lead=trend_lead(summary))
            outset.add("trend.png", png)
            outset.add("summary.json", json_text(summary))
            outset.add("report.html", html)
    except BaseException:
        bar.close()
        if create:
            shutil.rmtree(folder, ignore_errors=True)
        raise
    text = console_lines(summary, folder)
    if echo is not None:
        echo(text)
    else:
        from .console import current
        current().answer(text, summary)
    return summary, folder


#: the modules run_part uses (imported on first use otherwise): a local cluster's workers start
#: with them loaded (data_io.fleet.LOCAL_START_METHOD)
PART_MODULES = tuple(f"{__package__}.{name}" for name in (
    "trend_command", "case", "csv_out", "fit_steps", "logs", "plots", "report", "trend_plot", "tables",
    "trend_run", "trend_sink", "trend_text", "limits")) + (f"{__package__.rsplit('.', 1)[0]}.inverse.fitting",)


def run_part(case_path: str, out: str | None, options: dict) -> dict:
    """One part, on a worker: the one-part trend, its console text kept.  Returns a record
    with "case", "status" ("done", "bad input" or "failed"), and "folder", "text",
    "trend_rows", "flags", "sensor_faults", "warnings", "seconds" or "error"."""
    import time

    from ..forward.errors import ForwardModelError
    from ..inverse.errors import InverseError

    t = time.perf_counter()
    text: list[str] = []
    rec = {"case": str(case_path)}
    try:
        if out is not None:
            Path(out).parent.mkdir(parents=True, exist_ok=True)
        summary, folder = run_trend(case_path, out=out, progress=False, echo=text.append, **options)
    except (InputError, ForwardModelError, InverseError) as exc:
        return {**rec, "status": "bad input", "error": str(exc)}
    except OSError as exc:
        return {**rec, "status": "bad input", "error": f"{exc.filename or case_path}: {exc.strerror or exc}"}
    except Exception as exc:  # noqa: BLE001 - reported for this part, the others go on
        return {**rec, "status": "failed", "error": f"internal error: {type(exc).__name__}: {exc}"}
    return {**rec, "status": "done", "folder": str(folder), "text": "\n".join(text),
            "trend_rows": summary["trend_rows"], "flags": [f["zone"] for f in summary["flags"]],
            "sensor_faults": [f["sensor"] for f in summary.get("sensor_faults") or ()],
            "warnings": list(summary["warnings"]), "seconds": time.perf_counter() - t}


def _fleet(args) -> int:
    """Several parts (data_io.fleet): one line per finished part, then the tally."""
    import sys

    from .console import PROG, current, printable
    from .fleet import part_line, run_fleet

    if args.log:
        raise InputError("--log serves one part run here; with several parts or --scheduler each case reads "
                         "its own log ([sensors] readings)")
    con = current()

    def report(i, n, rec):
        line = part_line(i, n, rec)
        if rec["status"] != "done":
            print(f"{PROG}: error: {printable(line)}", file=con.stderr)
            return
        for w in rec.get("warnings") or ():      # each part's warnings, named by its case
            print(f"{PROG}: warning: {printable(rec['case'])}: {printable(w)}", file=con.stderr)
        if not (con.quiet or con.json):
            print(line, file=con.stdout)
            sys.stdout.flush()

    options = dict(every=args.every, window=args.window, drift=args.drift, sigma_floor=args.sigma_floor,
                   overwrite=args.overwrite, tz=args.tz, fmt=args.format)
    def started(n, where):
        if not (con.quiet or con.json):
            print(f"{n} parts on {where}; a line as each part finishes", file=con.stdout)
            sys.stdout.flush()

    records, status = run_fleet(args.case, run_part, out=args.out, scheduler=args.scheduler, workers=args.workers,
                                options=options, report=report, preload=PART_MODULES, started=started)
    done = sum(r["status"] == "done" for r in records)
    con.answer(f"{done} of {len(records)} parts done", {"parts": records, "done": done, "exit_status": status})
    return status


def _run(args) -> int:
    if len(args.case) > 1 or Path(args.case[0]).is_dir() or args.scheduler is not None:
        return _fleet(args)
    if args.workers:
        raise InputError("--workers serves several parts (case files or a folder of them); one case runs in "
                         "this process: leave --workers out")
    run_trend(args.case[0], log=args.log, every=args.every, out=args.out, window=args.window, drift=args.drift,
              sigma_floor=args.sigma_floor, overwrite=args.overwrite, tz=args.tz, fmt=args.format)
    return 0


def add_trend(sub, help) -> None:
    p = sub.add_parser(
        "trend", help=help,
        description="Read a thermocouple log (a time column -- seconds, a unit in brackets, or ISO 8601 "
                    "timestamps -- then one column per sensor id), find the steady windows, fit the "
                    "first settled one, and invert every steady window (or every Nth row with --every) with the "
                    "same model. Writes trend.csv, trend.png, summary.json and report.html; flags a zone "
                    "whose change from the first settled steady window exceeds its uncertainty.",
        epilog="examples:\n  heatsight trend platen.toml --log shift.csv\n"
               "  heatsight trend platen.toml --log month.csv --every 60 --out platen-month\n"
               "  heatsight trend platen.toml --log shift.csv --window 300 --drift 0.2\n"
               "  heatsight trend plant/ --every 60 --format parquet          (every case in plant/)\n"
               "  heatsight trend a.toml b.toml --scheduler tcp://10.0.0.5:8786\n\n"
               "Several parts: exit status 0 when every part succeeded, 2 when a part had bad input (the others "
               "are written), 1 when a part failed otherwise.\n\n"
               f"Defaults (common practice, no source): --window {DEFAULT_WINDOW_S:g} s, --drift "
               f"{DEFAULT_DRIFT_K:g} K, --sigma-floor {DEFAULT_FLOOR_K:g} K.",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", nargs="+",
                   help="case file (TOML); several case files or a folder of them run a fleet, one task per part "
                        "on dask.distributed (extra 'fleet'), each part with its own log")
    p.add_argument("--log", metavar="LOG.csv", help="the logged readings (default: [sensors] readings, if a log)")
    p.add_argument("--every", type=whole, metavar="N",
                   help="invert every Nth logged row instead of the steady windows")
    p.add_argument("--out", metavar="DIR", help="output folder (default: next to the case, <case>-trend)")
    p.add_argument("--window", type=positive_float, default=DEFAULT_WINDOW_S, metavar="SECONDS",
                   help=f"length of a window (default {DEFAULT_WINDOW_S:g})")
    p.add_argument("--drift", type=positive_float, default=DEFAULT_DRIFT_K, metavar="K",
                   help=f"a window is steady when no sensor drifts this much over it (default {DEFAULT_DRIFT_K:g})")
    p.add_argument("--sigma-floor", type=positive_float, default=DEFAULT_FLOOR_K, metavar="K",
                   help="random sd of a window mean that averaging cannot remove (default "
                        f"{DEFAULT_FLOOR_K:g})")
    p.add_argument("--tz", type=time_zone, metavar="ZONE",
                   help="show logged times with a UTC offset in this zone (UTC, +02:00 or Europe/Berlin; default: "
                        "the offset of the log's first row; times without an offset stay as written)")
    p.add_argument("--format", choices=("csv", "parquet"), default="csv",
                   help="the rows as trend.csv (default) or trend.parquet (smaller and quicker to write for long "
                        "logs; needs the extra 'parquet')")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the parts on the dask cluster at ADDRESS (e.g. tcp://10.0.0.5:8786; default: a local "
                        "cluster)")
    p.add_argument("--workers", type=whole, metavar="N",
                   help="processes of the local cluster for several parts (default 2, or the cores if fewer)")
    p.add_argument("--overwrite", action="store_true", help="allow writing into a non-empty folder")
    p.set_defaults(run=_run)
