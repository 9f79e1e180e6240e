"""The cascade module on the target cores: one build, every loop checked on it.

:func:`check_cascade_target` does for the one ``<prefix>.h``/``<prefix>.c``
of a cascade (:mod:`gainloom.codegen.cascade`) what
:func:`gainloom.codegen.target.check_target` does for a single loop, on
every core of :data:`gainloom.codegen.target_tools.CORES`:

1. build the module once as C99 and C11 with strict warnings as errors and
   read every public function's helpers, code and stack bytes and the
   tables' bytes (:func:`~gainloom.codegen.target_build.build_for_core`);
2. per loop, run that loop's host harness program (through its stand-in
   header, as on the host) on the core's board model: its output must be
   byte-identical to the host run and agree with the mirror; count its
   instructions per lookup and per step;
3. measure the interrupt at the base period in the documented calling
   order (``measure_cascade.c.j2``): instructions of the periods that run
   only the inner loop and of those that run the outer loop first, and the
   mean per base period;

and checks the module with cppcheck and its MISRA addon, with that
interrupt program as the caller of the public functions.  Without the
cross compiler or qemu the result is "not-checked", never a pass.
"""

from __future__ import annotations

import tempfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..c_names import c_names
from .harness import HarnessProgram, HarnessResult, c_literals, generated_files, harness_program
from .render import render_template, template_context
from .target import TargetResult, target_verdict
from .target_build import CoreBuild, build_for_core
from .target_rules import RulesResult, check_rules
from .target_run import INSTRUCTION_METHOD, EmulatorRun, InstructionCounts, count_instructions, run_harness, trace_counts
from .target_tools import CORES, TargetCore, TargetTools, find_target_tools

__all__ = ["INTERRUPT_OUTER_PERIODS", "CascadeLoopTarget", "InterruptCounts", "CascadeTargetResult",
           "check_cascade_target"]

#: Outer periods the interrupt measurement runs (each with its inner periods).
INTERRUPT_OUTER_PERIODS = 12

_INTERRUPT_MARKERS = {"measure_outer_begin": "with_outer", "measure_inner_begin": "inner_only"}


@dataclass(frozen=True)
class CascadeLoopTarget:
    """One loop of the module on the target cores.

    Attributes
    ----------
    name, prefix : str
    rate_factor : int
    runs : tuple of EmulatorRun
        Its harness on each core.
    instructions : tuple of InstructionCounts
        Its lookup and step on each core.
    """

    name: str
    prefix: str
    rate_factor: int
    runs: tuple[EmulatorRun, ...]
    instructions: tuple[InstructionCounts, ...]

    def on_core(self, core: str) -> dict[str, Any]:
        """Plain data of this loop on one core."""
        run = next((r.to_dict() for r in self.runs if r.core == core), None)
        counts = next((c.to_dict() for c in self.instructions if c.core == core and c.measured), None)
        return {"name": self.name, "prefix": self.prefix, "rate_factor": self.rate_factor, "emulated_run": run,
                "instructions": counts}


@dataclass(frozen=True)
class InterruptCounts:
    """Instructions of the base-period interrupt on one core, in the documented calling order.

    Attributes
    ----------
    core : str
    inner_only, with_outer : tuple of int
        One count per measured period: periods that step only the inner
        loop, and periods that step the outer loop first (every
        ``rate_factor``-th).
    rate_factor : int
    stack_bytes : int or None
        Deepest stack of the functions the interrupt calls (called one after
        the other, so the largest of theirs), without the interrupt's own frame.
    diagnostics : str
    """

    core: str
    inner_only: tuple[int, ...]
    with_outer: tuple[int, ...]
    rate_factor: int
    stack_bytes: int | None
    diagnostics: str = ""

    @property
    def measured(self) -> bool:
        """Both kinds of period were measured."""
        return bool(self.inner_only) and bool(self.with_outer)

    def to_dict(self) -> dict[str, Any]:
        """Plain data: spread of each kind and the mean per base period over whole outer periods."""
        mean = None
        if self.measured:
            # an outer period: one period with the outer step and rate_factor - 1 without
            per_outer = float(np.mean(self.with_outer)) + (self.rate_factor - 1) * float(np.mean(self.inner_only))
            mean = per_outer / self.rate_factor
        return {"core": self.core, "inner_only": InstructionCounts._spread(self.inner_only),
                "with_outer": InstructionCounts._spread(self.with_outer), "rate_factor": self.rate_factor,
                "mean_per_base_period": mean, "stack_bytes": self.stack_bytes, "diagnostics": self.diagnostics}


