"""`heatsight trend` over many parts (a fleet) on dask.distributed (optional extra ``fleet``).

    heatsight trend A.toml B.toml ...  |  heatsight trend FOLDER  [--scheduler ADDRESS] [--workers N]

Each part is a case file with its own log (its ``[sensors] readings``); a folder stands for
its ``*.toml`` case files.  One task per part runs the ordinary one-part trend
(data_io.trend_command.run_part, around run_trend) on a worker, so a part's outputs are exactly those of
running it alone, in ``<case>-trend`` next to its case (or ``DIR/<case>-trend`` with
``--out DIR``).  The parts run on a local cluster of --workers processes (one thread each)
by default, or on an existing cluster through --scheduler ADDRESS (its workers need
heatsight installed and the case and log files at the same paths).

A part's bad input is reported on its own line and the other parts go on.  Exit status:
0 when every part succeeded, 2 when at least one part had bad input (and none failed
otherwise), 1 when a part failed for another reason (an internal error or a lost worker);
the parts that succeeded have their outputs in every case.
"""

from __future__ import annotations

import os
import sys
import uuid
from importlib.util import find_spec
from pathlib import Path

from .errors import InputError

#: workers of the local cluster unless --workers is given (at most the machine's cores)
DEFAULT_WORKERS = 2
#: seconds to wait for a scheduler given with --scheduler
CONNECT_TIMEOUT_S = 20
#: One BLAS thread per worker process (dask's own default, written here once: the fork server
#: below starts with it before dask is imported); a variable the user has set wins, as in dask.
WORKER_THREAD_ENV = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
#: dask settings of the local cluster's workers (the README gives them for a real cluster).
#: dask's nannies start their workers with glibc's MALLOC_TRIM_THRESHOLD_ = 64 KiB; setting the
#: trim threshold (like the mmap threshold, top pad or mmap max; mallopt(3), from memory)
#: switches off glibc's adaptive mmap threshold, so every array above 128 KiB is
#: mapped and unmapped afresh and the fits' many short-lived posterior arrays cost page faults
#: (a part 8 -> 14 s, 6 s of it system time); None unsets it.  dask's sampling profiler of the
#: task thread is off (no dashboard reads it).  The BLAS thread variables stay at one thread.
LOCAL_WORKER_CONFIG = {"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
                       **{f"distributed.nanny.pre-spawn-environ.{k}": v for k, v in WORKER_THREAD_ENV.items()},
                       "distributed.worker.profile.enabled": False}
#: how the local cluster starts its workers: on Linux from a fork server that has imported
#: what a part needs (run_fleet's `preload`, e.g. trend_command.PART_MODULES), so that no worker
#: imports the numerical stack again: bench/fleet.py, both ways in fresh processes, 8 two-hour
#: parts on two workers 1.26x with dask's default (spawn), 1.48-1.57x this way, the same
#: numbers.  The server is a fresh single-threaded process, so nothing forks a parent that
#: runs dask's threads; it starts with the workers' environment (WORKER_THREAD_ENV).  It is
#: started first, before dask is imported, so that its imports (about 1.4 s) run on the second
#: core while this process imports dask and starts the scheduler (`start_fork_server`).
#: Elsewhere dask's default (spawn).
LOCAL_START_METHOD = "forkserver" if sys.platform.startswith("linux") else None


class FleetInterrupted(KeyboardInterrupt):
    """Ctrl-C during a fleet on an existing cluster; its text says what goes on there."""


def fleet_parts(paths) -> list[Path]:
    """The case files of a fleet: each path a case file (.toml) or a folder (its *.toml
    files, sorted); InputError for a missing path, an empty folder or a repeated case."""
    out: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            found = sorted(q for q in p.glob("*.toml") if q.is_file())
            if not found:
                below = sorted(q for q in p.glob("*/*.toml") if q.is_file())
                hint = (f"; its subfolders hold {len(below)} (e.g. {below[0]}): give them, e.g. "
                        f"{p / '*' / '*.toml'}" if below else "")
                raise InputError(f"the folder holds no case file (*.toml){hint}", file=p)
            out += found
        elif p.is_file():
            out.append(p)
        else:
            raise InputError("no such case file or folder", file=p)
    seen: dict = {}
    for p in out:
        key = p.resolve()
        if key in seen:
            raise InputError(f"the case is given twice (also as {seen[key]})", file=p)
        seen[key] = p
    return out


