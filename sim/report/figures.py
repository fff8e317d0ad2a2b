"""What every report figure is: a :class:`FigureSpec` (the matplotlib figure, its caption and the
data arrays drawn) or, when the log lacks what it needs, a :class:`Skipped` note saying why.

The data arrays are kept beside the figure so that a test (or a user) can check what was drawn
without reading pixels; the same log gives the same arrays and the same bytes.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sim.report.style import SOURCE_STYLES

__all__ = ["FigureSpec", "Skipped", "unit_scale", "source_line", "source_legend", "ROE_LABELS"]

ROE_LABELS = ("a δa", "a δλ", "a δex", "a δey", "a δix", "a δiy")
"""Axis names of the six a-scaled quasi-nonsingular mean ROE."""


@dataclass
class FigureSpec:
    """One report figure.

    Attributes
    ----------
    name : str
        File stem (``figNN_<name>.png`` / ``.pdf``).
    title : str
        Short title (drawn at the top left with the figure number).
    caption : str
        What is plotted, units and frame (the HTML page, ``figures.csv`` and ``figures.tex``).
    fig : matplotlib.figure.Figure
    data : dict
        Name -> numpy array: every array drawn.
    number : int
        Set by the report builder.
    files : dict
        Set by the report builder: format -> path.
    """

    name: str
    title: str
    caption: str
    fig: Any
    data: dict = field(default_factory=dict)
    number: int = 0
    files: dict = field(default_factory=dict)
    png_bytes: bytes = b""


@dataclass
class Skipped:
    """A figure the report leaves out, and why (e.g. a free-drift log has no ``/guidance``)."""

    name: str
    title: str
    reason: str


def unit_scale(values, metres: bool = True, km_above: float = 20e3) -> tuple[float, str]:
    """Divisor and unit for lengths (m or km) or speeds (mm/s or m/s) of a set of values."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    big = float(np.max(np.abs(v))) if v.size else 0.0
    if metres:
        return (1e3, "km") if big > km_above else (1.0, "m")
    return (1e-3, "mm/s") if big < 0.5 else (1.0, "m/s")


def source_line(k: int, lw: float = 1.2) -> dict:
    """Line keyword arguments of source ``k`` (0 candidate, 1 baseline)."""
    s = SOURCE_STYLES[min(k, len(SOURCE_STYLES) - 1)]
    return {"linestyle": s["linestyle"], "alpha": s["alpha"], "linewidth": lw * s["lw_scale"]}


def source_legend(ax, labels, loc: str = "best") -> None:
    """A small legend of the line styles: candidate solid, baseline dashed (only with two)."""
    if len(labels) < 2:
        return
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color="#4d5b6a", **source_line(k)) for k in range(len(labels))]
    leg = ax.legend(handles, list(labels), loc=loc, fontsize=6.5, title=None)
    ax.add_artist(leg)
