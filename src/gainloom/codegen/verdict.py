"""The verification verdict a generated header carries.

A table is **verified** for a number format when both of these passed:

1. the design verdict: every operating point meets every spec and the
   whole-table checks (between points, tolerances, smoothness) pass;
2. the re-check of the table **as stored** in that format (breakpoints and
   coefficients rounded, back in physical units) against the schedule.

Anything not known counts as not verified: a gains file that records no
verdict, or rounding that was not re-checked (``gainloom emit`` without
``--schedule``).  The header then defines ``<PREFIX>_VERIFIED`` as 0 and
stops compilation unless the integrator defines
``<PREFIX>_ACCEPT_UNVERIFIED``.

The host harness and the default simulation are not part of it: the
harness compiles this very header (a verdict that depended on it would be
circular), and the simulation's scenario is a smoke run, not a spec.  Both
stay in the run's summary and log.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["TableVerdict", "table_verdict"]


@dataclass(frozen=True)
class TableVerdict:
    """Whether a table may be built into firmware, and why.

    Parameters
    ----------
    verified : bool
        True only when every check it rests on ran and passed.
    basis : str
        One line, fixed words only (it goes into a C comment): what the
        verdict rests on, or what is missing.
    """

    verified: bool
    basis: str


def table_verdict(design_passed: bool | None, stored_passed: bool | None, number_format: str) -> TableVerdict:
    """Combine the design verdict and the re-check of the stored table.

    Parameters
    ----------
    design_passed : bool or None
        Every point and whole-table check passed; ``None`` when not
        recorded (e.g. a hand-written gains file without ``passed``).
    stored_passed : bool or None
        The table as stored in ``number_format`` passed the same checks;
        ``None`` when it was not re-checked.
    number_format : str
        The emitted number format (for the text).

    Returns
    -------
    TableVerdict
    """
    design = {
        True: "design passed (every point and whole-table check)",
        False: "design FAILED",
        None: "design verdict not recorded",
    }[design_passed]
    stored = {
        True: f"table as stored in {number_format} re-checked and passed",
        False: f"table as stored in {number_format} FAILED the re-check",
        None: f"table as stored in {number_format} not re-checked",
    }[stored_passed]
    return TableVerdict(design_passed is True and stored_passed is True, f"{design}; {stored}")
