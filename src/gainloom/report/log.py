"""Write the verification log: ``verification.json``, ``verification.md`` and PNG plots.

Everything is rendered in memory first and then written in one go through
:func:`gainloom.outputs.write_outputs` (atomic, with a manifest, never over
files gainloom did not write).  Same inputs give byte-identical files: keys
sorted, floats as shortest round-trip decimals, no timestamp unless asked
for, PNGs without software or date metadata.
"""

from __future__ import annotations

import datetime
import json
import os
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputError
from ..outputs import write_outputs
from .document import verification_document
from .markdown import render_markdown

__all__ = ["write_verification", "render_verification", "JSON_NAME", "MARKDOWN_NAME"]

#: File names of the two log files.
JSON_NAME = "verification.json"
MARKDOWN_NAME = "verification.md"


def _open_loop(schedule: Any, result: Any, table: Any):
    """The sampled open loop ``L = C P`` of the logged table at the result's points."""
    from ..design.engine import sampled_plant
    from ..design.structures import open_loop

    points = np.asarray(result.points, dtype=float)
    plant = sampled_plant(schedule, points)
    coefficients = {k: np.asarray(v, float).ravel() for k, v in table.coefficients.items()}
    return open_loop(plant, table.structure, coefficients)


def _filter_loop(schedule: Any, result: Any, loop: Any):
    """The filter cascade ``F`` per point and the sections' centres (rad/s), or ``None`` without filters."""
    from ..lti.loop import Loop

    values = schedule.filters_at(np.asarray(result.points, dtype=float))
    if values is None:
        return None
    num, den = values.discrete(loop.ts)
    return Loop(num=num, den=den, ts=loop.ts), np.stack([v["frequency"] for v in values.values])


#: File name of the simulation figure in the log folder.
_SIMULATION_PLOT = "simulation.png"
#: The measured plant's data and fit (schedules with plant.measured).
MEASURED_PLOT = "measured.png"


def _simulation_png(simulation: Any) -> bytes:
    """The simulation layer's figure of a run, as PNG bytes."""
    from ..simulation.plots import PLOT_FILE, render_plots

    return render_plots(simulation)[PLOT_FILE]


def render_verification(
    *,
    schedule: Any,
    result: Any,
    table: Any,
    gains_path: str | Path | None = None,
    harness: Any = None,
    quantisation: Any = None,
    simulation: Any = None,
    options: dict[str, Any] | None = None,
    plots: bool = True,
    timestamp: bool = False,
    target: Any = None,
) -> dict[str, str | bytes]:
    """Render every file of the log without writing it.

    Parameters are those of :func:`write_verification` (less ``out_dir`` and
    ``force``).

    Returns
    -------
    dict of str to str or bytes
        File name to content (text for JSON and Markdown, bytes for PNG).
    """
    from ..schedule import Schedule, load_schedule
    from . import plots as drawing
    from .frequency_plot import plot_frequency

    sched = schedule if isinstance(schedule, Schedule) else load_schedule(schedule)
    if int(np.prod(table.shape)) != len(result.points):
        raise InputError(
            f"the table has {int(np.prod(table.shape))} points (shape {table.shape}) but the result analysed "
            f"{len(result.points)}; pass the result's own table"
        )
    images: dict[str, bytes] = {}
    stamp = None
    if timestamp:
        stamp = datetime.datetime.now(datetime.UTC).replace(microsecond=0).isoformat()
    # The document is built twice only in name: plots need the per-point
    # entries, the document needs the plot names.
    names: list[str] = []
    if plots:
        names = ["gains.png", "margins.png", "step.png", "frequency.png"]
        if sched.family.plant.measured is not None:
            names.append(MEASURED_PLOT)
    draft = verification_document(schedule=sched, result=result, table=table, gains_path=gains_path,
                                  harness=harness, quantisation=quantisation, simulation=simulation,
                                  options=options, plots=names, timestamp=stamp, target=target)
    if plots:
        points = draft["points"]
        loop = _open_loop(sched, result, table)
        chosen = drawing.chosen_points(points)
        images["gains.png"] = drawing.plot_gains(table, tuple(result.status))
        images["margins.png"] = drawing.plot_margins(table, points)
        images["step.png"] = drawing.plot_steps(loop, chosen, points)
        images["frequency.png"] = plot_frequency(loop, chosen, points, _filter_loop(sched, result, loop))
        if sched.family.plant.measured is not None:
            images[MEASURED_PLOT] = _measured_png(sched, result)
        for index, role in chosen:
            name = f"locus_{index}.png"
            images[name] = drawing.plot_locus_point(loop, index, points[index], role)
            names.append(name)
        if simulation is not None:
            images[_SIMULATION_PLOT] = _simulation_png(simulation)
            names.append(_SIMULATION_PLOT)
        draft["plots"] = list(names)
    text = json.dumps(draft, indent=2, sort_keys=True, ensure_ascii=False, allow_nan=False) + "\n"
    files: dict[str, str | bytes] = {JSON_NAME: text, MARKDOWN_NAME: render_markdown(draft)}
    files.update(images)
    return files


def _measured_png(sched, result) -> bytes:
    """The measured plant's data and fit, with the data-judged crossover where the result has one."""
    from .measured_plot import plot_measured

    check = getattr(result, "data_check", None)
    crossover = None if check is None else check.margins.gain_crossover
    return plot_measured(sched.family.plant.measured, tuple(sched.describe_point(p) for p in sched.points),
                         crossover)


def write_verification(
    out_dir: str | os.PathLike,
    *,
    schedule: Any,
    result: Any,
    table: Any,
    gains_path: str | Path | None = None,
    harness: Any = None,
    quantisation: Any = None,
    simulation: Any = None,
    options: dict[str, Any] | None = None,
    plots: bool = True,
    timestamp: bool = False,
    force: bool = False,
    target: Any = None,
) -> list[Path]:
    """Write the verification log of a gain table into ``out_dir``.

    Parameters
    ----------
    out_dir : path
        Output folder (created if missing).
    schedule : Schedule or str or Path
        The schedule the table was designed for; its file is hashed.
    result : DesignResult or VerifyResult
        ``gainloom.design_table(schedule)`` or ``gainloom.verify(schedule, gains)``.
    table : GainTable
        The table logged (normally ``result.table``).
    gains_path : path, optional
        The gains file holding ``table`` (hashed; recorded by name).
    harness : HarnessResult, optional
        ``gainloom.check_generated_c(...)`` of the emitted C.
    quantisation : QuantisationResult, optional
        ``gainloom.codegen.quantisation.check_quantisation(...)``.
    simulation : SimulationResult, optional
        ``gainloom.simulation.run_scenario(...)``.
    options : dict, optional
        The run's options (number format, full-scale values, prefix, ...),
        recorded as given.
    plots : bool
        Write the PNG plots (default).
    timestamp : bool
        Add the UTC time of writing (off by default: the log is then
        byte-identical for the same inputs).
    force : bool
        Overwrite files in ``out_dir`` that gainloom did not write.
    target : TargetResult, optional
        ``gainloom.codegen.target.check_target(...)`` of the emitted C.

    Returns
    -------
    list of Path
        ``verification.json``, ``verification.md`` and the PNGs, in that order.

    Raises
    ------
    OutputConflictError
        A file in the way that gainloom did not write (see ``force``).
    """
    files = render_verification(schedule=schedule, result=result, table=table, gains_path=gains_path,
                                harness=harness, quantisation=quantisation, simulation=simulation,
                                options=options, plots=plots, timestamp=timestamp, target=target)
    return write_outputs(out_dir, files, force=force)
