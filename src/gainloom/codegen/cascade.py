"""One C module for every loop of a cascade: ``<prefix>.h`` and ``<prefix>.c``.

Each loop is rendered exactly as a single loop with its own prefix
(``<prefix>_<loop>``, so every identifier, helper and table is the loop's
own and the per-loop harness and mirror apply unchanged); the cascade header
holds the loops' declarations one after the other, after a comment with the
rates, the calling order of the interrupt and the signal scalings, and a
rate-divider macro per outer loop.  The source holds the loops' definitions,
each including the cascade header.

A loop's ``<PREFIX>_<LOOP>_VERIFIED`` is 1 only when its own table is verified
(:mod:`.verdict`) **and** the cascade checks passed: an outer loop designed
on an inner loop that fails, or a pair that fails its separation, does not
build without the loop's accept macro.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

from ..c_names import c_names, comment_text, validate_prefix
from ..design.table import GainTable
from ..errors import CodegenError
from ..safety import CAUTION
from .emit import render_files
from .render import banner_lines
from .verdict import TableVerdict

__all__ = ["CascadeLoopC", "cascade_verdict", "harness_header", "render_cascade_files"]


@dataclass(frozen=True, eq=False)
class CascadeLoopC:
    """What the cascade module needs of one loop.

    Attributes
    ----------
    name : str
        Loop name.
    prefix : str
        The loop's C prefix (``<cascade prefix>_<name>``).
    table : GainTable
    period : float
        Sample period, s.
    rate_factor : int
        Periods of the innermost loop per period of this loop.
    delay : int
        Computation delay in this loop's samples (outer loops: whole samples).
    error_full_scale, output_full_scale : float or None
        As given to the single-loop emitter.
    verdict : TableVerdict
        This loop's verdict, cascade checks included (:func:`cascade_verdict`).
    """

    name: str
    prefix: str
    table: GainTable
    period: float
    rate_factor: int
    delay: float
    error_full_scale: float | None
    output_full_scale: float | None
    verdict: TableVerdict


def cascade_verdict(loop_verdict: TableVerdict, cascade_passed: bool) -> TableVerdict:
    """A loop's verdict with the cascade checks added to what it rests on."""
    checks = "cascade checks passed" if cascade_passed else "cascade checks FAILED"
    return TableVerdict(loop_verdict.verified and cascade_passed, f"{loop_verdict.basis}; {checks}")


def _loop_texts(loop: CascadeLoopC, number_format: str, sha256: str, options: dict) -> tuple[str, str]:
    texts = render_files(loop.table, number_format, loop.prefix, sha256, {**options, "loop": loop.name},
                         error_full_scale=loop.error_full_scale, output_full_scale=loop.output_full_scale,
                         verdict=loop.verdict)
    names = c_names(loop.prefix)
    return texts[names.header], texts[names.source]


def _order_lines(loops: list[CascadeLoopC]) -> list[str]:
    inner = loops[0]
    lines = [f"{inner.prefix}: every {inner.period!r} s, the base period (inner loop)."]
    for outer in loops[1:]:
        lines.append(f"{outer.prefix}: every {outer.rate_factor}th base period ({outer.period!r} s).")
    lines += ["", "Calling order, in the interrupt at the base period (count k = 0, 1, 2, ...):"]
    for outer, below in zip(loops[1:], loops[:-1]):
        timing = (
            "its output becomes the reference of "
            f"{below.prefix} from the next {outer.prefix} period on ({int(outer.delay)} sample(s) of "
            "computation delay, as designed)"
            if outer.delay
            else f"its output is the reference of {below.prefix} in the same interrupt (no delay, as designed)"
        )
        lines += [
            (f"1. when k % {c_names(outer.prefix).macro('EVERY')} == 0: sample this loop's measurement, call "
            f"{c_names(outer.prefix).lookup}() with its scheduling inputs and {c_names(outer.prefix).update}() "
            f"with its error; {timing}."),
        ]
    lines += [
        (f"2. every period: {c_names(inner.prefix).lookup}() with its scheduling inputs, then "
        f"{c_names(inner.prefix).update}() with e = reference - measurement; the output drives the actuator "
        f"({inner.delay:g} sample(s) of computation delay as designed)."),
        ("Call every loop's clear function before the first step.  The outer loop's output limits are the "
        "inner loop's reference limits."),
    ]
    return lines


