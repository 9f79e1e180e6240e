"""Run the generated C on an emulated Cortex-M board and count its instructions.

Two programs are linked against the table object built for a core
(:func:`gainloom.codegen.target_build.build_for_core`), each with the start-up
code and linker script of ``codegen_templates/target/`` and newlib's
semihosting library (``--specs=rdimon.specs``), and run under
``qemu-system-arm -semihosting``:

- :func:`run_harness` runs the host harness program itself (the same source,
  the same vectors, :func:`gainloom.codegen.harness.harness_program`): what it
  prints must be byte-identical to the host run and agree with the Python
  mirror (bit for bit in Q15/Q31, within the harness's float tolerance in
  float32);
- :func:`count_instructions` runs a small measurement program with qemu
  translating one instruction per block (``-singlestep``) and logging every
  block executed (``-d exec,nochain``), then counts, for each call of the
  lookup and of the step, the trace lines between the marker functions that
  are not the caller's own.  That is the exact number of instructions the
  emulated core executed from the function's first instruction to its
  return, helpers included: not cycles (qemu models no pipeline, wait
  states or bus), and the caller's argument set-up and call are not counted.
"""

from __future__ import annotations

import functools
import hashlib
import re
import subprocess
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .harness import HarnessProgram, HarnessResult, c_literals, compare_output
from .mirror import lookup_gains
from .render import render_template, template_context, templates_dir
from .target_build import TARGET_OPTIMISATION, CoreBuild
from .target_tools import TargetCore, TargetTools

__all__ = [
    "MEASURED_LOOKUPS",
    "MEASURED_STEPS",
    "INSTRUCTION_METHOD",
    "EmulatorRun",
    "InstructionCounts",
    "run_harness",
    "measure_source",
    "parse_trace",
    "trace_counts",
    "count_instructions",
]

#: Lookups and steps the measurement program times (every n-th harness vector).
MEASURED_LOOKUPS = 40
MEASURED_STEPS = 120

#: How the instruction counts are made, for the log.
INSTRUCTION_METHOD = (
    "qemu-system-arm instruction trace (-singlestep -d exec,nochain): exact count of instructions executed "
    "from a function's entry to its return, helpers included; instructions, not cycles"
)

_MARKERS = {"measure_lookup_begin": "lookup", "measure_step_begin": "step"}
_TIMEOUT = 120.0


