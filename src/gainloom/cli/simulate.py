"""``gainloom simulate SCHEDULE --gains FILE``: run the scheduled closed loop in time.

The loop runs as the firmware will run it: the plant of the schedule at the
current operating point integrated exactly between samples (zero-order
hold), the controller coefficients interpolated from the gains file in the
chosen number format, output saturation and anti-windup.  Exit 0 when the
run is stable and every requested limit holds, 1 otherwise, 2 for bad input.
"""

from __future__ import annotations

import argparse

from ..errors import InputError
from ..safety import CAUTION
from .arguments import parse_number
from .output import print_json

HELP = "run the closed loop in time while the scheduling variables move (ramps, steps, load steps)"

_EPILOG = """\
paths of the scheduling variables (one option per variable; every variable
of the schedule needs one):
  --ramp speed=1500            hold speed at 1500
  --ramp speed=0:6000          linear from 0 at t = 0 to 6000 at the end
  --ramp speed=0:6000@0.1:0.3  hold 0, ramp between 0.1 s and 0.3 s, hold 6000
  --path speed=0:0,0.2:3000,0.4:3000   breakpoints TIME:VALUE (linear between)

reference: --reference 1.0 is a step from 0 to 1.0 at --reference-at (default
0 s); --reference-path TIME:VALUE,... gives a piecewise-linear reference
(repeat a time for a jump).  Load steps at the plant input:
--load-step TIME:AMPLITUDE, repeatable.

inputs of the controller step besides the error (controller-output units;
numbers or expressions of t, r, y, the scheduling variables and the
schedule's parameters, e.g. "ke * speed" or "-vbus / sqrt(3)"):
  --feedforward EXPR [--feedforward-at SECONDS]  added before saturation,
                               from that time on (zero before; default 0 s)
  --limit-step TIME:LOW:HIGH   run-time output limits from TIME on; repeatable
  --limit-step TIME:table      the table's limits again from TIME on

a cascade file (top-level 'loops', docs/cascade.md) runs the cascade at its
rates from its design folder (--gains DIR holding <loop>.gains.yaml), at a
held operating point (--ramp NAME=VALUE for any loop's variable; default the
outer loop at the middle of its ranges, the inner at inner_at), with an outer
reference step (--reference) and one load step (--load-step TIME:AMPLITUDE,
inner measurement units at the outer plant part's input).

exit status: 0 stable and every --max-* limit holds, 1 otherwise, 2 bad input.
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the command's options."""
    from ..simulation import SIMULATION_FORMATS

    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = _EPILOG
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule or cascade file (YAML)")
    parser.add_argument("--gains", metavar="FILE", required=True,
                        help="gains file written by gainloom design (a cascade: its design folder)")
    parser.add_argument("--duration", metavar="SECONDS", type=float,
                        help="length of the run (default 0.5; a cascade: 6 times the outer loop's time scale)")
    parser.add_argument(
        "--ramp", metavar="AXIS=START[:END[@T0:T1]]", action="append", default=[],
        help="path of a scheduling variable: held, or a linear ramp (see below); repeatable",
    )
    parser.add_argument(
        "--path", metavar="AXIS=T:V,T:V,...", action="append", default=[],
        help="piecewise-linear path of a scheduling variable by breakpoints; repeatable",
    )
    parser.add_argument("--reference", metavar="VALUE", type=float,
                        help="reference step size (default 1.0; a cascade: 0.1 of the outer error full scale)")
    parser.add_argument("--reference-at", metavar="SECONDS", type=float, default=0.0, help="time of the reference step")
    parser.add_argument("--reference-path", metavar="T:V,T:V,...", help="piecewise-linear reference instead of a step")
    parser.add_argument(
        "--load-step", metavar="TIME:AMPLITUDE", action="append", default=[],
        help="input-disturbance step at the plant input, controller-output units; repeatable",
    )
    parser.add_argument(
        "--feedforward", metavar="EXPR",
        help="feedforward term added before saturation: a number or an expression (see below)",
    )
    parser.add_argument(
        "--feedforward-at", metavar="SECONDS", type=float, default=0.0,
        help="time the feedforward is switched on (zero before; default 0)",
    )
    parser.add_argument(
        "--limit-step", metavar="TIME:LOW:HIGH", action="append", default=[],
        help="run-time output limits of the step from TIME on (TIME:table: the table's again); repeatable",
    )
    parser.add_argument(
        "--format", dest="number_format", metavar="FORMAT", choices=SIMULATION_FORMATS,
        help=f"controller arithmetic: {', '.join(SIMULATION_FORMATS)} (default: the schedule's codegen format)",
    )
    parser.add_argument(
        "--error-full-scale", metavar="VALUE", type=float,
        help="q15/q31: physical error that full-scale input stands for (default: the schedule's codegen.error_full_scale, else 1)",
    )
    parser.add_argument(
        "--output-full-scale", metavar="VALUE", type=float,
        help="q15/q31: physical output of full scale (default max(|u_min|, |u_max|))",
    )
    parser.add_argument("--max-overshoot", metavar="PERCENT", type=float, help="fail above this reference-step overshoot")
    parser.add_argument("--max-settling", metavar="SECONDS", type=float, help="fail above this settling time")
    parser.add_argument("--max-error", metavar="VALUE", type=float, help="fail above this |r - y| in the error window")
    parser.add_argument("--max-rms-error", metavar="VALUE", type=float, help="fail above this RMS error in the window")
    parser.add_argument(
        "--max-saturation", metavar="FRACTION", type=float, help="fail above this fraction (0..1) of time saturated"
    )
    parser.add_argument("--settle-band", metavar="PERCENT", type=float, default=2.0, help="settling band (default 2)")
    parser.add_argument(
        "--error-from", metavar="SECONDS", type=float, default=0.0, help="start of the error window (default 0)"
    )
    parser.add_argument("--plot", metavar="DIR", help="write simulation.png into DIR")
    parser.add_argument(
        "--force", action="store_true", help="with --plot: overwrite a simulation.png that gainloom did not write"
    )
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument("--series", action="store_true", help="with --json: include every sample")