@dataclass(frozen=True)
class CascadeTargetResult:
    """Outcome of :func:`check_cascade_target` (fields as :class:`~gainloom.codegen.target.TargetResult`).

    Attributes
    ----------
    status, message, number_format : str
    builds : tuple of CoreBuild
        The module on each core (every loop's functions).
    loops : tuple of CascadeLoopTarget
        Inner first.
    interrupts : tuple of InterruptCounts
        Per core.
    missing : tuple of str
    rules : RulesResult or None
    toolchain : dict or None
    """

    status: str
    message: str
    number_format: str
    builds: tuple[CoreBuild, ...] = ()
    loops: tuple[CascadeLoopTarget, ...] = ()
    interrupts: tuple[InterruptCounts, ...] = ()
    missing: tuple[str, ...] = ()
    rules: RulesResult | None = None
    toolchain: dict[str, str | None] | None = None

    @property
    def passed(self) -> bool | None:
        """True/False after a check; ``None`` when the tools were missing."""
        return None if self.status == "not-checked" else self.status == "passed"

    def for_loop(self, name: str) -> TargetResult:
        """One loop's view, as a single loop's target result: the module's builds, this loop's runs and counts."""
        loop = next(lp for lp in self.loops if lp.name == name)
        return TargetResult(self.status, self.message, self.number_format, self.builds, loop.runs, loop.instructions,
                            self.missing, self.rules, self.toolchain)

    def to_dict(self) -> dict[str, Any]:
        """Plain data for the verification log."""
        cores = []
        for build in self.builds:
            name = build.core.name
            cores.append({
                "core": name, "label": build.core.label, "machine": build.core.machine,
                "machine_note": build.core.machine_note, "build": build.to_dict(),
                "loops": [loop.on_core(name) for loop in self.loops],
                "interrupt": next((i.to_dict() for i in self.interrupts if i.core == name), None),
            })
        return {"status": self.status, "message": self.message, "number_format": self.number_format,
                "instruction_method": INSTRUCTION_METHOD, "missing_tools": list(self.missing),
                "toolchain": dict(self.toolchain or {"gcc": None, "qemu": None}), "cores": cores,
                "rules": None if self.rules is None else self.rules.to_dict()}


@dataclass(frozen=True)
class _Loop:
    name: str
    prefix: str
    rate_factor: int
    program: HarnessProgram
    host: HarnessResult | None


def _interrupt_source(loops: list[_Loop], header: str) -> str:
    """C source of the interrupt measurement program (inner and one outer loop, the documented order)."""
    inner, outer = loops
    periods = outer.rate_factor * INTERRUPT_OUTER_PERIODS
    fixed = inner.program.layout.fmt.is_fixed
    entries = []
    for loop, calls in ((inner, periods), (outer, INTERRUPT_OUTER_PERIODS)):
        axes = [{"name": axis.name, "literals": c_literals(values[:calls], fixed)}
                for axis, values in zip(loop.program.layout.axes, loop.program.point_inputs)]
        entries.append({"name": loop.name, "upper": loop.name.upper(), "calls": calls, "axes": axes,
                        "errors": c_literals(loop.program.errors[:calls], fixed), "names": c_names(loop.prefix)})
    context = template_context(inner.program.layout, inner.prefix, "0" * 64, {"harness": "target-measure-cascade"})
    context.update(header=header, periods=periods, loops=entries, inner=entries[0], outer=entries[1],
                   every_macro=c_names(outer.prefix).macro("EVERY"))
    return render_template("target/measure_cascade.c.j2", context)


def _interrupt_counts(tools: TargetTools, build: CoreBuild, source: str, work: Path, loops: list[_Loop]
                      ) -> InterruptCounts:
    counts, problem = trace_counts(tools, build, source, "interrupt", work, _INTERRUPT_MARKERS)
    called = {n for lp in loops for n in (c_names(lp.prefix).lookup, c_names(lp.prefix).update)}
    stacks = [f.stack_bytes for f in build.functions if f.name in called]
    stack = None if not stacks or any(s is None for s in stacks) else max(s for s in stacks if s is not None)
    return InterruptCounts(build.core.name, tuple(counts.get("inner_only", ())), tuple(counts.get("with_outer", ())),
                           loops[1].rate_factor, stack, problem)