def _run(command: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(command, cwd=cwd, capture_output=True, text=True, timeout=_TIMEOUT, check=False)


def _link(tools: TargetTools, build: CoreBuild, source: str, name: str, work: Path) -> tuple[Path | None, str]:
    """Compile ``source`` as ``<core>-<name>.c`` and link it with the start-up code and the table object."""
    core = build.core
    folder = templates_dir() / "target"
    program = work / f"{core.name}-{name}.c"
    program.write_text(source, encoding="utf-8")
    elf = work / f"{core.name}-{name}.elf"
    command = [
        tools.gcc, *core.flags, "-std=c99", TARGET_OPTIMISATION, *build.defines, "-I", str(work),
        "--specs=rdimon.specs", "-nostartfiles", "-T", str(folder / "link.ld"),
        str(folder / "startup.c"), program.name, str(build.object_path), "-o", elf.name,
    ]
    linked = _run(command, work)
    if linked.returncode != 0:
        return None, linked.stderr.strip()
    return elf, ""


@functools.lru_cache(maxsize=4)
def _one_instruction_flags(qemu: str) -> tuple[str, ...]:
    """One instruction per translated block: ``-singlestep`` (qemu < 8.1) or its successor."""
    version = _run([qemu, "--version"], Path.cwd()).stdout
    found = re.search(r"version (\d+)\.(\d+)", version)
    if found and (int(found.group(1)), int(found.group(2))) >= (8, 1):
        return ("-accel", "tcg,one-insn-per-tb=on")
    return ("-singlestep",)


def _emulate(tools: TargetTools, core: TargetCore, elf: Path, trace: Path | None = None):
    command = [
        tools.qemu, "-M", core.machine, "-nodefaults", "-display", "none",
        "-semihosting-config", "enable=on,target=native", "-kernel", str(elf),
    ]
    if trace is not None:
        command += [*_one_instruction_flags(tools.qemu), "-d", "exec,nochain", "-D", str(trace)]
    try:
        return _run(command, elf.parent)
    except subprocess.TimeoutExpired:
        return subprocess.CompletedProcess(command, -1, "", f"no exit within {_TIMEOUT:g} s")


@dataclass(frozen=True)
class EmulatorRun:
    """The harness program run on one emulated core.

    Attributes
    ----------
    core : str
    status : str
        ``passed`` or ``failed``.
    message : str
    identical_to_host : bool or None
        Printed exactly what the host harness printed (``None``: no host run
        to compare with).
    worst_gain_error, worst_step_error : float
        Against the Python mirror (LSB in fixed point, physical units in float32).
    diagnostics : str
    """

    core: str
    status: str
    message: str
    identical_to_host: bool | None = None
    worst_gain_error: float = float("nan")
    worst_step_error: float = float("nan")
    diagnostics: str = ""

    def to_dict(self) -> dict:
        return {
            "core": self.core,
            "status": self.status,
            "message": self.message,
            "identical_to_host": self.identical_to_host,
            "worst_gain_error": self.worst_gain_error,
            "worst_step_error": self.worst_step_error,
        }


def run_harness(
    tools: TargetTools, build: CoreBuild, program: HarnessProgram, work: Path, host: HarnessResult | None,
    program_name: str = "harness",
) -> EmulatorRun:
    """Run the harness program on the core's board model and compare its output.

    Parameters
    ----------
    tools : TargetTools
    build : CoreBuild
        A clean build of the table for this core.
    program : HarnessProgram
        The harness the host ran.
    work : Path
        Scratch folder holding the generated header.
    host : HarnessResult, optional
        The host run of the same program.  When it passed and the target
        printed the same bytes, its comparison with the mirror holds for the
        target too; otherwise the target's output is compared with the mirror.
    """
    name = build.core.name
    elf, problem = _link(tools, build, program.source, "harness", work)
    if elf is None:
        return EmulatorRun(name, "failed", "harness does not link for the target", diagnostics=problem)
    ran = _emulate(tools, build.core, elf)
    if ran.returncode != 0:
        return EmulatorRun(name, "failed", f"emulator exited with code {ran.returncode}",
                           diagnostics=ran.stderr[-2000:])
    digest = hashlib.sha256(ran.stdout.encode("utf-8")).hexdigest()
    reference = host if host is not None and host.passed and host.output_sha256 else None
    identical = None if reference is None else digest == reference.output_sha256
    if identical:
        return EmulatorRun(name, "passed", f"{reference.message}, byte-identical to the host build", True,
                           reference.worst_gain_error, reference.worst_step_error)
    comparison = compare_output(program, ran.stdout)
    passed = comparison.status == "passed" and identical is None
    message = comparison.message + ("" if identical is None else "; output differs from the host build")
    return EmulatorRun(
        name, "passed" if passed else "failed", message, identical,
        comparison.worst_gain_error, comparison.worst_step_error,
    )


@dataclass(frozen=True)
class InstructionCounts:
    """Instructions executed per call on one emulated core.

    Attributes
    ----------
    core : str
    lookup, step : tuple of int
        One count per measured call.
    diagnostics : str
        Why nothing was measured (empty when all went well).
    """

    core: str
    lookup: tuple[int, ...]
    step: tuple[int, ...]
    diagnostics: str = ""

    @property
    def measured(self) -> bool:
        """Both functions were measured."""
        return bool(self.lookup) and bool(self.step)

    @staticmethod
    def _spread(counts: tuple[int, ...]) -> dict:
        if not counts:
            return {"calls": 0, "min": None, "median": None, "max": None}
        values = np.asarray(counts)
        return {"calls": int(values.size), "min": int(values.min()), "median": float(np.median(values)),
                "max": int(values.max())}

    def to_dict(self) -> dict:
        return {"core": self.core, "lookup": self._spread(self.lookup), "step": self._spread(self.step)}


def measure_source(program: HarnessProgram, prefix: str) -> str:
    """C source of the measurement program (every n-th harness vector; the step's gains from the mirror)."""
    layout = program.layout
    fixed = layout.fmt.is_fixed
    point_stride = max(program.point_inputs[0].size // MEASURED_LOOKUPS, 1)
    step_stride = max(program.steps // MEASURED_STEPS, 1)
    points = [v[::point_stride][:MEASURED_LOOKUPS] for v in program.point_inputs]
    steps = [v[::step_stride][:MEASURED_STEPS] for v in program.step_inputs]
    errors = program.errors[::step_stride][:MEASURED_STEPS]
    gains = lookup_gains(layout, *steps)
    columns = [c_literals(np.asarray(gains[c.name]), fixed) for c in layout.coefficients]
    context = template_context(layout, prefix, "0" * 64, {"harness": "target-measure"})
    context.update(
        points_count=int(points[0].size),
        steps_count=int(errors.size),
        point_inputs=[c_literals(v, fixed) for v in points],
        step_gains=[list(row) for row in zip(*columns)],
        step_errors=c_literals(errors, fixed),
    )
    return render_template("target/measure.c.j2", context)


def parse_trace(lines, markers: dict[str, str] | None = None) -> dict[str, list[int]]:
    """Instructions per measured call from a qemu ``-d exec`` trace of a measurement program.

    Between a begin marker (``markers``: marker function -> what it starts;
    default the lookup's and the step's of ``measure.c.j2``) and
    ``measure_end``, every logged instruction whose function is neither a
    marker nor ``main`` counts.
    """
    markers = _MARKERS if markers is None else markers
    counts: dict[str, list[int]] = {kind: [] for kind in markers.values()}
    current, count = None, 0
    for line in lines:
        if not line.startswith("Trace"):
            continue
        symbol = line.rsplit("]", 1)[-1].strip()
        if symbol in markers:
            current, count = markers[symbol], 0
        elif symbol == "measure_end":
            if current is not None:
                counts[current].append(count)
            current = None
        elif current is not None and symbol != "main":
            count += 1
    return counts


def trace_counts(tools: TargetTools, build: CoreBuild, source: str, name: str, work: Path,
                 markers: dict[str, str] | None = None) -> tuple[dict[str, list[int]], str]:
    """Link a measurement program ``source`` as ``<core>-<name>``, run it traced and count (:func:`parse_trace`).

    Returns the counts and, when nothing could be measured, why (else ``""``).
    """
    elf, problem = _link(tools, build, source, name, work)
    if elf is None:
        return {}, f"measurement program does not link: {problem}"
    trace = work / f"{build.core.name}-{name}.trace"
    ran = _emulate(tools, build.core, elf, trace)
    if ran.returncode != 0 or not trace.exists():
        return {}, f"emulator exited with code {ran.returncode}: {ran.stderr[-500:]}"
    with trace.open(encoding="utf-8", errors="replace") as lines:
        counts = parse_trace(lines, markers)
    trace.unlink()
    return counts, ""


def count_instructions(tools: TargetTools, build: CoreBuild, program: HarnessProgram, prefix: str,
                       work: Path, program_name: str = "measure") -> InstructionCounts:
    """Count instructions per lookup and per step on the core's board model (see the module notes).

    ``program_name`` names the program's files in ``work`` (several loops share one folder).
    """
    counts, problem = trace_counts(tools, build, measure_source(program, prefix), program_name, work)
    if problem:
        return InstructionCounts(build.core.name, (), (), problem)
    return InstructionCounts(build.core.name, tuple(counts["lookup"]), tuple(counts["step"]))
