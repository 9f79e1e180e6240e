"""What the design says about the filter sections and the plant's resonance.

Per-point notes say where each automatic notch was placed and on which plant
pole pair; a warning per automatic notch gives the range it covers (the notch
follows the model, not the machine).  A point whose least-damped judged pole
comes from a resonance gets a note naming it, with what a notch can and
cannot do about it.
"""

from __future__ import annotations

import math

import numpy as np

from ..lti.filters import RESONANCE_DAMPING

__all__ = ["auto_notch_report", "resonance_note"]


def auto_notch_report(sched, points: np.ndarray) -> tuple[list[list[str]], list[str]]:
    """Notes per point and warnings for the ``notch: auto`` sections of a schedule.

    Parameters
    ----------
    sched : Schedule
    points : ndarray, shape (Q, n_axes)

    Returns
    -------
    notes : list of list of str
        One list per point (empty without automatic notches).
    warnings : list of str
        One per automatic notch.
    """
    notes: list[list[str]] = [[] for _ in range(np.asarray(points).shape[0])]
    values = sched.filters_at(points)
    if values is None:
        return notes, []
    warnings = []
    for index, (found, section) in enumerate(zip(values.resonance, values.values)):
        if found is None:
            continue
        frequency, damping = found
        for p in range(len(notes)):
            notes[p].append(
                f"notch auto (filters[{index}]) on the plant's least-damped pole pair: centre "
                f"{frequency[p]:.6g} rad/s ({frequency[p] / (2 * math.pi):.4g} Hz), plant damping {damping[p]:.3g}; "
                f"depth {section['depth'][p]:.3g} dB, width {section['width'][p]:.6g} rad/s"
            )
        warnings.append(
            f"controller.filters[{index}] notch auto: placed at every point on the plant model's least-damped pole "
            f"pair (damping below {RESONANCE_DAMPING:g}), {_hz(frequency.min())} to {_hz(frequency.max())} "
            f"(damping {damping.min():.3g} to {damping.max():.3g}); it follows the model, not the machine: measure "
            "the resonance on the hardware before flashing"
        )
    return notes, warnings


def resonance_note(analysis, p: int) -> str | None:
    """A note when point ``p``'s least-damped judged pole starts at a plant resonance, else ``None``."""
    if analysis.damping_pole_origin[p] != "resonance":
        return None
    start = complex(analysis.damping_pole_start_z[p])
    s = np.log(start) / float(analysis.sample_period[p])
    return (
        f"the least-damped pole (damping {analysis.damping[p]:.3g}) comes from the plant's resonance at "
        f"{abs(s):.6g} rad/s ({_hz(abs(s))}, open-loop damping {-s.real / abs(s):.3g}); a notch there "
        "(controller.filters) lowers the loop gain at the resonance but does not damp it"
    )


def _hz(w: float) -> str:
    return f"{w / (2 * math.pi):.4g} Hz"
