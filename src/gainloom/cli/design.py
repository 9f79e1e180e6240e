"""``gainloom design SCHEDULE --out DIR``: the whole job into one output folder.

Design the gain table, emit the C, compile and check it, re-check the table
after rounding, run a default scheduled simulation and write the
verification log (see :func:`gainloom.job.design_job.run_design_job`).  The CLI
only parses, shows progress and prints the summary.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path
from typing import TYPE_CHECKING, TextIO

from ..errors import InputError
from ..names import NUMBER_FORMATS
from ..outputs import check_output_folder
from ..safety import CAUTION
from .output import format_number, format_table, print_json

if TYPE_CHECKING:  # pragma: no cover
    from ..design.results import TableReport

HELP = "design gains at every operating point, emit and check the C, simulate, and write the verification log"

_EPILOG = """\
the full run, in order (progress on stderr):
  1. design     gains at every grid point + whole-table checks -> DIR/gains.yaml
  2. emit C     DIR/<prefix>.h and DIR/<prefix>.c in the number format
                (default: the schedule's codegen.format and codegen.prefix)
  3. check C    compile with strict warnings as errors and compare a host run
                with the Python mirror, when a C compiler is found; without one
                the summary says 'not checked: no C compiler found' (neither
                a pass nor a failure)
  4. quantisation  verify again with the coefficients rounded as the C stores them
  5. simulate   default scheduled run in the same number format: the first
                scheduling variable held at its lowest breakpoint for 3 T,
                ramped to its highest over 10 T, held 3 T (other variables at
                the middle of their range); unit reference step at 0 s; one
                load step of 0.1 * max(|u_min|, |u_max|) at the middle of the
                ramp.  T = largest designed 2 % settling time (at least 20
                sample periods; at most 100000 samples in all).  Passes when
                stable; overshoot, settling and load recovery are logged.
  6. log        DIR/verification.json, DIR/verification.md and PNG plots
All files are written together at the end: a run that stops with an error
leaves DIR as it was.  Files in DIR that gainloom did not write are never
overwritten without --force.  A failing design still writes every file; the
verdict is in the summary and verification.md, not in the C.

A cascade file (top-level 'loops', docs/cascade.md) designs the loops inner
first, each outer loop on the inner loop as designed, checks them together
(outer specs with the inner loop anywhere on its grid, bandwidth
separation), writes <loop>.gains.yaml per loop, one C module <prefix>.h/.c
with the calling order in its header, runs a reference step and a load step
of the cascade at its rates, and logs a 'loops' list and a 'cascade' section.

exit status: 0 every stage passes (a stage 'not checked' is reported, not
counted as a failure); 1 some spec fails (design, between points,
tolerances, quantisation, C check, simulation unstable); 2 bad input.
"""

def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = _EPILOG
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule or cascade file (YAML; docs/cascade.md)")
    parser.add_argument("--out", metavar="DIR", required=True, help="output folder (created if missing)")
    parser.add_argument(
        "--gains-name", metavar="NAME", default="gains.yaml",
        help="file name of the gains file in DIR (.yaml or .json; default gains.yaml)",
    )
    parser.add_argument(
        "--format", dest="number_format", choices=NUMBER_FORMATS, default=None,
        help="number format of the C, the quantisation re-check and the simulation "
        "(default: the schedule's codegen.format)",
    )
    parser.add_argument(
        "--prefix", default=None,
        help="start of every C identifier and of the C file names (default: the schedule's codegen.prefix)",
    )
    parser.add_argument(
        "--force", action="store_true", help="overwrite files in DIR that gainloom did not write or that were edited"
    )
    parser.add_argument("--no-simulate", action="store_true", help="skip the default scheduled simulation")
    parser.add_argument(
        "--no-compile",
        action="store_true",
        help="skip compiling and checking the C, on the host and the targets (reported as not checked)",
    )
    parser.add_argument(
        "--no-target",
        action="store_true",
        help="skip building the C for the target cores, the emulated runs and the coding-rule check "
        "(reported as not checked)",
    )
    parser.add_argument("--json", action="store_true", help="print the summary as JSON instead of a table")
    parser.add_argument("--quiet", action="store_true", help="no progress display on stderr")


class Counter:
    """Progress on stderr.

    On a terminal, one live line rewritten in place (``design  37/200``); off
    a terminal (a log file, a CI job) only one line per finished stage, so
    logs carry no carriage returns.
    """

    def __init__(self, stream=None, enabled: bool = True, live: bool | None = None) -> None:
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.live = _is_terminal(self.stream) if live is None else live
        self.last: tuple[str, int] | None = None

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.enabled or (stage, done) == self.last:
            return
        self.last = (stage, done)
        if self.live:
            self.stream.write(f"\r{stage:<15} {done:>6}/{total:<6}" + ("\n" if done >= total else ""))
        elif done >= total:
            self.stream.write(f"{stage:<15} {done:>6}/{total:<6} done\n")
        else:
            return
        self.stream.flush()


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):  # no isatty, or a closed stream
        return False


def summary_rows(labels, analysis, status, binding=None, point_warnings=None):
    """Rows of the per-point summary table.

    ``zeta`` and ``wn`` are those of one pole: the least-damped judged pole
    (``PointAnalysis.damping_pole_s``); ``wc`` is the gain crossover (shown
    as ``lowest..highest`` when ``|L|`` crosses 1 more than once and they
    differ by more than 1 %: ``min_crossover`` is judged on the lowest,
    ``max_crossover`` and the max-crossover objective on the highest) and
    ``wb`` the closed-loop bandwidth; ``!n`` after the status marks a point
    with n warnings (printed below the table).
    """
    rows = []
    names = list(analysis.physical)
    for p, label in enumerate(labels):
        count = len(point_warnings[p]) if point_warnings else 0
        row = [label, status[p] + (f" !{count}" if count else "")]
        row += [float(analysis.physical[n][p]) for n in names]
        row += [
            float(analysis.damping[p]),
            float(analysis.damping_pole_frequency[p]),
            float(analysis.gain_margin_db[p]),
            float(analysis.phase_margin[p]),
            _crossover_cell(float(analysis.crossover[p]), float(analysis.last_crossover[p])),
            float(analysis.bandwidth[p]),
            float(analysis.overshoot[p]),
        ]
        row.append("" if binding is None or binding[p] is None else binding[p])
        rows.append(row)
    headers = ["point", "status"] + names + [
        "zeta", "wn rad/s", "GM dB", "PM deg", "wc rad/s", "wb rad/s", "OS %", "binding"]
    return headers, rows


def _crossover_cell(lowest: float, highest: float) -> float | str:
    """One crossover, or ``lowest..highest`` when the loop crosses 0 dB at clearly different frequencies."""
    if math.isfinite(lowest) and math.isfinite(highest) and highest > 1.01 * lowest:
        return f"{format_number(lowest, 4)}..{format_number(highest, 4)}"
    return lowest


def point_summaries(labels, analysis, status, point_warnings=None) -> list[dict]:
    """Per-point numbers of the ``--json`` output (the table's columns and the least-damped pole)."""
    out = []
    for p, label in enumerate(labels):
        pole = complex(analysis.damping_pole_s[p])
        out.append({
            "point": label,
            "status": status[p],
            "damping": float(analysis.damping[p]),
            "damping_pole": {"s": [pole.real, pole.imag], "natural_frequency": float(analysis.damping_pole_frequency[p]),
                             "origin": analysis.damping_pole_origin[p]},
            "gain_margin_db": float(analysis.gain_margin_db[p]),
            "phase_margin_deg": float(analysis.phase_margin[p]),
            "crossover_rad_s": float(analysis.crossover[p]),
            "last_crossover_rad_s": float(analysis.last_crossover[p]),
            "bandwidth_rad_s": float(analysis.bandwidth[p]),
            "warnings": list(point_warnings[p]) if point_warnings else [],
        })
    return out


def _where(values: dict) -> str:
    """An operating point or tolerance corner as ``speed=125, J=x1.3``-style text."""
    return ", ".join(f"{name}={format_number(float(value))}" for name, value in values.items())


def print_table_report(report: TableReport, stream: TextIO) -> None:
    """Whole-table check lines (the first ten of each kind; the log has all)."""
    print(f"between points: {report.between_checked} checked, {len(report.between)} failing", file=stream)
    for failure in report.between[:10]:
        print(f"  interval {list(failure.interval)} at {_where(failure.point)}: {', '.join(failure.failed)}",
              file=stream)
    if report.tolerance_corners:
        print(
            f"tolerances: {report.tolerance_corners} corner(s)/sample(s) per point, "
            f"{len(report.tolerances)} point(s) failing at their worst corner",
            file=stream,
        )
        for worst in report.tolerances[:10]:
            corner = ", ".join(f"{name} x{format_number(float(v))}" for name, v in worst.scale.items())
            print(f"  {_where(worst.point)} worst corner {corner}: {', '.join(worst.failed)}", file=stream)
    for step in report.smoothness[:10]:
        print(f"smoothness: {step.coefficient} step {format_number(step.step)} > "
              f"{format_number(step.limit)} along {step.axis} at {list(step.index)}", file=stream)
    for change in report.monotone[:10]:
        print(f"monotone: {change.coefficient} not {change.direction} along {change.axis} at {list(change.index)}",
              file=stream)
    for note in report.smoothing:
        print(f"smoothing: {note}", file=stream)
    for inserted in report.inserted:
        print(f"inserted breakpoint {inserted.axis} = {format_number(inserted.value)}", file=stream)


def print_stages(job, stream) -> None:
    """One line per stage of the full run: verdict and why."""
    width = max(len(stage.stage) for stage in job.stages)
    for stage in job.stages:
        print(f"{stage.stage:<{width}}  {stage.status:<11}  {stage.detail}", file=stream)


def print_result(result) -> None:
    """A design's per-point table, warnings, failed points' notes, whole-table checks and verdict line."""
    headers, rows = summary_rows(result.point_labels, result.analysis, result.status, result.binding,
                                 result.point_warnings)
    print(format_table(headers, rows))
    for p, texts in enumerate(result.point_warnings):
        for text in texts:
            print(f"{result.point_labels[p]}: warning: {text}")
    for p, notes in enumerate(result.notes):
        if result.status[p] == "fail":
            for note in notes:
                print(f"{result.point_labels[p]}: {note}")
    print_table_report(result.table_report, sys.stdout)
    for warning in result.warnings:
        print(f"warning: {warning}")
    failed = sum(s == "fail" for s in result.status)
    print(f"design: {len(result.status) - failed}/{len(result.status)} points meet every spec; "
          f"whole-table checks {'pass' if result.table_report.passed else 'fail'}")


def verdict_line(job) -> str:
    """The run's verdict: PASS or the failing stages, and the stages not checked."""
    failing = [s.stage for s in job.stages if s.failed]
    verdict = "PASS" if job.passed else "FAIL: " + ", ".join(failing)
    unchecked = f" (not checked: {', '.join(job.not_checked)})" if job.not_checked else ""
    return f"{verdict}{unchecked}; the verdict and its reasons are in verification.md"


def run(args: argparse.Namespace) -> int:
    """Run the whole job, print the summary and the caution."""
    from ..job.design_job import run_design_job
    from ..schedule.cascade import is_cascade_file

    out = check_output_folder(args.out)
    if is_cascade_file(args.schedule):
        from .design_cascade import run_cascade

        return run_cascade(args, out)
    name = Path(args.gains_name)
    if name.name != args.gains_name or name.suffix.lower() not in (".yaml", ".yml", ".json"):
        raise InputError(f"--gains-name must be a plain file name ending .yaml, .yml or .json; got {args.gains_name!r}")
    job = run_design_job(
        args.schedule,
        out,
        number_format=args.number_format,
        prefix=args.prefix,
        force=args.force,
        compile=not args.no_compile,
        target=not args.no_target,
        simulate=not args.no_simulate,
        progress=Counter(enabled=not args.quiet),
        gains_name=args.gains_name,
    )
    result = job.design
    if args.json:
        print_json({
            "passed": job.passed,
            "design_passed": result.passed,
            "gains_file": str(job.gains_path),
            "c_files": [str(p) for p in job.c_files],
            "files": [str(p) for p in job.files],
            "number_format": job.number_format,
            "prefix": job.prefix,
            "stages": [s.to_dict() for s in job.stages],
            "not_checked": list(job.not_checked),
            "status": list(result.status),
            "binding": list(result.binding),
            "points": point_summaries(result.point_labels, result.analysis, result.status, result.point_warnings),
            "notes": [list(n) for n in result.notes],
            "table_checks": result.table_report.as_document(),
            "c_check": None if job.harness is None else job.harness.summary(),
            "simulation_scenario": job.scenario,
            "warnings": list(result.warnings),
        })
    else:
        print_result(result)
        print()
        print_stages(job, sys.stdout)
        print()
        print(verdict_line(job))
        print(f"output folder: {job.out_dir}")
        print(f"  gains file: {job.gains_path}")
        print(f"  C: {', '.join(str(p) for p in job.c_files) or 'not generated (see the C code stage)'}")
        print(f"  log: {job.out_dir / 'verification.md'} (verification.json, "
              f"{sum(p.suffix == '.png' for p in job.files)} PNG plots)")
    print(CAUTION, file=sys.stderr if args.json else sys.stdout)
    return job.exit_code
