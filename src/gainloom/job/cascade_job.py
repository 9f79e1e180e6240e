"""The whole job for a cascade file: every loop designed, emitted as one C
module, checked and logged into one output folder.

:func:`run_cascade_job` is what ``gainloom design CASCADE --out DIR`` runs:

1. design the loops inner first (:func:`gainloom.design.design_cascade`),
   with the cascade checks;
2. per loop, the stages of the single-loop job (:mod:`.design_job`): the gains
   file ``<loop>.gains.yaml`` and the re-check of the table as stored in
   the number format;
3. one C module ``<prefix>.h``/``<prefix>.c`` with every loop
   (:mod:`gainloom.codegen.cascade`); each loop's verdict includes the
   cascade checks;
4. per loop, the host harness against the Python mirror, run on the cascade
   module;
5. the log: ``verification.json`` with a top-level ``loops`` list (inner
   first; each entry the single-loop document) and a ``cascade`` section,
   ``verification.md`` the same, and each loop's plots as ``<loop>_*.png``.

6. a run of the cascade at its rates (:mod:`gainloom.simulation.cascade`):
   a reference step and a load step, in the number format of the C, with
   ``cascade_simulation.png``.

7. the module on the target cores (:mod:`gainloom.codegen.target_cascade`):
   one build per core, every loop's harness run emulated against its host
   run, instructions per lookup and step and of the base-period interrupt
   in the documented calling order, cppcheck with the MISRA addon; "not
   checked" without the tools.

Files are written once, at the end,
as by the single-loop job.
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..outputs import check_output_folder, write_outputs
from .design_job import (
    Progress,
    StagedOutcome,
    StageVerdict,
    _rules_stage,
    design_stage,
    harness_stage,
    quantisation_stage,
    resolve_format,
)

__all__ = ["CascadeJobResult", "cascade_stage", "cascade_target_stage", "run_cascade_job"]


@dataclass(frozen=True, eq=False)
class CascadeJobResult(StagedOutcome):
    """What :func:`run_cascade_job` returns.

    Attributes
    ----------
    out_dir : Path
    files : tuple of Path
        Every file written.
    c_files : tuple of Path
        ``<prefix>.h`` and ``<prefix>.c``.
    gains_paths : tuple of Path
        One gains file per loop, inner first.
    number_format, prefix : str
    design : CascadeDesign
    quantisation, harness : tuple
        Per loop, inner first (harness entries None when not compiled).
    target : CascadeTargetResult or None
        The module on the target cores (None when not asked for).
    stages : tuple of StageVerdict
        Per-loop stages (named ``<loop>: <stage>``), then the cascade's.
    """

    out_dir: Path
    files: tuple[Path, ...]
    c_files: tuple[Path, ...]
    gains_paths: tuple[Path, ...]
    number_format: str
    prefix: str
    design: Any
    quantisation: tuple[Any, ...]
    harness: tuple[Any, ...]
    target: Any
    stages: tuple[StageVerdict, ...]


def cascade_stage(checks: Any) -> StageVerdict:
    """The cascade checks as one stage line."""
    parts = []
    for pair in checks.pairs:
        ratio = f"crossover ratio {pair.min_crossover_ratio:.3g}"
        if pair.required_ratio is not None:
            ratio += f" (needs {pair.required_ratio:g}{'' if pair.separation_passed else ': FAILS'})"
        failing = f", {pair.failed_pairs} failing" if pair.failed_pairs else ""
        corners = f" x {pair.corners + 1} (nominal and tolerance corners)" if pair.corners else ""
        parts.append(f"{pair.outer} around {pair.inner}: {pair.pairs} point pairs{corners}{failing}, {ratio}, "
                     f"min GM {pair.min_gain_margin_db:.3g} dB, min PM {pair.min_phase_margin:.3g} deg"
                     f"{_worst_corner_text(pair)}")
    return StageVerdict("cascade", "pass" if checks.passed else "FAIL", "; ".join(parts))


def _worst_corner_text(pair: Any) -> str:
    """Where the outer specs are worst over every outer point (``""`` without tolerance corners)."""
    if not pair.corners or not pair.worst_per_point:
        return ""
    w = min(pair.worst_per_point, key=lambda e: (-len(e["failed_specs"]), e["binding_slack"]))
    failing = f", fails {', '.join(w['failed_specs'])}" if w["failed_specs"] else ""
    return (f"; worst at {w['outer_point']} with the inner loop at {w['inner_point']}, {w['corner_label']}: "
            f"{w['binding_spec'] or 'no spec'} binds{failing}")


def default_cascade_scenario(design: Any) -> Any:
    """The cascade run the full job does: a speed-reference step and a load step
    (:func:`gainloom.simulation.cascade_scenario.cascade_scenario` with its
    defaults, on the outer loop's time scale
    :func:`gainloom.simulation.defaults.time_scale`)."""
    from ..simulation.cascade_scenario import cascade_scenario
    from ..simulation.defaults import time_scale

    scale, _basis = time_scale(design.results[1])
    return cascade_scenario(design.schedules, design.cascade.loops[1].inner_at,
                            design.results[1].table.limit_envelope, scale)


def _interrupt_text(core: dict[str, Any]) -> str:
    build, interrupt = core["build"], core["interrupt"]
    stack = max((f["stack_bytes"] or 0 for f in build["functions"]), default=0)
    text = f"{core['core']}: {build['flash_bytes']} B flash, {build['ram_bytes']} B RAM, stack <= {stack} B"
    if interrupt and interrupt["mean_per_base_period"] is not None:
        inner, outer = interrupt["inner_only"], interrupt["with_outer"]
        text += (f", interrupt {inner['min']}..{inner['max']} instructions (inner step only), "
                 f"{outer['min']}..{outer['max']} (with the outer step), "
                 f"{interrupt['mean_per_base_period']:.0f} per base period on average")
    return text


def cascade_target_stage(target: Any, skipped: str) -> StageVerdict:
    """The cascade module on the target cores as one stage line: per core sizes and interrupt instructions."""
    if target is None:
        return StageVerdict("target", "not checked", f"not checked: {skipped}")
    if target.passed is None:
        return StageVerdict("target", "not checked", target.message)
    if not target.passed:
        return StageVerdict("target", "FAIL", target.message)
    return StageVerdict("target", "pass", "; ".join(_interrupt_text(c) for c in target.to_dict()["cores"]))


def simulation_stage(run: Any) -> StageVerdict:
    """The cascade run as one stage line: stability and per-loop figures."""
    if run is None:
        return StageVerdict("simulation", "not checked", "not checked: skipped on request (--no-simulate)")
    parts = []
    for loop in run.loops:
        m = loop.metrics
        text = f"{loop.name}: saturated {100 * m.saturation_fraction:.3g} %"
        if m.overshoot is not None:
            text += f", step overshoot {m.overshoot:.3g} %"
        if m.settling_time is not None:
            text += f", settling {m.settling_time:.3g} s"
        if m.instability.detected:
            text += f", UNSTABLE ({m.instability.kind})"
        parts.append(text)
    return StageVerdict("simulation", "pass" if run.stable else "FAIL", "; ".join(parts))


def _loop_c(loop: Any, schedule: Any, result: Any, verdict: Any) -> Any:
    from ..codegen.cascade import CascadeLoopC

    return CascadeLoopC(
        name=loop.name, prefix=schedule.codegen.prefix, table=result.table,
        period=float(schedule.sampling.period[0]), rate_factor=loop.rate_factor,
        delay=float(schedule.sampling.delay[0]), error_full_scale=schedule.codegen.error_full_scale,
        output_full_scale=schedule.codegen.output_full_scale, verdict=verdict,
    )


def _scales(schedule: Any) -> dict[str, Any]:
    return {"error_full_scale": schedule.codegen.error_full_scale,
            "output_full_scale": schedule.codegen.output_full_scale}


def _loop_log(loop: Any, schedule: Any, result: Any, gains_path: Path, harness: Any, quantisation: Any,
              options: dict[str, Any], target: Any) -> tuple[dict[str, Any], dict[str, str | bytes]]:
    """One loop's verification document and its plots renamed ``<loop>_*.png``."""
    from ..report.log import JSON_NAME, MARKDOWN_NAME, render_verification

    files = render_verification(schedule=schedule, result=result, table=result.table, gains_path=gains_path,
                                harness=harness, quantisation=quantisation, simulation=None, options=options, target=target,
                                plots=True)
    doc = json.loads(files.pop(JSON_NAME))
    files.pop(MARKDOWN_NAME)
    doc["plots"] = [f"{loop.name}_{name}" for name in doc.get("plots", [])]
    doc["loop"] = {"name": loop.name, "rate_factor": loop.rate_factor, "inner_at": loop.inner_at or {},
                   "shared_variables": list(loop.shared), "sample_period": float(schedule.sampling.period[0])}
    return doc, {f"{loop.name}_{name}": data for name, data in files.items()}


