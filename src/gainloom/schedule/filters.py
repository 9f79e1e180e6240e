"""``controller.filters``: read the filter sections and evaluate them per point.

A section's values are expressions of the scheduling variables and
parameters (a notch that follows a resonance moving with the load), checked
where they are evaluated: a bad value names the YAML node and the first
operating point where it goes wrong.  ``notch: auto`` places the notch on the
continuous plant's least-damped pole pair at every point (damping below
:data:`RESONANCE_DAMPING`), with :data:`AUTO_DEPTH_DB` and
:data:`AUTO_WIDTH_FRACTION` unless depth or width are written.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import names
from ..lti.filters import (
    RESONANCE_DAMPING,
    cascade,
    lightly_damped_pair,
    low_pass_continuous,
    notch_continuous,
    tustin_prewarped,
)
from .expressions import Expression, parse_expression
from .model import FilterSection
from .nodes import Node

__all__ = [
    "AUTO_DEPTH_DB",
    "AUTO_WIDTH_FRACTION",
    "MAX_DEPTH_DB",
    "RESONANCE_DAMPING",
    "FilterValues",
    "check_filter_names",
    "evaluate_filters",
    "read_filters",
]

#: Depth of an automatic notch, dB (common practice, no source).
AUTO_DEPTH_DB = 20.0

#: Width of an automatic notch as a fraction of its centre frequency: the
#: half-depth band spans +-20 % around the resonance, so a resonance that is
#: off by that much is still attenuated by half the depth (our choice).
AUTO_WIDTH_FRACTION = 0.4

#: Deepest notch accepted, dB: deeper ones put the zeros practically on the
#: unit circle, where coefficient rounding decides the depth.
MAX_DEPTH_DB = 60.0

#: Highest filter frequency accepted, as a fraction of Nyquist: near Nyquist
#: the Tustin map compresses the whole upper band into the section.
MAX_NYQUIST_FRACTION = 0.95


def read_filters(node: Node) -> tuple[FilterSection, ...]:
    """Read ``controller.filters``: a list of one-key mappings, or one mapping
    whose keys are sections in the order written (``{notch: auto}``)."""
    if node.is_mapping:
        entries = [(key, child) for key, child in node.mapping(names.FILTER_KINDS).items()]
    else:
        entries = []
        for item in node.sequence(min_length=1, what="filter sections"):
            keys = item.mapping(names.FILTER_KINDS)
            if len(keys) != 1:
                raise item.error(
                    f"each filter section is one mapping {{kind: settings}} with kind one of "
                    f"{', '.join(names.FILTER_KINDS)}; found {len(keys)} keys"
                )
            entries.append(next(iter(keys.items())))
    return tuple(_read_section(kind, child) for kind, child in entries)


def _is_auto(node: Node) -> bool:
    return node.is_scalar and node.scalar() == "auto"


def _read_section(kind: str, node: Node) -> FilterSection:
    allowed = names.FILTER_KEYS[kind]
    if _is_auto(node):
        if kind != "notch":
            raise node.error(f"'auto' places a notch on a resonance; a {kind} needs {{{', '.join(allowed)}}}")
        return FilterSection(kind=kind, values={}, auto=True, node=node)
    if not node.is_mapping:
        raise node.error(f"expected {{{', '.join(allowed)}}} for the {kind}" + (" or 'auto'" if kind == "notch" else "")
                         + f"; found {node.kind}")
    keys = node.mapping(allowed)
    auto = kind == "notch" and "frequency" in keys and _is_auto(keys["frequency"])
    required = () if auto else allowed
    missing = [key for key in required if key not in keys]
    if missing:
        raise node.error(f"missing required key {missing[0]!r} of the {kind} ({{{', '.join(allowed)}}})",
                         path=node.child_path(missing[0]))
    values = {
        key: parse_expression(child, f"{kind} {key}") for key, child in keys.items() if not (auto and key == "frequency")
    }
    return FilterSection(kind=kind, values=values, auto=auto, node=node)


def check_filter_names(sections: tuple[FilterSection, ...], known: dict[str, str], unavailable: dict[str, str]) -> None:
    """Refuse names in filter expressions that are not variables or parameters."""
    for section in sections:
        for expression in section.values.values():
            expression.check_names(known, unavailable)


@dataclass(frozen=True, eq=False)
class FilterValues:
    """Filter sections evaluated at points.

    Attributes
    ----------
    kinds : tuple of str
        One per section, in cascade order.
    values : tuple of dict of str to ndarray, shape (Q,)
        Per section: ``frequency`` (rad/s) and ``depth`` (dB), ``width``
        (rad/s) for a notch, ``damping`` for a low-pass.
    resonance : tuple of (ndarray, ndarray) or None
        For an automatic notch, the plant pair it sits on: natural frequency
        (rad/s) and damping per point; ``None`` for a written section.
    """

    kinds: tuple[str, ...]
    values: tuple[dict[str, np.ndarray], ...]
    resonance: tuple[tuple[np.ndarray, np.ndarray] | None, ...]

    def sections(self, ts: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
        """Each section in ``z``, Tustin-prewarped at its frequency: ``(num, den)`` of shape (Q, 3),
        ``den[:, 0] = 1`` (the table's ``b0, b1, b2`` and ``1, a1, a2``)."""
        ts = np.asarray(ts, dtype=float)
        sections = []
        for kind, values in zip(self.kinds, self.values):
            if kind == "notch":
                num, den = notch_continuous(values["frequency"], values["depth"], values["width"])
            else:
                num, den = low_pass_continuous(values["frequency"], values["damping"])
            sections.append(tustin_prewarped(num, den, values["frequency"], ts))
        return sections

    def discrete(self, ts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The cascade in ``z``: each section Tustin-prewarped at its frequency; shape (Q, 2 n + 1)."""
        ts = np.asarray(ts, dtype=float)
        return cascade(self.sections(ts), ts.shape[0])


def evaluate_filters(family, sections: tuple[FilterSection, ...], points: np.ndarray,
                     parameters: dict[str, np.ndarray], plant_den: np.ndarray, ts: np.ndarray) -> FilterValues:
    """Evaluate filter sections at ``points`` and check every value there.

    Parameters
    ----------
    family : Family
        The schedule's compiled family (for checked evaluation and point names).
    sections : tuple of FilterSection
    points : ndarray, shape (Q, n_axes)
    parameters : dict of str to ndarray, shape (Q,)
        Parameters at the points (nominal: the firmware's filter does not
        move with a tolerance).
    plant_den : ndarray, shape (Q, n + 1)
        Continuous plant denominators (``notch: auto`` looks for its resonance there).
    ts : ndarray, shape (Q,)
        Sample period, s.

    Raises
    ------
    ScheduleError
        At the section's node: a value that is not finite or out of range, a
        frequency at or above ``MAX_NYQUIST_FRACTION`` of Nyquist, or an
        automatic notch at a point whose plant has no resonance.
    """
    env = {axis.name: points[:, i] for i, axis in enumerate(family.axes)} | dict(parameters)
    kinds, values, resonance = [], [], []
    for section in sections:
        evaluated = {key: family._checked(expression, env, points, f"{section.kind} {key}", positive=True)
                     for key, expression in section.values.items()}
        found = None
        if section.auto:
            found = _resonance(family, section, points, plant_den)
            evaluated["frequency"] = found[0]
            evaluated.setdefault("depth", np.full(points.shape[0], AUTO_DEPTH_DB))
            evaluated.setdefault("width", AUTO_WIDTH_FRACTION * found[0])
        _check_ranges(family, section, evaluated, points, ts)
        kinds.append(section.kind)
        values.append(evaluated)
        resonance.append(found)
    return FilterValues(kinds=tuple(kinds), values=tuple(values), resonance=tuple(resonance))


def _resonance(family, section: FilterSection, points: np.ndarray, plant_den: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    frequency, damping = lightly_damped_pair(plant_den, RESONANCE_DAMPING)
    missing = ~np.isfinite(frequency)
    if np.any(missing):
        raise section.node.error(
            f"notch auto: the plant has no pole pair with damping below {RESONANCE_DAMPING:g} "
            f"{family._first_bad(missing, points)}; write the notch's frequency, depth and width"
        )
    return frequency, damping


def _check_ranges(family, section: FilterSection, values: dict[str, np.ndarray], points: np.ndarray,
                  ts: np.ndarray) -> None:
    def refuse(bad: np.ndarray, key: str, text: str) -> None:
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            expression = section.values.get(key)
            node = expression.node if isinstance(expression, Expression) else section.node
            raise node.error(f"{section.kind} {key} {text.format(value=values[key][index], ts=ts[index])} "
                             f"{family._first_bad(bad, points)}")

    nyquist = np.pi / ts
    refuse(values["frequency"] > MAX_NYQUIST_FRACTION * nyquist, "frequency",
           "{value:g} rad/s must be below " + f"{MAX_NYQUIST_FRACTION:g}" + " x Nyquist (pi/ts at ts = {ts:g} s)")
    if section.kind == "notch":
        refuse(values["depth"] > MAX_DEPTH_DB, "depth", "{value:g} dB is deeper than " + f"{MAX_DEPTH_DB:g} dB")
