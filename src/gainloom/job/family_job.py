"""A product family in one call: one schedule, a variants file, one design
job per variant, each into its own folder, and an index of the family.

:func:`run_family` is what ``gainloom family SCHEDULE --variants FILE --out
DIR`` runs:

1. read the variants file against the schedule (located errors at the cell);
2. write each variant as a complete schedule (the base file with its values
   replaced, :func:`gainloom.schedule.variants.variant_schedule_text`) and
   load it, so every bad value is found before any design starts;
3. run the design job of each variant (:func:`run_variant`, a work unit of
   plain data: the variant's schedule text in, its rendered files and a
   plain summary out) on local processes or a Dask cluster;
4. write ``DIR/<variant>/`` (the variant's schedule, gains file, C and
   verification log) and ``DIR/family.json`` and ``DIR/family.md`` (which
   variants pass, which spec binds where, every file with its SHA-256),
   each folder with :func:`gainloom.outputs.write_outputs`, after checking
   every folder for files gainloom did not write.
"""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import InputError, ScheduleError
from ..outputs import (
    MANIFEST_NAME,
    OutputConflictError,
    check_output_folder,
    find_conflicts,
    write_outputs,
)

__all__ = ["FamilyResult", "VariantOutcome", "VariantUnit", "run_family", "run_variant"]

Progress = Callable[[str, int, int], None]


@dataclass(frozen=True)
class VariantUnit:
    """One variant's work: plain text, nothing that needs this process.

    Attributes
    ----------
    name : str
        Variant name (its folder).
    schedule_name : str
        File name of the variant's schedule in its folder (the base file's name).
    schedule_text : str
        The complete schedule of the variant.
    """

    name: str
    schedule_name: str
    schedule_text: str


@dataclass(frozen=True)
class VariantOutcome:
    """What a variant's job sends back: its files and a plain summary.

    Attributes
    ----------
    name : str
    files : dict of str to bytes
        Every file of the variant's folder, its schedule included.
    summary : dict
        Verdict, stages and per-point status, binding and tightest spec
        (JSON-ready).
    """

    name: str
    files: dict[str, bytes]
    summary: dict[str, Any]


@dataclass(frozen=True, eq=False)
class FamilyResult:
    """What :func:`run_family` returns.

    Attributes
    ----------
    out_dir : Path
    index : dict
        The content of ``family.json``.
    files : tuple of Path
        Every file written (variant folders first, the index last).
    notes : tuple of str
        What the engine reported (e.g. a lost worker whose units were rerun).
    """

    out_dir: Path
    index: dict[str, Any]
    files: tuple[Path, ...]
    notes: tuple[str, ...]

    @property
    def passed(self) -> bool:
        """True when every variant passes every stage."""
        return all(v["passed"] for v in self.index["variants"])

    @property
    def exit_code(self) -> int:
        """0 every variant passes, 1 some fails."""
        return 0 if self.passed else 1


def _point_summaries(job) -> list[dict[str, Any]]:
    from ..design.slack import tightest_specs
    from ..spec_registry import SPEC_ORDER

    design = job.design
    tightest = tightest_specs(design.analysis, SPEC_ORDER)
    return [{"point": label, "status": design.status[p], "binding": design.binding[p], "tightest": tightest[p]}
            for p, label in enumerate(design.point_labels)]


def _job_summary(job) -> dict[str, Any]:
    return {
        "passed": job.passed,
        "design_passed": job.design.passed,
        "number_format": job.number_format,
        "prefix": job.prefix,
        "stages": [s.to_dict() for s in job.stages],
        "not_checked": list(job.not_checked),
        "points": _point_summaries(job),
    }


def run_variant(options: dict[str, Any], unit: VariantUnit) -> VariantOutcome:
    """Run one variant's design job in a scratch folder and return its files.

    Parameters
    ----------
    options : dict
        ``number_format``, ``compile``, ``target``, ``simulate`` (as
        :func:`~gainloom.job.design_job.run_design_job`) and ``inner_workers``:
        the design's own processes (1 when variants already run in parallel),
        or None for its default.
    unit : VariantUnit

    Returns
    -------
    VariantOutcome
    """
    from .design_job import run_design_job

    inner = options.get("inner_workers")
    saved = os.environ.get("GAINLOOM_WORKERS")
    if inner is not None:
        os.environ["GAINLOOM_WORKERS"] = str(inner)
    try:
        with tempfile.TemporaryDirectory(prefix="gainloom-variant-") as tmp:
            source = Path(tmp) / "in" / unit.schedule_name
            source.parent.mkdir()
            source.write_text(unit.schedule_text, encoding="utf-8")
            job = run_design_job(source, Path(tmp) / "out", number_format=options.get("number_format"),
                                 compile=options["compile"], target=options["target"], simulate=options["simulate"])
            files = {unit.schedule_name: unit.schedule_text.encode("utf-8")}
            files.update({p.name: p.read_bytes() for p in sorted((Path(tmp) / "out").iterdir())
                          if p.name != MANIFEST_NAME})
    finally:
        if inner is not None:
            if saved is None:
                os.environ.pop("GAINLOOM_WORKERS", None)
            else:
                os.environ["GAINLOOM_WORKERS"] = saved
    return VariantOutcome(name=unit.name, files=files, summary=_job_summary(job))


