"""Shared figure set-up: matplotlib's object API (no pyplot state), SVG that is the same on
every run (fixed ``svg.hashsalt``, no date), text kept as text so the page's fonts apply."""

from __future__ import annotations

import io
import re
import threading
from typing import Any

import matplotlib
from markupsafe import escape

matplotlib.use("Agg")

from matplotlib.figure import Figure  # noqa: E402

#: rcParams while drawing; held under a lock because rc_context changes process-wide state.
FIGURE_RC = {
    "svg.hashsalt": "fluxproof-report",
    "svg.fonttype": "none",
    "font.family": "sans-serif",
    "font.size": 9.5,
    "axes.edgecolor": "#4d5761",
    "axes.labelcolor": "#1f262d",
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.color": "#1f262d",
    "ytick.color": "#1f262d",
    "legend.frameon": False,
    "hatch.linewidth": 0.8,
}
INK, MUTED = "#1f262d", "#4d5761"
LAYER_SHADES = ("#dfe7ee", "#ece6d8", "#e2ebe0", "#e9e1ea", "#e6e6e6")
DEPLETED = "#9a5b00"
LINE_COLOURS = ("#1f4e79", "#a1401b", "#2f6b3a", "#6b3f7a", "#7a6a1f", "#3d6f73")



def numbers(values: Any) -> list[float] | None:
    """A record's non-empty list of numbers as floats, or None when it is anything else."""
    if not isinstance(values, list) or not values:
        return None
    if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values):
        return None
    return [float(v) for v in values]


_LOCK = threading.RLock()
_PROLOGUE = re.compile(r"^.*?(?=<svg\b)", re.DOTALL)


def new_figure(width_in: float = 7.6, height_in: float = 3.4) -> Figure:
    return Figure(figsize=(width_in, height_in), layout="constrained")


def figure_svg(figure: Figure, *, title: str) -> str:
    """The figure as inline SVG markup (XML prologue and DOCTYPE removed, a ``<title>`` and
    ``role="img"`` added for screen readers)."""
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", metadata={"Date": None})
    svg = _PROLOGUE.sub("", buffer.getvalue(), count=1)
    return svg.replace("<svg ", '<svg role="img" class="plot" ', 1).replace(
        ">", f"><title>{escape(title)}</title>", 1)


class drawing:
    """``with drawing():`` — matplotlib's rcParams for our figures, one figure at a time."""

    def __enter__(self) -> None:
        _LOCK.acquire()
        self._context = matplotlib.rc_context(FIGURE_RC)
        self._context.__enter__()

    def __exit__(self, *exc: object) -> None:
        try:
            self._context.__exit__(*exc)
        finally:
            _LOCK.release()