def _pair(text: str, what: str) -> tuple[float, float]:
    parts = text.split(":")
    if len(parts) != 2:
        raise InputError(f"{what}: expected A:B; got {text!r}")
    return parse_number(parts[0], what), parse_number(parts[1], what)


def _breakpoints(text: str, what: str):
    import numpy as np

    from ..simulation import PiecewiseLinear

    pairs = [_pair(item, what) for item in text.split(",") if item.strip()]
    if not pairs:
        raise InputError(f"{what}: expected TIME:VALUE,...; got {text!r}")
    return PiecewiseLinear(np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs]))


def parse_ramp(text: str, duration: float):
    """``AXIS=START[:END[@T0:T1]]`` to ``(axis, PiecewiseLinear)``."""

    from ..simulation import PiecewiseLinear

    name, sep, spec = text.partition("=")
    if not sep or not name.strip():
        raise InputError(f"--ramp: expected AXIS=START[:END[@T0:T1]]; got {text!r}")
    values, at, times = spec.partition("@")
    parts = values.split(":")
    what = f"--ramp {name}"
    if len(parts) == 1 and not at:
        return name.strip(), PiecewiseLinear.constant(parse_number(parts[0], what))
    if len(parts) != 2:
        raise InputError(f"{what}: expected START or START:END; got {values!r}")
    start, end = parse_number(parts[0], what), parse_number(parts[1], what)
    t0, t1 = _pair(times, what) if at else (0.0, duration)
    return name.strip(), PiecewiseLinear.ramp(start, end, t0, t1)


def parse_limit_step(text: str):
    """``TIME:LOW:HIGH`` or ``TIME:table`` to a :class:`~gainloom.simulation.LimitStep`."""
    from ..simulation import LimitStep
    from ..simulation.signals import SignalExpression

    parts = text.split(":")
    if len(parts) == 2 and parts[1].strip() == "table":
        return LimitStep(parse_number(parts[0], "--limit-step"))
    if len(parts) != 3 or not parts[1].strip() or not parts[2].strip():
        raise InputError(f"--limit-step: expected TIME:LOW:HIGH or TIME:table; got {text!r}")
    time = parse_number(parts[0], "--limit-step")
    low, high = (SignalExpression.parse(part.strip(), f"--limit-step {text} {which}")
                 for part, which in ((parts[1], "LOW"), (parts[2], "HIGH")))
    return LimitStep(time, low, high)


