"""The one registry of specs: name, kind of bound, unit, plain label, better direction.

Every spec a point is judged on is one :class:`SpecInfo`, in report order
(:data:`SPEC_ORDER`).  The design's notes, the certificates of infeasible
points, the search's frequency checks, the gains file's per-point ``specs``
and the verification log and its plots read names, bounds, units and labels
from here, so a spec is added in one place (and its reader in
``schedule/sections.py``, its measurement in ``design/analysis.py``).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["SPECS", "SPEC_ORDER", "SpecInfo", "spec_info"]


@dataclass(frozen=True)
class SpecInfo:
    """One spec.

    Attributes
    ----------
    name : str
        The spec's name (the schedule key, except ``stable``, always judged,
        and ``min_decay``, implied by ``max_settling_time``).
    bound : str
        ``"min"``: the judged value must be at least the limit; ``"max"``: at
        most (``stable``: pole radius below 1).
    unit : str
        Unit of the judged value and the limit (``""``: dimensionless).
    label : str
        The judged quantity in plain words (notes, certificates).
    limit_key : str or None
        Field of :class:`~gainloom.design.spec_limits.SpecLimits` holding the
        limit per point; None for ``stable`` (its bound is fixed).
    scheduled : bool
        True when the schedule states its bound (a key of
        :meth:`Schedule.spec_values`); False for ``stable`` and ``min_decay``.
    """

    name: str
    bound: str
    unit: str
    label: str
    limit_key: str | None
    scheduled: bool

    @property
    def better(self) -> str:
        """``"higher"`` when a larger value is better (a lower bound), else ``"lower"``."""
        return "higher" if self.bound == "min" else "lower"

    @property
    def unit_suffix(self) -> str:
        """The unit as written after a number: ``" rad/s"``, or ``""`` when dimensionless."""
        return f" {self.unit}" if self.unit else ""

    @property
    def relation(self) -> str:
        """``">="`` for a lower bound, ``"<="`` for an upper one."""
        return ">=" if self.bound == "min" else "<="


def _spec(name: str, bound: str, unit: str, label: str) -> SpecInfo:
    return SpecInfo(name=name, bound=bound, unit=unit, label=label, limit_key=None if name == "stable" else name,
                    scheduled=name not in ("stable", "min_decay"))


#: Every spec a point is judged on, in report order.
SPECS: tuple[SpecInfo, ...] = (
    _spec("stable", "max", "", "pole radius"),
    _spec("min_damping", "min", "", "damping"),
    _spec("min_decay", "min", "1/s", "decay rate"),
    _spec("min_natural_frequency", "min", "rad/s", "dominant natural frequency"),
    _spec("max_natural_frequency", "max", "rad/s", "dominant natural frequency"),
    _spec("max_pole_radius", "max", "", "pole radius"),
    _spec("min_gain_margin", "min", "dB", "gain margin"),
    _spec("min_phase_margin", "min", "deg", "phase margin"),
    _spec("min_delay_margin", "min", "s", "delay margin"),
    _spec("max_sensitivity_peak", "max", "", "sensitivity peak"),
    _spec("min_crossover", "min", "rad/s", "gain crossover"),
    _spec("max_crossover", "max", "rad/s", "highest gain crossover"),
    _spec("min_bandwidth", "min", "rad/s", "closed-loop bandwidth"),
    _spec("max_gain", "max", "", "controller gain"),
    _spec("system_type", "min", "", "system type"),
    _spec("max_overshoot", "max", "%", "step overshoot"),
    _spec("max_settling_time", "max", "s", "2 % settling time"),
)

#: Spec names in report order.
SPEC_ORDER: tuple[str, ...] = tuple(spec.name for spec in SPECS)

_BY_NAME = {spec.name: spec for spec in SPECS}


def spec_info(name: str) -> SpecInfo:
    """The registry entry of spec ``name``.

    Raises
    ------
    KeyError
        ``name`` is not a spec (a bug: spec names come from this registry).
    """
    return _BY_NAME[name]
