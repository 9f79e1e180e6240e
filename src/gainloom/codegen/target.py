"""The generated C on the target cores: cross-compiled, run emulated, measured.

:func:`check_target` does, for every core of
:data:`gainloom.codegen.target_tools.CORES`:

1. build the generated source as C99 and C11 with strict warnings as errors
   and read per function which runtime helpers it calls, its code and stack
   bytes, and the tables' bytes (:mod:`~gainloom.codegen.target_build`);
2. run the host harness program on the core's qemu board model and compare
   what it prints with the host run (byte for byte) and the Python mirror
   (:func:`~gainloom.codegen.target_run.run_harness`);
3. count instructions per lookup and per controller step on the emulator
   (:func:`~gainloom.codegen.target_run.count_instructions`);

and checks the generated files with cppcheck and its MISRA C:2012 addon
(:mod:`~gainloom.codegen.target_rules`; reported in ``rules``, judged apart).

It passes when every build is clean, no public function calls a helper the
core should not need (:func:`~gainloom.codegen.target_build.helper_allowed`)
and every emulated run agrees.  Without the cross compiler or qemu the result
is "not-checked" (``passed is None``), never a pass.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

from ..design.table import GainTable
from .harness import HarnessResult, generated_files, harness_program
from .target_build import CoreBuild, build_for_core
from .target_rules import RulesResult, check_rules
from .target_run import (
    INSTRUCTION_METHOD,
    EmulatorRun,
    InstructionCounts,
    count_instructions,
    measure_source,
    run_harness,
)
from .target_tools import CORES, TargetCore, TargetTools, find_target_tools

__all__ = ["TargetResult", "check_target", "target_verdict"]


@dataclass(frozen=True)
class TargetResult:
    """Outcome of :func:`check_target`.

    Attributes
    ----------
    status : str
        ``passed``, ``failed`` or ``not-checked``.
    message : str
        One line saying what happened.
    number_format : str
    builds : tuple of CoreBuild
    runs : tuple of EmulatorRun
    instructions : tuple of InstructionCounts
    missing : tuple of str
        Tools not found.
    toolchain : dict
        ``gcc`` and ``qemu``: first line of their ``--version`` (``None`` when missing).
    rules : RulesResult or None
        cppcheck and its MISRA addon on the generated files.
    """

    status: str
    message: str
    number_format: str
    builds: tuple[CoreBuild, ...] = ()
    runs: tuple[EmulatorRun, ...] = ()
    instructions: tuple[InstructionCounts, ...] = ()
    missing: tuple[str, ...] = ()
    rules: RulesResult | None = None
    toolchain: dict[str, str | None] | None = None

    @property
    def passed(self) -> bool | None:
        """True/False after a check; ``None`` when the tools were missing."""
        return None if self.status == "not-checked" else self.status == "passed"

    def to_dict(self) -> dict:
        """Plain data for the verification log."""
        cores = []
        for build in self.builds:
            entry = {"core": build.core.name, "label": build.core.label, "machine": build.core.machine,
                     "machine_note": build.core.machine_note, "build": build.to_dict()}
            entry["emulated_run"] = next((r.to_dict() for r in self.runs if r.core == build.core.name), None)
            entry["instructions"] = next(
                (c.to_dict() for c in self.instructions if c.core == build.core.name and c.measured), None
            )
            cores.append(entry)
        return {
            "status": self.status,
            "message": self.message,
            "number_format": self.number_format,
            "instruction_method": INSTRUCTION_METHOD,
            "missing_tools": list(self.missing),
            "toolchain": dict(self.toolchain or {"gcc": None, "qemu": None}),
            "cores": cores,
            "rules": None if self.rules is None else self.rules.to_dict(),
        }


def target_verdict(builds, runs, counts) -> tuple[str, str]:
    """Status and message of target builds, emulated runs and instruction counts (see the module notes)."""
    problems = []
    for build in builds:
        name = build.core.name
        if not build.builds:
            failed = [s for s, ok in build.compiled.items() if not ok]
            problems.append(f"{name} does not compile as {', '.join(failed)}")
            continue
        for function in build.functions:
            bad = [h.symbol for h in function.helpers if not h.allowed]
            if bad:
                problems.append(f"{function.name} calls {', '.join(bad)} on {name}")
    problems += [f"{r.core}: {r.message}" for r in runs if r.status != "passed"]
    problems += [f"{c.core}: {c.diagnostics}" for c in counts if not c.measured]
    if problems:
        return "failed", "; ".join(problems)
    cores = ", ".join(b.core.name for b in builds)
    return "passed", (f"{cores}: C99 and C11 clean, no helper calls the core should not need, "
                      "emulated runs agree with the host and the mirror")


def check_target(
    files: Iterable[str | os.PathLike],
    table: GainTable,
    *,
    host: HarnessResult | None = None,
    number_format: str | None = None,
    prefix: str | None = None,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
    tools: TargetTools | None = None,
) -> TargetResult:
    """Cross-compile, run emulated and measure the generated C on every target core.

    Parameters
    ----------
    files : iterable of path
        The generated ``<prefix>.h`` and ``<prefix>.c``.
    table : GainTable
        The table they were generated from.
    host : HarnessResult, optional
        The host harness run of the same files; the emulated output must then
        be byte-identical to it.
    number_format, prefix, error_full_scale, output_full_scale : optional
        As given to the emitter; default: read from the header's banner.
    tools : TargetTools, optional
        Default :func:`~gainloom.codegen.target_tools.find_target_tools`.

    Returns
    -------
    TargetResult
    """
    files = [Path(f) for f in files]
    generated = generated_files(
        files, number_format=number_format, prefix=prefix,
        error_full_scale=error_full_scale, output_full_scale=output_full_scale,
    )
    tools = tools or find_target_tools()
    program = harness_program(table, generated)
    fixed = program.layout.fmt.is_fixed
    missing = tuple(tools.missing("gcc", "nm", "size", "readelf", "qemu"))
    with tempfile.TemporaryDirectory(prefix="gainloom-target-") as tmp:
        work = Path(tmp)
        for f in files:
            shutil.copyfile(f, work / f.name)
        caller = work / "caller.c"
        caller.write_text(measure_source(program, generated.prefix), encoding="utf-8")
        if missing:
            rules = check_rules([work / f.name for f in files], caller, tools.cppcheck, generated.defines)
            return TargetResult("not-checked", f"not checked: {', '.join(missing)} not found",
                                generated.number_format, missing=missing, rules=rules,
                                toolchain=tools.versions())
        sources = [work / s.name for s in generated.sources]

        def on_core(core: TargetCore):
            build = build_for_core(tools, core, sources, work, fixed, generated.defines)
            if not build.builds:
                return build, None, None
            run = run_harness(tools, build, program, work, host)
            return build, run, count_instructions(tools, build, program, generated.prefix, work)

        # the cores and the rule check are independent subprocess work: run them side by side
        with ThreadPoolExecutor(max_workers=len(CORES) + 1) as pool:
            rules_job = pool.submit(check_rules, [work / f.name for f in files], caller, tools.cppcheck,
                                    generated.defines)
            per_core = list(pool.map(on_core, CORES))
            rules = rules_job.result()
    builds = [b for b, _, _ in per_core]
    runs = [r for _, r, _ in per_core if r is not None]
    counts = [c for _, _, c in per_core if c is not None]
    status, message = target_verdict(builds, runs, counts)
    return TargetResult(status, message, generated.number_format, tuple(builds), tuple(runs), tuple(counts),
                        rules=rules, toolchain=tools.versions())
