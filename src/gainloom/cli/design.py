"""``gainloom design SCHEDULE --out DIR``: design the gain table and write the gains file."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..errors import InputError
from .output import format_number, format_table, print_json

HELP = "design gains at every operating point of a schedule and write the gains file"

#: Printed at the end of every design run.
SAFETY_CAUTION = (
    "CAUTION: these gains drive motors and power stages. Validate them on the hardware with current and "
    "speed limits and a safe test set-up before use. gainloom does not replace functional-safety "
    "processes, local codes or licensed engineering judgement."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule file (YAML)")
    parser.add_argument("--out", metavar="DIR", required=True, help="directory for the gains file")
    parser.add_argument(
        "--gains-name", metavar="NAME", default="gains.yaml",
        help="file name of the gains file in DIR (.yaml or .json; default gains.yaml)",
    )
    parser.add_argument("--json", action="store_true", help="print the summary as JSON instead of a table")
    parser.add_argument("--quiet", action="store_true", help="no progress display on stderr")


class Counter:
    """A one-line progress counter on stderr: ``design  37/200``."""

    def __init__(self, stream=None, enabled: bool = True) -> None:
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.last = None

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.enabled:
            return
        text = f"\r{stage:<15} {done:>6}/{total:<6}"
        if (stage, done) != self.last:
            self.stream.write(text)
            if done >= total:
                self.stream.write("\n")
            self.stream.flush()
            self.last = (stage, done)


def summary_rows(labels, analysis, status, binding=None):
    """Rows of the per-point summary table."""
    rows = []
    names = list(analysis.physical)
    for p, label in enumerate(labels):
        row = [label, status[p]]
        row += [float(analysis.physical[n][p]) for n in names]
        row += [
            float(analysis.damping[p]),
            float(analysis.natural_frequency[p]),
            float(analysis.gain_margin_db[p]),
            float(analysis.phase_margin[p]),
            float(analysis.overshoot[p]),
        ]
        row.append("" if binding is None or binding[p] is None else binding[p])
        rows.append(row)
    headers = ["point", "status"] + names + ["zeta", "wn rad/s", "GM dB", "PM deg", "OS %", "binding"]
    return headers, rows


def print_table_report(report, stream) -> None:
    """Whole-table check lines."""
    print(f"between points: {report.between_checked} checked, {len(report.between)} failing", file=stream)
    for entry in report.between[:10]:
        print(f"  interval {entry['interval']} at {entry['point']}: {', '.join(entry['failed'])}", file=stream)
    if report.tolerance_corners:
        print(
            f"tolerances: {report.tolerance_corners} corner(s)/sample(s) per point, "
            f"{len(report.tolerances)} point(s) failing at their worst corner",
            file=stream,
        )
        for entry in report.tolerances[:10]:
            print(f"  {entry['point']} worst {entry['scale']}: {', '.join(entry['failed'])}", file=stream)
    for entry in report.smoothness[:10]:
        print(f"smoothness: {entry['coefficient']} step {format_number(entry['step'])} > "
              f"{format_number(entry['limit'])} along {entry['axis']} at {entry['index']}", file=stream)
    for entry in report.monotone[:10]:
        print(f"monotone: {entry['coefficient']} not {entry['direction']} along {entry['axis']} at {entry['index']}",
              file=stream)
    for note in report.smoothing:
        print(f"smoothing: {note}", file=stream)
    for entry in report.inserted:
        print(f"inserted breakpoint {entry['axis']} = {format_number(entry['value'])}", file=stream)


def run(args: argparse.Namespace) -> int:
    """Design, write the gains file, print the summary and the caution."""
    from ..design.engine import design
    from ..design.gainsfile import write_gains

    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out must be a directory; {out} is a file")
    name = Path(args.gains_name)
    if name.name != args.gains_name or name.suffix.lower() not in (".yaml", ".yml", ".json"):
        raise InputError(f"--gains-name must be a plain file name ending .yaml, .yml or .json; got {args.gains_name!r}")
    result = design(args.schedule, progress=Counter(enabled=not args.quiet))
    out.mkdir(parents=True, exist_ok=True)
    path = write_gains(result, out / name)
    if args.json:
        print_json({
            "passed": result.passed,
            "gains_file": str(path),
            "status": list(result.status),
            "binding": list(result.binding),
            "notes": [list(n) for n in result.notes],
            "table_checks": result.table_report.as_document(),
            "warnings": list(result.warnings),
        })
    else:
        headers, rows = summary_rows(result.point_labels, result.analysis, result.status, result.binding)
        print(format_table(headers, rows))
        for p, notes in enumerate(result.notes):
            if result.status[p] == "fail":
                for note in notes:
                    print(f"{result.point_labels[p]}: {note}")
        print_table_report(result.table_report, sys.stdout)
        for warning in result.warnings:
            print(f"warning: {warning}")
        failed = sum(s == "fail" for s in result.status)
        verdict = "PASS" if result.passed else "FAIL"
        print(f"{verdict}: {len(result.status) - failed}/{len(result.status)} points meet every spec; "
              f"whole-table checks {'pass' if result.table_report.passed else 'fail'}")
        print(f"gains file: {path}")
    print(SAFETY_CAUTION, file=sys.stderr if args.json else sys.stdout)
    return result.exit_code
