"""Reading an input text file with one clear message for each way it can fail."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError


def read_text(path, kind: str, *, missing: str = "file not found", hint: str = "") -> str:
    """The file's text (UTF-8, optional BOM); InputError naming the file otherwise.

    kind: what the file should be ("a CSV file", "a case file (TOML)"); hint: advice added to
    the not-UTF-8 message.
    """
    path = Path(path)
    if not path.exists():
        raise InputError(missing, file=path)
    if path.is_dir():
        raise InputError(f"is a folder; expected {kind}", file=path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror or exc})", file=path) from exc
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"is not UTF-8 text (byte {exc.start}){hint}", file=path) from exc
