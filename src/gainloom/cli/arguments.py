"""Reading numbers and coefficient lists from command-line text (never eval),
and the options shared by the commands that run work units."""

from __future__ import annotations

import argparse
import math
import re
import sys

import numpy as np

from ..errors import InputError

__all__ = ["add_engine_arguments", "engine_options", "parse_coefficients", "parse_number", "print_notes"]

_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def parse_number(text: str, what: str) -> float:
    """Parse one finite number; ``what`` names the option in the message."""
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{what}: expected a number; got {text!r}") from None
    if not math.isfinite(value):
        raise InputError(f"{what}: expected a finite number; got {text!r}")
    return value


def parse_coefficients(text: str, what: str) -> np.ndarray:
    """Parse ``"1 2 3"``, ``"1, 2, 3"`` or ``"[1, 2, 3]"`` into finite floats.

    Parameters
    ----------
    text : str
        Coefficients in descending powers, separated by spaces or commas.
    what : str
        Option name for messages, e.g. ``"num"``.
    """
    body = text.strip()
    if body.startswith("[") and body.endswith("]"):
        body = body[1:-1]
    parts = [p for p in re.split(r"[\s,]+", body) if p]
    if not parts:
        raise InputError(f"--{what} is empty; expected coefficients in descending powers, e.g. \"1 3 2\"")
    bad = [p for p in parts if not _NUMBER.match(p)]
    if bad:
        raise InputError(
            f"--{what}: cannot read {bad[0]!r} as a number; expected coefficients in descending powers "
            "separated by spaces or commas, e.g. \"1 3 2\""
        )
    values = np.array([float(p) for p in parts])
    if not np.all(np.isfinite(values)):
        raise InputError(f"--{what}: coefficients must be finite numbers")
    return values


def add_engine_arguments(parser: argparse.ArgumentParser, what: str) -> None:
    """``--workers`` and ``--cluster``, shared by the commands that run work units."""
    from ..design.cluster import CLUSTER_ENVIRONMENT, INSTALL_HINT

    parser.add_argument("--workers", metavar="N", type=int, default=None,
                        help=f"local processes running the {what} (default GAINLOOM_WORKERS or the CPU count)")
    parser.add_argument("--cluster", metavar="ADDRESS", default=None,
                        help=f"run the {what} on the Dask scheduler at ADDRESS (e.g. tcp://10.0.0.5:8786; "
                        f"default {CLUSTER_ENVIRONMENT}); same results as a local run; needs {INSTALL_HINT}")


def print_notes(notes, stream=None) -> None:
    """What the engine reported (a lost worker, ...), one line each, on stderr."""
    for note in notes:
        print(f"note: {note}", file=stream or sys.stderr)


def engine_options(args: argparse.Namespace) -> dict:
    """``workers`` and ``cluster`` keyword arguments from ``--workers`` / ``--cluster`` (or ``GAINLOOM_CLUSTER``)."""
    from ..design.cluster import cluster_address

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be at least 1; got {args.workers}")
    return {"workers": args.workers, "cluster": cluster_address(args.cluster)}