def _scaling_lines(loops: list[CascadeLoopC], number_format: str) -> list[str]:
    if number_format == "float32":
        return ["Signals are float in physical units: the outer output is the inner reference as it is."]
    lines = []
    for outer, below in zip(loops[1:], loops[:-1]):
        out_fs, err_fs = outer.output_full_scale, below.error_full_scale
        if out_fs is not None and err_fs is not None and out_fs == err_fs:
            lines.append(f"{outer.prefix} output and {below.prefix} error share the full scale {out_fs!r}: "
                         "subtract the measurement from the output directly.")
        else:
            lines.append(f"{outer.prefix} output full scale {out_fs!r}, {below.prefix} error full scale "
                         f"{err_fs!r}: rescale the output by their ratio before forming the inner error "
                         "(see each loop's scaling comment below).")
    return lines


def _comment(lines: list[str]) -> list[str]:
    out = ["/*"]
    for line in lines:
        if not line:
            out.append(" *")
            continue
        for part in textwrap.wrap(comment_text("cascade comment", line), 96, subsequent_indent="   "):
            out.append(f" * {part}")
    out.append(" */")
    return out


def _drop_repeated_includes(sections: list[str]) -> list[str]:
    """Each section without the ``#include`` lines an earlier section already has.

    The loops' sections follow each other in one file; an include repeated
    after the first loop's code would be an include preceded by code (MISRA
    C:2012 rule 20.1) and adds nothing: the header is already in.
    """
    seen: set[str] = set()
    kept = []
    for section in sections:
        lines = section.split("\n")
        includes = {line for line in lines if line.startswith("#include ")}
        kept.append("\n".join(line for line in lines if line not in seen))
        seen |= includes
    return kept


def render_cascade_files(loops: list[CascadeLoopC], prefix: str, number_format: str, sha256: str,
                         options: dict | None = None) -> dict[str, str]:
    """Render the cascade's one header and one source.

    Parameters
    ----------
    loops : list of CascadeLoopC
        Inner loop first.
    prefix : str
        The cascade's C prefix (file names ``<prefix>.h``, ``<prefix>.c``).
    number_format : str
    sha256 : str
        SHA-256 of the cascade file.
    options : dict, optional
        Generation options recorded in each banner.

    Returns
    -------
    dict of str to str
        ``<prefix>.h`` and ``<prefix>.c``.
    """
    validate_prefix(prefix)
    names = c_names(prefix)
    options = dict(options or {})
    headers, sources = [], []
    for loop in loops:
        header, source = _loop_texts(loop, number_format, sha256, options)
        include = f'#include "{c_names(loop.prefix).header}"\n'
        if source.count(include) != 1:
            raise CodegenError(f"internal: the source of loop {loop.name!r} does not include its header once")
        headers.append(header)
        sources.append(source.replace(include, f'#include "{names.header}"\n'))
    banner = banner_lines(number_format, prefix, sha256, {**options, "loops": ",".join(lp.name for lp in loops)})
    top = _comment(banner + [""] + textwrap.wrap(CAUTION, 90))
    about = _comment([f"Cascade of {len(loops)} loops, inner first, in one module.", ""] + _order_lines(loops)
                     + [""] + _scaling_lines(loops, number_format))
    dividers = [f"#define {c_names(lp.prefix).macro('EVERY')} ({lp.rate_factor})  "
                f"/* base periods per {lp.name} period */" for lp in loops[1:]]
    header = "\n".join(top + ["", f"#ifndef {names.guard}", f"#define {names.guard}", ""] + about + [""]
                       + dividers + [""]) + "\n" + "\n".join(_drop_repeated_includes(headers)) \
        + f"\n#endif /* {names.guard} */\n"
    source = "\n".join(top) + "\n\n" + "\n".join(_drop_repeated_includes(sources))
    return {names.header: header, names.source: source}


def harness_header(loop: CascadeLoopC, cascade_prefix: str, number_format: str, sha256: str,
                   options: dict | None = None) -> tuple[str, str]:
    """A stand-in ``<loop prefix>.h`` for the per-loop host harness.

    The harness includes the loop's own header name and reads its settings
    from its banner; this file carries the loop's banner and includes the
    cascade header, so the harness compiles and runs the cascade module.

    Returns
    -------
    name, text : str
    """
    header, _source = _loop_texts(loop, number_format, sha256, dict(options or {}))
    banner_end = header.index(" */\n") + len(" */\n")
    text = header[:banner_end] + f'#include "{c_names(cascade_prefix).header}"\n'
    return c_names(loop.prefix).header, text
