"""The project's one safety caution, shown by every command and carried by every output.

Motors and power stages can injure people and destroy hardware, so every
result gainloom prints or writes says what it is (model evidence, not proof)
and defers to functional-safety practice, local codes and licensed engineers.
One text, in the two shapes the outputs need: a paragraph for terminals and
C banners, and the points of that paragraph for the verification log.
"""

from __future__ import annotations

__all__ = ["CAUTION", "CAUTION_POINTS"]

#: The caution's points, one per bullet of the verification log.
CAUTION_POINTS: tuple[str, ...] = (
    "These gains drive motors and power stages that can injure people and destroy hardware.",
    "Designs, loci, simulations and generated code are model results: evidence, not proof.",
    "Validate the gains on the real hardware before use, with current and speed limits active "
    "and a safe test set-up (guarding, emergency stop, reduced energy where possible).",
    "The checks cover the models in the schedule file, nothing else: unmodelled dynamics, "
    "sensor noise, saturation beyond the stated limits and faults are not covered.",
    "gainloom does not replace functional-safety processes, local codes and standards, "
    "or the judgement of a licensed engineer.",
)

#: The caution as one paragraph, printed after every command and wrapped into every C banner.
CAUTION: str = "CAUTION: " + " ".join(CAUTION_POINTS)
