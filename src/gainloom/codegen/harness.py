"""Compile the generated C as firmware would and check it against the mirror.

:func:`check_generated_c` finds the host C compiler (``$CC``, else ``cc``,
``gcc`` or ``clang``), compiles the generated source with strict warnings as
errors (:data:`WARNING_FLAGS`) under C99 (and checks it again as C11, where
the ``_Static_assert`` branch is taken), builds a generated host harness with
AddressSanitizer and UndefinedBehaviorSanitizer where the toolchain supports
them, runs it, and compares every printed number with the Python mirror
(:mod:`gainloom.codegen.mirror`):

- Q15/Q31: bit-exact (worst error reported in LSB, must be 0);
- float32: within a derived tolerance.  The mirror performs the same IEEE
  single-precision operations in the same order, so results are normally
  identical; the tolerance admits a compiler that contracts ``a * b + c``
  into a fused multiply-add (one rounding fewer per operation).  Gains: each
  interpolation stage is ``(1 - t) a + t b`` with at most 4 roundings of
  magnitude ``<= max|table|``, three stages in 2-D, so
  ``tol = 4 * stages * eps32 * max|table|`` per coefficient.  Step outputs
  and states: a rounding difference of ``eps32 * |state|`` per step may
  accumulate in the integrator and filter states like a random walk, so
  ``tol = 8 * eps32 * sqrt(steps) * max|signal|``.

With no compiler on the machine the result says so (``status ==
"no-compiler"``, ``passed is None``): neither a failure nor a silent pass.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import os
import shlex
import shutil
import subprocess
import tempfile
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..c_names import c_names
from ..design.table import GainTable
from ..errors import CodegenError
from .layout import AxisLayout, TableLayout, layout_table
from .mirror import lookup_gains, output_code, run_steps, state_fields
from .render import c_float_exact, render_template, template_context

__all__ = [
    "WARNING_FLAGS",
    "SANITIZER_FLAGS",
    "HarnessResult",
    "GeneratedFiles",
    "HarnessProgram",
    "OutputComparison",
    "find_compiler",
    "c_literals",
    "generated_files",
    "harness_program",
    "compare_output",
    "check_generated_c",
]

#: Warnings the generated C must compile clean under, as errors.
WARNING_FLAGS: tuple[str, ...] = (
    "-Wall",
    "-Wextra",
    "-Wpedantic",
    "-Wconversion",
    "-Wshadow",
    "-Wdouble-promotion",
    "-Wfloat-equal",
    "-Werror",
)

#: Sanitizers for the harness build, when the toolchain can run them.
SANITIZER_FLAGS: tuple[str, ...] = ("-fsanitize=address,undefined", "-fno-sanitize-recover=all")

_EPS32 = float(np.finfo(np.float32).eps)
_RUN_ENV = {"ASAN_OPTIONS": "detect_leaks=0", "UBSAN_OPTIONS": "halt_on_error=1:print_stacktrace=1"}


@dataclass(frozen=True)
class HarnessResult:
    """Outcome of compiling and running the generated C.

    Parameters
    ----------
    status : str
        ``"passed"``, ``"failed"`` or ``"no-compiler"``.
    message : str
        One line saying what happened.
    compiler : str or None
        Compiler command used.
    compiler_version : str or None
        First line of ``<compiler> --version``.
    flags : tuple of str
        Flags of the harness build (standard, warnings, sanitizers).
    sanitizers : bool
        Whether the harness ran under ASan + UBSan.
    points, steps : int
        Gain lookups and controller steps compared.
    worst_gain_error, worst_step_error : float
        Largest difference from the mirror: LSB of the stored integers (fixed
        point) or physical units (float32).
    gain_tolerance, step_tolerance : float
        Largest difference accepted (0 for fixed point; largest over
        coefficients / signals for float32).
    saturated_high, saturated_low : int
        Steps whose output sat on the upper / lower limit.
    output_sha256 : str or None
        SHA-256 of everything the harness printed (another build of the
        same harness, e.g. on the target, must print the same bytes).
    diagnostics : str
        Compiler or run-time messages (empty when all went well).
    """

    status: str
    message: str
    compiler: str | None = None
    compiler_version: str | None = None
    flags: tuple[str, ...] = ()
    sanitizers: bool = False
    points: int = 0
    steps: int = 0
    worst_gain_error: float = float("nan")
    worst_step_error: float = float("nan")
    gain_tolerance: float = float("nan")
    step_tolerance: float = float("nan")
    saturated_high: int = 0
    saturated_low: int = 0
    output_sha256: str | None = None
    diagnostics: str = field(default="", repr=False)

    @property
    def passed(self) -> bool | None:
        """True/False after a run; ``None`` when no compiler was found."""
        if self.status == "no-compiler":
            return None
        return self.status == "passed"

    def summary(self) -> dict:
        """The result as a plain dict (for logs and JSON)."""
        return {
            "status": self.status,
            "message": self.message,
            "compiler": self.compiler,
            "compiler_version": self.compiler_version,
            "flags": list(self.flags),
            "sanitizers": self.sanitizers,
            "points": self.points,
            "steps": self.steps,
            "worst_gain_error": self.worst_gain_error,
            "worst_step_error": self.worst_step_error,
            "gain_tolerance": self.gain_tolerance,
            "step_tolerance": self.step_tolerance,
            "saturated_high": self.saturated_high,
            "saturated_low": self.saturated_low,
            "output_sha256": self.output_sha256,
        }


def find_compiler(env: dict | None = None) -> list[str] | None:
    """The host C compiler command: ``$CC`` (split like a shell word list),
    else the first of ``cc``, ``gcc``, ``clang`` on ``PATH``; ``None`` if none."""
    env = os.environ if env is None else env
    if env.get("CC"):
        command = shlex.split(env["CC"])
        if command and shutil.which(command[0]):
            return command
        return None
    for name in ("cc", "gcc", "clang"):
        path = shutil.which(name)
        if path:
            return [path]
    return None


def _run(command: list[str], cwd: Path, env: dict | None = None, timeout: float = 120.0):
    return subprocess.run(command, cwd=cwd, capture_output=True, text=True, timeout=timeout, env=env, check=False)


@functools.lru_cache(maxsize=8)
def _compiler_facts(command: tuple[str, ...]) -> tuple[str, bool]:
    """(version line, sanitizers usable) for a compiler, probed once."""
    version = _run([*command, "--version"], Path.cwd())
    version_line = (version.stdout or version.stderr).splitlines()[0].strip() if version.returncode == 0 else "unknown"
    with tempfile.TemporaryDirectory(prefix="gainloom-cc-") as tmp:
        work = Path(tmp)
        (work / "probe.c").write_text("int main(void) { return 0; }\n", encoding="ascii")
        built = _run([*command, "-std=c99", *SANITIZER_FLAGS, "probe.c", "-o", "probe"], work)
        usable = built.returncode == 0 and _run([str(work / "probe")], work, _env()).returncode == 0
    return version_line, usable


def _env() -> dict:
    env = dict(os.environ)
    env.update(_RUN_ENV)
    return env


def _axis_points(axis: AxisLayout, fixed: bool, rng: np.random.Generator, count: int) -> np.ndarray:
    """Inputs on one axis: breakpoints, neighbours, midpoints, beyond both ends, random inside."""
    a = axis.stored
    if fixed:
        special = [a, a - 1, a + 1, (a[:-1] + a[1:]) // 2]
        special.append(np.array([a[0] - 1000, a[-1] + 1000, -(2**31), 2**31 - 1], dtype=np.int64))
        values = np.concatenate(special)
        values = np.clip(values, -(2**31), 2**31 - 1)
        fill = rng.integers(a[0], a[-1], size=max(count - values.size, 0), endpoint=True)
        return np.concatenate([values, fill]).astype(np.int64)
    span = np.float32(a[-1] - a[0])
    with np.errstate(over="ignore"):
        special = [
            a,
            np.nextafter(a, np.float32(-np.inf)),
            np.nextafter(a, np.float32(np.inf)),
            (a[:-1] + a[1:]) / np.float32(2),
            np.array([a[0] - span, a[-1] + span, -np.inf, np.inf, np.nan, np.nan], dtype=np.float32),
        ]
    values = np.concatenate(special).astype(np.float32)
    fill = rng.uniform(float(a[0]), float(a[-1]), size=max(count - values.size, 0)).astype(np.float32)
    return np.concatenate([values, fill]).astype(np.float32)


def _point_inputs(layout: TableLayout, rng: np.random.Generator, points: int) -> list[np.ndarray]:
    fixed = layout.fmt.is_fixed
    if len(layout.axes) == 1:
        return [_axis_points(layout.axes[0], fixed, rng, points)]
    first = _axis_points(layout.axes[0], fixed, rng, 0)
    second = _axis_points(layout.axes[1], fixed, rng, 0)
    # every special value of one axis against every special value of the other
    grid0, grid1 = (g.ravel() for g in np.meshgrid(first, second, indexing="ij"))
    extra = max(points - grid0.size, 0)
    fill0 = _axis_points(layout.axes[0], fixed, rng, first.size + extra)[first.size :]
    fill1 = _axis_points(layout.axes[1], fixed, rng, second.size + extra)[second.size :]
    return [np.concatenate([grid0, fill0]), np.concatenate([grid1, fill1])]


def _step_inputs(layout: TableLayout, rng: np.random.Generator, steps: int) -> tuple[list[np.ndarray], np.ndarray]:
    """Scheduling inputs sweeping past both ends, and an error sequence that
    drives the output into both limits (sustained full-scale errors), then
    sines, noise and zeros."""
    k = np.arange(steps)
    inputs = []
    for number, axis in enumerate(layout.axes):
        low, high = float(axis.stored[0]), float(axis.stored[-1])
        centre, half = (low + high) / 2, (high - low) / 2 * 1.2
        sweep = centre + half * np.sin(2 * np.pi * k / (steps / (2.0 + number)))
        if layout.fmt.is_fixed:
            inputs.append(np.clip(np.round(sweep), -(2**31), 2**31 - 1).astype(np.int64))
        else:
            inputs.append(sweep.astype(np.float32))
    segment = steps // 10
    if layout.fmt.is_fixed:
        full = float(layout.fmt.q_max)
    else:
        gains = [np.max(np.abs(c.stored)) for c in layout.coefficients if c.name in ("kp", "kc")]
        limit = max(abs(float(v)) for v in layout.limits)
        full = 4.0 * limit / max(float(gains[0]), 1e-30)
    pattern = np.zeros(steps)
    pattern[:segment] = full
    pattern[segment : 2 * segment] = -full
    pattern[2 * segment : 3 * segment] = 0.0
    pattern[3 * segment : 4 * segment] = 0.8 * full
    pattern[4 * segment : 6 * segment] = 0.6 * full * np.sin(2 * np.pi * k[: 2 * segment] / 97.0)
    pattern[6 * segment : 7 * segment] = -full
    pattern[7 * segment : 9 * segment] = rng.uniform(-full, full, size=2 * segment)
    pattern[9 * segment :] = 0.01 * full * np.sin(2 * np.pi * k[9 * segment :] / 13.0)
    if layout.fmt.is_fixed:
        errors = np.clip(np.round(pattern), layout.fmt.q_min, layout.fmt.q_max).astype(np.int64)
        errors[segment - 3 : segment] = layout.fmt.q_min  # the most negative code, once
    else:
        errors = pattern.astype(np.float32)
        errors[[17, 18, 5 * segment + 1]] = (np.nan, np.inf, -np.inf)  # non-finite samples count as 0
    return inputs, errors


def _step_extras(layout: TableLayout, rng: np.random.Generator, steps: int) -> tuple[np.ndarray, ...]:
    """Feedforward and run-time limits per step: none at first, then a ripple
    and sustained feedforward on both sides (also while the output saturates),
    run-time limits narrower than the table's that move like a bus-voltage
    ripple, a few invalid pairs (low > high, NaN: the table's limits apply)
    and, in fixed point, the format's extreme codes."""
    k = np.arange(steps)
    segment = steps // 10
    fixed = layout.fmt.is_fixed
    full = float(layout.fmt.q_max) if fixed else max(abs(float(v)) for v in layout.limits)
    feed = 0.4 * full * np.sin(2 * np.pi * k / 151.0)
    feed[:segment] = 0.0
    feed[5 * segment : 6 * segment] = 0.9 * full
    feed[8 * segment : 9 * segment] = -0.9 * full
    use = np.zeros(steps, dtype=bool)
    use[2 * segment : 4 * segment] = True
    use[6 * segment : 8 * segment] = True
    ripple = 1.0 + 0.2 * np.sin(2 * np.pi * k / 89.0)
    low, high = -0.3 * full * ripple, 0.5 * full * ripple
    low[2 * segment + 5 : 2 * segment + 8] = high[2 * segment + 5 : 2 * segment + 8] + 0.01 * full  # low > high
    if fixed:
        codes = [np.clip(np.round(v), layout.fmt.q_min, layout.fmt.q_max).astype(np.int64) for v in (feed, low, high)]
        feed, low, high = codes
        low[7 * segment : 7 * segment + 40], high[7 * segment : 7 * segment + 40] = layout.fmt.q_min, layout.fmt.q_max
        feed[7 * segment + 40 : 7 * segment + 43] = layout.fmt.q_min
        return feed, use, low, high
    feed, low, high = (v.astype(np.float32) for v in (feed, low, high))
    feed[[7 * segment, 7 * segment + 1]] = (np.nan, np.inf)  # non-finite feedforward counts as 0
    low[6 * segment + 3] = np.nan  # a NaN limit: the table's limits apply
    return feed, use, low, high


def c_literals(values: np.ndarray, fixed: bool) -> list[str]:
    """C literals of input vectors (exact: integers, or float32 in hex-float form)."""
    if fixed:
        # INT32_MIN has no literal form: write it as an expression
        return [f"({int(v) + 1} - 1)" if int(v) == -(2**31) else str(int(v)) for v in values]
    return [c_float_exact(float(v)) for v in values]


def _parse(text: str, fixed: bool, tag: str) -> np.ndarray:
    rows = [line.split()[1:] for line in text.splitlines() if line.startswith(tag)]
    if fixed:
        return np.array([[int(v) for v in row] for row in rows], dtype=np.int64)
    # float32 bit patterns: exact, and printable by C libraries without %a (newlib's)
    bits = np.array([[int(v, 16) for v in row] for row in rows], dtype=np.uint32)
    return bits.view(np.float32).astype(np.float64)


def _difference(c_values: np.ndarray, mirror: np.ndarray) -> np.ndarray:
    """Absolute differences; a NaN on one side only counts as infinite."""
    c_values = c_values.astype(float)
    mirror = mirror.astype(float)
    with np.errstate(invalid="ignore"):
        diff = np.abs(c_values - mirror)
    both_nan = np.isnan(c_values) & np.isnan(mirror)
    same_inf = np.isinf(c_values) & (c_values == mirror)
    diff = np.where(both_nan | same_inf, 0.0, diff)
    return np.where(np.isnan(diff), np.inf, diff)


def _banner_options(header: Path) -> dict[str, str]:
    """``key=value`` pairs of the banner's ``options:`` line (empty if none)."""
    for line in header.read_text(encoding="utf-8").splitlines()[:12]:
        text = line.lstrip(" */")
        if text.startswith("options: "):
            return dict(item.split("=", 1) for item in text[len("options: ") :].split() if "=" in item)
    return {}


def _agree(key: str, given, recorded):
    """The given value, else the recorded one; refuse a contradiction."""
    if given is None:
        return recorded
    if recorded is not None and given != recorded:
        raise CodegenError(f"{key} {given!r} contradicts the generated files' banner ({key}={recorded})")
    return given


@dataclass(frozen=True)
class GeneratedFiles:
    """The generated files and the settings they were generated with.

    Attributes
    ----------
    sources, headers : tuple of Path
        The ``.c`` and ``.h`` files.
    number_format, prefix : str
    error_full_scale, output_full_scale : float or None
    """

    sources: tuple[Path, ...]
    headers: tuple[Path, ...]
    number_format: str
    prefix: str
    error_full_scale: float | None
    output_full_scale: float | None

    @property
    def defines(self) -> tuple[str, ...]:
        """Compiler defines of every check build: ``-D<PREFIX>_ACCEPT_UNVERIFIED``.

        The checks test the arithmetic of any table, verified or not, so they
        build as an integrator who accepted an unverified table would.
        """
        return (f"-D{c_names(self.prefix).accept_unverified}",)


def generated_files(
    files: Iterable[str | os.PathLike],
    *,
    number_format: str | None = None,
    prefix: str | None = None,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
) -> GeneratedFiles:
    """Sort the generated files and settle their settings against the header's banner.

    A setting not given is read from the banner; one that contradicts the
    banner is refused (:class:`~gainloom.errors.CodegenError`).
    """
    files = [Path(f) for f in files]
    sources = tuple(f for f in files if f.suffix == ".c")
    headers = tuple(f for f in files if f.suffix == ".h")
    if not sources or not headers:
        raise CodegenError(f"expected a generated .h and .c; got {[str(f) for f in files]}")
    recorded = _banner_options(headers[0])
    number_format = _agree("format", number_format, recorded.get("format"))
    prefix = _agree("prefix", prefix, recorded.get("prefix"))
    scales = {}
    for key, value in (("error_full_scale", error_full_scale), ("output_full_scale", output_full_scale)):
        scales[key] = _agree(key, value, float(recorded[key]) if key in recorded else None)
    if number_format is None or prefix is None:
        raise CodegenError(f"{headers[0]}: no gainloom banner; pass number_format and prefix")
    return GeneratedFiles(sources, headers, number_format, prefix, **scales)


@dataclass(frozen=True)
class HarnessProgram:
    """The harness C source and the vectors it runs (the same on host and target).

    Attributes
    ----------
    layout : TableLayout
    source : str
        Text of ``harness.c``: prints one ``G`` line per lookup and one ``S``
        line (output, then states) per step; fixed point as decimal
        integers, float32 as the 8 hex digits of each IEEE bit pattern.
    point_inputs, step_inputs : tuple of ndarray
        Scheduling inputs per axis of the lookups and of the steps.
    errors : ndarray
        Error sample of each step.
    feedforward, use_limits, low, high : ndarray
        Feedforward per step; where ``use_limits`` the run-time limits
        ``(low, high)`` are passed (else NULL).
    clear_at : int
        Step before which the state is cleared again.
    """

    layout: TableLayout
    source: str
    point_inputs: tuple[np.ndarray, ...]
    step_inputs: tuple[np.ndarray, ...]
    errors: np.ndarray
    clear_at: int
    feedforward: np.ndarray
    use_limits: np.ndarray
    low: np.ndarray
    high: np.ndarray

    @property
    def steps(self) -> int:
        """Controller steps the harness runs."""
        return int(self.errors.size)


def harness_program(
    table: GainTable, generated: GeneratedFiles, *, points: int = 1200, steps: int = 6000, seed: int = 0
) -> HarnessProgram:
    """Vectors and harness source for a generated table (see :func:`check_generated_c`)."""
    if points < 1000 or steps < 5000:
        raise CodegenError(f"the harness compares at least 1000 points and 5000 steps; got {points}, {steps}")
    layout = layout_table(
        table,
        generated.number_format,
        error_full_scale=generated.error_full_scale,
        output_full_scale=generated.output_full_scale,
    )
    fixed = layout.fmt.is_fixed
    rng = np.random.default_rng(seed)
    point_inputs = _point_inputs(layout, rng, points)
    step_inputs, errors = _step_inputs(layout, rng, steps)
    feedforward, use_limits, low, high = _step_extras(layout, rng, steps)
    clear_at = steps // 2
    context = template_context(layout, generated.prefix, "0" * 64, {"harness": "host"})
    context.update(
        points_count=int(point_inputs[0].size),
        steps_count=steps,
        clear_at=clear_at,
        point_inputs=[c_literals(v, fixed) for v in point_inputs],
        step_inputs=[c_literals(v, fixed) for v in step_inputs],
        step_errors=c_literals(errors, fixed),
        step_feedforward=c_literals(feedforward, fixed),
        step_use_limits=[f"{int(v)}u" for v in use_limits],
        step_low=c_literals(low, fixed),
        step_high=c_literals(high, fixed),
    )
    source = render_template("harness.c.j2", context)
    return HarnessProgram(layout, source, tuple(point_inputs), tuple(step_inputs), errors, clear_at,
                          feedforward, use_limits, low, high)


@dataclass(frozen=True)
class OutputComparison:
    """A harness output compared with the Python mirror (fields as in :class:`HarnessResult`)."""

    status: str
    message: str
    points: int = 0
    steps: int = 0
    worst_gain_error: float = float("nan")
    worst_step_error: float = float("nan")
    gain_tolerance: float = float("nan")
    step_tolerance: float = float("nan")
    saturated_high: int = 0
    saturated_low: int = 0


def _mirror_outputs(program: HarnessProgram) -> tuple[np.ndarray, np.ndarray]:
    """What the mirror says the harness prints: gains per lookup, outputs and states per step."""
    layout, clear_at = program.layout, program.clear_at
    mirror_gains = lookup_gains(layout, *program.point_inputs)
    step_gains = lookup_gains(layout, *program.step_inputs)
    extras = (program.use_limits, program.low, program.high)
    first = run_steps(layout, {n: v[:clear_at] for n, v in step_gains.items()}, program.errors[:clear_at],
                      program.feedforward[:clear_at], tuple(v[:clear_at] for v in extras))
    second = run_steps(layout, {n: v[clear_at:] for n, v in step_gains.items()}, program.errors[clear_at:],
                       program.feedforward[clear_at:], tuple(v[clear_at:] for v in extras))
    fields = state_fields(layout.structure, layout.sections)
    mirror_steps = np.column_stack(
        [np.concatenate([first.output, second.output])]
        + [np.concatenate([first.states[f], second.states[f]]) for f in fields]
    )
    mirror_table = np.column_stack([mirror_gains[c.name] for c in layout.looked_up])
    return mirror_table, mirror_steps


def _tolerances(layout: TableLayout, mirror_steps: np.ndarray, steps: int) -> tuple[np.ndarray, np.ndarray]:
    """Accepted differences per coefficient and per printed signal (see the module notes)."""
    if layout.fmt.is_fixed:
        return np.zeros(len(layout.looked_up)), np.zeros(mirror_steps.shape[1])
    stages = 3 if len(layout.axes) == 2 else 1
    gain_tol = np.array([4 * stages * _EPS32 * float(np.max(np.abs(c.stored))) for c in layout.looked_up])
    with np.errstate(invalid="ignore"):
        scale = np.nanmax(np.abs(mirror_steps), axis=0)
    step_tol = 8 * _EPS32 * np.sqrt(steps) * np.maximum(scale, max(abs(float(v)) for v in layout.limits))
    return gain_tol, step_tol


def compare_output(program: HarnessProgram, stdout: str) -> OutputComparison:
    """Compare what a harness run printed with the Python mirror.

    Q15/Q31 must agree bit for bit; float32 within the tolerances of the
    module notes.
    """
    layout, steps = program.layout, program.steps
    fixed = layout.fmt.is_fixed
    c_gains = _parse(stdout, fixed, "G")
    c_steps = _parse(stdout, fixed, "S")
    mirror_table, mirror_steps = _mirror_outputs(program)
    if c_gains.shape != mirror_table.shape or c_steps.shape != mirror_steps.shape:
        return OutputComparison(
            "failed",
            f"harness printed {c_gains.shape} gains and {c_steps.shape} steps; expected "
            f"{mirror_table.shape} and {mirror_steps.shape}",
        )
    gain_diff = _difference(c_gains, mirror_table)
    step_diff = _difference(c_steps, mirror_steps)
    gain_tol, step_tol = _tolerances(layout, mirror_steps, steps)
    if fixed:
        out_low, out_high = (output_code(layout, v) for v in layout.limits)
    else:
        out_low, out_high = (float(v) for v in layout.limits)
    gains_ok = bool(np.all(gain_diff <= gain_tol))
    steps_ok = bool(np.all(step_diff <= step_tol))
    outputs = mirror_steps[:, 0]
    verdict = "bit-exact" if fixed else "within tolerance"
    message = f"{c_gains.shape[0]} lookups and {steps} steps " + (
        verdict if gains_ok and steps_ok else ""
    ) + ("" if gains_ok else "; gains differ from the mirror") + (
        "" if steps_ok else "; controller steps differ from the mirror"
    )
    return OutputComparison(
        "passed" if gains_ok and steps_ok else "failed",
        message.strip(),
        points=int(c_gains.shape[0]),
        steps=steps,
        worst_gain_error=float(np.max(gain_diff)),
        worst_step_error=float(np.max(step_diff)),
        gain_tolerance=float(np.max(gain_tol)),
        step_tolerance=float(np.max(step_tol)),
        saturated_high=int(np.sum(outputs >= out_high)),
        saturated_low=int(np.sum(outputs <= out_low)),
    )


def _build_settings(
    command: list[str], generated: GeneratedFiles, accept: tuple[str, ...]
) -> tuple[tuple[str, ...], tuple[str, ...], dict]:
    """Preprocessor defines, the C99 build flags and the compiler facts every result records.

    Sanitizers join the flags when the compiler supports them.
    """
    version, sanitizers = _compiler_facts(tuple(command))
    defines = (*generated.defines, *(f"-D{c_names(p).accept_unverified}" for p in accept))
    flags = ("-std=c99", "-O1", *WARNING_FLAGS, *defines) + (SANITIZER_FLAGS if sanitizers else ())
    common = dict(compiler=" ".join(command), compiler_version=version, flags=flags, sanitizers=sanitizers)
    return defines, flags, common


def _compile_and_run(
    command: list[str],
    files: list[Path],
    program: HarnessProgram,
    generated: GeneratedFiles,
    defines: tuple[str, ...],
    flags: tuple[str, ...],
    common: dict,
) -> HarnessResult | subprocess.CompletedProcess:
    """Check the sources as C11, build them with the harness as C99 and run it, in a temporary folder.

    Returns the finished run, or the failed ``HarnessResult`` of the first step that failed.
    """
    sources = [s.name for s in generated.sources]
    with tempfile.TemporaryDirectory(prefix="gainloom-harness-") as tmp:
        work = Path(tmp)
        for f in files:
            shutil.copyfile(f, work / f.name)
        (work / "harness.c").write_text(program.source, encoding="utf-8")
        c11 = _run([*command, "-std=c11", *WARNING_FLAGS, *defines, "-fsyntax-only", *sources], work)
        if c11.returncode != 0:
            return HarnessResult("failed", "generated C does not compile as C11", diagnostics=c11.stderr, **common)
        built = _run([*command, *flags, *sources, "harness.c", "-o", "harness"], work)
        if built.returncode != 0:
            return HarnessResult("failed", "generated C does not compile as C99", diagnostics=built.stderr, **common)
        ran = _run([str(work / "harness")], work, _env())
        if ran.returncode != 0:
            return HarnessResult(
                "failed", f"harness exited with code {ran.returncode}", diagnostics=ran.stderr[-4000:], **common
            )
    return ran


def check_generated_c(
    files: Iterable[str | os.PathLike],
    table: GainTable,
    *,
    number_format: str | None = None,
    prefix: str | None = None,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
    points: int = 1200,
    steps: int = 6000,
    seed: int = 0,
    compiler: list[str] | None = None,
    accept: tuple[str, ...] = (),
) -> HarnessResult:
    """Compile the generated C, run a host harness and compare with the mirror.

    Parameters
    ----------
    files : iterable of path
        The generated ``<prefix>.h`` and ``<prefix>.c``.
    table : GainTable
        The table the files were generated from.
    number_format, prefix : str, optional
        As given to the emitter; default: read from the header's banner.
    error_full_scale, output_full_scale : float, optional
        As given to the emitter (fixed point); default: read from the
        header's banner.  A value that contradicts the banner is refused.
    points : int
        Gain lookups to compare (at least 1000).
    steps : int
        Controller steps to compare (at least 5000); the state is cleared
        half-way to check the clear function.
    seed : int
        Seed of the random inputs (results are deterministic).
    compiler : list of str, optional
        Compiler command; default :func:`find_compiler`.
    accept : tuple of str
        Further prefixes whose tables the build accepts unverified (the
        other loops of a cascade module, :mod:`gainloom.codegen.cascade`);
        the checks test arithmetic, so they build as an integrator who
        accepted every table would.

    Returns
    -------
    HarnessResult
    """
    if points < 1000 or steps < 5000:
        raise CodegenError(f"the harness compares at least 1000 points and 5000 steps; got {points}, {steps}")
    files = [Path(f) for f in files]
    generated = generated_files(
        files,
        number_format=number_format,
        prefix=prefix,
        error_full_scale=error_full_scale,
        output_full_scale=output_full_scale,
    )
    command = compiler or find_compiler()
    if command is None:
        return HarnessResult(
            "no-compiler", "no C compiler found ($CC, cc, gcc, clang): the generated C was NOT checked"
        )
    defines, flags, common = _build_settings(command, generated, accept)
    program = harness_program(table, generated, points=points, steps=steps, seed=seed)
    ran = _compile_and_run(command, files, program, generated, defines, flags, common)
    if isinstance(ran, HarnessResult):
        return ran
    comparison = compare_output(program, ran.stdout)
    return HarnessResult(
        **dataclasses.asdict(comparison),
        output_sha256=hashlib.sha256(ran.stdout.encode("utf-8")).hexdigest(),
        diagnostics=ran.stderr,
        **common,
    )
