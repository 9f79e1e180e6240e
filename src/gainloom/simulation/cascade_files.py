"""A cascade run from files: the cascade file and its design folder.

:func:`simulate_cascade_files` is what ``gainloom simulate CASCADE --gains
DIR`` runs: it loads the cascade, reads each loop's ``<loop>.gains.yaml``
from the design folder (written by ``gainloom design CASCADE --out DIR``),
checks that each table belongs to its loop, takes the outer loop's time
scale from its gains file's per-point figures, and runs the cascade
(:func:`gainloom.simulation.cascade.run_cascade`).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..design.gainsfile import GainsMetadata, provenance_notes, read_gains
from ..errors import InputError, ScheduleError
from ..schedule.cascade import load_cascade
from .cascade import CascadeRun, run_cascade
from .cascade_scenario import cascade_scenario
from .defaults import time_scale_of

__all__ = ["CascadeSimulation", "gains_file_name", "simulate_cascade_files"]


def gains_file_name(loop_name: str) -> str:
    """Name of a loop's gains file in a cascade's design folder."""
    return f"{loop_name}.gains.yaml"


@dataclass(frozen=True, eq=False)
class CascadeSimulation:
    """What :func:`simulate_cascade_files` returns.

    Attributes
    ----------
    run : CascadeRun
    gains_files : tuple of str
        The gains files read, inner first.
    rate_factors : tuple of int
        Each loop's period in base (inner) periods, inner first.
    time_scale : float
        The outer loop's time scale ``T`` the defaults are built on, s.
    time_scale_basis : str
    notes : tuple of str
        What the gains files' own records, and the folder's log, say against
        using them as they are.
    """

    run: CascadeRun
    gains_files: tuple[str, ...]
    rate_factors: tuple[int, ...]
    time_scale: float
    time_scale_basis: str
    notes: tuple[str, ...]

    @property
    def passed(self) -> bool:
        """No loop shows divergence, growth or a saturated oscillation."""
        return self.run.stable

    def to_dict(self, series: bool = False) -> dict[str, Any]:
        """Plain data (strict-JSON-ready)."""
        return {"kind": "cascade", "passed": self.passed, **self.run.to_dict(series),
                "gains_files": list(self.gains_files), "rate_factors": list(self.rate_factors),
                "time_scale": {"seconds": self.time_scale, "basis": self.time_scale_basis},
                "notes": list(self.notes)}


def _check_table(table: Any, schedule: Any, loop_name: str, path: Path) -> None:
    """A gains file must hold a table of this loop: its variables, structure and sample period."""
    names = tuple(a.name for a in table.axes)
    if names != tuple(schedule.axis_names):
        raise ScheduleError(f"expected the scheduling variables of loop {loop_name!r} "
                            f"({', '.join(schedule.axis_names)}); found {', '.join(names)}",
                            file=str(path), key_path="axes")
    structure = schedule.controller.structure
    if table.structure != structure:
        raise ScheduleError(f"expected loop {loop_name!r}'s controller structure {structure!r}; "
                            f"found {table.structure!r}", file=str(path), key_path="structure")
    period = float(schedule.sampling.period[0])
    stored = table.sample_period
    if abs(float(stored.max()) - period) > 1e-9 * period or abs(float(stored.min()) - period) > 1e-9 * period:
        raise ScheduleError(f"expected loop {loop_name!r}'s sample period {period!r} s at every point; "
                            f"found {float(stored.min())!r} to {float(stored.max())!r} s",
                            file=str(path), key_path="sample_period")


def _read_loop_gains(folder: Path, loop: Any) -> tuple[Any, Any, Path]:
    path = folder / gains_file_name(loop.name)
    if not path.is_file():
        raise InputError(f"--gains {folder}: no {path.name} (the design folder of a cascade holds one gains "
                         f"file per loop, written by 'gainloom design CASCADE --out {folder}')")
    table, metadata = read_gains(path)
    _check_table(table, loop.schedule, loop.name, path)
    return table, metadata, path


def _outer_scale(table: Any, metadata: GainsMetadata) -> tuple[float, str]:
    points = [p for p in metadata.points or [] if isinstance(p, dict)]

    def figure(key: str) -> list[float]:
        return [float(p[key]) if isinstance(p.get(key), (int, float)) else float("nan") for p in points]

    return time_scale_of(figure("settling_time_s"), figure("decay"), table.sample_period)


#: Largest design log read for its verdict, bytes (the demo's is about 0.5 MB).
_MAX_LOG_BYTES = 64 * 1024 * 1024


def _log_notes(folder: Path, sha256: str) -> list[str]:
    """What the design folder's log says against the run: a cascade that failed its checks.

    The gains files record each loop's own design; the cascade checks
    (bandwidth separation, outer specs with the inner loop in place) are
    only in the folder's ``verification.json``.  A missing or unreadable log
    gives no note: the gains files are what the run uses.
    """
    import json

    from ..inputs import read_input_file

    path = folder / "verification.json"
    if not path.is_file():
        return []
    try:
        doc = json.loads(read_input_file(path, "design log", _MAX_LOG_BYTES))
        info = doc["cascade"]
        recorded, passed = info["sha256"], info["passed"]
    except (ValueError, KeyError, TypeError, OSError):
        return []
    if recorded != sha256:
        return [f"{path.name}: the design folder's log is of a different version of this cascade file"]
    if passed is False:
        return [f"{path.name}: the design folder's log records a cascade that did NOT pass its checks "
                "(verification.md says why)"]
    return []


def simulate_cascade_files(
    cascade_path: str | os.PathLike,
    gains_folder: str | os.PathLike,
    *,
    number_format: str | None = None,
    duration: float | None = None,
    reference_step: float | None = None,
    load: tuple[float, float] | None = None,
    point: dict[str, float] | None = None,
) -> CascadeSimulation:
    """Run a designed cascade from its file and its design folder (module docstring).

    Parameters
    ----------
    cascade_path : path
        The cascade file (docs/cascade.md).
    gains_folder : path
        Its design folder, holding ``<loop>.gains.yaml`` for every loop.
    number_format : str, optional
        Controller arithmetic; default the cascade's ``codegen.format``.
    duration, reference_step, load, point : optional
        As :func:`gainloom.simulation.cascade_scenario.cascade_scenario`.

    Returns
    -------
    CascadeSimulation

    Raises
    ------
    ScheduleError
        A bad cascade file, or a gains file that is malformed or belongs to
        another loop (file, line and key named).
    InputError
        No design folder, a missing gains file, or a bad scenario value.
    """
    cascade = load_cascade(Path(cascade_path))
    folder = Path(gains_folder)
    if not folder.is_dir():
        raise InputError(f"--gains {folder}: a cascade needs its design folder (holding "
                         f"{', '.join(gains_file_name(lp.name) for lp in cascade.loops)}); "
                         f"{'found a file' if folder.exists() else 'no such folder'}")
    read = [_read_loop_gains(folder, loop) for loop in cascade.loops]
    schedules = (cascade.loops[0].schedule, cascade.loops[1].schedule)
    tables = tuple(table for table, _m, _p in read)
    scale, basis = _outer_scale(tables[1], read[1][1])
    scenario = cascade_scenario(schedules, cascade.loops[1].inner_at, tables[1].limit_envelope, scale,
                                duration=duration, reference_step=reference_step, load=load, point=point)
    run = run_cascade(cascade, schedules, tables, scenario, number_format or cascade.codegen.format)
    notes = tuple([f"{path.name}: {note}" for _t, metadata, path in read
                   for note in provenance_notes(metadata, cascade.sha256)] + _log_notes(folder, cascade.sha256))
    return CascadeSimulation(run=run, gains_files=tuple(str(p) for _t, _m, p in read),
                             rate_factors=tuple(loop.rate_factor for loop in cascade.loops), time_scale=scale,
                             time_scale_basis=basis, notes=notes)
