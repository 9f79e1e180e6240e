"""``gainloom simulate CASCADE --gains DIR``: the cascade branch of the simulate
command (:func:`gainloom.simulation.cascade_files.simulate_cascade_files`);
the CLI only parses, calls it and prints each loop's figures."""

from __future__ import annotations

import argparse
from typing import Any

from ..errors import InputError
from ..safety import CAUTION
from .arguments import parse_number
from .output import format_number, print_json

__all__ = ["run_cascade"]

#: Single-loop options a cascade run does not take, with what their destination holds when not given.
_SINGLE_LOOP_ONLY: tuple[tuple[str, str, Any], ...] = (
    ("--path", "path", []),
    ("--reference-at", "reference_at", 0.0),
    ("--reference-path", "reference_path", None),
    ("--feedforward", "feedforward", None),
    ("--feedforward-at", "feedforward_at", 0.0),
    ("--limit-step", "limit_step", []),
    ("--error-full-scale", "error_full_scale", None),
    ("--output-full-scale", "output_full_scale", None),
    ("--max-overshoot", "max_overshoot", None),
    ("--max-settling", "max_settling", None),
    ("--max-error", "max_error", None),
    ("--max-rms-error", "max_rms_error", None),
    ("--max-saturation", "max_saturation", None),
    ("--settle-band", "settle_band", 2.0),
    ("--error-from", "error_from", 0.0),
)


def _refuse_single_loop_options(args: argparse.Namespace) -> None:
    for option, dest, unset in _SINGLE_LOOP_ONLY:
        if getattr(args, dest) != unset:
            raise InputError(f"{option} does not apply to a cascade: its run holds the operating point and takes "
                             "--ramp NAME=VALUE, --reference, --load-step and --duration (docs/simulate.md, "
                             "'Cascades'); full scales come from the cascade file")


def _point(args: argparse.Namespace) -> dict[str, float]:
    """``--ramp NAME=VALUE`` options as held values (a cascade run holds the operating point)."""
    point: dict[str, float] = {}
    for text in args.ramp:
        name, sep, value = text.partition("=")
        name = name.strip()
        if not sep or not name or ":" in value or "@" in value:
            raise InputError(f"--ramp: a cascade run holds the operating point: expected NAME=VALUE; got {text!r}")
        if name in point:
            raise InputError(f"scheduling variable {name!r} has two values")
        point[name] = parse_number(value, f"--ramp {name}")
    return point


def _load(args: argparse.Namespace) -> tuple[float, float] | None:
    if not args.load_step:
        return None
    if len(args.load_step) > 1:
        raise InputError(f"--load-step: a cascade run takes one load step; got {len(args.load_step)}")
    time, sep, amplitude = args.load_step[0].partition(":")
    if not sep:
        raise InputError(f"--load-step: expected TIME:AMPLITUDE; got {args.load_step[0]!r}")
    return parse_number(time, "--load-step"), parse_number(amplitude, "--load-step")


def _loop_line(loop: Any, every: int) -> str:
    m = loop.metrics
    rate = f" (every {every}th base period)" if every > 1 else " (base period)"
    parts = [f"saturated {format_number(100 * m.saturation_fraction, 3)} % of the run"]
    if m.overshoot is not None:
        parts.append(f"reference step {format_number(m.step_size, 4)} at {format_number(m.step_time, 4)} s: "
                     f"overshoot {format_number(m.overshoot, 3)} %, settling "
                     + (f"not settled within the {format_number(loop.step_window, 3)} s to the next event"
                        if m.settling_time is None else f"{format_number(m.settling_time, 3)} s"))
    for response in m.load_responses:
        recovery = "not recovered" if response.recovery_time is None else \
            f"recovered in {format_number(response.recovery_time, 3)} s"
        parts.append(f"load step {format_number(response.amplitude, 4)} at {format_number(response.time, 4)} s: "
                     f"peak deviation {format_number(response.peak_deviation, 4)}, {recovery}")
    parts.append(f"rms error {format_number(m.rms_error, 4)}")
    if m.instability.detected:
        parts.append(f"UNSTABLE ({m.instability.kind}: {m.instability.detail})")
    return f"loop {loop.name}{rate}: " + "; ".join(parts)


def _summary(simulation: Any) -> list[str]:
    run = simulation.run
    s = run.scenario
    where = ", ".join(f"{k}={format_number(v, 6)}" for k, v in s.outer_point.items())
    inner = ", ".join(f"{k}={format_number(v, 6)}" for k, v in s.inner_point.items())
    lines = [f"cascade run ({run.number_format}), operating point held: outer {where}; inner {inner}",
             f"outer reference step {format_number(s.reference_step, 6)} at 0 s; load step "
             f"{format_number(s.load_amplitude, 6)} at {format_number(s.load_time, 4)} s; run "
             f"{format_number(s.duration, 4)} s (time scale {format_number(simulation.time_scale, 4)} s: "
             f"{simulation.time_scale_basis})"]
    lines += [_loop_line(loop, every) for loop, every in reversed(tuple(zip(run.loops, simulation.rate_factors)))]
    lines.append("verdict: " + ("stable: no divergence, growth or saturated oscillation in any loop" if run.stable
                                else "UNSTABLE"))
    return lines


def run_cascade(args: argparse.Namespace) -> int:
    """Simulate a cascade from its design folder; exit 0 when every loop is stable, else 1."""
    from ..simulation.cascade_files import simulate_cascade_files

    _refuse_single_loop_options(args)
    point, load = _point(args), _load(args)  # bad options fail before any file is read
    simulation = simulate_cascade_files(args.schedule, args.gains, number_format=args.number_format,
                                        duration=args.duration, reference_step=args.reference, load=load,
                                        point=point)
    plots = []
    if args.plot is not None:
        from ..outputs import write_outputs
        from ..simulation.cascade_plot import PLOT_FILE, plot_cascade

        plots = [str(p) for p in write_outputs(args.plot, {PLOT_FILE: plot_cascade(simulation.run)},
                                               force=args.force)]
    if args.json:
        data = simulation.to_dict(series=args.series)
        data["plots"] = plots
        data["caution"] = CAUTION
        print_json(data)
    else:
        for line in _summary(simulation):
            print(line)
        for note in simulation.notes:
            print(f"note: {note}")
        for path in plots:
            print(f"plot: {path}")
        print(CAUTION)
    return 0 if simulation.passed else 1
