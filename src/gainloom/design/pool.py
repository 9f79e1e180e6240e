"""Run work units on local processes: the shared context once per process,
each unit as plain arrays.

The context (schedule, structure, ...) reaches a forked worker by
inheritance, not by pickling; only the units and their results travel, so
a distributed engine can take the same units.  Results come back in unit
order whatever the number of workers.  With a scheduler address the same
units run on a Dask cluster instead (:mod:`gainloom.design.cluster`).
"""

from __future__ import annotations

import multiprocessing
from collections.abc import Callable, Sequence
from typing import Any

__all__ = ["map_units"]

#: The worker's (function, context), set once per forked process.
_WORKER: tuple[Callable[..., Any], tuple[Any, ...]] | None = None


def _start_worker(function: Callable[..., Any], context: tuple[Any, ...]) -> None:
    global _WORKER
    _WORKER = (function, context)


def _run_one(unit: Any) -> Any:
    if _WORKER is None:
        raise RuntimeError("pool worker started without its context")
    function, context = _WORKER
    return function(*context, unit)


def map_units(function: Callable[..., Any], context: tuple[Any, ...], units: Sequence[Any], workers: int,
              progress: Callable[[str, int, int], None] | None = None, total: int | None = None,
              stage: str = "tolerance study", cluster: str | None = None,
              notes: list[str] | None = None) -> list[Any]:
    """``[function(*context, unit) for unit in units]``, on ``workers`` forked processes or a Dask cluster.

    Parameters
    ----------
    function : callable
        Module-level function (picklable by name).
    context : tuple
        Leading arguments shared by every unit.
    units : sequence
        Work units (plain data: pickled to the workers).
    workers : int
        Processes; 1 (or no ``fork`` on this system) runs in this process.
        Ignored on a cluster.
    progress : callable, optional
        ``progress(stage, done, total)``; ``done`` adds each unit's ``draws.sum()``
        when the result has one, else 1.
    total : int, optional
        Total reported to progress (default: the number of units).
    stage : str
        Stage name for progress.
    cluster : str, optional
        Address of a Dask scheduler (:mod:`gainloom.design.cluster`); the
        results are the same as on local processes.
    notes : list of str, optional
        Receives what the engine reports (workers lost and units rerun).

    Returns
    -------
    list
        Results in unit order, whatever the order they finished in.
    """
    done = 0
    total = len(units) if total is None else total
    results: list[Any] = [None] * len(units)

    def record(index: int, result: Any) -> None:
        nonlocal done
        results[index] = result
        draws = getattr(result, "draws", None)
        done += int(draws.sum()) if draws is not None else 1
        if progress is not None:
            progress(stage, done, total)

    if progress is not None:
        progress(stage, 0, total)
    if cluster is not None:
        from .cluster import run_on_cluster

        run_on_cluster(function, context, units, cluster, record, notes)
        return results
    if workers > 1 and len(units) > 1 and "fork" in multiprocessing.get_all_start_methods():
        from concurrent.futures import ProcessPoolExecutor

        context_fork = multiprocessing.get_context("fork")
        with ProcessPoolExecutor(max_workers=min(workers, len(units)), mp_context=context_fork,
                                 initializer=_start_worker, initargs=(function, context)) as pool:
            for index, result in enumerate(pool.map(_run_one, units)):
                record(index, result)
        return results
    for index, unit in enumerate(units):
        record(index, function(*context, unit))
    return results