def part_folders(parts, out) -> list[Path | None]:
    """Each part's output folder: None (run_trend's default, next to the case) or, with
    --out DIR, DIR/<case stem>-trend; two parts may not share one."""
    if out is None:
        return [None] * len(parts)
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError("exists and is not a folder; --out names the folder of the parts' output folders", file=out)
    if not out.absolute().parent.is_dir():
        raise InputError(f"the folder {out.absolute().parent} does not exist", file=out)
    folders = [out / f"{p.stem}-trend" for p in parts]
    names: dict = {}
    for p, f in zip(parts, folders):
        if f.name in names:
            raise InputError(f"two parts would write into {f} (also {names[f.name]}); give the cases different "
                             f"names or leave out --out", file=p)
        names[f.name] = p
    return folders


def start_fork_server(modules) -> None:
    """Start this process's multiprocessing fork server now, importing `modules`, with the
    workers' environment (WORKER_THREAD_ENV unless set); returns at once while the server
    imports.  A server already running is left as it is (one per process)."""
    import multiprocessing.forkserver as forkserver

    added = {k: v for k, v in WORKER_THREAD_ENV.items() if k not in os.environ}
    os.environ.update(added)
    try:
        forkserver.set_forkserver_preload(list(modules))
        forkserver.ensure_running()
    finally:
        for k in added:
            os.environ.pop(k, None)


def _client(scheduler, workers, preload=()):
    """A dask.distributed Client: of the cluster at `scheduler`, or of a new local cluster
    of `workers` processes with one thread each (closed with the client), its workers
    started with the modules `preload` imported (LOCAL_START_METHOD; the fork server is one
    per process: the first local cluster's list holds for the later ones)."""
    if not scheduler and LOCAL_START_METHOD == "forkserver" and preload and find_spec("distributed"):
        start_fork_server(["distributed", *preload])
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise InputError("trend over several parts runs on dask.distributed: pip install 'heatsight[fleet]'") from None
    if scheduler:
        try:
            return Client(scheduler, timeout=CONNECT_TIMEOUT_S)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"--scheduler {scheduler}: cannot reach the scheduler ({exc})") from None
        except (MemoryError, EOFError) as exc:     # something answered, not in dask's protocol
            raise InputError(f"--scheduler {scheduler}: what answers there is not a dask scheduler "
                             f"({type(exc).__name__}); give the scheduler's address (port 8786 by default, "
                             f"not its dashboard's)") from None
    import logging

    import dask

    config = dict(LOCAL_WORKER_CONFIG)
    if LOCAL_START_METHOD is not None:
        config["distributed.worker.multiprocessing-method"] = LOCAL_START_METHOD
    with dask.config.set(config):
        cluster = LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True, dashboard_address=None,
                               silence_logs=logging.ERROR)
    return Client(cluster, set_as_default=False)


def exit_status(records) -> int:
    """0 every part done, 1 a part failed for a reason other than its input, else 2."""
    states = {r["status"] for r in records}
    return 1 if "failed" in states else 2 if "bad input" in states else 0


