"""C identifiers built from user-chosen names: validated, never rewritten.

One set of rules for every layer: the schedule loader reports a bad
``codegen.prefix`` at its line (``prefix_problem``), code generation refuses
one passed directly (``validate_prefix``).

Every identifier in the generated C is ``<prefix>_<something>`` (or the
upper-case form for macros), where ``<something>`` is a fixed word, an axis
name or a coefficient name.  A name that would make a reserved, ambiguous or
over-long identifier is refused with :class:`~gainloom.errors.CodegenError`;
gainloom never silently changes a name the user chose.

Rules for the prefix (ISO C; section numbers from memory, C99 first, the
C11 renumbering of "Future library directions" is 7.31).  Every rule is
checked on the prefix as written and on its upper-case form, which starts
every macro:

- letters, digits and underscores, starting with a letter; not empty
  (6.4.2.1; a leading underscore is reserved, 7.1.3);
- no double underscore anywhere and no trailing underscore (``<prefix>_x``
  would then contain ``__``; 7.1.3);
- not a keyword of C99, C11 or C23 (6.4.1);
- not a name space the standard library reserves for future use (7.26):

  - ``E`` + digit or upper-case letter: ``<errno.h>`` macros (7.26.3);
  - ``FE_`` + upper-case letter: ``<fenv.h>`` macros (7.6);
  - ``PRI`` or ``SCN`` + lower-case letter or ``X``: ``<inttypes.h>`` (7.26.4);
  - ``LC_`` + upper-case letter: ``<locale.h>`` (7.26.5);
  - ``SIG`` + upper-case letter, ``SIG_`` + upper-case letter:
    ``<signal.h>`` (7.26.6);
  - ``int``/``uint`` and ``INT``/``UINT``: ``<stdint.h>`` reserves typedefs
    ``int*_t`` and macros ``INT*_MAX``/``_MIN``/``_C`` (7.26.8), and
    gainloom makes a ``<prefix>_..._t`` typedef and ``<PREFIX>_U_MAX`` from
    every prefix;
  - ``str`` + lower-case letter: ``<stdlib.h>``, ``<string.h>`` (7.26.10-11);
  - ``mem`` or ``wcs`` + lower-case letter: ``<string.h>``, ``<wchar.h>``
    (7.26.11-12);
  - ``is`` or ``to`` + lower-case letter: ``<ctype.h>``, ``<wctype.h>``
    (7.26.2, 7.26.13);
  - C11 only (7.31): ``ATOMIC_`` + upper-case, ``atomic_``/``memory_`` +
    lower-case (``<stdatomic.h>``); ``cnd_``, ``mtx_``, ``thrd_``, ``tss_``
    + lower-case (``<threads.h>``);

- not the name of a standard header (7.1.2), so ``<prefix>.h`` next to the
  user's sources never shadows one (``math.h``, ``signal.h``, ...);
- at most :data:`MAX_PREFIX_LENGTH` characters for the prefix, so the longest
  external name (``<prefix>_limits_t``, ``<prefix>_update``) stays within the
  31 significant initial characters C99 5.2.4.1 guarantees for external
  identifiers.

:class:`CNames` builds every name of the generated C from the prefix, in
this one place: the templates, the harness and the docs read it.

Text in C comments (units, file names and options in the banner) goes
through :func:`comment_text`: printable ASCII is kept as written, other
printable characters become C universal character names (``\\u00b0``), and
text that could end or change a comment is refused: control characters
(newline, carriage return, tab, ...), invisible format characters (e.g. the
bidirectional overrides), ``*/``, ``/*``, ``//``, a backslash (a
backslash-newline splices lines, 5.1.1.2) and ``??`` (trigraphs such as
``??/``, 5.2.1.1).
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass

from .errors import CodegenError

__all__ = [
    "C_KEYWORDS",
    "STANDARD_HEADERS",
    "MAX_PREFIX_LENGTH",
    "MAX_FRAGMENT_LENGTH",
    "prefix_problem",
    "validate_prefix",
    "validate_fragment",
    "comment_text_problem",
    "comment_text",
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

#: Standard headers of C11 (7.1.2, from memory); ``<prefix>.h`` must not shadow one.
STANDARD_HEADERS: frozenset[str] = frozenset(
    """assert complex ctype errno fenv float inttypes iso646 limits locale math setjmp signal stdalign
    stdarg stdatomic stdbool stddef stdint stdio stdlib stdnoreturn string tgmath threads time uchar
    wchar wctype""".split()
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

# Name spaces of the library's future directions (module docstring), matched
# against a representative generated name: ``<prefix>_a`` for functions and
# typedefs, ``<PREFIX>_A`` for macros.
_RESERVED_STARTS: tuple[tuple[re.Pattern, str], ...] = tuple(
    (re.compile(pattern), what)
    for pattern, what in (
        (r"E[0-9A-Z]", "E + digit or capital (<errno.h>)"),
        (r"FE_[A-Z]", "FE_ + capital (<fenv.h>)"),
        (r"(?:PRI|SCN)[a-zX]", "PRI/SCN + lower case or X (<inttypes.h>)"),
        (r"LC_[A-Z]", "LC_ + capital (<locale.h>)"),
        (r"SIG_?[A-Z]", "SIG + capital or SIG_ (<signal.h>)"),
        (r"ATOMIC_[A-Z]|(?:atomic|memory)_[a-z]", "ATOMIC_, atomic_, memory_ (<stdatomic.h>)"),
        (r"u?int|U?INT", "int/uint (<stdint.h> reserves int*_t typedefs and INT*_MAX macros)"),
        (r"(?:str|mem|wcs)[a-z]", "str/mem/wcs + lower case (<string.h>, <stdlib.h>, <wchar.h>)"),
        (r"(?:is|to)[a-z]", "is/to + lower case (<ctype.h>, <wctype.h>)"),
        (r"(?:cnd|mtx|thrd|tss)_[a-z]", "cnd_/mtx_/thrd_/tss_ (<threads.h>)"),
    )
)


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
    if prefix == "":
        return "prefix is empty; every generated C name starts with it, so give one (e.g. 'motor')"
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
    if prefix.lower() in STANDARD_HEADERS:
        return f"prefix {prefix!r} would write {prefix}.h, the name of a standard C header; choose another name"
    for generated in (f"{prefix}_a", f"{prefix.upper()}_A"):
        for pattern, what in _RESERVED_STARTS:
            if pattern.match(generated):
                return (
                    f"prefix {prefix!r} makes names such as {generated[:-1]}... that the C standard library "
                    f"reserves ({what}); choose another name"
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


def comment_text_problem(text: str) -> str | None:
    """Return why ``text`` cannot go in a C comment, or ``None``.

    Non-ASCII printable characters are not a problem (:func:`comment_text`
    writes them as universal character names).

    Parameters
    ----------
    text : str
        A unit, file name or option value.
    """
    if not isinstance(text, str):
        return f"expected text; got {type(text).__name__}"
    for character in text:
        if character.isascii() and character.isprintable():
            continue
        if unicodedata.category(character)[0] in "CZ" and character != " ":
            # Cc control (newline, tab, ...), Cf format (bidirectional
            # overrides), Zl/Zp line and paragraph separators, Co/Cn/Cs
            return f"{text!r} contains the control or invisible character U+{ord(character):04X}"
    for sequence, why in (
        ("*/", "would end the comment"),
        ("/*", "would open a nested comment"),
        ("//", "starts a line comment"),
        ("\\", "can splice lines (backslash-newline)"),
        ("??", "can start a trigraph such as ??/"),
    ):
        if sequence in text:
            return f"{text!r} contains {sequence!r}, which {why} in C"
    return None


def comment_text(kind: str, text: str) -> str:
    """``text`` as it may appear in a generated C comment.

    Printable ASCII is kept as written; every other printable character is
    written as a C universal character name (``\\u00b0`` for a degree sign),
    so the files are ASCII whatever the schedule's text.

    Parameters
    ----------
    kind : str
        What the text is, for the message (e.g. ``"unit of axis 'speed'"``).
    text : str
        The text.

    Raises
    ------
    CodegenError
        For text that could end, nest or change a comment
        (:func:`comment_text_problem`); it is never rewritten.
    """
    problem = comment_text_problem(text)
    if problem:
        raise CodegenError(f"{kind}: {problem}; it cannot go into the generated C")
    return "".join(
        c if c.isascii() else (f"\\u{ord(c):04x}" if ord(c) <= 0xFFFF else f"\\U{ord(c):08x}") for c in text
    )


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
