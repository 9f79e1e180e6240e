"""The figure of a cascade run: each loop's reference and measurement, and
its controller output against its limits, inner loop at the bottom."""

from __future__ import annotations

from ..look import LIMIT, SERIES, new_figure, png_bytes
from .cascade import CascadeRun

__all__ = ["PLOT_FILE", "plot_cascade"]

#: File name of the figure in the log folder.
PLOT_FILE = "cascade_simulation.png"


def plot_cascade(run: CascadeRun) -> bytes:
    """PNG bytes of the run: two panels per loop, outer loop first."""
    figure = new_figure((8.0, 2.2 * 2 * len(run.loops)))
    axes = figure.subplots(2 * len(run.loops), 1, sharex=True)
    for row, loop in enumerate(reversed(run.loops)):
        top, bottom = axes[2 * row], axes[2 * row + 1]
        top.plot(loop.time, loop.reference, color=SERIES[1], drawstyle="steps-post", label="reference")
        top.plot(loop.time, loop.output, color=SERIES[0], label="measurement")
        top.set_ylabel(f"{loop.name}")
        top.legend(loc="lower right", fontsize="small")
        bottom.plot(loop.time, loop.control, color=SERIES[2], drawstyle="steps-post", label="controller output")
        for limit in loop.limits:
            bottom.axhline(limit, color=LIMIT, linestyle="--", linewidth=0.8)
        bottom.set_ylabel(f"{loop.name} output")
        bottom.legend(loc="lower right", fontsize="small")
    axes[-1].set_xlabel("time [s]")
    figure.suptitle(f"cascade run ({run.number_format}): reference step at 0 s, load step at "
                    f"{run.scenario.load_time:.3g} s")
    return png_bytes(figure)
