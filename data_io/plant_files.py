"""What plants export, read as CSV text: the encoding (UTF-8 with or without BOM, UTF-16
with a BOM, else Windows-1252, else Latin-1), the field separator (comma, semicolon or tab,
from the header line), the decimal mark (a comma when the separator is not one and the
numbers are written ``108,24``), and workbooks (``.xlsx``, first sheet, extra ``excel``) and
``.parquet`` files (extra ``parquet``) turned into CSV text.

Only the first SNIFF_BYTES of a text file decide, so a log larger than memory is never read
whole here; the log reader hands the decided format to pandas.read_csv.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError
from .limits import MAX_TABLE_BYTES

#: bytes read to decide the encoding, separator and decimal mark
SNIFF_BYTES = 1 << 20
SEPARATORS = (",", ";", "\t")
#: codecs by the names people know them
ENCODING_NAMES = {"utf-8-sig": "UTF-8", "utf-16": "UTF-16", "cp1252": "Windows-1252", "latin-1": "Latin-1"}
_COMMA_NUMBER = re.compile(r"^\s*[+-]?\d+,\d+(?:[eE][+-]?\d+)?\s*$")
_DOT_NUMBER = re.compile(r"^\s*[+-]?\d*\.\d+(?:[eE][+-]?\d+)?\s*$")
_XLSX_MAGIC = b"PK\x03\x04"
_PARQUET_MAGIC = b"PAR1"
#: the optional extra and the package each binary format needs
BINARY_FORMATS = {"xlsx": ("excel", "openpyxl", "an Excel workbook (.xlsx)"),
                  "parquet": ("parquet", "pyarrow", "a Parquet file")}


@dataclass(frozen=True)
class TextFormat:
    """How a table's text is written: `encoding` (a Python codec), `sep`, `decimal`;
    `converted` holds the CSV text of a workbook or Parquet file (None for text files)."""

    encoding: str = "utf-8-sig"
    sep: str = ","
    decimal: str = "."
    converted: str | None = None

    @property
    def separator_name(self) -> str:
        return {",": "commas", ";": "semicolons", "\t": "tabs"}[self.sep]


def check_file(path, kind: str = "a CSV file", *, missing: str = "file not found") -> Path:
    """The path of an existing regular file, or InputError (a folder, a device such as
    /dev/zero, a pipe)."""
    path = Path(path)
    try:
        if not path.exists():
            raise InputError(missing, file=path)
        if path.is_dir():
            raise InputError(f"is a folder; expected {kind}", file=path)
        if not path.is_file():
            raise InputError(f"is not a regular file (a device or a pipe); expected {kind}", file=path)
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror or exc})", file=path) from None
    return path


def _head(path: Path, n: int) -> bytes:
    try:
        with open(path, "rb") as fh:
            return fh.read(n)
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror or exc})", file=path) from None


def binary_kind(path: Path, head: bytes) -> str | None:
    """"xlsx" or "parquet" from the file's first bytes (or its name), else None."""
    suffix = path.suffix.lower()
    if head.startswith(_XLSX_MAGIC) or suffix in (".xlsx", ".xlsm"):
        return "xlsx"
    if head.startswith(_PARQUET_MAGIC) or suffix == ".parquet":
        return "parquet"
    return None


def _line_of(data: bytes, offset: int) -> int:
    return data.count(b"\n", 0, offset) + 1


def choose_encoding(data: bytes, path: Path, final: bool = True) -> str:
    """The codec of `data` (a whole file when `final`, else its first bytes)."""
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        return "utf-16"
    nul = data.find(b"\x00")
    if nul >= 0:
        raise InputError(f"line {_line_of(data, nul)}: holds a NUL byte, so it is not text; expected a CSV "
                         f"file (UTF-8, Windows-1252 or Latin-1), an .xlsx workbook or a .parquet file", file=path)
    try:
        codecs.getincrementaldecoder("utf-8-sig")().decode(data, final=final)
        return "utf-8-sig"
    except UnicodeDecodeError:
        pass
    try:
        data.decode("cp1252")
        return "cp1252"
    except UnicodeDecodeError:
        return "latin-1"


def decode(data: bytes, path: Path, encoding: str) -> str:
    """`data` decoded; InputError naming the line where it stops being `encoding`."""
    try:
        return data.decode(encoding)
    except UnicodeDecodeError as exc:
        raise InputError(f"line {_line_of(data, exc.start)}: byte {exc.start} is not "
                         f"{ENCODING_NAMES.get(encoding, encoding)} text like the "
                         f"lines before it; save the file in one encoding (UTF-8 preferred)", file=path) from None


