"""Frozen registries of the names users may write.

Validation, error messages, ``--help`` and the docs all read these tuples, so a
name is added in exactly one place.  Every layer may import this module.
"""

from __future__ import annotations

from difflib import get_close_matches

__all__ = [
    "CANCEL_TARGETS",
    "CONTROLLER_COEFFICIENTS",
    "CONTROLLER_STRUCTURES",
    "CROSSOVER_OBJECTIVES",
    "DESIGN_STRATEGIES",
    "FILTER_COEFFICIENTS",
    "FILTER_KEYS",
    "FILTER_KINDS",
    "HOLD_METHODS",
    "INTERPOLATIONS",
    "MONOTONE_DIRECTIONS",
    "NUMBER_FORMATS",
    "POLE_SELECTIONS",
    "SWEEP_OBJECTIVES",
    "TOLERANCE_DESIGNS",
    "TOLERANCE_DISTRIBUTIONS",
    "TOLERANCE_SAMPLINGS",
    "TUNING_RULES",
    "unknown_name_message",
]

#: Discretisation methods: zero-order hold, first-order (triangle) hold,
#: Tustin (bilinear, optional prewarp), matched pole-zero, impulse invariant.
HOLD_METHODS: tuple[str, ...] = ("zoh", "foh", "tustin", "matched", "impulse")

#: Controller structures the scheduler can tune.
CONTROLLER_STRUCTURES: tuple[str, ...] = ("p", "pi", "pd", "pid", "lead", "lag", "leadlag")

#: Difference-equation coefficients each structure stores per table point,
#: in table order.  The discrete forms are defined in DEVELOPERS.md
#: ("Discrete controller forms"); design, codegen and simulation all follow it.
CONTROLLER_COEFFICIENTS: dict[str, tuple[str, ...]] = {
    "p": ("kp",),
    "pi": ("kp", "ki_ts"),
    "pd": ("kp", "kd_b", "kd_a"),
    "pid": ("kp", "ki_ts", "kd_b", "kd_a"),
    "lead": ("kc", "zc", "pc"),
    "lag": ("kc", "zc", "pc"),
    "leadlag": ("kc", "zc1", "pc1", "zc2", "pc2"),
}

#: Number formats of the emitted C tables.
NUMBER_FORMATS: tuple[str, ...] = ("float32", "q15", "q31")

#: How firmware interpolates between table points.
INTERPOLATIONS: tuple[str, ...] = ("linear", "bilinear")

#: Published PI tuning rules available as strategies (design/tuning_rules.py).
TUNING_RULES: tuple[str, ...] = ("modulus-optimum", "symmetric-optimum")

#: How the scheduler picks gains at each point (schedule key controller.strategy).
DESIGN_STRATEGIES: tuple[str, ...] = ("pole-cancel", "dominant-pair", "shape-sweep") + TUNING_RULES

#: What shape-sweep optimises over the swept controller-zero locations.
SWEEP_OBJECTIVES: tuple[str, ...] = ("fastest", "most-damped", "nearest-target", "max-crossover")

#: Objectives judged on the gain crossover, searched over the whole controller
#: space (design/crossover.py); nearest-target joins them with a crossover target.
CROSSOVER_OBJECTIVES: tuple[str, ...] = ("max-crossover",)

#: Which plant pole the pole-cancel strategy places the controller zero on.
CANCEL_TARGETS: tuple[str, ...] = ("slowest", "fastest")

#: How tolerance combinations are sampled (tolerances.samples).
TOLERANCE_SAMPLINGS: tuple[str, ...] = ("corners", "space_filling")

#: What the design does with the tolerances (tolerances.design): only check
#: the table at every tolerance sample, or design against them (worst case).
TOLERANCE_DESIGNS: tuple[str, ...] = ("check", "worst-case")

#: How the statistical study draws parameters (tolerances.distribution):
#: uniform over the tolerance box, or normal with the tolerance as 3 sigma.
TOLERANCE_DISTRIBUTIONS: tuple[str, ...] = ("uniform", "normal")

#: Required direction of a coefficient along each table axis (table.monotone).
MONOTONE_DIRECTIONS: tuple[str, ...] = ("increasing", "decreasing")

#: Which closed-loop poles the damping, decay and natural-frequency specs
#: judge (specs.poles): the dominant ones (docs/design.md) or every pole.
POLE_SELECTIONS: tuple[str, ...] = ("dominant", "all")


#: Second-order filter sections after the controller (``controller.filters``).
FILTER_KINDS: tuple[str, ...] = ("notch", "low_pass")

#: Keys of each filter section: notch centre frequency (rad/s), depth (dB)
#: and half-depth width (rad/s); low-pass frequency (rad/s) and damping.
FILTER_KEYS: dict[str, tuple[str, ...]] = {
    "notch": ("frequency", "depth", "width"),
    "low_pass": ("frequency", "damping"),
}

#: Coefficients of one discrete filter section in the table, direct form
#: ``y = b0 x + b1 x[k-1] + b2 x[k-2] - a1 y[k-1] - a2 y[k-2]`` (``a0 = 1``).
FILTER_COEFFICIENTS: tuple[str, ...] = ("b0", "b1", "b2", "a1", "a2")


def unknown_name_message(kind: str, name: str, known: tuple[str, ...]) -> str:
    """Return "unknown <kind> 'x'; known: a, b (did you mean 'a'?)".

    Parameters
    ----------
    kind : str
        What the name is meant to be, e.g. ``"hold method"``.
    name : str
        The name the user wrote.
    known : tuple of str
        The registry it should come from.
    """
    message = f"unknown {kind} {name!r}; known: {', '.join(known)}"
    close = get_close_matches(str(name), known, n=1)
    if close:
        message += f" (did you mean {close[0]!r}?)"
    return message
