"""Render the C header and source of a laid-out table from Jinja2 templates.

Templates live in the repository's top-level ``codegen_templates/`` and are
shipped in the wheel as ``gainloom/codegen_templates``.  The environment uses
``StrictUndefined`` (a missing variable is an error, never an empty string),
``trim_blocks`` and ``lstrip_blocks``; rendered text has trailing whitespace
stripped and ends with exactly one newline.  Nothing in the output depends on
time or machine: the same inputs give byte-identical files.
"""

from __future__ import annotations

import functools
import importlib.resources
import math
import re
import textwrap
from pathlib import Path

import jinja2
import numpy as np

from ..c_names import FORMAT_CODES, c_names, comment_text
from ..errors import CodegenError
from ..safety import CAUTION
from ..version import __version__
from .layout import GAIN_COEFFICIENTS, TableLayout
from .mirror import state_fields
from .qformat import STATE_FRAC
from .verdict import TableVerdict

__all__ = ["templates_dir", "c_float", "c_float_exact", "render_c", "render_template", "banner_lines"]

_SHA256 = re.compile(r"[0-9a-f]{64}\Z")

def templates_dir() -> Path:
    """Directory of the C templates.

    Looks in the installed package first (``gainloom/codegen_templates``, put
    there by the wheel's force-include) and falls back to the repository's
    top-level ``codegen_templates/`` for a source checkout run with
    ``PYTHONPATH=src``.

    Raises
    ------
    CodegenError
        When neither location holds the templates.
    """
    packaged = importlib.resources.files("gainloom") / "codegen_templates"
    if packaged.is_dir():
        return Path(str(packaged))
    checkout = Path(__file__).resolve().parents[3] / "codegen_templates"
    if checkout.is_dir():
        return checkout
    raise CodegenError(f"C templates not found in {packaged} nor {checkout}; the installation is incomplete")


def _fail(message: str) -> None:
    raise CodegenError(f"template check failed: {message}")


@functools.lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        autoescape=False,
    )
    env.globals["fail"] = _fail
    return env


def render_template(name: str, context: dict) -> str:
    """Render one template with the strict environment and clean its output.

    Parameters
    ----------
    name : str
        Template file name in :func:`templates_dir`.
    context : dict
        Template variables.
    """
    try:
        text = _environment().get_template(name).render(**context)
    except jinja2.TemplateError as error:
        raise CodegenError(f"template {name}: {error}") from None
    lines: list[str] = []
    for line in text.splitlines():
        line = line.rstrip()
        if line or (lines and lines[-1]):  # no leading or repeated blank lines
            lines.append(line)
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines) + "\n"


def c_float(value: float) -> str:
    """Shortest decimal C literal that reads back as the same float32.

    Non-finite values are refused (tables hold finite numbers only).
    """
    value32 = np.float32(value)
    if not np.isfinite(value32):
        raise CodegenError(f"value {value!r} is not a finite float32")
    magnitude = abs(float(value32))
    if magnitude != 0.0 and (magnitude < 1e-4 or magnitude >= 1e7):
        text = np.format_float_scientific(value32, unique=True, trim="0")
    else:
        text = np.format_float_positional(value32, unique=True, trim="0")
    return f"{text}f"


def c_float_exact(value: float) -> str:
    """Exact hexadecimal C99 float literal (``NAN``/``INFINITY`` for non-finite)."""
    value32 = float(np.float32(value))
    if math.isnan(value32):
        return "NAN"
    if math.isinf(value32):
        return "INFINITY" if value32 > 0 else "(-INFINITY)"
    return f"{value32.hex()}f"


def verdict_lines(verdict: TableVerdict, macro: str) -> list[str]:
    """Banner lines stating the verification verdict and what it rests on.

    Parameters
    ----------
    verdict : TableVerdict
        The table's verdict (fixed words only: it goes into a C comment).
    macro : str
        Name of the ``<PREFIX>_VERIFIED`` macro.
    """
    if "*/" in verdict.basis or "\n" in verdict.basis:
        raise CodegenError(f"verdict text cannot go in a C comment: {verdict.basis!r}")
    state = f"VERIFIED ({macro} 1)" if verdict.verified else f"NOT VERIFIED ({macro} 0, see verification.md)"
    return textwrap.wrap(f"verification: {state}: {verdict.basis}.", 74, subsequent_indent="  ")


