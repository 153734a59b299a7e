"""What every figure of heatsight shares: resolution, line colours, flag colours and the
figure constructor (no pyplot: no global state, PNGs through the Agg renderer)."""

from __future__ import annotations

from matplotlib.figure import Figure

DPI = 110
#: colours of profile and trend lines (our own choice; distinct in print and for most colour vision)
LINE_COLOURS = ("#1f5f8b", "#c0562f", "#3c8d5a", "#7b4f9d", "#8c6d1f", "#2f8c8c")
FLAG_COLOUR = {"ok": "#1f5f8b", "suspect": "#d08a00", "set aside": "#d03c50"}
#: Text properties for user text (sensor names...): shown literally, a '$' starts no mathematics
LITERAL = {"parse_math": False}


def new_figure(width, height) -> Figure:
    """A constrained-layout figure of width x height inches."""
    return Figure(figsize=(width, height), layout="constrained")
