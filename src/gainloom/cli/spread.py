"""``gainloom spread SCHEDULE --gains FILE``: statistical tolerance study of a table.

Every point of the gains file is analysed on the random parameter draws of
the schedule's ``tolerances`` section (``samples: N``, ``distribution``,
``seed``).  Exit 0 when no draw violates a spec, 1 otherwise, 2 for bad
input.
"""

from __future__ import annotations

import argparse

import numpy as np

from ..safety import CAUTION
from .arguments import add_engine_arguments, engine_options, print_notes
from .design import Counter
from .output import format_number, format_table, print_json

HELP = "statistical tolerance study: fraction of random parameter draws that violate each spec, per point"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule file (YAML) with tolerances.samples: N")
    parser.add_argument("--gains", metavar="FILE", required=True, help="gains file (YAML or JSON)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON instead of tables")
    parser.add_argument("--plot", metavar="DIR", help="write spread.png (violation fraction over the grid) into DIR")
    parser.add_argument("--force", action="store_true",
                        help="with --plot: overwrite a spread.png that gainloom did not write")
    add_engine_arguments(parser, "chunks of points x draws")
    parser.add_argument("--quiet", action="store_true", help="no progress display on stderr")


def _percent(value: float) -> str:
    return f"{100 * value:.3g}"


def _interval(low: float, high: float) -> str:
    return f"[{_percent(low)}, {_percent(high)}]"


def print_result(result) -> None:
    """Print the per-point table and the worst draw of every spec."""
    low, high = result.interval()
    any_low, any_high = result.any_interval()
    spread = ", ".join(result.parameters)
    print(f"tolerance study: {result.draws} {result.distribution} draws per point (seed {result.seed}) of {spread}; "
          f"fractions in %, intervals {100 * result.confidence:g} % Clopper-Pearson")
    headers = ["point", "any spec", "interval"] + list(result.specs)
    rows = [[label, _percent(result.any_fraction[p]), _interval(any_low[p], any_high[p])]
            + [_percent(result.fraction[p, s]) for s in range(len(result.specs))]
            for p, label in enumerate(result.point_labels)]
    print(format_table(headers, rows))
    print("worst draw per spec (over all points):")
    for s, name in enumerate(result.specs):
        p = int(np.argmax(result.totals.worst_badness[:, s]))
        worst = result.worst(p, s)
        values = ", ".join(f"{n} = {format_number(v)} (x{format_number(worst['factors'][n], 4)})"
                           for n, v in worst["parameters"].items())
        print(f"  {name}: {format_number(worst['value'])} (limit {format_number(float(result.limits[p, s]))}) "
              f"at {result.point_labels[p]}, draw {worst['draw']}: {values}; "
              f"{_percent(result.fraction[p, s])} % of draws violate it there {_interval(low[p, s], high[p, s])}")


def run(args: argparse.Namespace) -> int:
    """Run the study and print it; exit 0 no violating draw, 1 some."""
    from ..design.spread import run_study
    from ..outputs import check_output_folder

    engine = engine_options(args)
    if args.plot is not None:
        check_output_folder(args.plot)
    notes: list[str] = []
    result = run_study(args.schedule, args.gains, progress=Counter(enabled=not args.quiet), notes=notes, **engine)
    print_notes(notes)
    plots = []
    if args.plot is not None:
        from ..report.spread_plot import write_spread_plot

        plots = [str(path) for path in write_spread_plot(result, args.plot, force=args.force)]
    if args.json:
        data = result.to_dict()
        data["plots"] = plots
        data["notes"] = notes
        data["caution"] = CAUTION
        print_json(data)
    else:
        print_result(result)
        for path in plots:
            print(f"plot: {path}")
        print(CAUTION)
    return 0 if result.passed else 1
