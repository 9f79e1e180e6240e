"""Run work units on a Dask cluster (the optional ``cluster`` extra).

The same units as the local pool (:mod:`gainloom.design.pool`): the shared
context is sent once to every worker (``scatter(..., broadcast=True)``),
each unit is plain arrays or text, and each result comes back to this
process as soon as it is finished.  Dask reruns the units of a worker that
is lost (its own retries, ``distributed.scheduler.allowed-failures``); the
run notes which workers left, and the result does not change because a
unit's result does not depend on where it runs.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Callable, Sequence
from typing import Any

from ..errors import DesignError, InputError

__all__ = ["CLUSTER_ENVIRONMENT", "INSTALL_HINT", "cluster_address", "run_on_cluster"]

#: Environment variable naming the Dask scheduler when ``--cluster`` is not given.
CLUSTER_ENVIRONMENT = "GAINLOOM_CLUSTER"

#: What to install for ``--cluster``.
INSTALL_HINT = "pip install 'gainloom[cluster]' (Dask's distributed scheduler)"

#: Seconds to wait for the scheduler to answer and for its first worker.
CONNECT_TIMEOUT = 30


def cluster_address(option: str | None) -> str | None:
    """The scheduler address: ``option``, else ``GAINLOOM_CLUSTER``; None for the local pool."""
    address = option if option is not None else os.environ.get(CLUSTER_ENVIRONMENT)
    if address is None:
        return None
    address = address.strip()
    if not address:
        if option is not None:
            raise InputError("--cluster needs the address of a Dask scheduler, e.g. tcp://10.0.0.5:8786")
        return None
    return address


def _client(address: str):
    try:
        from distributed import Client
    except ImportError:
        raise InputError(f"running on the cluster {address} needs Dask: {INSTALL_HINT}") from None
    try:
        client = Client(address, timeout=f"{CONNECT_TIMEOUT}s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as error:
        raise InputError(f"cannot reach the Dask scheduler at {address}: {error}") from None
    try:
        client.wait_for_workers(1, timeout=CONNECT_TIMEOUT)
    except (TimeoutError, OSError):
        client.close()
        raise InputError(f"the Dask scheduler at {address} has no worker (waited {CONNECT_TIMEOUT} s); "
                         "start workers with: dask worker ADDRESS") from None
    return client


def _apply(function: Callable[..., Any], context: tuple[Any, ...], unit: Any) -> Any:
    return function(*context, unit)


def _workers(client) -> set[str]:
    return set(client.scheduler_info(n_workers=-1)["workers"])


def run_on_cluster(function: Callable[..., Any], context: tuple[Any, ...], units: Sequence[Any], address: str,
                   record: Callable[[int, Any], None], notes: list[str] | None = None) -> None:
    """Run ``function(*context, unit)`` for every unit on the Dask scheduler at ``address``.

    Parameters
    ----------
    function : callable
        Module-level function (workers import it by name: gainloom must be
        installed on them, the same version).
    context : tuple
        Sent once to every worker.
    units : sequence
        Plain-data work units.
    address : str
        Scheduler address (``tcp://host:8786``).
    record : callable
        ``record(index, result)`` as each unit finishes (any order).
    notes : list of str, optional
        Receives one line when workers left during the run.

    Raises
    ------
    InputError
        No Dask, no scheduler at ``address`` or no worker.
    DesignError
        A unit that Dask gave up on (it lost a worker each time it ran).
    """
    client = _client(address)  # first: says what to install when Dask is missing
    from distributed import KilledWorker, as_completed

    try:
        seen = _workers(client)
        [shared] = client.scatter([context], broadcast=True, hash=False)
        run = uuid.uuid4().hex[:12]
        futures = [client.submit(_apply, function, shared, unit, key=f"gainloom-unit-{run}-{i}", pure=False)
                   for i, unit in enumerate(units)]
        index = {future.key: i for i, future in enumerate(futures)}
        lost: set[str] = set()
        try:
            for future, result in as_completed(futures, loop=client.loop, with_results=True):
                record(index[future.key], result)
                now = _workers(client)
                lost |= seen - now
                seen |= now
            lost |= seen - _workers(client)
        except KilledWorker as error:
            raise DesignError(f"Dask gave up on a work unit that was running each time a worker died ({error}); "
                              "see the workers' logs (memory limit?)") from None
        if lost and notes is not None:
            notes.append(f"Dask: {len(lost)} worker(s) left during the run ({', '.join(sorted(lost))}); their work "
                         "units were run again on the others (Dask's retries); the result does not depend on "
                         "where a unit runs")
    finally:
        client.close()