def _on_core(tools: TargetTools, core: TargetCore, work: Path, source: Path, fixed: bool,
             defines: tuple[str, ...], loops: list[_Loop], interrupt: str) -> tuple[Any, ...]:
    build = build_for_core(tools, core, [source], work, fixed, defines)
    if not build.builds:
        return build, [], [], None
    runs = [run_harness(tools, build, lp.program, work, lp.host, f"harness_{lp.name}") for lp in loops]
    counts = [count_instructions(tools, build, lp.program, lp.prefix, work, f"measure_{lp.name}") for lp in loops]
    return build, runs, counts, _interrupt_counts(tools, build, interrupt, work, loops)


def _loops(work: Path, texts: dict[str, str], loops: list[Any], hosts: list[HarnessResult | None],
           stand_ins: list[tuple[str, str]]) -> tuple[list[_Loop], tuple[str, ...]]:
    """Each loop's harness program on the module (through its stand-in header) and the build's defines."""
    found, defines = [], []
    module = [work / name for name in sorted(texts)]
    for loop, host, (name, _text) in zip(loops, hosts, stand_ins):
        generated = generated_files([work / name, *module], error_full_scale=loop.error_full_scale,
                                    output_full_scale=loop.output_full_scale)
        defines += [d for d in generated.defines if d not in defines]
        found.append(_Loop(loop.name, loop.prefix, loop.rate_factor, harness_program(loop.table, generated), host))
    return found, tuple(defines)


def check_cascade_target(
    texts: dict[str, str],
    loops: list[Any],
    stand_ins: list[tuple[str, str]],
    hosts: list[HarnessResult | None],
    number_format: str,
    *,
    tools: TargetTools | None = None,
) -> CascadeTargetResult:
    """Cross-compile, run emulated and measure a cascade module on every target core (module docstring).

    Parameters
    ----------
    texts : dict of str to str
        The module: ``<prefix>.h`` and ``<prefix>.c`` by file name.
    loops : list of CascadeLoopC
        Inner first (two loops).
    stand_ins : list of (str, str)
        Each loop's stand-in header (:func:`gainloom.codegen.cascade.harness_header`).
    hosts : list of HarnessResult or None
        Each loop's host harness run on the module; the emulated output must
        then be byte-identical to it.
    number_format : str
    tools : TargetTools, optional
        Default :func:`~gainloom.codegen.target_tools.find_target_tools`.

    Returns
    -------
    CascadeTargetResult
    """
    tools = tools or find_target_tools()
    missing = tuple(tools.missing("gcc", "nm", "size", "readelf", "qemu"))
    header = next(name for name in texts if name.endswith(".h"))
    with tempfile.TemporaryDirectory(prefix="gainloom-cascade-target-") as tmp:
        work = Path(tmp)
        for name, text in [*texts.items(), *stand_ins]:
            (work / name).write_text(text, encoding="utf-8")
        found, defines = _loops(work, texts, loops, hosts, stand_ins)
        caller = work / "interrupt.c"
        interrupt = _interrupt_source(found, header)
        caller.write_text(interrupt, encoding="utf-8")
        module = [work / name for name in sorted(texts)]
        if missing:
            rules = check_rules(module, caller, tools.cppcheck, defines)
            return CascadeTargetResult("not-checked", f"not checked: {', '.join(missing)} not found", number_format,
                                       missing=missing, rules=rules, toolchain=tools.versions())
        source = next(p for p in module if p.suffix == ".c")
        fixed = found[0].program.layout.fmt.is_fixed
        with ThreadPoolExecutor(max_workers=len(CORES) + 1) as pool:
            rules_job = pool.submit(check_rules, module, caller, tools.cppcheck, defines)
            per_core = list(pool.map(lambda core: _on_core(tools, core, work, source, fixed, defines, found,
                                                           interrupt), CORES))
            rules = rules_job.result()
    builds = [b for b, _r, _c, _i in per_core]
    runs = [r for _b, rs, _c, _i in per_core for r in rs]
    counts = [c for _b, _r, cs, _i in per_core for c in cs]
    interrupts = [i for _b, _r, _c, i in per_core if i is not None]
    status, message = target_verdict(builds, runs, counts)
    problems = [f"{i.core}: interrupt not measured: {i.diagnostics}" for i in interrupts if not i.measured]
    if problems:
        status, message = "failed", "; ".join(([] if status == "passed" else [message]) + problems)
    loop_results = tuple(
        CascadeLoopTarget(lp.name, lp.prefix, lp.rate_factor, tuple(rs[k] for _b, rs, _c, _i in per_core if rs),
                          tuple(cs[k] for _b, _r, cs, _i in per_core if cs))
        for k, lp in enumerate(found))
    return CascadeTargetResult(status, message, number_format, tuple(builds), loop_results, tuple(interrupts),
                               rules=rules, toolchain=tools.versions())
