"""Plain Python data from numpy results, for JSON, YAML and logs.

One converter for every layer, so a number looks the same in the gains file,
the verification log and ``--json`` output.  Formats differ only in how they
write non-finite floats, which strict JSON cannot hold.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Literal

import numpy as np

__all__ = ["to_plain"]

NonFinite = Literal["keep", "null", "text"]


def to_plain(value: Any, nonfinite: NonFinite = "null") -> Any:
    """Convert numpy scalars/arrays, tuples, complex numbers and paths to plain Python.

    Parameters
    ----------
    value : any
        Nested dicts, lists, tuples, arrays and scalars.
    nonfinite : {"null", "text", "keep"}
        How to write NaN and infinities: ``None`` (strict JSON where a missing
        value is meant), the strings ``"nan"``/``"inf"``/``"-inf"`` (strict
        JSON that reads back as floats), or unchanged floats (YAML).

    Returns
    -------
    any
        Dicts (string keys), lists, bool, int, float, str or None.  Complex
        numbers become ``[re, im]``.
    """
    if isinstance(value, dict):
        return {str(k): to_plain(v, nonfinite) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_plain(v, nonfinite) for v in value]
    if isinstance(value, np.ndarray):
        return to_plain(value.tolist(), nonfinite)
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        if math.isfinite(value) or nonfinite == "keep":
            return value
        if nonfinite == "null":
            return None
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, (complex, np.complexfloating)):
        return [to_plain(value.real, nonfinite), to_plain(value.imag, nonfinite)]
    if isinstance(value, Path):
        return str(value)
    return value
