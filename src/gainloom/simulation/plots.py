"""Plots of one run: deterministic PNG files (matplotlib, Agg canvas).

Drawing is kept apart from the computation: nothing else in this package
imports matplotlib.  The figure has a fixed size and resolution, the
matplotlib default style (no user rc file leaks in) and no software or date
metadata, so the same result gives byte-identical files.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..outputs import write_outputs
from .result import SimulationResult

__all__ = ["PLOT_FILE", "render_plots", "write_plots"]

#: File name of the figure written by :func:`write_plots`.
PLOT_FILE = "simulation.png"

_SIZE_INCHES = (8.0, 10.0)


def render_plots(result: SimulationResult) -> dict[str, bytes]:
    """Draw the run as PNG bytes, by file name (:data:`PLOT_FILE`).

    Panels, sharing the time axis: reference and output; controller output
    with its limits (and the value before saturation); the scheduling
    variable(s); the interpolated coefficients.

    Parameters
    ----------
    result : SimulationResult
        The run to draw.

    Returns
    -------
    dict of str to bytes
        File name to PNG content.
    """
    import matplotlib.style
    from cycler import cycler

    from ..look import SERIES, new_figure, png_bytes

    t = result.time
    with matplotlib.style.context(["default", {"axes.prop_cycle": cycler(color=SERIES)}]):
        figure = new_figure(_SIZE_INCHES)
        axes = figure.subplots(4, 1, sharex=True)
        tracking, control, schedule, gains = axes

        tracking.plot(t, result.reference, drawstyle="steps-post", label="reference r")
        tracking.plot(t, result.output, drawstyle="steps-post", label="output y")
        tracking.set_ylabel("output")
        tracking.set_title(
            f"{result.structure} in {result.number_format}: "
            + ("PASS" if result.passed else "FAIL")
            + ("" if result.stable else f" (unstable: {result.metrics.instability.kind})")
        )

        low, high = result.output_limits
        control.plot(t, result.unsaturated, drawstyle="steps-post", color="0.6", label="before saturation")
        control.plot(t, result.control, drawstyle="steps-post", label="controller output u")
        # the limits the step used: tabulated or run-time ones move along the run
        limit_low, limit_high = result.limits_in_force
        for values, label in ((limit_low, "limits"), (limit_high, None)):
            control.plot(t, values, drawstyle="steps-post", color="k", linestyle="--", linewidth=0.8, label=label)
        low = float(np.min(limit_low[np.isfinite(limit_low)], initial=low))
        high = float(np.max(limit_high[np.isfinite(limit_high)], initial=high))
        if np.any(np.isfinite(result.feedforward) & (result.feedforward != 0)):
            control.plot(t, result.feedforward, drawstyle="steps-post", color="C2", linewidth=0.8, label="feedforward")
        span = high - low
        finite = result.unsaturated[np.isfinite(result.unsaturated)]
        top = min(float(np.max(finite, initial=high)), high + span)
        bottom = max(float(np.min(finite, initial=low)), low - span)
        control.set_ylim(min(bottom, low) - 0.05 * span, max(top, high) + 0.05 * span)
        control.set_ylabel("control")

        schedule.plot(t, result.points[:, 0], label=result.axis_names[0])
        schedule.set_ylabel(result.axis_names[0])
        if len(result.axis_names) > 1:
            # A second variable has its own range: its own scale on the right.
            second = schedule.twinx()
            second.plot(t, result.points[:, 1], color="C1", label=result.axis_names[1])
            second.set_ylabel(result.axis_names[1])
            second.legend(loc="lower right", fontsize="small")

        for name, values in result.gains.items():
            gains.plot(t, values, drawstyle="steps-post", label=name)
        gains.set_ylabel("coefficients")
        gains.set_xlabel("time (s)")

        for panel in axes:
            panel.grid(True, linewidth=0.4)
            panel.legend(loc="upper right", fontsize="small")
        figure.tight_layout()
        data = png_bytes(figure)
    return {PLOT_FILE: data}


def write_plots(result: SimulationResult, directory: str | os.PathLike, *, force: bool = False) -> list[Path]:
    """Draw the run and write it into ``directory`` through
    :func:`gainloom.outputs.write_outputs` (never over a file gainloom did not
    write, unless ``force``).

    Parameters
    ----------
    result : SimulationResult
        The run to draw.
    directory : path
        Folder to write into (created if missing).
    force : bool
        Overwrite a file of the same name that gainloom did not write.

    Returns
    -------
    list of Path
        The files written.
    """
    return write_outputs(directory, render_plots(result), force=force)
