"""``gainloom discretize``: one continuous transfer function to its hold equivalent."""

from __future__ import annotations

import argparse

import numpy as np

from ..errors import InputError
from ..lti.discretize import discrete_roots, discretize_loop
from ..lti.loop import Loop
from ..lti.poles import root_records
from ..names import HOLD_METHODS
from .arguments import parse_coefficients, parse_number
from .output import format_number, format_table, print_json

__all__ = ["HELP", "add_arguments", "run", "parse_coefficients"]

HELP = "discretise a continuous transfer function (hold method, computation delay) and show its poles and zeros"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the options of ``gainloom discretize``."""
    parser.add_argument("--num", required=True, help='numerator, descending powers of s, e.g. "1 2"')
    parser.add_argument("--den", required=True, help='denominator, descending powers of s, e.g. "1 3 2"')
    parser.add_argument("--ts", required=True, help="sample period in seconds")
    parser.add_argument(
        "--method", default="zoh", help=f"hold method: {', '.join(HOLD_METHODS)} (default zoh)"
    )
    parser.add_argument(
        "--delay", default="0", help="computation delay in samples (fractional only with zoh; default 0)"
    )
    parser.add_argument(
        "--dead-time", default="0", help="plant dead time in seconds, absorbed into the delay (default 0)"
    )
    parser.add_argument("--prewarp", default=None, help="Tustin prewarp frequency in rad/s (below pi/ts)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")


def describe(num, den, ts, method="zoh", delay=0.0, dead_time=0.0, prewarp=None) -> dict:
    """The discretised loop as a plain dict (what ``--json`` prints)."""
    plant = Loop(num=num, den=np.trim_zeros(den, "f") if np.any(den) else den, dead_time=dead_time)
    loop = discretize_loop(plant, ts, method=method, delay=delay, prewarp=prewarp)
    dnum, dden = np.asarray(loop.delta_num)[0], np.asarray(loop.delta_den)[0]  # discretize_loop always sets them
    # G(z = 1) = G_delta(g = 0): exact zero trailing coefficient for a pole at z = 1.
    infinite = dden[-1] == 0
    dc_gain = None if infinite else float(dnum[-1] / dden[-1])
    return {
        "method": method,
        "ts": float(ts),
        "delay_samples": float(loop.delay[0]),
        "prewarp": prewarp,
        "num": loop.num[0],
        "den": loop.den[0],
        "delta_num": dnum,
        "delta_den": dden,
        "poles": root_records(discrete_roots(loop.den[0], dden, ts)[0]),
        "zeros": root_records(discrete_roots(loop.num[0], dnum, ts)[0]),
        "zeros_at_infinity": int(np.argmax(loop.num[0] != 0)) if np.any(loop.num[0]) else loop.order,
        "dc_gain": dc_gain,
        "dc_gain_infinite": bool(infinite),
    }


def run(args: argparse.Namespace) -> int:
    """Discretise and print; return the exit code."""
    num = parse_coefficients(args.num, "num")
    den = parse_coefficients(args.den, "den")
    if not np.any(den):
        raise InputError("--den is all zeros")
    ts = parse_number(args.ts, "--ts")
    delay = parse_number(args.delay, "--delay")
    dead_time = parse_number(args.dead_time, "--dead-time")
    prewarp = None if args.prewarp is None else parse_number(args.prewarp, "--prewarp")
    result = describe(num, den, ts, args.method, delay, dead_time, prewarp)
    if args.json:
        print_json(result)
        return 0
    digits = 12
    lines = [
        f"hold {result['method']}, ts = {format_number(ts)} s, delay = {format_number(result['delay_samples'])} samples"
        + ("" if prewarp is None else f", prewarp = {format_number(prewarp)} rad/s"),
        "numerator   (z, descending): " + " ".join(format_number(c, digits) for c in result["num"]),
        "denominator (z, descending): " + " ".join(format_number(c, digits) for c in result["den"]),
        "numerator   (g = (z-1)/ts):  " + " ".join(format_number(c, digits) for c in result["delta_num"]),
        "denominator (g = (z-1)/ts):  " + " ".join(format_number(c, digits) for c in result["delta_den"]),
        "",
    ]
    for title in ("poles", "zeros"):
        # Ten digits: poles near z = 1 differ only in the later digits.
        rows = [
            [i + 1] + [format_number(r[key], 10) for key in ("real", "imag", "magnitude", "angle_rad")]
            for i, r in enumerate(result[title])
        ]
        lines.append(f"{title} (z):" if rows else f"{title} (z): none finite")
        if rows:
            lines.append(format_table(["#", "real", "imag", "magnitude", "angle_rad"], rows))
        lines.append("")
    if result["zeros_at_infinity"]:
        lines.append(f"zeros at infinity: {result['zeros_at_infinity']}")
    if result["dc_gain_infinite"]:
        lines.append("DC gain: infinite (pole at z = 1)")
    else:
        lines.append(f"DC gain: {format_number(result['dc_gain'], digits)}")
    print("\n".join(lines))
    return 0
