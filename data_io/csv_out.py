"""Output writers: CSV and JSON, written atomically (temporary file in the same folder,
then os.replace), with spreadsheet formula injection neutralized in CSV text cells.

A text cell starting with =, +, -, @, a tab or a carriage return could be run as a formula
by a spreadsheet; such cells are written with a leading single quote.  Numbers are never
altered.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
FLOAT_FORMAT = "%.10g"


def neutralize(cell):
    """Text starting like a spreadsheet formula gets a leading single quote; else unchanged."""
    if isinstance(cell, str) and cell.startswith(_FORMULA_START):
        return "'" + cell
    return cell


def check_output_path(path, inputs=(), overwrite: bool = False) -> Path:
    """Refuse an output path whose folder is missing, that is a folder, that is one of the
    input files (inputs are never overwritten), or that exists unless `overwrite` (as the
    output folders of fit, plan and trend).  Returns the path."""
    path = Path(path)
    if path.is_dir():
        raise InputError("is a folder; expected an output file name", file=path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"the folder {folder} does not exist", file=path)
    for p in inputs:
        try:
            same = path.exists() and Path(p).exists() and os.path.samefile(path, p)
        except OSError:
            same = False
        if same or path.resolve() == Path(p).resolve():
            raise InputError("is an input file of this run; choose another output name", file=path)
    if path.exists() and not overwrite:
        raise InputError("exists; give --overwrite to replace it, or another name", file=path)
    return path


#: files a fit writes into its output folder (a trend adds its own); none may be an input
FIT_OUTPUT_NAMES = ("estimate.csv", "sensors.csv", "summary.json", "points.csv", "report.html")
#: the data files any heatsight command writes (fit, plan, trend; figures are *.png): the only
#: earlier outputs an --overwrite run removes, whatever else a summary.json lists
REMOVABLE_OUTPUTS = frozenset(FIT_OUTPUT_NAMES) | {"plan.csv", "sensors_value.csv", "plan.html", "trend.csv",
                                                   "trend.parquet"}
#: the key of summary.json listing the files of its run: --overwrite replaces only these
OUTPUT_FILES_KEY = "output_files"


def own_outputs(folder: Path) -> set[str]:
    """Names heatsight wrote into `folder` in an earlier run (listed in its summary.json)."""
    import json

    try:
        listed = json.loads((Path(folder) / "summary.json").read_text(encoding="utf-8")).get(OUTPUT_FILES_KEY)
    except (OSError, ValueError, AttributeError):
        return set()
    if not isinstance(listed, list):
        return set()
    return {n for n in listed if isinstance(n, str) and n and "/" not in n and n not in (".", "..")}


#: the end of a staged file's name: '.NAME.' + mkstemp's random part + this (OutputSet.stream)
STAGED_SUFFIX = ".tmp"


def staging_leftovers(folder: Path) -> list[Path]:
    """Files an OutputSet staged in `folder` and never renamed into place because its process
    was killed (a lost worker, SIGKILL): hidden '.NAME.XXXXXXXX.tmp' files of heatsight's
    output names (OutputSet.stream).  They hold no output; a later run into the folder
    treats them as absent and removes them when it commits."""
    names = set(REMOVABLE_OUTPUTS) | {"summary.json"}
    out = []
    try:
        entries = list(Path(folder).iterdir())
    except OSError:
        return []
    for p in entries:
        n = p.name
        if n.startswith(".") and n.endswith(STAGED_SUFFIX) and p.is_file() and not p.is_symlink():
            stem = n[1:-len(STAGED_SUFFIX)].rsplit(".", 1)[0]     # '.trend.csv.ab12cd34.tmp' -> 'trend.csv'
            if stem in names or stem.endswith(".png"):
                out.append(p)
    return sorted(out)


def stale_outputs(folder: Path, written) -> list[str]:
    """heatsight's earlier outputs in `folder` (own_outputs) that a run writing the names
    `written` leaves behind and removes: only names heatsight writes (REMOVABLE_OUTPUTS and
    figures, *.png), whatever else a summary.json lists."""
    return sorted(n for n in own_outputs(folder) - set(written)
                  if (n in REMOVABLE_OUTPUTS or n.endswith(".png")) and "\x00" not in n)


#: how the messages of output_folder name the folder option and overwriting: the command
#: line's words (default) and the Python API's (write_report, Plan.write)
CLI_WORDS = {"another": "choose another --out", "overwrite": "add --overwrite", "names": "--out names a folder",
             "writable": "choose a folder you may write to with --out"}
API_WORDS = {"another": "give another folder", "overwrite": "pass overwrite=True", "names": "give a folder",
             "writable": "give a folder you may write to"}


def output_folder(out, case, overwrite: bool, names=FIT_OUTPUT_NAMES, inputs=(), words=None) -> tuple[Path, bool]:
    """The output folder `out` and whether it must be created.

    Refused: a file where the folder should be, a missing parent, a non-empty folder without
    `overwrite`, and any output (of `names`, or a PNG) that would replace one of the run's
    inputs (the case's files and `inputs`: --readings, --at, --log), a folder, or a file
    heatsight did not write there (`--overwrite` replaces only heatsight's own earlier
    outputs, listed in the folder's summary.json; those this run does not write are removed
    when it commits, so the folder and its summary.json agree).  words: CLI_WORDS (default)
    or API_WORDS, how the messages name the folder option and overwriting."""
    w = CLI_WORDS if words is None else words
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"exists and is not a folder; {w['names']}", file=out)
    if not out.parent.is_dir():
        raise InputError(f"the folder {out.parent} does not exist", file=out)
    every_input = [Path(p) for p in list(case.input_files()) + [p for p in inputs if p is not None]]
    resolved = {p.resolve() for p in every_input}
    leftovers = set(staging_leftovers(out)) if out.is_dir() else set()
    existing = sorted(p for p in out.iterdir() if p not in leftovers) if out.is_dir() else []
    # heatsight's earlier outputs this run does not write go when it commits (OutputSet)
    earlier = [out / name for name in stale_outputs(out, names)]
    for target in [out / name for name in names] + [p for p in existing if p.suffix == ".png"] + earlier:
        if target.resolve() in resolved or any(_same(target, p) for p in every_input):
            raise InputError(f"{target.name} in the output folder is an input of this run; {w['another']}",
                             file=out)
    if existing and not overwrite:
        raise InputError(f"the output folder is not empty; {w['another']} or {w['overwrite']}", file=out)
    own = own_outputs(out)
    for target in [out / name for name in names]:
        if target.is_dir():
            raise InputError(f"{target.name} in the output folder is a folder; move it or {w['another']}",
                             file=out)
        if target.exists() and target.name not in own:
            raise InputError(f"{target.name} in the output folder was not written by heatsight, which never "
                             f"replaces such a file; move it or {w['another']}", file=out)
    _probe(out if out.is_dir() else out.parent, w)
    return out, not out.exists()


def _probe(folder: Path, words=None) -> None:
    """Refuse, before any work, a folder where nothing can be created (read-only, /proc...)."""
    try:
        os.rmdir(tempfile.mkdtemp(prefix=".heatsight-probe.", dir=folder))
    except OSError as exc:
        raise InputError(f"cannot write here ({exc.strerror or exc}); {(words or CLI_WORDS)['writable']}",
                         file=folder) from None


def _same(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def _default_mode() -> int:
    """Permissions of a newly created file under the current umask (mkstemp uses 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def atomic_write_bytes(path, data: bytes) -> None:
    """Write `data` to `path` atomically: temporary file in the same folder, then os.replace.
    On any failure the temporary file is removed and `path` is left as it was."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        os.fchmod(fd, _default_mode())
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def atomic_write_text(path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def csv_text(frame: pd.DataFrame, float_format: str = FLOAT_FORMAT) -> str:
    """CSV text of a frame (no index), text cells neutralized, header cells too."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col].dtype):
            out[col] = out[col].map(neutralize)
    out.columns = [neutralize(str(c)) for c in out.columns]
    buf = io.StringIO()
    out.to_csv(buf, index=False, float_format=float_format, lineterminator="\n")
    return buf.getvalue()


def write_csv(frame: pd.DataFrame, path=None, *, float_format: str = FLOAT_FORMAT, stream=None) -> None:
    """Write `frame` as CSV to `path` atomically, or to `stream` (default stdout) when path is None."""
    text = csv_text(frame, float_format)
    if path is None:
        (stream or sys.stdout).write(text)
        return
    atomic_write_text(path, text)


def _jsonable(obj):
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def json_text(obj) -> str:
    """JSON text: numpy values made plain, NaN/inf written as null."""
    return json.dumps(_jsonable(obj), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def write_json(obj, path) -> None:
    """Write `obj` as JSON to `path` atomically."""
    atomic_write_text(path, json_text(obj))


@contextlib.contextmanager
def named_os_errors(path):
    """An OSError raised without a file name (a full disk while writing to an open file) names
    `path`, so that the one-line message says where."""
    try:
        yield
    except OSError as exc:
        if exc.filename is not None or exc.errno is None:
            raise
        raise OSError(exc.errno, exc.strerror or str(exc), str(path)) from exc


class OutputSet:
    """Write several output files so that either all of them appear or none does.

    Use as a context manager: ``add(name, bytes_or_text)`` stages files (in temporary
    files inside `folder`); on a clean exit they are renamed into place (the files they
    replace are kept aside until every rename succeeded, and put back otherwise); on an error the temporary files are removed and
    nothing is left behind.  A set that writes a summary.json also removes, once every
    rename succeeded, heatsight's earlier outputs there (own_outputs) that it did not write:
    a --overwrite run without --at leaves no points.csv of an earlier run behind, unlisted.
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self._staged: list[tuple[str, Path]] = []

    def __enter__(self):
        return self

    def stream(self, name: str):
        """A binary file object writing into the staged temporary file of `name` (for
        outputs too large to hold in memory); the caller closes it."""
        fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=STAGED_SUFFIX, dir=self.folder)
        self._staged.append((name, Path(tmp)))
        os.fchmod(fd, _default_mode())
        return os.fdopen(fd, "wb")

    def add(self, name: str, data) -> Path:
        if isinstance(data, str):
            data = data.encode("utf-8")
        with named_os_errors(self.folder / name):
            with self.stream(name) as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        return self.folder / name

    def _commit(self) -> None:
        aside: list[tuple[Path, Path]] = []      # (target, its earlier version kept aside)
        done: list[Path] = []
        written = {name for name, _ in self._staged}
        stale = stale_outputs(self.folder, written) if "summary.json" in written else []
        mine = {staged for _, staged in self._staged}
        leftovers = [p for p in staging_leftovers(self.folder) if p not in mine]
        try:
            for name, staged in self._staged:
                target = self.folder / name
                if target.is_dir():
                    raise InputError(f"{name} in the output folder is a folder; move it or choose another --out",
                                     file=self.folder)
                if target.exists():
                    keep = Path(tempfile.mkdtemp(prefix=f".{name}.", suffix=".old", dir=self.folder)) / name
                    aside.append((target, keep))
                    os.replace(target, keep)
                os.replace(staged, target)
                done.append(target)
            for name in stale:
                target = self.folder / name
                try:
                    if not target.is_file() or target.is_symlink():
                        continue
                    keep = Path(tempfile.mkdtemp(prefix=".stale.", suffix=".old", dir=self.folder)) / name
                    aside.append((target, keep))
                    os.replace(target, keep)
                except (OSError, ValueError):         # an odd name: left as it is
                    continue
        except BaseException:
            for target in done:
                try:
                    target.unlink()
                except OSError:
                    pass
            for target, keep in aside:
                if keep.exists():
                    try:
                        os.replace(keep, target)
                    except OSError:
                        pass
            raise
        finally:
            for _, keep in aside:
                try:
                    keep.unlink()
                except OSError:
                    pass
                try:
                    keep.parent.rmdir()
                except OSError:
                    pass
        for p in leftovers:                        # a killed earlier run's staged files
            try:
                p.unlink()
            except OSError:
                pass

    def __exit__(self, exc_type, exc, tb):
        try:
            if exc_type is None:
                self._commit()
        finally:
            for _, tmp in self._staged:
                try:
                    tmp.unlink()
                except OSError:
                    pass
            self._staged.clear()
        return False
