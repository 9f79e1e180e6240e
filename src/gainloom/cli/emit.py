"""``gainloom emit``: write the C lookup tables and controller step for a gains file."""

from __future__ import annotations

import argparse
import hashlib
import sys
from pathlib import Path

from ..c_names import c_names
from ..codegen.emit import emit_c
from ..codegen.harness import check_generated_c
from ..codegen.verdict import table_verdict
from ..design.gainsfile import GainsMetadata, compromise_points, provenance_notes, read_gains
from ..errors import CodegenError
from ..names import NUMBER_FORMATS
from ..safety import CAUTION
from .output import print_json

HELP = "write C lookup tables and the controller step for a gains file"

def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``gainloom emit``."""
    parser.add_argument("gains", metavar="GAINS", help="gains file written by 'gainloom design' (YAML or JSON)")
    parser.add_argument("--out", required=True, metavar="DIR", help="output folder (created if missing)")
    parser.add_argument(
        "--format",
        dest="number_format",
        choices=NUMBER_FORMATS,
        default=None,
        help="number format (default: the schedule's codegen.format with --schedule, else float32)",
    )
    parser.add_argument(
        "--prefix",
        default=None,
        help="start of every C identifier and of the file names "
        "(default: the schedule's codegen.prefix with --schedule, else ctl)",
    )
    parser.add_argument(
        "--error-full-scale",
        type=float,
        default=None,
        metavar="E",
        help="q15/q31: physical error that full-scale input stands for (default: the schedule's codegen.error_full_scale with --schedule, else 1)",
    )
    parser.add_argument(
        "--output-full-scale",
        type=float,
        default=None,
        metavar="U",
        help="q15/q31: physical output of full scale (default: the schedule's codegen.output_full_scale with --schedule, else max(|u_min|, |u_max|))",
    )
    parser.add_argument(
        "--check",
        action="store_true",
        help="compile the result with strict warnings and compare a host run with the Python mirror",
    )
    parser.add_argument(
        "--schedule",
        metavar="SCHEDULE",
        default=None,
        help="re-check the table as stored (rounded to the format) against this schedule; "
        "its codegen section gives the default prefix and format",
    )
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument(
        "--force", action="store_true", help="overwrite files in DIR that gainloom did not write or that were edited"
    )


def run(args: argparse.Namespace) -> int:
    """Emit, optionally check and re-verify; exit 0, or 1 when a check fails."""
    gains_path = Path(args.gains)
    table, metadata = read_gains(gains_path)
    schedule = None
    if args.schedule is not None:
        from ..schedule import load_schedule

        schedule = load_schedule(args.schedule)
        args.number_format = args.number_format or schedule.codegen.format
        args.prefix = schedule.codegen.prefix if args.prefix is None else args.prefix
        if args.error_full_scale is None:
            args.error_full_scale = schedule.codegen.error_full_scale
        if args.output_full_scale is None:
            args.output_full_scale = schedule.codegen.output_full_scale
    _check_filters(metadata, table, schedule)
    args.number_format = args.number_format or "float32"
    args.prefix = "ctl" if args.prefix is None else args.prefix
    source_sha256 = metadata.schedule_sha256
    gains_sha256 = hashlib.sha256(gains_path.read_bytes()).hexdigest()
    report: dict = {"format": args.number_format, "prefix": args.prefix}
    code = 0
    stored_passed = None
    if schedule is not None:
        report["stored_table"] = _recheck_stored(schedule, table, args)
        stored_passed = report["stored_table"]["passed"]
        if not stored_passed:
            code = 1
    # the header's verdict: the design recorded in the gains file and the
    # re-check of the rounded table; either unknown counts as not verified
    recorded = metadata.passed
    compromises = compromise_points(metadata)
    report["compromise_points"] = compromises
    if compromises:
        recorded = False  # a best compromise is not a design: never emitted as verified
    verdict = table_verdict(recorded, stored_passed, args.number_format)
    report["verified"] = verdict.verified
    report["verdict"] = verdict.basis
    written = emit_c(
        table,
        args.out,
        args.number_format,
        args.prefix,
        source_sha256,
        {"gains_file": gains_path.name, "gains_sha256": gains_sha256},
        error_full_scale=args.error_full_scale,
        output_full_scale=args.output_full_scale,
        verdict=verdict,
        force=args.force,
    )
    report["files"] = [str(p) for p in written]
    if args.check:
        # format, prefix and full-scale values are read back from the banner
        result = check_generated_c(written, table)
        report["check"] = result.summary()
        if result.passed is False:
            code = 1
            print(result.diagnostics, file=sys.stderr)
    notes = provenance_notes(metadata, None if schedule is None else schedule.sha256)
    if compromises:
        notes.append("a table with best-compromise points is never emitted as verified: the header is NOT VERIFIED")
    report["warnings"] = notes
    if args.json:
        print_json(report)
    else:
        for path in written:
            print(f"wrote {path}")
        if "check" in report:
            check = report["check"]
            print(
                f"check: {check['status']}: {check['message']}"
                + (f" [{check['compiler_version']}, sanitizers {'on' if check['sanitizers'] else 'off'}]"
                   if check["compiler_version"] else "")
            )
        if "stored_table" in report:
            stored_report = report["stored_table"]
            print(
                f"stored table ({args.number_format}) on {args.schedule}: "
                f"{'PASS' if stored_report['passed'] else 'FAIL'}: {stored_report['points_passing']}/"
                f"{stored_report['points']} points meet every spec; whole-table checks "
                f"{'pass' if stored_report['table_checks_passed'] else 'fail'}"
            )
        if not report["verified"]:
            print(
                f"header NOT VERIFIED ({report['verdict']}): it compiles only with "
                f"{c_names(args.prefix).accept_unverified} defined",
                file=sys.stderr,
            )
        for note in report["warnings"]:
            print(f"warning: {note}", file=sys.stderr)
        print(CAUTION)
    return code


def _check_filters(metadata: GainsMetadata, table, schedule) -> None:
    """Refuse a table whose tabulated filter sections differ from those it was designed with.

    A gains file written before the C carried filter sections records them
    under ``design.filters`` but has no ``filters`` tables: C without them
    would be another controller than the one verified.
    """
    recorded = (metadata.design or {}).get("filters") or []
    expected = len(schedule.controller.filters) if schedule is not None else len(recorded)
    if expected != len(table.filters):
        raise CodegenError(
            f"the table was designed with {expected} controller.filters section(s) but the gains file "
            f"tabulates {len(table.filters)}; design it again with this gainloom"
        )


def _recheck_stored(schedule, table, args: argparse.Namespace) -> dict:
    """Verify the table as stored in the chosen format against the schedule.

    The same re-check after rounding as the design job's quantisation stage
    (:func:`gainloom.codegen.quantisation.check_quantisation`), so both give
    the header the same verdict.
    """
    from ..codegen.quantisation import check_quantisation

    quantisation = check_quantisation(schedule, table, args.number_format,
                                      error_full_scale=args.error_full_scale, output_full_scale=args.output_full_scale)
    checked = quantisation.rounded
    return {
        "passed": checked.passed,
        "points_passing": sum(s == "pass" for s in checked.status),
        "points": len(checked.status),
        "table_checks_passed": checked.table_report.passed,
        "failed_specs": [checked.analysis.failed_specs(p) for p in range(checked.analysis.points)],
        "broken_by_rounding": quantisation.broken,
    }
