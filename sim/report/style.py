"""covey's figure style and the deterministic figure writer.

One plain style for every report figure: covey's own palette (:data:`PALETTE`, one colour per
spacecraft, in the log's order), matplotlib's bundled DejaVu Sans (so a figure renders the same on
every machine), light grid, no top/right spines, figures numbered "Figure N" at the top left.
A candidate is drawn solid, a baseline dashed and lighter (:data:`SOURCE_STYLES`).

Figures are :class:`matplotlib.figure.Figure` objects drawn on the Agg canvas (pyplot is never
used, so no global state and no GUI backend). :func:`save_figure` writes PNG and PDF without dates:
PNG metadata carry no ``Software`` or time entries, the PDF has no ``CreationDate``, so the same
data give the same bytes.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Iterable, Sequence

import matplotlib

from sim import __version__

__all__ = ["PALETTE", "MODE_COLOURS", "SOURCE_STYLES", "RC", "new_figure", "save_figure", "label_figure",
           "render_png", "freeze_layout", "colour", "mode_colour", "time_axis", "PNG_DPI"]

PALETTE = ("#0f5c6e", "#b5452b", "#6b7f1f", "#6d3b7b", "#c28f1c", "#2f8f83", "#8c2f39", "#4d5b6a")
"""Spacecraft colours, in the log's spacecraft order (chief first)."""

MODE_COLOURS = {"max_drag": "#c28f1c", "min_drag": "#2f8f83", "nominal": "#c9cfd6"}
"""Attitude-mode colours (other modes take :data:`_EXTRA_MODE_COLOURS` in order)."""
_EXTRA_MODE_COLOURS = ("#6d3b7b", "#8c2f39", "#6b7f1f", "#0f5c6e", "#4d5b6a")

INK = "#262b30"
GRID = "#dde1e6"
BAND = "#e7eaee"
LIMIT = "#111417"
LIMIT_DASH = (0, (3, 1.5))
"""Colour and dash pattern of limits (requirement limits, the keep-out radius)."""

SOURCE_STYLES = (
    {"linestyle": "-", "alpha": 1.0, "lw_scale": 1.0, "suffix": ""},
    {"linestyle": (0, (4, 2)), "alpha": 0.7, "lw_scale": 0.85, "suffix": " (baseline)"},
)
"""Line style of the candidate (index 0) and of the baseline (index 1)."""

PNG_DPI = 120
"""Resolution of the PNG figures (the PDF is vector)."""

RC = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 8.0,
    "axes.titlesize": 8.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 8.0,
    "axes.edgecolor": "#5c6670",
    "axes.labelcolor": INK,
    "axes.linewidth": 0.7,
    "axes.grid": True,
    "axes.axisbelow": True,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.prop_cycle": matplotlib.cycler(color=list(PALETTE)),
    "axes.formatter.useoffset": False,
    "axes.formatter.limits": (-4, 5),
    "grid.color": GRID,
    "grid.linewidth": 0.6,
    "grid.linestyle": "-",
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.frameon": False,
    "legend.fontsize": 7.0,
    "legend.handlelength": 2.2,
    "lines.linewidth": 1.2,
    "lines.markersize": 4.0,
    "patch.linewidth": 0.6,
    "text.color": INK,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "pdf.fonttype": 3,
    "svg.hashsalt": "covey",
    "path.simplify": True,
}
"""matplotlib settings of every report figure (applied with ``rc_context`` while drawing)."""


def colour(index: int) -> str:
    """Colour of the spacecraft at ``index`` in the log's order."""
    return PALETTE[index % len(PALETTE)]


def mode_colour(name: str, all_modes: Sequence[str]) -> str:
    """Colour of an attitude mode (fixed for the three required modes)."""
    if name in MODE_COLOURS:
        return MODE_COLOURS[name]
    others = [m for m in all_modes if m not in MODE_COLOURS]
    k = others.index(name) if name in others else 0
    return _EXTRA_MODE_COLOURS[k % len(_EXTRA_MODE_COLOURS)]


def time_axis(duration_s: float, epoch_utc: str = "") -> tuple[float, str]:
    """Divisor and axis label for times since the epoch: hours up to 3 days, else days."""
    since = f"time since {epoch_utc}" if epoch_utc else "time since epoch"
    if duration_s <= 3 * 86400.0:
        return 3600.0, f"{since} [h]"
    return 86400.0, f"{since} [days]"


def new_figure(width_in: float = 7.2, height_in: float = 4.2):
    """A blank figure on the Agg canvas with covey's style, constrained layout.

    Draw on it inside ``matplotlib.rc_context(RC)`` (the :func:`sim.report.build` figure builders
    do) so that the style applies to the artists created.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with matplotlib.rc_context(RC):
        fig = Figure(figsize=(width_in, height_in), layout="constrained")
        FigureCanvasAgg(fig)
    return fig


def label_figure(fig, number: int, title: str) -> None:
    """Write "Figure N  title" at the top left of the figure."""
    with matplotlib.rc_context(RC):
        fig.suptitle(f"Figure {number}   {title}", x=0.005, ha="left", fontsize=9.5,
                     fontweight="bold", color=INK)


_PNG_META = {"Software": None}
_PDF_META = {"Creator": f"covey {__version__}", "Producer": None, "CreationDate": None,
             "ModDate": None}


def render_png(fig, dpi: int = PNG_DPI) -> bytes:
    """The figure as PNG bytes (no dates or software entries in the metadata)."""
    buf = io.BytesIO()
    with matplotlib.rc_context(RC):
        fig.savefig(buf, format="png", dpi=dpi, metadata=dict(_PNG_META))
    return buf.getvalue()


def freeze_layout(fig, dpi: int = PNG_DPI) -> None:
    """Run the figure's constrained layout once (at ``dpi``) and keep it: later renderings (PNG,
    PDF) draw once each, without laying out again. Positions are figure fractions, so the PDF gets
    the same layout as the PNG."""
    eng = fig.get_layout_engine()
    if eng is None:
        return
    with matplotlib.rc_context(RC):
        fig.set_dpi(dpi)
        eng.execute(fig)
        fig.set_layout_engine(None)  # None, not "none": a placeholder engine makes savefig draw twice


def save_figure(fig, stem: str | Path, formats: Iterable[str] = ("png", "pdf"),
                dpi: int = PNG_DPI, title: str = "") -> dict[str, Path]:
    """Write the figure as ``stem.png`` and ``stem.pdf`` (deterministic bytes).

    Returns
    -------
    dict
        Format -> path written. The PNG bytes are also returned under ``"png_bytes"`` when PNG is
        written (the HTML page embeds them).
    """
    stem = Path(stem)
    out: dict = {}
    freeze_layout(fig, dpi)
    with matplotlib.rc_context(RC):
        for fmt in formats:
            path = stem.with_suffix(f".{fmt}")
            if fmt == "png":
                data = render_png(fig, dpi)
                path.write_bytes(data)
                out["png_bytes"] = data
            elif fmt == "pdf":
                meta = dict(_PDF_META)
                if title:
                    meta["Title"] = title
                fig.savefig(path, format="pdf", metadata=meta)
            else:
                raise ValueError(f"figure format {fmt!r}: png or pdf")
            out[fmt] = path
    return out
