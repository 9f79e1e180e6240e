"""``spread.png``: the tolerance study's violation fraction over the grid.

Drawing only (numbers from :class:`gainloom.design.spread.SpreadResult`), in
the look of :mod:`gainloom.report.plots`: the fraction of draws violating
any spec against the first scheduling variable, one line per value of the
second on a 2-D grid, each point with its confidence interval as an error
bar.  Written through :func:`gainloom.outputs.write_outputs`.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np

from ..look import SERIES, new_figure, png_bytes
from ..outputs import write_outputs
from .plots import axis_label, grid_lines

__all__ = ["plot_spread", "write_spread_plot", "SPREAD_PLOT"]

#: File name of the plot.
SPREAD_PLOT = "spread.png"


def plot_spread(result: Any) -> bytes:
    """Violation fraction (any spec, percent) with its interval, over the grid.

    Parameters
    ----------
    result : SpreadResult
        Its ``table`` supplies the axes (names, units, values).
    """
    table = result.table
    shape = tuple(a.values.size for a in table.axes)
    low, high = result.any_interval()
    grids = {k: 100.0 * np.asarray(v).reshape(shape) for k, v in
             (("fraction", result.any_fraction), ("low", low), ("high", high))}
    figure = new_figure((8.0, 4.4))
    ax = figure.add_subplot(1, 1, 1)
    for n, (label, x, y, flat) in enumerate(grid_lines(table, grids["fraction"])):
        below = y - grids["low"].ravel()[flat]
        above = grids["high"].ravel()[flat] - y
        ax.errorbar(x, y, yerr=[below, above], marker="o", ms=3.5, lw=1.4, capsize=3,
                    color=SERIES[n % len(SERIES)], label=label)
    ax.set_xlabel(axis_label(table.axes[0]), fontsize=8.5)
    ax.set_ylabel("draws violating a spec [%]", fontsize=8.5)
    ax.set_ylim(bottom=0)
    ax.grid(True, color="#e4e4e4", lw=0.6)
    ax.tick_params(labelsize=8)
    if len(table.axes) > 1:
        ax.legend(fontsize=8, frameon=False)
    level = f"{100 * result.confidence:g} %"
    figure.suptitle(f"Tolerance study: {result.draws} {result.distribution} draws per point, seed {result.seed}; "
                    f"bars: {level} Clopper-Pearson interval", fontsize=10, x=0.01, ha="left")
    figure.subplots_adjust(left=0.1, right=0.98, top=0.9, bottom=0.13)
    return png_bytes(figure)


def write_spread_plot(result: Any, folder: str | os.PathLike, *, force: bool = False) -> list[Path]:
    """Draw the study and write ``spread.png`` into ``folder`` (never over a
    file gainloom did not write, unless ``force``)."""
    return write_outputs(folder, {SPREAD_PLOT: plot_spread(result)}, force=force)
