"""Argument types of the command line, shared by every command's parser (one module, so
that the command modules and cli.py need not import each other)."""

from __future__ import annotations

import argparse
import math
import re


def positive_float(text: str) -> float:
    """A finite number > 0."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    return value


def non_negative_float(text: str) -> float:
    """A finite number >= 0."""
    try:
        if float(text) == 0.0:
            return 0.0
    except ValueError:
        pass
    return positive_float(text)


def count(text: str) -> int:
    """A whole number >= 0."""
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 0, got {text!r}")
    return v


def whole(text: str) -> int:
    """A whole number >= 1."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value


_OFFSET = re.compile(r"^(?:UTC)?([+-])(\d{1,2})(?::?(\d{2}))?$", re.IGNORECASE)


def time_zone(text: str):
    """A zone for showing logged times: "UTC", an offset "+02:00", or a zone name such as
    "Europe/Berlin" (the system's time-zone database)."""
    import datetime as dt
    import zoneinfo

    text = text.strip()
    if text.upper() in ("UTC", "Z"):
        return dt.timezone.utc
    m = _OFFSET.match(text)
    if m:
        hours, minutes = int(m.group(2)), int(m.group(3) or 0)
        if hours > 14 or minutes > 59:
            raise argparse.ArgumentTypeError(f"expected an offset from -14:00 to +14:00, got {text!r}")
        sign = -1 if m.group(1) == "-" else 1
        return dt.timezone(sign * dt.timedelta(hours=hours, minutes=minutes))
    try:
        return zoneinfo.ZoneInfo(text)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
        raise argparse.ArgumentTypeError(f"unknown time zone {text!r}; write UTC, an offset such as +02:00, "
                                         f"or a zone name such as Europe/Berlin") from None