def _cascade_document(cascade: Any, design: Any, docs: list[dict[str, Any]], stages: list[StageVerdict],
                      c_names_: list[str]) -> dict[str, Any]:
    from ..safety import CAUTION

    return {
        "kind": "cascade",
        "cascade": {
            "name": cascade.name, "description": cascade.description, "path": cascade.path,
            "sha256": cascade.sha256, "loops": [loop.name for loop in cascade.loops],
            "min_crossover_ratio": cascade.cascade.min_crossover_ratio,
            "checks": design.checks.to_dict(), "c_files": c_names_,
            "passed": not any(s.failed for s in stages),
            "stages": [s.to_dict() for s in stages],
        },
        "loops": docs,
        "caution": CAUTION,
    }


def run_cascade_job(
    cascade_path: str | os.PathLike,
    out_dir: str | os.PathLike,
    *,
    number_format: str | None = None,
    prefix: str | None = None,
    force: bool = False,
    compile: bool = True,
    simulate: bool = True,
    target: bool = True,
    progress: Progress | None = None,
) -> CascadeJobResult:
    """Design, emit, check and log a cascade into one output folder (module docstring).

    Parameters
    ----------
    cascade_path : path
        The cascade file (docs/cascade.md).
    out_dir : path
        Output folder (created if missing), written once at the end.
    number_format : str, optional
        Default the cascade's ``codegen.format``.
    prefix : str, optional
        The module's C prefix; default ``codegen.prefix`` (each loop's is
        ``<prefix>_<loop>``).
    force : bool
        Overwrite files gainloom did not write or that were edited.
    compile : bool
        Compile the module and run each loop's host harness (when a compiler exists).
    simulate : bool
        Run the cascade at its rates (:func:`default_cascade_scenario`) in
        the number format, with a plot ``cascade_simulation.png``.
    target : bool
        With ``compile``: the module on the target cores
        (:func:`gainloom.codegen.target_cascade.check_cascade_target`).
    progress : callable, optional

    Returns
    -------
    CascadeJobResult
    """
    from ..c_names import validate_prefix
    from ..codegen.cascade import cascade_verdict, harness_header, render_cascade_files
    from ..codegen.quantisation import check_quantisation
    from ..codegen.verdict import table_verdict
    from ..design.cascade import design_cascade
    from ..design.gainsfile import render_gains
    from ..schedule.cascade import load_cascade

    out = check_output_folder(out_dir)
    cascade = load_cascade(Path(cascade_path))
    number_format = resolve_format(cascade.loops[0].schedule, number_format)
    prefix = cascade.codegen.prefix if prefix is None else validate_prefix(prefix)
    cascade = _with_prefix(cascade, prefix, number_format)
    design = design_cascade(cascade, progress=progress)
    gains = {loop.name: render_gains(result, f"{loop.name}.gains.yaml")
             for loop, result in zip(cascade.loops, design.results)}
    quantisation = tuple(check_quantisation(s, r.table, number_format, baseline=r, **_scales(s))
                         for s, r in zip(design.schedules, design.results))
    loops_c = [
        _loop_c(loop, s, r, cascade_verdict(table_verdict(r.passed, q.rounded.passed, number_format),
                                            design.checks.passed))
        for loop, s, r, q in zip(cascade.loops, design.schedules, design.results, quantisation)
    ]
    c_texts = render_cascade_files(loops_c, prefix, number_format, cascade.sha256,
                                   {"cascade": Path(cascade.path).name})
    texts = {f"{name}.gains.yaml": text for name, text in gains.items()} | c_texts
    with tempfile.TemporaryDirectory(prefix="gainloom-cascade-") as tmp:
        stage_dir = Path(tmp)
        for name, text in texts.items():
            (stage_dir / name).write_text(text, encoding="utf-8")
        stand_ins = [harness_header(lc, prefix, number_format, cascade.sha256, {"cascade": "harness"})
                     for lc in loops_c]
        harness = tuple(_harness(stage_dir, c_texts, lc, stand_in, loops_c) if compile else None
                        for lc, stand_in in zip(loops_c, stand_ins))
        target_result = None
        if compile and target:
            from ..codegen.target_cascade import check_cascade_target

            target_result = check_cascade_target(c_texts, loops_c, stand_ins, list(harness), number_format)
        run = None
        if simulate:
            from ..simulation.cascade import run_cascade

            run = run_cascade(cascade, design.schedules, tuple(r.table for r in design.results),
                              default_cascade_scenario(design), number_format)
        skipped = "skipped on request (" + ("--no-compile" if not compile else "--no-target") + ")"
        stages = _stages(cascade, design, quantisation, harness, number_format, c_texts, run,
                         (target_result, skipped))
        docs, images = _logs(cascade, design, stage_dir, harness, quantisation, number_format, prefix, target_result)
    document = _cascade_document(cascade, design, docs, stages, sorted(c_texts))
    document["cascade"]["target"] = None if target_result is None else target_result.to_dict()
    files: dict[str, str | bytes] = dict(texts)
    if run is not None:
        from ..simulation.cascade_plot import PLOT_FILE, plot_cascade

        document["cascade"]["simulation"] = run.to_dict()
        files[PLOT_FILE] = plot_cascade(run)
    files.update(_log_files(document))
    files.update(images)
    written = write_outputs(out, files, force=force)
    return CascadeJobResult(
        out_dir=out, files=tuple(written), c_files=tuple(out / n for n in c_texts),
        gains_paths=tuple(out / f"{loop.name}.gains.yaml" for loop in cascade.loops),
        number_format=number_format, prefix=prefix, design=design, quantisation=quantisation, harness=harness,
        target=target_result, stages=tuple(stages),
    )


