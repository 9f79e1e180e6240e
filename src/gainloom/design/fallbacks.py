"""Per-point warnings wherever a point's choice is not what was asked for.

A design is silent only when each point holds the gain its objective or
target asked for.  Every other outcome is a *warning* on the point (data
on :class:`gainloom.design.results.DesignResult`, shown in the CLI table
as a marker, in verification.md "Warnings" and in the JSON), naming the
spec or target and the shortfall:

* the strategy's own gain (the dominant-pair magnitude condition, a tuning
  rule's gain) misses a spec and another gain was taken;
* the objective's best gain misses the step-response specs and a sampled
  gain that passes was taken instead;
* a target is missed by more than ``TARGET_TOLERANCE`` (5 %): the dominant
  pole's distance to the target pole relative to the target's natural
  frequency, or the crossover's relative distance to a crossover target;
* a point meets a spec only without the design back-off (inside the
  written bound but outside the tightened one);
* no gain meets every spec: the table holds the best compromise, which is
  not a design (the gains file marks the point ``compromise: true``).
"""

from __future__ import annotations

import math

import numpy as np

from ..spec_registry import SPEC_ORDER, spec_info
from .analysis import PointAnalysis, judge
from .diagnose import limit_text
from .spec_limits import SpecLimits

__all__ = ["TARGET_TOLERANCE", "shortfall", "compromise_warnings", "boundary_warnings", "target_warnings",
           "strategy_gain_warning"]

#: A target missed by more than this relative distance gives a warning.
TARGET_TOLERANCE = 0.05


def shortfall(analysis: PointAnalysis, p: int, names: list[str] | None = None, word: str = "needs") -> str:
    """``"name: quantity value (needs >= limit)"`` for specs ``names`` (default: the failing ones) of point ``p``."""
    names = analysis.failed_specs(p) if names is None else names
    parts = []
    for name in names:
        spec = spec_info(name)
        limit = 1.0 if name == "stable" else float(getattr(analysis.limits, name)[p])
        parts.append(f"{name}: {spec.label} {analysis.values[name][p]:.6g}{spec.unit_suffix} "
                     f"({word} {limit_text(name, limit)})")
    return "; ".join(parts)


def compromise_warnings(analysis: PointAnalysis, status: tuple[str, ...], binding) -> dict[int, str]:
    """Warning of every failing point: the table holds a best compromise, not a design."""
    out = {}
    for p, state in enumerate(status):
        if state == "fail":
            name = binding[p] or (analysis.failed_specs(p) or ["stable"])[0]
            out[p] = (f"no design found meets every spec ({name} binds): the table holds the best compromise, "
                      f"marked compromise in the gains file; not verified: {shortfall(analysis, p)}")
    return out


def boundary_warnings(analysis: PointAnalysis, aimed: SpecLimits | None = None) -> dict[int, str]:
    """Passing points that meet a spec only inside the design back-off.

    ``aimed`` are the specs the design aimed at (default
    ``SpecLimits.tightened``; the crossover objectives aim at a smaller
    margin back-off, :func:`gainloom.design.crossover_job.tightened_limits`).
    """
    aimed = analysis.limits.tightened() if aimed is None else aimed
    tight = judge(analysis.values, aimed, step=True)
    out = {}
    for p in np.flatnonzero(analysis.passed):
        names = [n for n in SPEC_ORDER if not tight[n][p]]
        if names:
            out[int(p)] = ("met only on the spec boundary, without the design back-off: "
                           + shortfall(analysis, int(p), names, word="limit"))
    return out


def target_warnings(analysis: PointAnalysis, target) -> dict[int, str]:
    """Points whose result misses the controller's target by more than ``TARGET_TOLERANCE``.

    ``target`` is the schedule's ``controller.target`` (pole or crossover) or None.
    """
    if target is None:
        return {}
    out = {}
    if target.crossover is not None:
        goal = float(target.crossover)
        for p in range(analysis.points):
            value = float(analysis.crossover[p])
            miss = abs(value - goal) / goal if math.isfinite(value) else math.inf
            if miss > TARGET_TOLERANCE:
                out[p] = (f"target crossover {goal:.6g} rad/s missed by {100 * miss:.3g} %: "
                          f"crossover {value:.6g} rad/s")
        return out
    zeta, wn = float(target.damping), float(target.natural_frequency)
    s_target = complex(-zeta * wn, wn * math.sqrt(max(1 - zeta * zeta, 0.0)))
    for p in range(analysis.points):
        s = complex(analysis.poles_s[p, 0]) if analysis.poles_s.shape[1] else complex("nan")
        s = complex(s.real, abs(s.imag))
        miss = abs(s - s_target) / wn
        if not miss <= TARGET_TOLERANCE:
            out[p] = (f"target pole (damping {zeta:.3g}, natural frequency {wn:.6g} rad/s) missed by "
                      f"{100 * miss:.3g} % of its natural frequency: dominant pole s = {s.real:.6g} "
                      f"{'+' if s.imag >= 0 else '-'} {abs(s.imag):.6g}j rad/s")
    return out


def strategy_gain_warning(asked: PointAnalysis, q: int, chosen_gain: float, own: str) -> str:
    """Warning where the strategy's own gain (row ``q`` of ``asked``) misses a spec."""
    return (f"the {own} gain K = {asked.gain[q]:.6g} fails {shortfall(asked, q)}; "
            f"the table holds K = {chosen_gain:.6g} instead")
