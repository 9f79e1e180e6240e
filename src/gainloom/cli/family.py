"""``gainloom family SCHEDULE --variants FILE --out DIR``: design a product family.

One design job per variant of the variants file (CSV or YAML, one variant
per row overriding schedule parameters), each into ``DIR/<variant>/``, and
the family's index ``DIR/family.md`` / ``DIR/family.json``.  Exit 0 when every
variant passes, 1 when some fails, 2 for bad input.
"""

from __future__ import annotations

import argparse
import sys

from ..names import NUMBER_FORMATS
from ..safety import CAUTION
from .arguments import add_engine_arguments, engine_options, print_notes
from .design import Counter
from .output import format_table, print_json

HELP = "design every variant of a product family (variants file) into its own folder, with an index"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    parser.add_argument("schedule", metavar="SCHEDULE", help="base schedule file (YAML)")
    parser.add_argument("--variants", metavar="FILE", required=True,
                        help="variants file: CSV (header name,<parameter>,...) or YAML (variants: [...])")
    parser.add_argument("--out", metavar="DIR", required=True,
                        help="family folder: one folder per variant, family.md and family.json")
    parser.add_argument("--format", dest="number_format", choices=NUMBER_FORMATS, default=None,
                        help="number format of every variant's C (default: the schedule's codegen.format)")
    parser.add_argument("--force", action="store_true",
                        help="overwrite files that gainloom did not write or that were edited")
    parser.add_argument("--no-simulate", action="store_true", help="skip each variant's default simulation")
    parser.add_argument("--no-compile", action="store_true", help="skip compiling and checking each variant's C")
    parser.add_argument("--no-target", action="store_true", help="skip the target-core builds and runs")
    add_engine_arguments(parser, "variants")
    parser.add_argument("--json", action="store_true", help="print family.json instead of the summary table")
    parser.add_argument("--quiet", action="store_true", help="no progress display on stderr")


def run(args: argparse.Namespace) -> int:
    """Run the family and print its summary."""
    from ..job.family_job import run_family
    from ..outputs import check_output_folder

    engine = engine_options(args)
    check_output_folder(args.out)
    result = run_family(args.schedule, args.variants, args.out, number_format=args.number_format, force=args.force,
                        compile=not args.no_compile, target=not args.no_target, simulate=not args.no_simulate,
                        **engine, progress=Counter(enabled=not args.quiet))
    print_notes(result.notes)
    if args.json:
        print_json({**result.index, "notes": list(result.notes)})
        print(CAUTION, file=sys.stderr)
        return result.exit_code
    rows = []
    for v in result.index["variants"]:
        binding = "; ".join(f"{s} ({len(w)})" for s, w in v["binding"].items()) or "-"
        tightest = "; ".join(f"{s} ({len(w)})" for s, w in v["tightest"].items()) or "-"
        rows.append([v["name"], "pass" if v["passed"] else "FAIL", f"{v['points_passing']}/{v['points']}",
                     binding, tightest])
    print(format_table(["variant", "verdict", "points passing", "binding (failing points)",
                        "tightest (passing points)"], rows))
    passing = sum(v["passed"] for v in result.index["variants"])
    print(f"family: {passing}/{len(rows)} variants pass; index: {result.out_dir / 'family.md'} (family.json)")
    print(CAUTION)
    return result.exit_code