def banner_lines(number_format: str, prefix: str, source_sha256: str | None, options: dict) -> list[str]:
    """Lines of the banner comment: generator, source hash, options, caution.

    Parameters
    ----------
    number_format, prefix : str
        As passed to the emitter.
    source_sha256 : str or None
        SHA-256 (64 lower-case hex digits) of the schedule file; ``None``
        when the gains file does not record it (the banner then says so).
    options : dict
        Generation options, written sorted as ``key=value``.
    """
    if source_sha256 is not None and (not isinstance(source_sha256, str) or not _SHA256.match(source_sha256)):
        raise CodegenError(f"source_sha256 must be 64 lower-case hex digits; got {source_sha256!r}")
    pairs = {"format": number_format, "prefix": prefix, **{str(k): v for k, v in options.items()}}
    rendered = []
    for key in sorted(pairs):
        value = pairs[key]
        text = repr(value) if isinstance(value, float) else str(value)
        rendered.append(f"{comment_text('option name', key)}={comment_text(f'option {key!r}', text)}")
    return [
        f"generated by gainloom {__version__}, do not edit.",
        f"schedule sha256: {source_sha256 or 'not recorded'}",
        "options: " + " ".join(rendered),
    ]


def _literal(layout: TableLayout, value) -> str:
    return c_float(float(value)) if not layout.fmt.is_fixed else str(int(value))


def _context(
    layout: TableLayout, prefix: str, source_sha256: str | None, options: dict, verdict: TableVerdict | None
) -> dict:
    names = c_names(prefix)
    if verdict is None:
        verdict = TableVerdict(False, "no verdict was given to the generator")
    fmt = layout.fmt
    upper = names.upper
    seen = set()
    for axis in layout.axes:
        if axis.name.upper() in seen:
            raise CodegenError(f"axis names must differ ignoring case; {axis.name!r} repeats")
        seen.add(axis.name.upper())
    axes = []
    for axis in layout.axes:
        axes.append(
            {
                "name": axis.name,
                "upper": axis.name.upper(),
                "unit": comment_text(f"unit of axis {axis.name!r}", axis.unit),
                "size": axis.size,
                "breakpoints": [_literal(layout, v) for v in axis.stored],
                "frac": axis.frac,
                "uniform": axis.uniform,
                "step": _literal(layout, axis.step) if axis.uniform else "0",
                "inv_step": c_float(axis.inv_step) if (axis.uniform and not fmt.is_fixed) else "0",
                "weight_shift": [] if axis.weight_shift is None else [f"{int(v)}u" for v in axis.weight_shift],
                "weight_scale": [] if axis.weight_scale is None else [f"{int(v)}u" for v in axis.weight_scale],
                "index_scale": f"{axis.index_scale}u",
                "index_shift": axis.index_shift,
            }
        )
    columns = layout.axes[1].size if len(layout.axes) == 2 else 1
    coefficients = []
    for item in layout.looked_up:
        rows = np.asarray(item.stored).reshape(-1, columns)
        if fmt.is_fixed:
            if item in layout.limit_tables:
                recipe = f"round({item.name} / output_full_scale * 2^{item.frac}), ties away from zero (output format)"
            elif item.name in GAIN_COEFFICIENTS:
                recipe = (
                    f"round({item.name} * error_full_scale / output_full_scale * 2^{item.frac}), "
                    "ties away from zero"
                )
            elif item in layout.filter_tables:
                recipe = (f"filter section coefficient {item.name} (Tustin prewarped at the section's centre), "
                          f"round({item.name} * 2^{item.frac}), ties away from zero")
            else:
                recipe = f"round({item.name} * 2^{item.frac}), ties away from zero"
        elif item in layout.filter_tables:
            recipe = f"filter section coefficient {item.name} (Tustin prewarped at the section's centre), float32"
        else:
            recipe = f"{item.name} rounded to nearest float32"
        coefficients.append(
            {
                "name": item.name,
                "upper": item.name.upper(),
                "frac": item.frac,
                "rows": [[_literal(layout, v) for v in row] for row in rows],
                "recipe": recipe,
            }
        )
    if fmt.is_fixed:
        limits = [str(int(v)) for v in layout.limits]
    else:
        limits = [c_float(float(v)) for v in layout.limits]
    structure_doc = {
        "p": "u = kp e",
        "pi": "x[k] = x[k-1] + ki_ts e[k] (conditional integration); u = kp e + x",
        "pd": "d[k] = kd_a d[k-1] + kd_b (e[k] - e[k-1]); u = kp e + d",
        "pid": "d[k] = kd_a d[k-1] + kd_b (e[k] - e[k-1]); x[k] = x[k-1] + ki_ts e[k] "
        "(conditional integration); u = kp e + x + d",
        "lead": "v[k] = pc v[k-1] + kc (e[k] - zc e[k-1]); u = v",
        "lag": "v[k] = pc v[k-1] + kc (e[k] - zc e[k-1]); u = v",
        "leadlag": "v1[k] = pc1 v1[k-1] + kc (e[k] - zc1 e[k-1]); v2[k] = pc2 v2[k-1] + (v1[k] - zc2 v1[k-1]); u = v2",
    }[layout.structure]
    ts = layout.table.sample_period
    return {
        "banner": banner_lines(fmt.name, prefix, source_sha256, options) + verdict_lines(verdict, names.verified),
        "verified": verdict.verified,
        "caution": textwrap.wrap(CAUTION, 74),
        "prefix": prefix,
        "upper": upper,
        "names": names,
        "format_codes": [(names.format_code(name), code) for name, code in FORMAT_CODES.items()],
        "fmt": {
            "name": fmt.name,
            "code_macro": names.format_code(fmt.name),
            "coef_t": fmt.c_type,
            "sig_t": fmt.c_type,
            "in_t": "int32_t" if fmt.is_fixed else "float",
            "is_fixed": fmt.is_fixed,
            "bits": fmt.bits,
            "signal_frac": fmt.signal_frac,
            "interp_frac": fmt.interp_frac,
        },
        "state_frac": STATE_FRAC,
        "to_state_shift": fmt.signal_frac - STATE_FRAC if fmt.is_fixed else 0,
        "structure": layout.structure,
        "structure_doc": structure_doc,
        "state_fields": list(state_fields(layout.structure, layout.sections)),
        "sections": layout.sections,
        "section_kinds": [section.kind.replace("_", "-") for section in layout.table.filters],
        "axes": axes,
        "coefficients": coefficients,
        "columns": columns,
        "limits": limits,
        # the limits in force without run-time limits: looked up per point when tabulated
        "table_low": (f"{names.local('to_state')}(gains->u_min)" if fmt.is_fixed else "gains->u_min")
        if layout.limit_tables else f"{upper}_U_MIN",
        "table_high": (f"{names.local('to_state')}(gains->u_max)" if fmt.is_fixed else "gains->u_max")
        if layout.limit_tables else f"{upper}_U_MAX",
        "limits_tabulated": bool(layout.limit_tables),
        "limits_physical": [repr(float(v)) for v in layout.table.limit_envelope],
        "error_full_scale": repr(layout.error_full_scale) if fmt.is_fixed else "",
        "output_full_scale": repr(layout.output_full_scale) if fmt.is_fixed else "",
        "sample_period": (
            repr(float(ts.flat[0])) if np.all(ts == ts.flat[0]) else f"{float(ts.min())!r} .. {float(ts.max())!r}"
        ),
        "points": int(np.prod([a.size for a in layout.axes])),
    }


