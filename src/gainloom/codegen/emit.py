"""Emit the C for a gain table into an output folder.

The whole pipeline of this layer in one call: lay the table out in the
number format (:mod:`.layout`), render header and source (:mod:`.render`),
then write both through :func:`gainloom.outputs.write_outputs` (rendered
first, written atomically, never over files gainloom did not write).
"""

from __future__ import annotations

import os
from pathlib import Path

from ..c_names import validate_prefix
from ..design.table import GainTable
from ..outputs import write_outputs
from .layout import layout_table
from .render import render_c
from .verdict import TableVerdict

__all__ = ["render_files", "emit_c"]


def render_files(
    table: GainTable,
    number_format: str,
    prefix: str,
    source_sha256: str | None,
    options: dict | None = None,
    *,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
    verdict: TableVerdict | None = None,
) -> dict[str, str]:
    """Render ``<prefix>.h`` and ``<prefix>.c`` without writing them.

    Parameters are those of :func:`emit_c` (less the folder and ``force``).

    Returns
    -------
    dict of str to str
        File name to text.
    """
    validate_prefix(prefix)
    layout = layout_table(
        table, number_format, error_full_scale=error_full_scale, output_full_scale=output_full_scale
    )
    recorded = dict(options or {})
    if layout.fmt.is_fixed:
        # the resolved full-scale values decide every stored integer: record them
        recorded["error_full_scale"] = layout.error_full_scale
        recorded["output_full_scale"] = layout.output_full_scale
    return render_c(layout, prefix, source_sha256, recorded, verdict)


def emit_c(
    table: GainTable,
    out_dir: str | os.PathLike,
    number_format: str,
    prefix: str,
    source_sha256: str | None,
    options: dict | None = None,
    *,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
    verdict: TableVerdict | None = None,
    force: bool = False,
) -> list[Path]:
    """Generate the C header and source of a gain table into ``out_dir``.

    Parameters
    ----------
    table : GainTable
        The designed table.
    out_dir : path
        Output folder (created if missing).
    number_format : str
        ``"float32"``, ``"q15"`` or ``"q31"``.
    prefix : str
        Start of every generated identifier and the file names
        (``<prefix>.h``, ``<prefix>.c``).
    source_sha256 : str or None
        SHA-256 of the schedule file the table was designed from (for the
        banner); ``None`` if unknown.
    options : dict, optional
        Further generation options to record in the banner (e.g. the gains
        file name).
    error_full_scale : float, optional
        Fixed point: physical error of full-scale input (default 1).
    output_full_scale : float, optional
        Fixed point: physical output of full scale (default
        ``max(|u_min|, |u_max|)``).
    verdict : TableVerdict, optional
        The table's verification verdict (:func:`.verdict.table_verdict`).
        ``None`` counts as not verified: the header then stops compilation
        unless ``<PREFIX>_ACCEPT_UNVERIFIED`` is defined.
    force : bool
        Overwrite files in ``out_dir`` that gainloom did not write.

    Returns
    -------
    list of Path
        Header and source paths.

    Raises
    ------
    CodegenError
        Bad prefix or names, values that do not fit the format.
    OutputConflictError
        A file in the way that gainloom did not write (see ``force``).
    """
    files = render_files(
        table,
        number_format,
        prefix,
        source_sha256,
        options,
        error_full_scale=error_full_scale,
        output_full_scale=output_full_scale,
        verdict=verdict,
    )
    return write_outputs(out_dir, files, force=force)