def _with_prefix(cascade: Any, prefix: str, number_format: str) -> Any:
    """The cascade with its loops' C prefixes and number format as emitted."""
    from dataclasses import replace

    loops = tuple(
        replace(loop, schedule=replace(loop.schedule, codegen=replace(
            loop.schedule.codegen, prefix=f"{prefix}_{loop.name}", format=number_format)))
        for loop in cascade.loops
    )
    codegen = replace(cascade.codegen, prefix=prefix, format=number_format)
    return replace(cascade, loops=loops, codegen=codegen)


def _harness(stage_dir: Path, c_texts: dict[str, str], loop_c: Any, stand_in: tuple[str, str],
             loops_c: list[Any]) -> Any:
    """Run one loop's host harness on the cascade module (through its stand-in header)."""
    from ..codegen.harness import check_generated_c

    name, text = stand_in
    loop_dir = stage_dir / f"harness_{loop_c.name}"
    loop_dir.mkdir()
    (loop_dir / name).write_text(text, encoding="utf-8")
    for file_name, body in c_texts.items():
        (loop_dir / file_name).write_text(body, encoding="utf-8")
    files = [loop_dir / name] + [loop_dir / n for n in sorted(c_texts)]
    others = tuple(lc.prefix for lc in loops_c if lc.prefix != loop_c.prefix)
    return check_generated_c(files, loop_c.table, error_full_scale=loop_c.error_full_scale,
                             output_full_scale=loop_c.output_full_scale, accept=others)