def render_c(
    layout: TableLayout,
    prefix: str,
    source_sha256: str | None,
    options: dict | None = None,
    verdict: TableVerdict | None = None,
) -> dict[str, str]:
    """Render ``<prefix>.h`` and ``<prefix>.c`` for a laid-out table.

    Parameters
    ----------
    layout : TableLayout
        From :func:`gainloom.codegen.layout.layout_table`.
    prefix : str
        Start of every generated identifier (see
        :class:`gainloom.c_names.CNames`).
    source_sha256 : str or None
        SHA-256 of the schedule file, for the banner.
    options : dict, optional
        Generation options to record in the banner.
    verdict : TableVerdict, optional
        Verification verdict of the table (:mod:`.verdict`); ``None``
        counts as not verified.

    Returns
    -------
    dict of str to str
        File name to text, header first.
    """
    context = _context(layout, prefix, source_sha256, dict(options or {}), verdict)
    return {
        context["names"].header: render_template("table.h.j2", context),
        context["names"].source: render_template("table.c.j2", context),
    }


def template_context(
    layout: TableLayout,
    prefix: str,
    source_sha256: str,
    options: dict | None = None,
    verdict: TableVerdict | None = None,
) -> dict:
    """The variables the table templates see (for the harness template)."""
    return _context(layout, prefix, source_sha256, dict(options or {}), verdict)
