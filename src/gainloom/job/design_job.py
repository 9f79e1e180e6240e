"""The whole job in one call: schedule file in, checked output folder out.

:func:`run_design_job` is what ``gainloom design SCHEDULE --out DIR`` runs:

1. load the schedule and design the gain table (the gains file);
2. verify the table again after rounding to the emitted number format;
3. render the C header and source in that format, carrying the table's
   verdict (design and re-check, :mod:`gainloom.codegen.verdict`);
4. compile them and run the host harness against the Python mirror, when a
   C compiler is present (none found: "not checked", neither pass nor fail);
   then build them for the target cores, run the harness on emulated boards,
   count instructions and check the coding rules
   (:func:`gainloom.codegen.target.check_target`; without the tools: "not
   checked");
5. run a default scheduled simulation
   (:func:`gainloom.simulation.defaults.default_scenario`) in that
   number format;
6. render the verification log (JSON, Markdown, PNGs);

and only then write every file in **one** :func:`gainloom.outputs.write_outputs`
call.  Anything that goes wrong before the write (bad input, a file in the
way that gainloom did not write) leaves the output folder exactly as it was.

A design that fails a spec still writes everything: the gains file records
``passed: false``, the log names the binding spec at every failed point, and
the C is exactly what ``gainloom emit --schedule`` makes of the same gains
file.  The header carries the table's verdict: a table that failed defines
``<PREFIX>_VERIFIED`` as 0 and does not compile unless the integrator
defines ``<PREFIX>_ACCEPT_UNVERIFIED``.  The verdict rests on the design and
the re-check of the rounded table only, so the C of a table does not change
when, say, a simulation setting changes.

This module is the job layer (:mod:`gainloom.job`): it may use every library
layer, ``report`` included; the CLI only parses arguments and prints.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import InputError
from ..names import NUMBER_FORMATS, unknown_name_message
from ..outputs import check_output_folder, write_outputs
from ..simulation.defaults import default_scenario

if TYPE_CHECKING:  # pragma: no cover
    from ..codegen.harness import HarnessResult
    from ..codegen.quantisation import QuantisationResult
    from ..codegen.target import TargetResult
    from ..design.results import DesignResult
    from ..schedule import Schedule
    from ..simulation.result import SimulationResult

__all__ = [
    "JobResult",
    "StageVerdict",
    "StagedOutcome",
    "design_stage",
    "harness_stage",
    "quantisation_stage",
    "resolve_format",
    "run_design_job",
]

Progress = Callable[[str, int, int], None]


@dataclass(frozen=True)
class StageVerdict:
    """Outcome of one stage of the job.

    Parameters
    ----------
    stage : str
        ``design``, ``C code``, ``C check``, ``target``, ``C rules``,
        ``quantisation``, ``simulation``, ``log`` or ``measured data`` (a measured plant).
    status : str
        ``pass``, ``FAIL``, ``not checked``, ``written`` or ``not generated``.
    detail : str
        One line saying why.
    """

    stage: str
    status: str
    detail: str

    def to_dict(self) -> dict[str, str]:
        """Plain data (the ``stages`` entries of the JSON outputs)."""
        return {"stage": self.stage, "status": self.status, "detail": self.detail}

    @property
    def failed(self) -> bool:
        """True when this stage fails the run."""
        return self.status == "FAIL"


class StagedOutcome:
    """Verdict properties of a job result with a ``stages`` tuple of :class:`StageVerdict`."""

    stages: tuple[StageVerdict, ...]

    @property
    def passed(self) -> bool:
        """True when no stage failed ("not checked" stages do not count as a pass; see ``not_checked``)."""
        return not any(s.failed for s in self.stages)

    @property
    def not_checked(self) -> tuple[str, ...]:
        """Stages that did not run or could not check anything."""
        return tuple(s.stage for s in self.stages if s.status == "not checked")

    @property
    def exit_code(self) -> int:
        """CLI exit code: 0 every stage passes (or was not checked), 1 some spec fails."""
        return 0 if self.passed else 1


@dataclass(frozen=True, eq=False)
class JobResult(StagedOutcome):
    """What :func:`run_design_job` returns.

    Attributes
    ----------
    out_dir : Path
        The output folder.
    files : tuple of Path
        Every file written, in the order written.
    gains_path : Path
        The gains file.
    c_files : tuple of Path
        ``<prefix>.h`` and ``<prefix>.c``.
    number_format, prefix : str
        Of the emitted C.
    schedule : Schedule
    design : DesignResult
    harness : HarnessResult or None
        None when the C check was not asked for.
    target : TargetResult or None
        None when the target check was not asked for.
    quantisation : QuantisationResult
    simulation : SimulationResult or None
        None when the simulation was skipped.
    scenario : dict or None
        The default scenario as run, with how it was derived.
    stages : tuple of StageVerdict
        One per stage, in order.
    """

    out_dir: Path
    files: tuple[Path, ...]
    gains_path: Path
    c_files: tuple[Path, ...]
    number_format: str
    prefix: str
    schedule: Schedule
    design: DesignResult
    harness: HarnessResult | None
    target: TargetResult | None
    quantisation: QuantisationResult
    simulation: SimulationResult | None
    scenario: dict[str, Any] | None
    stages: tuple[StageVerdict, ...]


def measured_stage(check: Any) -> StageVerdict:
    """The table judged on the measured data as one stage line, with the worst data-judged margins."""
    m = check.margins
    count = len(check.failed)
    worst = (f"worst on the data: GM {np.nanmin(m.gain_margin_db):.3g} dB, PM {np.nanmin(m.phase_margin):.3g} deg, "
             f"Ms {np.nanmax(m.sensitivity_peak):.3g}")
    if check.passed:
        return StageVerdict("measured data", "pass", f"{count}/{count} points meet the frequency specs on the raw "
                            f"data; {worst}")
    failing = [f"{check.labels[i]}: {'; '.join(f)}" for i, f in enumerate(check.failed) if f]
    return StageVerdict("measured data", "FAIL", f"{len(failing)}/{count} points fail on the raw data ("
                        + " | ".join(failing[:2]) + (" ..." if len(failing) > 2 else "") + f"); {worst}")


def design_stage(result: Any) -> StageVerdict:
    """The design as one stage line: points passing, binding specs and whole-table checks that fail."""
    failed = [p for p, s in enumerate(result.status) if s != "pass"]
    if not failed and result.table_report.passed:
        return StageVerdict("design", "pass", f"{len(result.status)}/{len(result.status)} points meet every spec; "
                            "whole-table checks pass")
    parts = []
    if failed:
        binding: dict[str, int] = {}
        for p in failed:
            name = result.binding[p] or (result.analysis.failed_specs(p) or ["?"])[0]
            binding[name] = binding.get(name, 0) + 1
        named = ", ".join(f"{name} at {count} point(s)" for name, count in sorted(binding.items()))
        parts.append(f"{len(failed)}/{len(result.status)} points fail (binding spec: {named})")
    report = result.table_report
    if report.between:
        parts.append(f"{len(report.between)} between-point check(s) fail")
    if report.tolerances:
        parts.append(f"{len(report.tolerances)} point(s) fail at a tolerance corner")
    if report.smoothness:
        parts.append(f"{len(report.smoothness)} smoothness violation(s)")
    if report.monotone:
        parts.append(f"{len(report.monotone)} monotonicity violation(s)")
    return StageVerdict("design", "FAIL", "; ".join(parts))


def harness_stage(harness: Any, skipped: str | None = None) -> StageVerdict:
    """The host harness as one stage line (``None``: not run, for the reason ``skipped``)."""
    if harness is None:
        return StageVerdict("C check", "not checked", "not checked: " + (
            skipped or "compile-and-harness check skipped on request (--no-compile)"))
    if harness.status == "no-compiler":
        return StageVerdict("C check", "not checked", "not checked: no C compiler found")
    if harness.passed:
        return StageVerdict("C check", "pass", f"{harness.compiler_version}: {harness.message}")
    return StageVerdict("C check", "FAIL", f"{harness.compiler_version}: {harness.message}")


def _target_figures(target: Any) -> str:
    parts = []
    for core in target.to_dict()["cores"]:
        counts, build = core["instructions"], core["build"]
        stack = max((f["stack_bytes"] or 0 for f in build["functions"]), default=0)
        text = f"{core['core']}: {build['flash_bytes']} B flash, {build['ram_bytes']} B RAM, stack <= {stack} B"
        if counts:
            text += (f", lookup {counts['lookup']['min']}..{counts['lookup']['max']}, "
                     f"step {counts['step']['min']}..{counts['step']['max']} instructions")
        parts.append(text)
    return "; ".join(parts)


def _target_stage(target: Any, skipped: str) -> StageVerdict:
    if target is None:
        return StageVerdict("target", "not checked", f"not checked: {skipped}")
    if target.passed is None:
        return StageVerdict("target", "not checked", target.message)
    if target.passed:
        return StageVerdict("target", "pass", _target_figures(target))
    return StageVerdict("target", "FAIL", target.message)


def _rules_stage(target: Any, skipped: str) -> StageVerdict:
    if target is None:
        return StageVerdict("C rules", "not checked", f"not checked: {skipped}")
    rules = target.rules
    status = {True: "pass", False: "FAIL", None: "not checked"}[rules.passed]
    return StageVerdict("C rules", status, rules.message)


def quantisation_stage(quantisation: Any, number_format: str) -> StageVerdict:
    """The re-check of the table as stored in ``number_format`` as one stage line."""
    warned = quantisation.filter_warnings
    note = f"; {len(warned)} filter warning(s): {warned[0]}" if warned else ""
    if quantisation.passed:
        return StageVerdict("quantisation", "pass", f"rounding to {number_format} breaks no spec" + (
            "; filter poles stay inside the unit circle" if quantisation.filters else "") + note)
    broken = quantisation.broken
    shown = "; ".join([f"{b['spec']} at {b['point']} ({b['where']})" for b in broken[:3]]
                      + quantisation.filter_failures[:2])
    count = len(broken) + len(quantisation.filter_failures)
    more = f" and {count - 3} more" if count > 3 else ""
    return StageVerdict("quantisation", "FAIL", f"rounding to {number_format} breaks {shown}{more}{note}")


def _simulation_stage(simulation: Any, skipped: str | None = None) -> StageVerdict:
    if simulation is None:
        return StageVerdict("simulation", "not checked",
                            "not checked: " + (skipped or "skipped on request (--no-simulate)"))
    m = simulation.metrics
    if simulation.stable:
        overshoot = "-" if m.overshoot is None else f"{m.overshoot:.3g} %"
        return StageVerdict("simulation", "pass" if simulation.passed else "FAIL",
                            f"stable over {simulation.time.size} samples; step overshoot {overshoot}, "
                            f"saturated {100 * m.saturation_fraction:.3g} % of the run")
    return StageVerdict("simulation", "FAIL", f"unstable ({m.instability.kind}): {m.instability.detail}")


def resolve_format(schedule: Any, number_format: str | None) -> str:
    """The number format asked for, else the schedule's ``codegen.format``; refuses an unknown one."""
    fmt = number_format or schedule.codegen.format
    if fmt not in NUMBER_FORMATS:
        raise InputError(unknown_name_message("number format", fmt, NUMBER_FORMATS))
    return fmt