def _stages(cascade: Any, design: Any, quantisation: tuple, harness: tuple, number_format: str,
            c_texts: dict[str, str], run: Any, target: tuple[Any, str]) -> list[StageVerdict]:
    stages: list[StageVerdict] = []
    for loop, result, quant, check in zip(cascade.loops, design.results, quantisation, harness):
        for stage in (design_stage(result), quantisation_stage(quant, number_format), harness_stage(check)):
            stages.append(StageVerdict(f"{loop.name}: {stage.stage}", stage.status, stage.detail))
    stages.append(cascade_stage(design.checks))
    stages.append(StageVerdict("C code", "written", f"{', '.join(sorted(c_texts))} ({number_format}, one module "
                               f"for {', '.join(loop.name for loop in cascade.loops)})"))
    stages.append(cascade_target_stage(*target))
    stages.append(_rules_stage(*target))
    stages.append(simulation_stage(run))
    return stages


def _logs(cascade: Any, design: Any, stage_dir: Path, harness: tuple, quantisation: tuple, number_format: str,
          prefix: str, target: Any) -> tuple[list[dict[str, Any]], dict[str, str | bytes]]:
    docs, images = [], {}
    for loop, sched, result, check, quant in zip(cascade.loops, design.schedules, design.results, harness,
                                                 quantisation):
        options = {"number_format": number_format, "prefix": sched.codegen.prefix, "cascade_prefix": prefix,
                   "gains_file": f"{loop.name}.gains.yaml",
                   **{k: v for k, v in _scales(sched).items() if v is not None}}
        doc, loop_images = _loop_log(loop, sched, result, stage_dir / f"{loop.name}.gains.yaml", check, quant,
                                     options, None if target is None else target.for_loop(loop.name))
        docs.append(doc)
        images.update(loop_images)
    return docs, images


def _log_files(document: dict[str, Any]) -> dict[str, str]:
    from ..report.log import JSON_NAME, MARKDOWN_NAME
    from ..report.markdown_cascade import render_cascade_markdown

    text = json.dumps(document, indent=2, sort_keys=True, ensure_ascii=False, allow_nan=False) + "\n"
    return {JSON_NAME: text, MARKDOWN_NAME: render_cascade_markdown(document)}

