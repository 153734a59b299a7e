"""`heatsight fit` and `heatsight demo`: read, fit, write every output or none."""

from __future__ import annotations

import argparse
from pathlib import Path

from .arguments import count


class _Draws:
    """progress(done, total) of the Monte Carlo draws, drawn by data_io.console."""

    def __init__(self):
        self.bar, self.done = None, 0

    def __call__(self, done, total):
        from .console import current

        if self.bar is None:
            self.bar = current().progress(total, "drawing")
        self.bar.update(done - self.done)
        self.done = done
        if done >= total:
            self.bar.close()


def run_fit(case_path, *, readings=None, at=None, out=None, overwrite=False, monte_carlo=0, seed=0,
            echo=None, json_extra=None):
    """Fit a case and write its outputs; returns (result, output folder).  The console summary
    goes to `echo` (default: the command's data_io.console, which also serves --json)."""
    from .console import current
    from .csv_out import output_folder
    from .fit_outputs import console_summary, summary_dict
    from .fit_steps import fit_case, load_fit_case, output_files, write_outputs

    case, readings_path = load_fit_case(case_path, readings)
    folder, create = output_folder(Path(out) if out else case.folder / f"{case.path.stem}-fit", case, overwrite,
                                   inputs=[readings_path, at])
    current().step(f"fitting {case.path} to {readings_path}")
    status = current().status()
    try:
        result, points = fit_case(case, readings_path, at=at, monte_carlo=monte_carlo, seed=seed,
                                  progress=_Draws() if monte_carlo else None,
                                  stage=lambda k, n, text: status.show(f"fitting [{k}/{n}]: {text}"))
        status.show(f"drawing the figures and the report for {folder}")
        files = output_files(result, case, readings_path, points)
    finally:
        status.close()
    current().step(f"writing the outputs into {folder}")
    write_outputs(folder, create, files)
    text = console_summary(result, folder)
    if echo is not None:
        echo(text)
    else:
        # --json prints what summary.json holds (user units, the unit named), not the fit's SI summary
        current().answer(text, {**summary_dict(result, case_path=case.path, readings_path=readings_path),
                                "outputs": str(folder), **(json_extra or {})})
    return result, folder


def _run_fit(args) -> int:
    from .limits import MAX_MONTE_CARLO, check_count

    check_count(args.monte_carlo, MAX_MONTE_CARLO, "--monte-carlo", "draws")
    run_fit(args.case, readings=args.readings, at=args.at, out=args.out, overwrite=args.overwrite,
            monte_carlo=args.monte_carlo, seed=args.seed)
    return 0


def add_fit(sub, help) -> None:
    p = sub.add_parser(
        "fit", help=help,
        description="Fit the case's unknown face (temperature or heat flux) to a snapshot of "
                    "readings and write estimate.csv, sensors.csv, summary.json, figures and report.html "
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
