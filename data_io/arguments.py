"""Argument types of the command line, shared by every command's parser (one module, so
that the command modules and cli.py need not import each other)."""

from __future__ import annotations

import argparse

import numpy as np


def positive_float(text: str) -> float:
    """A finite number > 0."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}") from None
    if not (np.isfinite(value) and value > 0):
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
    value = count(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value
