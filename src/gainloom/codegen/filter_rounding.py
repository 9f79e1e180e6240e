"""Filter sections after rounding: pole and zero radius and frequency, as stored.

The loop re-check of :mod:`.quantisation` rounds the controller
coefficients; the filter sections need a check of their own, because the
rounding of ``a1, a2`` moves a section's poles, and a pole pair close to the
unit circle (a low-pass far below Nyquist, a narrow notch) can be pushed
onto or outside it.  Per section and grid point the designed and the stored
coefficients give, for the poles ``z^2 + a1 z + a2`` and the zeros
``b0 z^2 + b1 z + b2``:

- radius ``|z|`` of the pair;
- frequency: for the poles the equivalent continuous natural frequency
  ``|ln z| / ts``; for the zeros the angle ``arg z / ts``, the notch's
  deepest frequency (rad/s).

A stored pole with ``|z| >= 1`` is a failure.  A notch whose stored centre
(zero angle) moved by more than :data:`CENTRE_TOLERANCE` relative to the
designed one is a warning, as is a low-pass whose pole frequency moved by
that much.  Only grid points are checked, which is enough for stability:
the stable second-order denominators form the open triangle ``|a2| < 1``,
``|a1| < 1 + a2`` (Jury's conditions for a second-order polynomial), which
is convex, so coefficients interpolated linearly (or bilinearly) between
stored stable ones stay stable.  The fixed-point lookup rounds each
interpolation by at most one LSB, which the reported least distance to the
triangle's edge (``stability_margin``, in units of the coefficients) lets a
reviewer compare with the format's resolution.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..design.table import GainTable, filter_coefficient_name
from .layout import TableLayout

__all__ = ["CENTRE_TOLERANCE", "SectionRounding", "check_filter_rounding"]

#: Relative move of a notch centre (or a low-pass pole frequency) by rounding
#: beyond which the log warns (common practice, no source: a notch of the
#: default width, +-20 % around its centre, still attenuates by nearly the
#: full depth at 1 % off).
CENTRE_TOLERANCE = 0.01


def _pair(c2: np.ndarray, c1: np.ndarray, c0: np.ndarray) -> np.ndarray:
    """The root with non-negative imaginary part (the larger one when real) of ``c2 z^2 + c1 z + c0``."""
    disc = (c1 * c1 - 4.0 * c2 * c0).astype(complex)
    root = np.sqrt(disc)
    first, second = (-c1 + root) / (2.0 * c2), (-c1 - root) / (2.0 * c2)
    return np.where(np.abs(first) >= np.abs(second), first, second)


def _stability_margin(a1: np.ndarray, a2: np.ndarray) -> np.ndarray:
    """Least distance of ``(a1, a2)`` inside the triangle ``|a2| < 1, |a1| < 1 + a2`` (negative outside)."""
    return np.minimum.reduce([1.0 - a2, 1.0 + a2 - a1, 1.0 + a2 + a1])


@dataclass(frozen=True)
class SectionRounding:
    """One filter section before and after rounding, worst over the grid.

    Attributes
    ----------
    section : int
        1-based position in the cascade (``f<n>_`` in the C).
    kind : str
        ``notch`` or ``low_pass``.
    pole_radius : tuple of float
        Largest pole radius designed and stored.
    zero_radius : tuple of float
        Largest zero radius designed and stored.
    pole_frequency_change, zero_frequency_change : float
        Largest relative change of the pole natural frequency and of the
        zero angle frequency (rad/s).
    stability_margin : float
        Least distance of the stored ``(a1, a2)`` inside the stability triangle.
    failures, warnings : tuple of str
        What the module docstring says fails or warns, with the point.
    """

    section: int
    kind: str
    pole_radius: tuple[float, float]
    zero_radius: tuple[float, float]
    pole_frequency_change: float
    zero_frequency_change: float
    stability_margin: float
    failures: tuple[str, ...]
    warnings: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """Plain data for the verification log."""
        return {
            "section": self.section,
            "kind": self.kind,
            "pole_radius": {"designed": self.pole_radius[0], "stored": self.pole_radius[1]},
            "zero_radius": {"designed": self.zero_radius[0], "stored": self.zero_radius[1]},
            "pole_frequency_change": self.pole_frequency_change,
            "zero_frequency_change": self.zero_frequency_change,
            "stability_margin": self.stability_margin,
            "failures": list(self.failures),
            "warnings": list(self.warnings),
        }


def _relative(before: np.ndarray, after: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(before > 0, np.abs(after - before) / before, 0.0)


def _section(number: int, kind: str, designed: dict[str, np.ndarray], stored: dict[str, np.ndarray],
             ts: np.ndarray, labels: list[str]) -> SectionRounding:
    poles = [_pair(np.ones_like(c["a1"]), c["a1"], c["a2"]) for c in (designed, stored)]
    zeros = [_pair(c["b0"], c["b1"], c["b2"]) for c in (designed, stored)]
    pole_freq = [np.abs(np.log(p)) / ts for p in poles]
    zero_freq = [np.abs(np.angle(z)) / ts for z in zeros]
    pole_move, zero_move = _relative(*pole_freq), _relative(*zero_freq)
    radius = np.abs(poles[1])
    failures = tuple(f"filters[{number - 1}] {kind}: a pole pair at |z| = {radius[p]:.9g} after rounding "
                     f"(designed {np.abs(poles[0][p]):.9g}) at {labels[p]}" for p in np.flatnonzero(radius >= 1.0))
    centre, move = ("centre", zero_move) if kind == "notch" else ("pole frequency", pole_move)
    before = zero_freq[0] if kind == "notch" else pole_freq[0]
    after = zero_freq[1] if kind == "notch" else pole_freq[1]
    warnings = tuple(f"filters[{number - 1}] {kind}: rounding moves the {centre} from {before[p]:.6g} to "
                     f"{after[p]:.6g} rad/s ({100 * move[p]:.3g} %, more than {100 * CENTRE_TOLERANCE:g} %) "
                     f"at {labels[p]}" for p in np.flatnonzero(move > CENTRE_TOLERANCE))
    return SectionRounding(
        section=number, kind=kind,
        pole_radius=(float(np.max(np.abs(poles[0]))), float(np.max(radius))),
        zero_radius=(float(np.max(np.abs(zeros[0]))), float(np.max(np.abs(zeros[1])))),
        pole_frequency_change=float(np.max(pole_move)), zero_frequency_change=float(np.max(zero_move)),
        stability_margin=float(np.min(_stability_margin(stored["a1"], stored["a2"]))),
        failures=failures, warnings=warnings,
    )


def check_filter_rounding(table: GainTable, layout: TableLayout, labels: list[str]) -> tuple[SectionRounding, ...]:
    """Each filter section of ``table`` against its stored coefficients in ``layout``.

    Parameters
    ----------
    table : GainTable
        The table as designed.
    layout : TableLayout
        The same table laid out in a number format.
    labels : list of str
        The grid points in words, grid order (first axis slowest).

    Returns
    -------
    tuple of SectionRounding
        One per section, in cascade order; empty without filters.
    """
    stored = {c.name: np.asarray(c.physical, dtype=float).ravel() for c in layout.filter_tables}
    ts = np.asarray(table.sample_period, dtype=float).ravel()
    out = []
    for i, section in enumerate(table.filters):
        designed = {name: grid.ravel() for name, grid in section.coefficients.items()}
        rounded = {name: stored[filter_coefficient_name(i, name)] for name in designed}
        out.append(_section(i + 1, section.kind, designed, rounded, ts, labels))
    return tuple(out)
