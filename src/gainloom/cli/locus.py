"""``gainloom locus``: root-locus facts of one loop, as a table, JSON or a plot."""

from __future__ import annotations

import argparse
import math

import numpy as np

from ..errors import InputError
from ..limits import MAX_DELAY_SAMPLES, MAX_PLANT_ORDER
from ..lti.discretize import discretize_loop
from ..lti.facts import LocusFacts, locus_facts
from ..lti.intervals import damping_gain_intervals
from ..lti.loop import Loop
from ..lti.poles import damping_and_frequency
from ..lti.trace import trace_covering
from ..names import HOLD_METHODS, unknown_name_message
from ..safety import CAUTION
from .arguments import parse_coefficients
from .output import format_number, format_table, print_json

HELP = "root-locus facts of one loop K N/D (s-plane, or z-plane after sampling)"

def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the options of ``gainloom locus``."""
    parser.add_argument("--num", required=True, help='loop numerator N, descending powers, e.g. "1 2"')
    parser.add_argument("--den", required=True, help='loop denominator D, descending powers, e.g. "1 3 2 0"')
    parser.add_argument("--ts", type=float, help="sample period in seconds: discretise the plant first")
    parser.add_argument(
        "--method", default="zoh", help=f"hold method with --ts (one of: {', '.join(HOLD_METHODS)}; default zoh)"
    )
    parser.add_argument("--delay", type=float, default=0.0, help="computation delay in samples with --ts (default 0)")
    parser.add_argument("--prewarp", type=float, help="Tustin prewarp frequency in rad/s")
    parser.add_argument(
        "--discrete", action="store_true", help="num/den are already polynomials in z (needs --ts; no discretising)"
    )
    parser.add_argument("--negative", action="store_true", help="facts for the K < 0 locus")
    parser.add_argument(
        "--damping", type=float, nargs="+", default=[], metavar="ZETA",
        help="damping ratios to draw as contours on the plot (each in [0, 1))",
    )
    parser.add_argument("--json", action="store_true", help="print the facts as JSON")
    parser.add_argument("--plot", metavar="FILE.png", help="draw the locus into this PNG file")
    parser.add_argument(
        "--force", action="store_true", help="with --plot: overwrite a file that gainloom did not write"
    )


def _build_loop(args: argparse.Namespace) -> tuple[Loop, str]:
    """Return the loop to analyse (one point) and how it was made."""
    num = parse_coefficients(args.num, "num")
    den = parse_coefficients(args.den, "den")
    # a loop given in z carries its delay poles in the polynomial
    most = MAX_PLANT_ORDER + (MAX_DELAY_SAMPLES if args.discrete else 0)
    if len(den) - 1 > most:
        raise InputError(f"--den has degree {len(den) - 1}; at most {most} is accepted")
    if args.discrete and args.ts is None:
        raise InputError("--discrete says num/den are in z; give their sample period with --ts")
    if args.ts is None:
        for option, value, default in (("--method", args.method, "zoh"), ("--delay", args.delay, 0.0),
                                       ("--prewarp", args.prewarp, None)):
            if value != default:
                raise InputError(f"{option} only applies when sampling; give --ts")
        return Loop(num=num, den=den), "continuous"
    if not (math.isfinite(args.ts) and args.ts > 0):
        raise InputError(f"--ts must be a positive sample period in seconds; got {args.ts}")
    if args.discrete:
        if args.delay != 0.0 or args.prewarp is not None or args.method != "zoh":
            raise InputError("--discrete loops are used as given; --method/--delay/--prewarp do not apply")
        return Loop(num=num, den=den, ts=args.ts), "given in z"
    if args.method not in HOLD_METHODS:
        raise InputError(unknown_name_message("hold method", args.method, HOLD_METHODS))
    loop = discretize_loop(Loop(num=num, den=den), args.ts, args.method, delay=args.delay, prewarp=args.prewarp)
    how = f"{args.method}, ts = {args.ts:g} s, delay = {loop.delay[0]:g} samples"
    if args.prewarp is not None:
        how += f", prewarp {args.prewarp:g} rad/s"
    return loop, how


def loop_facts(loop: Loop, negative: bool) -> LocusFacts:
    """Facts of the first point of ``loop`` (delta form used when present)."""
    ts = None if loop.ts is None else float(loop.ts[0])
    return locus_facts(loop.num[0], loop.den[0], ts=ts, negative=negative, delta=loop.delta(0))


def _cx(value: complex) -> str:
    if value.imag == 0:
        return format_number(value.real)
    return f"{format_number(value.real)} {'+' if value.imag > 0 else '-'} {format_number(abs(value.imag))}j"


def _interval(pair: tuple[float, float]) -> str:
    lo, hi = pair
    left = "-inf" if lo == -math.inf else format_number(lo)
    right = "inf" if hi == math.inf else format_number(hi)
    return f"({left}, {right})"


def format_facts(
    facts: LocusFacts,
    how: str,
    damped: dict[float, list[tuple[float, float]]] | None = None,
    damping_asked: bool = False,
) -> str:
    """Readable multi-section text of the facts.

    Parameters
    ----------
    facts : LocusFacts
    how : str
        How the analysed loop was made (continuous, given in z, hold used).
    damped : dict, optional
        Damping ratio -> gain intervals meeting it (``K > 0``).
    damping_asked : bool
        Damping ratios were requested (explains their absence for ``K < 0``).
    """
    plane = facts.plane
    sign = "K < 0" if facts.negative else "K > 0"
    out = [f"Root locus of K N/D in the {plane}-plane for {sign} ({how})", ""]

    rows = []
    for kind, roots in (("pole", facts.poles), ("zero", facts.zeros)):
        for root in roots:
            zeta, wn = damping_and_frequency(root.value, facts.ts)
            rows.append([kind, _cx(root.value), root.multiplicity, float(zeta), float(wn)])
    out += ["Open-loop poles and zeros", format_table(["", "location", "mult", "zeta", "wn [rad/s]"], rows), ""]

    if facts.segments:
        out += ["Real-axis segments on the locus: " + ", ".join(_interval(s) for s in facts.segments), ""]
    else:
        out += ["Real-axis segments on the locus: none", ""]

    if facts.asymptote_angles:
        out += [
            f"Asymptotes: {len(facts.asymptote_angles)} from centroid {format_number(facts.centroid)} at "
            + ", ".join(f"{a:.6g} deg" for a in facts.asymptote_angles),
            "",
        ]
    else:
        out += ["Asymptotes: none (as many zeros as poles)", ""]

    if facts.breakaways:
        rows = [[b.kind, _cx(b.point), b.gain] for b in facts.breakaways]
        out += ["Breakaway and break-in points", format_table(["kind", "point", "gain K"], rows), ""]
    else:
        out += ["Breakaway and break-in points: none", ""]

    if facts.crossings:
        if facts.ts is None:
            rows = [[_cx(c.point), c.omega, c.gain] for c in facts.crossings]
            table = format_table(["root", "omega [rad/s]", "gain K"], rows)
        else:
            rows = [[_cx(c.point), c.theta, c.omega, c.gain] for c in facts.crossings]
            table = format_table(["root", "theta [rad]", "theta/ts [rad/s]", "gain K"], rows)
        boundary = "imaginary axis" if facts.ts is None else "unit circle"
        out += [f"Crossings of the {boundary}", table, ""]
    else:
        out += ["Crossings of the stability boundary: none", ""]

    rows = [["departure", _cx(d.at), d.multiplicity, ", ".join(f"{a:.4f}" for a in d.angles)] for d in facts.departures]
    rows += [["arrival", _cx(d.at), d.multiplicity, ", ".join(f"{a:.4f}" for a in d.angles)] for d in facts.arrivals]
    out += ["Departure and arrival angles", format_table(["", "at", "mult", "angles [deg]"], rows), ""]

    if facts.stable_gain_intervals:
        out += ["Stable gain intervals: " + ", ".join(_interval(s) for s in facts.stable_gain_intervals), ""]
    else:
        out += [f"Stable gain intervals: none for {sign}", ""]
    if damped:
        out.append("Gains K > 0 with every closed-loop pole stable and damped at least")
        for ratio, pairs in damped.items():
            out.append(f"  zeta >= {ratio:g}: " + (", ".join(_interval(p) for p in pairs) if pairs else "no gain"))
        out.append("")
    elif damping_asked and facts.negative:
        out += ["Damping gain intervals are only computed for K > 0.", ""]
    for warning in facts.warnings:
        out.append(f"warning: {warning}")
    out.append(CAUTION)
    return "\n".join(out)


def _branches(loop: Loop, facts: LocusFacts) -> tuple[np.ndarray, np.ndarray, tuple[str, ...]]:
    """Gains, continuous branches and tracer warnings for the plot.

    The tracer's default gain range ends where the locus is asymptotic; it
    is widened when a crossing or breakaway lies beyond it, so every
    annotated point sits on a drawn branch.
    """
    special = [c.gain for c in facts.crossings] + [b.gain for b in facts.breakaways]
    traced = trace_covering(loop, special, negative=facts.negative)
    count = int(traced.counts[0])
    return traced.gains[0, :count], traced.roots[0, :count], traced.warnings


def _damping_curves(zetas: list[float], facts: LocusFacts) -> list[tuple[str, np.ndarray]]:
    """Constant-damping contours (rays in s, log-spirals in z) for the plot."""
    from ..lti.regions import SpecRegion

    # Rays are drawn well past the interesting points; the plot clips them.
    reach = [abs(r.value) for r in facts.poles + facts.zeros] + [abs(c.point) for c in facts.crossings]
    extent = 10.0 * max(reach + [1.0])
    curves = []
    for zeta in zetas:
        if zeta == 0:
            continue  # zeta = 0 is the stability boundary, drawn anyway
        region = SpecRegion(min_damping=zeta, ts=facts.ts)
        found = region.boundary_curves(extent=extent if facts.ts is None else None)
        # boundary_curves lists the decay (here: stability) boundary first,
        # then the two constant-damping curves.
        for curve in found[1:3]:
            curves.append((f"ζ={zeta:g}", curve))
    return curves


def _limit_marks(loop: Loop, damped: dict[float, list[tuple[float, float]]]) -> list[tuple[float, np.ndarray]]:
    """Closed-loop poles at each finite end of the damping gain intervals."""
    from ..lti.closed_loop import closed_loop_poles

    ends = sorted({end for pairs in damped.values() for pair in pairs for end in pair if 0 < end < math.inf})
    if not ends:
        return []
    poles = closed_loop_poles(loop, np.asarray(ends))[0]
    return [(gain, poles[k]) for k, gain in enumerate(ends)]


def _end(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def run(args: argparse.Namespace) -> int:
    """Compute, print and optionally plot; return the exit code."""
    for zeta in args.damping:
        if not (0.0 <= zeta < 1.0):
            raise InputError(f"--damping {zeta:g} is outside [0, 1); expected a damping ratio such as 0.7")
    loop, how = _build_loop(args)
    facts = loop_facts(loop, args.negative)
    damped = damping_gain_intervals(loop, args.damping) if not args.negative else {}
    if args.json:
        data = facts.to_dict()
        data["discretization"] = how
        data["sampling"] = (
            None
            if loop.hold is None or loop.ts is None
            else {
                "method": loop.hold,
                "ts": float(loop.ts[0]),
                "delay_samples": float(loop.delay[0]),
                "prewarp": None if loop.prewarp is None else float(loop.prewarp),
            }
        )
        data["damping_gain_intervals"] = {
            f"{zeta:g}": [[_end(lo), _end(hi)] for lo, hi in pairs] for zeta, pairs in damped.items()
        }
        print_json(data)
    else:
        print(format_facts(facts, how, damped, damping_asked=bool(args.damping)))
    if args.plot is not None:
        from ..report.locus_plot import plot_locus

        gains, branches, notes = _branches(loop, facts)
        plot_locus(
            facts, gains, branches, args.plot,
            damping_curves=_damping_curves(args.damping, facts),
            gain_marks=_limit_marks(loop, damped),
            force=args.force,
        )
        if not args.json:
            for note in notes:
                print(f"plot note: {note}")
            print(f"plot written to {args.plot}")
    return 0

