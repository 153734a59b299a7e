"""Reading an input text file (a case file) with one clear message for each way it can fail."""

from __future__ import annotations

from .errors import InputError
from .limits import MAX_TABLE_BYTES
from .plant_files import check_file


def read_text(path, kind: str, *, missing: str = "file not found", hint: str = "") -> str:
    """The file's text (UTF-8, optional BOM); InputError naming the file otherwise.

    kind: what the file should be ("a case file (TOML)"); hint: advice added to the not-UTF-8
    message.  Devices, pipes and files over MAX_TABLE_BYTES are refused before reading.
    """
    path = check_file(path, kind, missing=missing)
    try:
        size = path.stat().st_size
        if size > MAX_TABLE_BYTES:
            raise InputError(f"is {size / 1e6:.0f} MB; expected {kind}", file=path)
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror or exc})", file=path) from exc
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise InputError(f"line {line}: is not UTF-8 text (byte {exc.start}){hint}", file=path) from exc