def _relocated(error: ScheduleError, lines: dict, shown: str) -> ScheduleError:
    """An error in a variant's schedule, at the variants-file cell when it lies on a replaced value."""
    override = lines.get(error.line)
    if override is not None:
        node = override.node
        return ScheduleError(error.message, file=node.file, line=node.line, column=node.column, key_path=node.path)
    return ScheduleError(error.message, file=shown, line=error.line, column=error.column, key_path=error.key_path)


def variant_units(schedule_path: str | os.PathLike, variants_path: str | os.PathLike, out: Path
                  ) -> tuple[list[VariantUnit], Any, list]:
    """Read, render and load every variant; return its units, the base schedule and the variants.

    Raises
    ------
    ScheduleError
        The first bad value, at its cell in the variants file (or in the
        variant's schedule as it would be written, for a problem elsewhere).
    """
    from ..inputs import read_input_file
    from ..limits import MAX_SCHEDULE_BYTES
    from ..schedule import load_schedule
    from ..schedule.variants import read_variants, variant_schedule_text

    base = load_schedule(os.fspath(schedule_path))
    base_text = read_input_file(schedule_path, "schedule file", MAX_SCHEDULE_BYTES).decode("utf-8")
    variants = read_variants(os.fspath(variants_path), tuple(base.parameters), base.axis_names)
    schedule_name = Path(schedule_path).name
    taken = {"gains.yaml", "verification.json", "verification.md", f"{base.codegen.prefix}.h",
             f"{base.codegen.prefix}.c"}
    if schedule_name in taken:
        raise InputError(f"the schedule file's name {schedule_name!r} is also an output file of each variant; "
                         "rename the schedule file")
    units = []
    with tempfile.TemporaryDirectory(prefix="gainloom-family-") as tmp:
        for variant in variants:
            text, lines = variant_schedule_text(base_text, str(schedule_path), variant, str(variants_path))
            probe = Path(tmp) / variant.name / schedule_name
            probe.parent.mkdir()
            probe.write_text(text, encoding="utf-8")
            try:
                load_schedule(probe)
            except ScheduleError as error:
                raise _relocated(error, lines, str(out / variant.name / schedule_name)) from None
            units.append(VariantUnit(name=variant.name, schedule_name=schedule_name, schedule_text=text))
    return units, base, list(variants)


def run_family(
    schedule_path: str | os.PathLike,
    variants_path: str | os.PathLike,
    out_dir: str | os.PathLike,
    *,
    number_format: str | None = None,
    force: bool = False,
    compile: bool = True,
    target: bool = True,
    simulate: bool = True,
    workers: int | None = None,
    cluster: str | None = None,
    progress: Progress | None = None,
) -> FamilyResult:
    """Design every variant of a product family into its own folder, with an index.

    Parameters
    ----------
    schedule_path : path
        The base schedule (YAML).
    variants_path : path
        The variants file (CSV or YAML, :mod:`gainloom.schedule.variants`).
    out_dir : path
        Family folder: ``<variant>/`` folders, ``family.json``, ``family.md``.
    number_format, compile, target, simulate
        As :func:`~gainloom.job.design_job.run_design_job`, for every variant.
    force : bool
        Overwrite files gainloom did not write or that were edited.
    workers : int, optional
        Local processes (default ``GAINLOOM_WORKERS`` or the CPU count).
    cluster : str, optional
        Address of a Dask scheduler (or ``GAINLOOM_CLUSTER``); the units run
        there instead of on local processes, with the same files.
    progress : callable, optional
        ``progress(stage, done, total)`` in variants.

    Returns
    -------
    FamilyResult

    Raises
    ------
    GainloomError
        Bad schedule, variants file or options, or a file in the way.  No
        folder is written then.
    """
    from ..design.engine import worker_count
    from ..design.pool import map_units
    from ..report.family_index import render_family_index

    out = check_output_folder(out_dir)
    units, base, variants = variant_units(schedule_path, variants_path, out)
    for unit in units:
        check_output_folder(out / unit.name)
    count = worker_count(len(units)) if workers is None else max(1, workers)
    parallel = count > 1 or cluster is not None
    options = {"number_format": number_format, "compile": compile, "target": target, "simulate": simulate,
               "inner_workers": 1 if parallel else None}
    notes: list[str] = []
    outcomes = map_units(run_variant, (options,), units, count, progress, stage="family", cluster=cluster,
                         notes=notes)
    index_files = render_family_index(base, schedule_path, variants_path, variants, outcomes)
    if not force:
        conflicts = [c for o in outcomes for c in find_conflicts(out / o.name, o.files)]
        conflicts += find_conflicts(out, index_files)
        if conflicts:
            raise OutputConflictError("refusing to overwrite: " + "; ".join(conflicts)
                                      + " (use --force, or force=True, to overwrite); nothing was written")
    written: list[Path] = []
    for outcome in outcomes:
        written += write_outputs(out / outcome.name, outcome.files, force=force)
    written += write_outputs(out, index_files, force=force)
    return FamilyResult(out_dir=out, index=json.loads(index_files["family.json"]), files=tuple(written),
                        notes=tuple(notes))
