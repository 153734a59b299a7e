"""Reading one TOML case file: where a value sits, and one-line errors naming it."""

from __future__ import annotations

import difflib
from pathlib import Path

from .errors import InputError


class _Ctx:
    def __init__(self, path: Path):
        self.path = path

    def error(self, where: str, problem: str) -> InputError:
        return InputError(problem, file=self.path, where=where)

    def check_keys(self, table: dict, valid: tuple[str, ...], where: str) -> None:
        for key in table:
            if key not in valid:
                close = difflib.get_close_matches(str(key), valid, n=1, cutoff=0.6)
                hint = f"did you mean '{close[0]}'?" if close else f"expected one of: {', '.join(valid)}"
                raise self.error(f"{where}.{key}" if where else str(key), f"unknown key '{key}'; {hint}")

    def table(self, parent: dict, key: str, where: str, required: bool) -> dict | None:
        if key not in parent:
            if required:
                raise self.error(where, f"missing [{where}] table")
            return None
        value = parent[key]
        if not isinstance(value, dict):
            raise self.error(where, f"expected a table [{where}], got {_show(value)}")
        return value

    def text(self, table: dict, key: str, where: str) -> str:
        value = table[key]
        if not isinstance(value, str):
            raise self.error(where, f"expected text in quotes, got {_show(value)}")
        return value

    def path_value(self, table: dict, key: str, where: str) -> Path:
        text = self.text(table, key, where)
        if not text.strip():
            raise self.error(where, "empty file name")
        p = Path(text.strip()).expanduser()
        full = p if p.is_absolute() else self.path.parent / p
        if not full.exists():
            raise self.error(where, f"file not found: {full}")
        if full.is_dir():
            raise self.error(where, f"{full} is a folder; expected a CSV file")
        return full


def _show(value) -> str:
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "a list"
    return repr(value)
