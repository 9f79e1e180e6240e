"""The project's plot look: resolution, colours and the deterministic PNG writer.

Every PNG gainloom writes (log plots, loci, simulations) is drawn on an Agg
canvas (no display, no pyplot state) at one resolution, in one palette, and
saved without software or date metadata, so the same input gives the same
bytes.  Any layer that draws imports this module, never matplotlib's global
state.
"""

from __future__ import annotations

import io

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["DPI", "SERIES", "LIMIT", "MARK", "BOUNDARY", "STABLE_FILL", "REGION", "new_figure", "png_bytes"]

#: Resolution of every plot, dots per inch.
DPI = 110

#: Series colours, muted and distinguishable on white, in the order lines take them.
SERIES = ("#1f6f8b", "#b5562d", "#5b8c2a", "#7b4f9d", "#c29a1a", "#2f4858", "#a23b72", "#3e8e7e")
#: Spec limits, failures and imaginary-axis crossings.
LIMIT = "#c0262d"
#: Designed poles and other marks.
MARK = "#202020"
#: The stability boundary (unit circle or imaginary axis).
BOUNDARY = "#44546a"
#: The stable region's fill.
STABLE_FILL = "#eef5ee"
#: The spec region's outline.
REGION = "#2b7a3d"


def new_figure(size: tuple[float, float]) -> Figure:
    """A figure of ``size`` inches at :data:`DPI` on its own Agg canvas."""
    figure = Figure(figsize=size, dpi=DPI)
    FigureCanvasAgg(figure)
    return figure


def png_bytes(figure: Figure) -> bytes:
    """Render a figure to PNG bytes without software or time metadata."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=DPI, metadata={"Software": None})
    return buffer.getvalue()
