"""Reading numbers and coefficient lists from command-line text (never eval)."""

from __future__ import annotations

import math
import re

import numpy as np

from ..errors import InputError

__all__ = ["parse_number", "parse_coefficients"]

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