def undecodable_line(path: Path, encoding: str) -> int | None:
    """The line of the first byte of the file that is not `encoding` text (read in blocks;
    for messages only)."""
    decoder = codecs.getincrementaldecoder(encoding)()
    line, block_size = 1, 1 << 20
    try:
        with open(path, "rb") as fh:
            while block := fh.read(block_size):
                try:
                    decoder.decode(block)
                except UnicodeDecodeError as exc:
                    return line + block.count(b"\n", 0, max(exc.start, 0))
                line += block.count(b"\n")
    except OSError:
        return None
    return None


def _first_line(text: str) -> str:
    for line in text.splitlines():
        if line.strip():
            return line
    return ""


def choose_separator(header: str) -> str:
    """The separator giving the header most fields (a comma on a tie)."""
    best, fields = ",", 0
    for sep in SEPARATORS:
        try:
            n = len(next(csv.reader([header], delimiter=sep), []))
        except csv.Error:
            n = header.count(sep) + 1
        if n > fields:
            best, fields = sep, n
    return best


def choose_decimal(text: str, sep: str) -> str:
    """"," when fields are not comma-separated and numbers are written with a decimal comma."""
    if sep == ",":
        return "."
    comma = dot = 0
    for line in text.splitlines()[:1000]:
        for cell in line.split(sep)[:64]:
            comma += bool(_COMMA_NUMBER.match(cell))
            dot += bool(_DOT_NUMBER.match(cell))
    return "," if comma > dot else "."


def _converted(path: Path, kind: str) -> str:
    """CSV text (comma, dot) of a workbook's first sheet or of a Parquet table."""
    import pandas as pd

    extra, package, name = BINARY_FORMATS[kind]
    try:
        __import__(package)
    except ImportError:
        raise InputError(f"is {name}; reading it needs the optional extra: pip install 'heatsight[{extra}]' "
                         f"(or save it as CSV)", file=path) from None
    try:
        if kind == "xlsx":
            frame = pd.read_excel(path, header=None, dtype=object, sheet_name=0)
            frame = frame.dropna(how="all")
            out = frame.to_csv(index=False, header=False, lineterminator="\n")
        else:
            frame = pd.read_parquet(path)
            out = frame.to_csv(index=False, lineterminator="\n")
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - the readers raise many kinds on broken files
        raise InputError(f"cannot read it as {name} ({type(exc).__name__}: {' '.join(str(exc).split())[:160]})",
                         file=path) from None
    return out


def sniff(path, kind: str = "a CSV file") -> TextFormat:
    """The TextFormat of a table file from its first bytes (workbooks and Parquet converted)."""
    path = check_file(path, kind)
    head = _head(path, SNIFF_BYTES)
    binary = binary_kind(path, head)
    if binary is not None:
        return TextFormat(converted=_converted(path, binary))
    encoding = choose_encoding(head, path, final=len(head) < SNIFF_BYTES)
    try:
        text = codecs.getincrementaldecoder(encoding)().decode(head, final=False)
    except UnicodeDecodeError:
        text = head.decode(encoding, errors="replace")
    sep = choose_separator(_first_line(text))
    return TextFormat(encoding, sep, choose_decimal(text, sep))


def table_text(path, kind: str = "a CSV file") -> tuple[str, TextFormat]:
    """The whole text of a (small) table file and its format; files over MAX_TABLE_BYTES
    are refused (a log is streamed instead, data_io.logs)."""
    fmt = sniff(path, kind)
    path = Path(path)
    if fmt.converted is not None:
        return fmt.converted, fmt
    size = path.stat().st_size
    if size > MAX_TABLE_BYTES:
        raise InputError(f"is {size / 1e6:.0f} MB; a table of this kind is at most {MAX_TABLE_BYTES / 1e6:.0f} MB "
                         f"(a log may be larger: give it with --log)", file=path)
    data = _head(path, MAX_TABLE_BYTES + 1)
    return decode(data, path, fmt.encoding), fmt


def rows(text: str, fmt: TextFormat, path=None) -> list[tuple[int, list[str]]]:
    """(file line number, stripped cells) of every record, decimal commas turned into
    points; blank lines give no cells."""
    out = []
    reader = csv.reader(io.StringIO(text, newline=None), delimiter=fmt.sep if fmt.converted is None else ",",
                        skipinitialspace=True)
    try:
        for row in reader:
            cells = [c.strip() for c in row]
            if fmt.decimal == ",":
                cells = [c.replace(",", ".") if _COMMA_NUMBER.match(c) else c for c in cells]
            out.append((reader.line_num, cells))
    except csv.Error as exc:
        raise InputError(f"line {reader.line_num}: malformed CSV ({exc})", file=path) from None
    return out
