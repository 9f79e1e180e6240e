"""Time-domain specs of a measured plant: what the fitted model may be trusted for.

A frequency response holds no poles and no step response, so damping,
decay, natural frequency, pole radius, overshoot and settling can only be
judged on the model fitted to the data.  How far to trust that judgement is
what the data can say, so each point's time-domain verdict on the model is
kept only where the data back it (our decisions, documented in
docs/schedule-format.md, measured):

* **overshoot**: the data bound how far the true step can be from the
  model's (:func:`gainloom.lti.data_margins.step_deviation_bound`, a
  fraction of the step, over the measured band); the model's overshoot plus
  that bound must meet ``max_overshoot``;
* **settling**: the model's settling time stands only when that bound is
  below the settling band (2 %): otherwise the data allow the true step to
  sit outside the band where the model's has settled;
* **poles** (``min_damping``, ``min_decay``, natural frequency, pole radius):
  judged on the model only where the model meets its fit tolerance within
  an octave of the crossover (rms relative error), the band the closed loop's
  dominant poles come from; elsewhere they are not trusted and the point
  fails.
"""

from __future__ import annotations

import numpy as np

from .analysis import SETTLING_BAND
from .spec_limits import SpecLimits

__all__ = ["POLE_SPECS", "time_domain_findings"]

#: Specs judged on the closed-loop poles of the model.
POLE_SPECS = ("min_damping", "min_decay", "min_natural_frequency", "max_natural_frequency", "max_pole_radius")


def time_domain_findings(limits: SpecLimits, step_bound: np.ndarray, band_rms: np.ndarray, tolerance: float,
                         overshoot: np.ndarray | None, settling: np.ndarray | None) -> tuple[tuple[str, ...], ...]:
    """Per point, the time-domain specs the data do not back (see the module docstring).

    Parameters
    ----------
    limits : SpecLimits
        Specs at the measured points.
    step_bound : ndarray, shape (P,)
        Largest step-response difference the data allow, fraction of the step.
    band_rms : ndarray, shape (P,)
        rms relative fit error within an octave of the crossover (``nan``
        without a crossover).
    tolerance : float
        The fit tolerance (``plant.measured.fit.tolerance``).
    overshoot, settling : ndarray (P,) or None
        The model's step overshoot (percent) and settling time (s); ``None``
        when they were not computed (then only the pole specs are judged).

    Returns
    -------
    tuple of tuple of str
    """
    out = []
    for p in range(step_bound.size):
        found = []
        bound = 100 * step_bound[p]
        limit = limits.max_overshoot[p]
        if overshoot is not None and np.isfinite(limit) and not overshoot[p] + bound <= limit:
            found.append(f"max_overshoot with the data: {overshoot[p]:.3g} % on the model plus up to {bound:.2g} % "
                         f"that the data allow is above {limit:.4g} %")
        if settling is not None and np.isfinite(limits.max_settling_time[p]) and not bound < 100 * SETTLING_BAND:
            found.append(f"max_settling_time not judged on the data: they allow the step to differ from the model's "
                         f"by up to {bound:.2g} %, not less than the {100 * SETTLING_BAND:g} % settling band")
        asked = [name for name in POLE_SPECS if np.isfinite(getattr(limits, name)[p])]
        if asked and not band_rms[p] <= tolerance:
            missed = (f"misses the data by {100 * band_rms[p]:.3g} % rms within an octave of the crossover"
                      if np.isfinite(band_rms[p]) else "cannot be compared with the data near a crossover (none in them)")
            found.append(f"{', '.join(asked)} not trusted: judged on a model that {missed} (fit tolerance "
                         f"{100 * tolerance:g} %)")
        out.append(tuple(found))
    return tuple(out)