def run_design_job(
    schedule_path: str | os.PathLike,
    out_dir: str | os.PathLike,
    *,
    number_format: str | None = None,
    prefix: str | None = None,
    force: bool = False,
    compile: bool = True,
    target: bool = True,
    simulate: bool = True,
    progress: Progress | None = None,
    gains_name: str = "gains.yaml",
) -> JobResult:
    """Design, emit, check and log a schedule into one output folder.

    Parameters
    ----------
    schedule_path : path
        The schedule file (YAML).
    out_dir : path
        Output folder (created if missing).  Written once, at the end.
    number_format : str, optional
        ``float32``, ``q15`` or ``q31``; default the schedule's
        ``codegen.format``.  The C, the quantisation re-check and the
        simulation all use it (fixed point: the default full-scale values of
        docs/codegen.md).
    prefix : str, optional
        C identifier and file-name prefix; default ``codegen.prefix``.
    force : bool
        Overwrite files in ``out_dir`` that gainloom did not write or that
        were edited since.
    compile : bool
        Compile the C and run the host harness (when a compiler exists).
    target : bool
        Build the C for the target cores, run it emulated, count its
        instructions and check its coding rules (when the tools exist; not
        without ``compile``).
    simulate : bool
        Run the default scheduled simulation (:func:`default_scenario`).
    progress : callable, optional
        ``progress(stage, done, total)`` for a display.
    gains_name : str
        File name of the gains file (``.yaml``, ``.yml`` or ``.json``).

    Returns
    -------
    JobResult

    Raises
    ------
    GainloomError
        Bad schedule or options (:class:`~gainloom.errors.ScheduleError`,
        :class:`~gainloom.errors.InputError`), a table the number format
        cannot hold (:class:`~gainloom.errors.CodegenError`), or a file in
        the way (:class:`~gainloom.outputs.OutputConflictError`).  Nothing is
        written then.
    """
    from ..c_names import c_names, validate_prefix
    from ..codegen.emit import render_files
    from ..codegen.harness import check_generated_c
    from ..codegen.quantisation import check_quantisation
    from ..codegen.target import check_target
    from ..codegen.verdict import table_verdict
    from ..design.engine import design
    from ..design.gainsfile import render_gains
    from ..outputs import sha256_bytes
    from ..report.log import render_verification
    from ..schedule import load_schedule
    from ..simulation import run_scenario

    def step(stage: str, done: int, total: int = 1) -> None:
        if progress is not None:
            progress(stage, done, total)

    name = Path(gains_name)
    if name.name != gains_name or name.suffix.lower() not in (".yaml", ".yml", ".json"):
        raise InputError(f"gains file name must be a plain file name ending .yaml, .yml or .json; got {gains_name!r}")
    out = check_output_folder(out_dir)  # a bad output path is bad input, found before the design
    schedule = load_schedule(os.fspath(schedule_path))
    number_format = resolve_format(schedule, number_format)
    prefix = schedule.codegen.prefix if prefix is None else prefix
    validate_prefix(prefix)  # before the design: a bad prefix is bad input, found at once

    result = design(schedule, progress=progress)
    gains_text = render_gains(result, gains_name)
    gains_sha256 = sha256_bytes(gains_text.encode("utf-8"))

    # Physical full scales of the fixed-point error and output (codegen
    # section); every stage that rounds uses the same ones.
    scales: dict[str, Any] = {
        "error_full_scale": schedule.codegen.error_full_scale,
        "output_full_scale": schedule.codegen.output_full_scale,
    }
    step("quantisation", 0)
    quantisation = check_quantisation(schedule, result.table, number_format, baseline=result, **scales)
    step("quantisation", 1)

    step("emit C", 0)
    verdict = table_verdict(result.passed, quantisation.rounded.passed, number_format)
    c_texts = render_files(
        result.table, number_format, prefix, str(result.schedule_sha256),
        {"gains_file": gains_name, "gains_sha256": gains_sha256}, verdict=verdict, **scales)
    step("emit C", 1)

    with tempfile.TemporaryDirectory(prefix="gainloom-job-") as tmp:
        # A staging copy: the harness compiles files, and the log hashes the
        # gains file by path.  The output folder itself is written only once.
        stage = Path(tmp)
        (stage / gains_name).write_text(gains_text, encoding="utf-8")
        for file_name, text in c_texts.items():
            (stage / file_name).write_text(text, encoding="utf-8")
        harness = None
        if compile:
            step("check C", 0)
            harness = check_generated_c([stage / n for n in c_texts], result.table, **scales)
            step("check C", 1)
        target_result = None
        if target and compile:
            step("target", 0)
            target_result = check_target([stage / n for n in c_texts], result.table, host=harness, **scales)
            step("target", 1)

        simulation = description = None
        if simulate:
            step("simulate", 0)
            scenario, description = default_scenario(schedule, result)
            simulation = run_scenario(schedule, result.table, scenario, number_format, **scales)
            step("simulate", 1)

        step("log", 0)
        options = {
            "number_format": number_format,
            "prefix": prefix,
            "c_files": sorted(c_texts),
            "gains_file": gains_name,
            "compile": bool(compile),
            "target": bool(target and compile),
            "simulate": bool(simulate),
            **{key: value for key, value in scales.items() if value is not None},
        }
        if description is not None:
            options["simulation_scenario"] = description
        log_files = render_verification(
            schedule=schedule, result=result, table=result.table, gains_path=stage / gains_name,
            harness=harness, quantisation=quantisation, simulation=simulation, options=options, plots=True,
            target=target_result,
        )
        step("log", 1)

    files: dict[str, str | bytes] = {gains_name: gains_text}
    files.update(c_texts)
    clash = sorted(set(files) & set(log_files))
    if clash:
        raise InputError(f"file name(s) {', '.join(clash)} would be written twice; choose another prefix or gains name")
    files.update(log_files)
    step("write", 0)
    written = write_outputs(out, files, force=force)
    step("write", 1)

    stages = (
        design_stage(result),
        *([] if getattr(result, "data_check", None) is None else [measured_stage(result.data_check)]),
        StageVerdict("C code", "written", f"{', '.join(sorted(c_texts))} ({number_format}, prefix {prefix}); "
                     + ("header marked verified" if verdict.verified else
                        f"header NOT VERIFIED: builds only with {c_names(prefix).accept_unverified} defined")),
        harness_stage(harness),
        _target_stage(target_result, "skipped on request (" + ("--no-compile" if not compile else "--no-target") + ")"),
        _rules_stage(target_result, "skipped on request (" + ("--no-compile" if not compile else "--no-target") + ")"),
        quantisation_stage(quantisation, number_format),
        _simulation_stage(simulation),
        StageVerdict("log", "written", ", ".join(sorted(log_files))),
    )
    return JobResult(
        out_dir=out,
        files=tuple(written),
        gains_path=out / gains_name,
        c_files=tuple(out / n for n in c_texts),
        number_format=number_format,
        prefix=prefix,
        schedule=schedule,
        design=result,
        harness=harness,
        target=target_result,
        quantisation=quantisation,
        simulation=simulation,
        scenario=description,
        stages=stages,
    )