def run_fleet(paths, task, *, out=None, scheduler=None, workers=None, options=None, report=None, client=None,
              preload=(), started=None):
    """Run task(case path, output folder or None, options) -> record (a module-level
    function, data_io.trend_command.run_part) for every part; returns (records in the parts'
    order, exit status).
    report(i, n, record) is called as each part finishes (progress per part); `client`: an
    existing dask Client to use (else one is made from scheduler / workers and closed);
    preload: names of the modules the task needs, loaded in a local cluster's workers before
    they start (LOCAL_START_METHOD).
    started(n, where) is called once the cluster answers, before the parts are submitted
    (where: "a local cluster of 2 worker processes" or "the cluster at ADDRESS")"""
    if scheduler is not None and not str(scheduler).strip():
        raise InputError("--scheduler needs the scheduler's address, e.g. tcp://10.0.0.5:8786")
    parts = fleet_parts(paths)
    folders = part_folders(parts, out)
    if scheduler and workers:
        raise InputError("--workers sets the size of a local cluster; with --scheduler the cluster's own "
                         "workers run the parts: leave --workers out")
    workers = int(workers or min(DEFAULT_WORKERS, os.cpu_count() or 1))
    if workers < 1:
        raise InputError(f"--workers needs a whole number >= 1, got {workers}")
    options = dict(options or {})
    # workers open the files in their own working folder: absolute paths; the records name
    # each case as it was given
    cases = [str(p.absolute()) for p in parts]
    targets = [None if f is None else str(f.absolute()) for f in folders]
    out_dir = None if out is None else Path(out).absolute()
    made_out = out_dir is not None and not out_dir.exists()
    fresh = [f is not None and not Path(f).exists() for f in targets]
    run_id = uuid.uuid4().hex[:12]               # task names unique to this run on a shared cluster
    own = client is None
    records: list = [None] * len(parts)
    quiet = _quiet_dask_logs()
    try:
        if own:
            client = _client(scheduler, workers, preload)
        from dask.distributed import as_completed

        if started is not None:
            where = (f"the cluster at {scheduler}" if scheduler else
                     f"a local cluster of {workers} worker process{'es' if workers > 1 else ''}")
            started(len(parts), where if own else "the given cluster")

        futures = [client.submit(task, c, f, options, key=f"heatsight-part-{run_id}-{i}", pure=False)
                   for i, (c, f) in enumerate(zip(cases, targets))]
        index = {fut.key: i for i, fut in enumerate(futures)}
        try:
            for done, fut in enumerate(as_completed(futures, loop=client.loop), 1):
                i = index[fut.key]
                try:
                    rec = fut.result()
                except Exception as exc:  # noqa: BLE001 - a lost worker or a task that could not run
                    rec = {"status": "failed", "error": f"{type(exc).__name__}: {exc}"}
                rec = {**rec, "case": str(parts[i])}
                records[i] = rec
                if report is not None:
                    report(done, len(parts), rec)
        except KeyboardInterrupt:
            if scheduler:       # parts not started yet never start; running ones go on there
                client.cancel([f for f, r in zip(futures, records) if r is None])
                raise FleetInterrupted("parts already running on the cluster go on and write their outputs; "
                                       "the others were cancelled") from None
            raise
    finally:
        try:
            if own:
                cluster = getattr(client, "cluster", None)
                if client is not None:
                    client.close()
                if cluster is not None:
                    cluster.close()
        finally:
            quiet()
            # what a part that did not finish left (its worker stopped or lost): folders this
            # run made that hold nothing but staged files, and an --out folder left empty
            for f, new, rec in zip(targets, fresh, records):
                if new and not scheduler and (rec is None or rec["status"] != "done"):
                    _remove_if_unfinished(Path(f))      # a local cluster's workers are stopped
            if made_out:
                try:
                    out_dir.rmdir()
                except OSError:
                    pass
    return records, exit_status(records)


def _quiet_dask_logs():
    """Silence dask.distributed's own log lines (tracebacks of a lost scheduler or worker)
    while a fleet runs: each part's fate is reported on its own line.  Returns the undo."""
    import logging

    loggers = [logging.getLogger(n) for n in ("distributed", "distributed.client", "distributed.worker",
                                              "distributed.scheduler", "distributed.nanny", "tornado")]
    levels = [lg.level for lg in loggers]
    for lg in loggers:
        lg.setLevel(logging.CRITICAL)

    def undo():
        for lg, level in zip(loggers, levels):
            lg.setLevel(level)
    return undo


def _remove_if_unfinished(folder: Path) -> None:
    """Remove a part's output folder that this run made when it holds only staged files of
    an unfinished write (csv_out.staging_leftovers) or nothing."""
    from .csv_out import staging_leftovers

    try:
        leftovers = set(staging_leftovers(folder))
        if any(p not in leftovers for p in folder.iterdir()):
            return
        for p in leftovers:
            p.unlink()
        folder.rmdir()
    except OSError:
        pass


def part_line(i: int, n: int, rec: dict) -> str:
    """One line of progress for a finished part."""
    head = f"part {i}/{n} {rec['case']}"
    if rec["status"] == "done":
        flags = f"; flagged: {', '.join(rec['flags'])}" if rec["flags"] else "; no flags"
        if rec.get("sensor_faults"):
            flags += f"; sensors left out of some rows: {', '.join(rec['sensor_faults'])}"
        return f"{head}: done in {rec['seconds']:.1f} s, {rec['trend_rows']} trend rows{flags}; outputs in {rec['folder']}"
    return f"{head}: {rec['status']}: {rec['error']}"