def build_scenario(args: argparse.Namespace):
    """The :class:`~gainloom.simulation.Scenario` the options describe."""
    from ..simulation import (
        Feedforward,
        LoadStep,
        PiecewiseLinear,
        Scenario,
        ScenarioSpecs,
    )
    from ..simulation.signals import SignalExpression

    duration = 0.5 if args.duration is None else args.duration
    trajectory = {}
    for text in args.ramp:
        name, path = parse_ramp(text, duration)
        if name in trajectory:
            raise InputError(f"scheduling variable {name!r} has two paths")
        trajectory[name] = path
    for text in args.path:
        name, sep, spec = text.partition("=")
        if not sep or not name.strip():
            raise InputError(f"--path: expected AXIS=T:V,T:V,...; got {text!r}")
        if name.strip() in trajectory:
            raise InputError(f"scheduling variable {name.strip()!r} has two paths")
        trajectory[name.strip()] = _breakpoints(spec, f"--path {name.strip()}")
    if not trajectory:
        raise InputError("give a path for each scheduling variable with --ramp or --path")
    if args.reference_path:
        reference = _breakpoints(args.reference_path, "--reference-path")
    else:
        reference = PiecewiseLinear.step(1.0 if args.reference is None else args.reference, args.reference_at)
    loads = tuple(LoadStep(*_pair(text, "--load-step")) for text in args.load_step)
    feedforward = None
    if args.feedforward is not None:
        feedforward = Feedforward(SignalExpression.parse(args.feedforward, "--feedforward"), args.feedforward_at)
    elif args.feedforward_at:
        raise InputError("--feedforward-at needs --feedforward")
    specs = ScenarioSpecs(
        max_overshoot=args.max_overshoot,
        max_settling_time=args.max_settling,
        max_error=args.max_error,
        max_rms_error=args.max_rms_error,
        max_saturation_fraction=args.max_saturation,
    )
    return Scenario(
        duration,
        trajectory,
        reference=reference,
        load_steps=loads,
        specs=specs,
        settle_band=args.settle_band / 100.0,
        error_from=args.error_from,
        feedforward=feedforward,
        limit_steps=tuple(parse_limit_step(text) for text in args.limit_step),
    )


def run(args: argparse.Namespace) -> int:
    """Simulate; exit 0 when stable and within every limit, else 1."""
    from ..design.gainsfile import provenance_notes, read_gains
    from ..schedule import load_schedule
    from ..schedule.cascade import is_cascade_file
    from ..simulation import run_scenario

    if is_cascade_file(args.schedule):
        from .simulate_cascade import run_cascade

        return run_cascade(args)

    scenario = build_scenario(args)  # bad options fail before any file is read
    schedule = load_schedule(args.schedule)
    table, metadata = read_gains(args.gains)
    number_format = args.number_format or schedule.codegen.format
    result = run_scenario(
        schedule,
        table,
        scenario,
        number_format,
        error_full_scale=(
            schedule.codegen.error_full_scale if args.error_full_scale is None else args.error_full_scale
        ),
        output_full_scale=(
            schedule.codegen.output_full_scale if args.output_full_scale is None else args.output_full_scale
        ),
    )
    notes = provenance_notes(metadata, schedule.sha256)
    plots = []
    if args.plot is not None:
        from ..simulation.plots import write_plots

        plots = [str(path) for path in write_plots(result, args.plot, force=args.force)]
    if args.json:
        data = result.to_dict(series=args.series)
        data["notes"] = notes
        data["plots"] = plots
        data["caution"] = CAUTION
        print_json(data)
    else:
        for line in result.summary():
            print(line)
        for note in notes:
            print(f"note: {note}")
        for path in plots:
            print(f"plot: {path}")
        print(CAUTION)
    return 0 if result.passed else 1
