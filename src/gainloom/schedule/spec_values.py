"""Spec bounds per operating point, overrides resolved."""

from __future__ import annotations

import math

import numpy as np

from ..spec_registry import SPECS
from .model import SpecSection

__all__ = ["resolve_specs", "overshoot_to_damping", "SPEC_VALUE_KEYS"]

#: Keys of :meth:`Schedule.spec_values`: the registry's specs that a schedule states.
SPEC_VALUE_KEYS: tuple[str, ...] = tuple(spec.name for spec in SPECS if spec.scheduled)


def overshoot_to_damping(overshoot_percent: float | np.ndarray) -> np.ndarray:
    """Damping ratio of a standard second-order step response with this overshoot.

    Inverts ``Mp = exp(-pi zeta / sqrt(1 - zeta^2))``:
    ``zeta = -ln(Mp) / sqrt(pi^2 + ln(Mp)^2)`` with ``Mp`` the fraction.

    Parameters
    ----------
    overshoot_percent : float or ndarray
        Peak overshoot in percent, ``0 < Mp < 100``; NaN passes through.
    """
    with np.errstate(invalid="ignore"):
        log_mp = np.log(np.asarray(overshoot_percent, dtype=float) / 100.0)
        return -log_mp / np.sqrt(math.pi**2 + log_mp**2)


def _flat(section_values: dict) -> dict[str, float]:
    """Spec-section values (None = not required) as the flat spec_values keys."""
    out: dict[str, float] = {}
    for key, value in section_values.items():
        if key == "natural_frequency":
            low, high = (None, None) if value is None else value
            out["min_natural_frequency"] = math.nan if low is None else float(low)
            out["max_natural_frequency"] = math.nan if high is None else float(high)
        else:
            out[key] = math.nan if value is None else float(value)
    return out


def resolve_specs(specs: SpecSection, axis_names: tuple[str, ...], points: np.ndarray) -> dict[str, np.ndarray]:
    """Bounds at ``points`` (shape (Q, n_axes)); see :meth:`Schedule.spec_values`.

    Overrides apply in file order, a later override winning where regions
    overlap.  The damping implied by ``max_overshoot`` is combined with
    ``min_damping`` after overrides, keeping the stricter (larger) one.
    """
    points = np.asarray(points, dtype=float)
    if points.ndim == 1 and len(axis_names) == 1:
        points = points[:, np.newaxis]
    count = points.shape[0]
    base = _flat({key: getattr(specs, key) for key in (
        "min_damping", "max_overshoot", "max_settling_time", "natural_frequency", "max_pole_radius",
        "min_gain_margin", "min_phase_margin", "min_delay_margin", "max_sensitivity_peak", "system_type",
        "max_gain", "min_crossover", "max_crossover", "min_bandwidth",
    )})
    values = {key: np.full(count, base[key]) for key in SPEC_VALUE_KEYS}
    for override in specs.overrides:
        inside = np.ones(count, dtype=bool)
        for name, (low, high) in override.where.items():
            column = points[:, axis_names.index(name)]
            inside &= (column >= low) & (column <= high)
        for key, value in _flat(override.set).items():
            values[key][inside] = value
    from_overshoot = overshoot_to_damping(values["max_overshoot"])
    values["min_damping"] = np.fmax(values["min_damping"], from_overshoot)
    return values
