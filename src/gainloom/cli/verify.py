"""``gainloom verify SCHEDULE --gains FILE``: re-check a gains file against a schedule."""

from __future__ import annotations

import argparse
import sys

from ..safety import CAUTION
from .design import Counter, point_summaries, print_table_report, summary_rows
from .output import format_table, print_json

HELP = "re-check a gains file (designed or tuned by hand) against a schedule"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule file (YAML)")
    parser.add_argument("--gains", metavar="FILE", required=True, help="gains file (YAML or JSON)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON instead of a table")
    parser.add_argument("--quiet", action="store_true", help="no progress display on stderr")


def run(args: argparse.Namespace) -> int:
    """Verify and print the summary; exit 0 all pass, 1 some spec fails."""
    from ..design.engine import verify

    result = verify(args.schedule, args.gains, progress=Counter(enabled=not args.quiet))
    if args.json:
        print_json({
            "passed": result.passed,
            "status": list(result.status),
            "failed_specs": [result.analysis.failed_specs(p) for p in range(result.analysis.points)],
            "points": point_summaries(result.point_labels, result.analysis, result.status),
            "table_checks": result.table_report.as_document(),
            "compromise_points": list(result.compromise_points),
            "warnings": list(result.warnings),
        })
        return result.exit_code
    headers, rows = summary_rows(result.point_labels, result.analysis, result.status)
    rows = [row[:-1] + [", ".join(result.analysis.failed_specs(p) + (["compromise"] if p in result.compromise_points else []))]
            for p, row in enumerate(rows)]
    print(format_table(headers[:-1] + ["failed specs"], rows))
    print_table_report(result.table_report, sys.stdout)
    for warning in result.warnings:
        print(f"warning: {warning}")
    failed = sum(s == "fail" for s in result.status)
    print(f"{'PASS' if result.passed else 'FAIL'}: {len(result.status) - failed}/{len(result.status)} points meet "
          f"every spec; whole-table checks {'pass' if result.table_report.passed else 'fail'}")
    print(CAUTION)
    return result.exit_code
