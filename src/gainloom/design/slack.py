"""How close a measured spec value is to its bound: the one measure the
tolerance study (worst draw) and the family summary (tightest spec) share."""

from __future__ import annotations

import numpy as np

__all__ = ["spec_badness", "spec_limit", "tightest_specs"]

#: Specs left out of "tightest": met with zero slack by design (an integer
#: count, or the unit circle every stable loop is inside of).
_NOT_RANKED = ("stable", "system_type")


def spec_badness(name: str, value: np.ndarray, limit: np.ndarray) -> np.ndarray:
    """Distance on the wrong side of the bound (negative inside it); NaN values are worst.

    Parameters
    ----------
    name : str
        Spec name (``min_...`` and ``system_type`` are lower bounds).
    value, limit : ndarray
        Measured value and bound, same units.
    """
    lower_bound = name.startswith("min_") or name == "system_type"
    with np.errstate(invalid="ignore"):
        out = (limit - value) if lower_bound else (value - limit)
    return np.where(np.isnan(value), np.inf, out)


def spec_limit(limits, name: str) -> np.ndarray:
    """The bound judged for ``name`` (``stable``: pole radius 1)."""
    if name == "stable":
        return np.ones(limits.min_damping.shape)
    return getattr(limits, name)


def tightest_specs(analysis, specs: tuple[str, ...]) -> tuple[str | None, ...]:
    """Per point, the required spec with the least slack relative to its bound.

    Parameters
    ----------
    analysis : PointAnalysis
        ``values`` and ``limits`` per spec.
    specs : tuple of str
        Spec names to rank (``stable`` and ``system_type`` are skipped).

    Returns
    -------
    tuple of str or None
        ``None`` at a point where no ranked spec is required.
    """
    ranked = [s for s in specs if s not in _NOT_RANKED]
    if not ranked:
        return (None,) * analysis.gain.shape[0]
    columns = []
    for s in ranked:
        limit = np.asarray(spec_limit(analysis.limits, s), float)
        badness = spec_badness(s, np.asarray(analysis.values[s], float), limit)
        with np.errstate(invalid="ignore", divide="ignore"):
            relative = badness / np.abs(limit)
        columns.append(np.where(np.isnan(limit), -np.inf, np.nan_to_num(relative, nan=np.inf)))
    relative = np.stack(columns, axis=-1)  # -inf: not required at that point
    best = np.argmax(relative, axis=-1)
    return tuple(None if not np.isfinite(relative[p, b]) else ranked[b] for p, b in enumerate(best))
