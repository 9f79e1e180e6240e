"""C identifiers built from user-chosen names: validated, never rewritten.

One set of rules for every layer: the schedule loader reports a bad
``codegen.prefix`` at its line (``prefix_problem``), code generation refuses
one passed directly (``validate_prefix``).

Every identifier in the generated C is ``<prefix>_<something>`` (or the
upper-case form for macros), where ``<something>`` is a fixed word, an axis
name or a coefficient name.  A name that would make a reserved, ambiguous or
over-long identifier is refused with :class:`~gainloom.errors.CodegenError`;
gainloom never silently changes a name the user chose.

Rules (C99 7.1.3 "Reserved identifiers" and 6.4.2.1, from memory):

- letters, digits and underscores, starting with a letter (a leading
  underscore is reserved);
- no double underscore anywhere and no trailing underscore (``<prefix>_x``
  would then contain ``__``);
- not a keyword of C99, C11 or C23;
- not in a name space the standard library reserves for future use:
  ``is``/``to`` + lower-case letter (``<ctype.h>``), ``str``/``mem``/``wcs``
  + lower-case letter (``<string.h>``, ``<stdlib.h>``), ``E`` + digit or
  upper-case letter (``<errno.h>``), ``int``/``uint`` names ending in ``_t``
  (``<stdint.h>``);
- at most :data:`MAX_PREFIX_LENGTH` characters for the prefix, so the longest
  external name (``<prefix>_limits_t``, ``<prefix>_update``) stays within the
  31 significant initial characters C99 5.2.4.1 guarantees for external
  identifiers.

:class:`CNames` builds every name of the generated C from the prefix, in
this one place: the templates, the harness and the docs read it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from .errors import CodegenError

__all__ = [
    "C_KEYWORDS",
    "MAX_PREFIX_LENGTH",
    "MAX_FRAGMENT_LENGTH",
    "prefix_problem",
    "validate_prefix",
    "validate_fragment",
    "FORMAT_CODES",
    "CNames",
    "c_names",
]

#: Keywords of C99, C11 and C23 (ISO/IEC 9899 section 6.4.1, from memory).
C_KEYWORDS: frozenset[str] = frozenset(
    """auto break case char const continue default do double else enum extern float for goto if
    inline int long register restrict return short signed sizeof static struct switch typedef union
    unsigned void volatile while alignas alignof bool constexpr false nullptr static_assert
    thread_local true typeof typeof_unqual""".split()
)

#: Longest prefix accepted: 31 significant characters minus the longest
#: word gainloom appends to an external name (``_limits_t``, 9 characters),
#: with two to spare (the limit predates the current names and is kept so
#: no prefix that was accepted before is refused now).
MAX_PREFIX_LENGTH = 20

#: Longest axis or coefficient name accepted inside an identifier.
MAX_FRAGMENT_LENGTH = 24

_SHAPE = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")
_FRAGMENT_SHAPE = re.compile(r"[A-Za-z0-9][A-Za-z0-9_]*\Z")
_LIBRARY_RESERVED = re.compile(r"(?:(?:is|to|str|mem|wcs)[a-z]|E[0-9A-Z]|u?int[A-Za-z0-9_]*_t\Z)")


def _common_problem(kind: str, name: str, limit: int) -> str | None:
    if "__" in name:
        return f"{kind} {name!r} contains a double underscore, which C reserves; choose another name"
    if name.endswith("_"):
        return f"{kind} {name!r} ends with an underscore (joined names would contain '__'); drop it"
    if len(name) > limit:
        return f"{kind} {name!r} has {len(name)} characters; at most {limit} are accepted"
    return None


def prefix_problem(prefix: str) -> str | None:
    """Return why ``prefix`` cannot start every generated C name, or ``None``.

    Parameters
    ----------
    prefix : str
        User-chosen name, e.g. ``"motor_speed"``.
    """
    if not isinstance(prefix, str) or not _SHAPE.match(prefix):
        return (
            f"prefix {prefix!r} is not a C identifier: it must start with a letter "
            "followed by letters, digits or underscores"
        )
    problem = _common_problem("prefix", prefix, MAX_PREFIX_LENGTH)
    if problem:
        return problem
    if prefix in C_KEYWORDS:
        return f"prefix {prefix!r} is a C keyword; choose another name"
    if _LIBRARY_RESERVED.match(prefix):
        return (
            f"prefix {prefix!r} starts a name the C standard library reserves "
            "(is*, to*, str*, mem*, wcs*, E*, int*_t); choose another name"
        )
    return None


def validate_prefix(prefix: str) -> str:
    """Return ``prefix`` unchanged if it can start every generated C name.

    Parameters
    ----------
    prefix : str
        User-chosen name, e.g. ``"motor_speed"``.

    Returns
    -------
    str
        The same string.

    Raises
    ------
    CodegenError
        With the rule that the name breaks; the name is never rewritten.
    """
    problem = prefix_problem(prefix)
    if problem:
        raise CodegenError(problem)
    return prefix


def validate_fragment(kind: str, name: str) -> str:
    """Return ``name`` unchanged if it can follow ``<prefix>_`` in a C name.

    Parameters
    ----------
    kind : str
        What the name is, for the message (e.g. ``"axis name"``).
    name : str
        Axis or coefficient name.

    Raises
    ------
    CodegenError
        When the joined identifier would be invalid or reserved.
    """
    if not isinstance(name, str) or not _FRAGMENT_SHAPE.match(name):
        raise CodegenError(
            f"{kind} {name!r} cannot appear in a C identifier: expected letters, digits or underscores, "
            "starting with a letter or digit"
        )
    problem = _common_problem(kind, name, MAX_FRAGMENT_LENGTH)
    if problem:
        raise CodegenError(problem)
    return name


#: Value of ``<PREFIX>_NUMBER_FORMAT`` per number format.  0 is left unused:
#: an undefined macro reads as 0 in ``#if``, so it never matches a format.
FORMAT_CODES: dict[str, int] = {"float32": 1, "q15": 2, "q31": 3}


@dataclass(frozen=True)
class CNames:
    """Every identifier of the generated C for one prefix.

    Functions: ``lookup`` (interpolate the table at the scheduling inputs),
    ``clear`` (zero the controller state), ``update`` (one controller step).
    Types: ``gains_t``, ``state_t``, ``limits_t`` (run-time output limits).
    Macros are upper case: ``macro("AXIS", "SPEED", "LEN")`` gives
    ``MOTOR_AXIS_SPEED_LEN``.  File-local helpers use :meth:`local`.

    Parameters
    ----------
    prefix : str
        A prefix accepted by :func:`validate_prefix`.
    """

    prefix: str

    def __post_init__(self) -> None:
        validate_prefix(self.prefix)

    @property
    def upper(self) -> str:
        """Start of every macro: the prefix in upper case."""
        return self.prefix.upper()

    @property
    def header(self) -> str:
        """Header file name."""
        return f"{self.prefix}.h"

    @property
    def source(self) -> str:
        """Source file name."""
        return f"{self.prefix}.c"

    @property
    def lookup(self) -> str:
        """Function that interpolates the coefficients at the scheduling inputs."""
        return f"{self.prefix}_lookup"

    @property
    def clear(self) -> str:
        """Function that zeroes the controller state."""
        return f"{self.prefix}_clear"

    @property
    def update(self) -> str:
        """Function that runs one controller step."""
        return f"{self.prefix}_update"

    @property
    def gains_t(self) -> str:
        """Type of the interpolated coefficients."""
        return f"{self.prefix}_gains_t"

    @property
    def state_t(self) -> str:
        """Type of the controller state."""
        return f"{self.prefix}_state_t"

    @property
    def limits_t(self) -> str:
        """Type of the optional run-time output limits."""
        return f"{self.prefix}_limits_t"

    @property
    def guard(self) -> str:
        """Include guard of the header."""
        return self.macro("H")

    @property
    def number_format(self) -> str:
        """Macro holding the number format's code (:data:`FORMAT_CODES`)."""
        return self.macro("NUMBER_FORMAT")

    def format_code(self, number_format: str) -> str:
        """Macro naming one number format's code, e.g. ``MOTOR_FORMAT_Q15``."""
        return self.macro("FORMAT", number_format.upper())

    @property
    def verified(self) -> str:
        """Macro: 1 when the table passed verification, else 0."""
        return self.macro("VERIFIED")

    @property
    def accept_unverified(self) -> str:
        """Macro an integrator defines to compile an unverified table anyway."""
        return self.macro("ACCEPT_UNVERIFIED")

    def macro(self, *words: str) -> str:
        """``<PREFIX>_<WORD>_...`` in upper case."""
        return "_".join([self.upper, *(w.upper() for w in words)])

    def local(self, *words: str) -> str:
        """``<prefix>_<word>_...``: file-local (``static``) names of the source."""
        return "_".join([self.prefix, *words])


def c_names(prefix: str) -> CNames:
    """The :class:`CNames` of ``prefix`` (validated, never rewritten).

    Raises
    ------
    CodegenError
        When the prefix cannot start a C name.
    """
    return CNames(prefix)
