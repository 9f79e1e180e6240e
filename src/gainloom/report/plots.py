"""PNG plots of the verification log, rendered to bytes.

Drawing only; every number comes from the design result and the sampled
plant.  Output is deterministic: Agg canvas (no display, no pyplot state),
fixed size and resolution, no software or date entries in the PNG metadata
(``metadata={"Software": None}``), so the same input gives the same bytes.

Plots
-----
* ``gains.png``: each table coefficient against the first scheduling
  variable; 2-D tables draw one line per value of the second variable.
* ``margins.png``: damping, dominant natural frequency, gain and phase
  margin, delay margin, sensitivity peak, gain crossover and closed-loop
  bandwidth against the first variable,
  with each spec limit drawn (a step line, since overrides may change it per
  point) and failing points circled.
* ``step.png``: the sampled loop's unit step response at the chosen points.
* ``frequency.png``: ``|L|`` and phase of ``L`` with the margins marked,
  and ``|S|``, ``|T|`` at the chosen points (:mod:`gainloom.report.frequency_plot`).
* ``locus_<n>.png``: root locus of the sampled loop ``K L(z)`` at a chosen
  point, ``K`` a multiple of the table's loop gain (``K = 1``: the designed
  poles), in the z-plane, near ``z = 1`` magnified, and mapped to
  ``s = ln(z)/ts``, with the spec region of that point.  Branches and facts
  are those of ``gainloom locus`` (tracer, locus facts); the drawing is
  this module's, because it marks the designed poles and the spec region,
  which the locus command's plot does not.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import scipy.signal
from matplotlib.lines import Line2D

from ..errors import GainloomError
from ..look import (
    BOUNDARY,
    LIMIT,
    MARK,
    REGION,
    SERIES,
    STABLE_FILL,
    new_figure,
    png_bytes,
)
from ..lti.closed_loop import closed_loop_poles
from ..lti.facts import locus_facts
from ..lti.loop import Loop
from ..lti.regions import SpecRegion
from ..spec_registry import spec_info

__all__ = [
    "plot_gains",
    "plot_margins",
    "plot_steps",
    "plot_locus_point",
    "chosen_points",
    "LOCUS_GAINS",
]

#: Multiples of the designed loop gain swept when the tracer cannot be used.
LOCUS_GAINS = np.geomspace(1e-3, 1e3, 481)

def axis_label(axis: Any) -> str:
    return f"{axis.name} [{axis.unit}]" if axis.unit else axis.name


def grid_lines(table: Any, grid: np.ndarray):
    """(label, x, y, flat indices) per line of a 1-D or 2-D grid."""
    x = table.axes[0].values
    if len(table.axes) == 1:
        yield None, x, grid, np.arange(x.size)
        return
    second = table.axes[1]
    flat = np.arange(grid.size).reshape(grid.shape)
    for j, value in enumerate(second.values):
        unit = f" {second.unit}" if second.unit else ""
        yield f"{second.name} = {value:.4g}{unit}", x, grid[:, j], flat[:, j]


def plot_gains(table: Any, status: tuple[str, ...]) -> bytes:
    """Table coefficients against the scheduling variable(s).

    Parameters
    ----------
    table : GainTable
    status : tuple of str
        ``"pass"``/``"fail"`` per point (grid order); failing points are
        circled.
    """
    names = table.coefficient_names
    columns = 2 if len(names) > 1 else 1
    rows = math.ceil(len(names) / columns)
    figure = new_figure((9.0, 2.6 * rows + 1.2))
    failed = np.array([s != "pass" for s in status])
    for k, name in enumerate(names):
        ax = figure.add_subplot(rows, columns, k + 1)
        grid = np.asarray(table.coefficients[name])
        for n, (label, x, y, flat) in enumerate(grid_lines(table, grid)):
            colour = SERIES[n % len(SERIES)]
            ax.plot(x, y, marker="o", ms=3.5, lw=1.4, color=colour, label=label)
            bad = failed[flat]
            if bad.any():
                ax.plot(x[bad], y[bad], ls="none", marker="o", ms=9, mfc="none", mec=LIMIT, mew=1.4)
        ax.set_title(f"{name}", fontsize=10, loc="left")
        ax.set_xlabel(axis_label(table.axes[0]), fontsize=8.5)
        ax.grid(True, color="#e4e4e4", lw=0.6)
        ax.tick_params(labelsize=8)
        ax.ticklabel_format(axis="y", style="sci", scilimits=(-3, 4), useOffset=False)
    handles, labels = figure.axes[0].get_legend_handles_labels()
    extra = [Line2D([], [], ls="none", marker="o", ms=9, mfc="none", mec=LIMIT, mew=1.4,
                    label="point fails a spec")] if failed.any() else []
    figure.legend(handles=[h for h, lab in zip(handles, labels) if lab] + extra, loc="lower center",
                  ncol=min(5, len(handles) + 1), fontsize=8, frameon=False)
    figure.suptitle(f"Table coefficients ({table.structure}): difference-equation values at each breakpoint",
                    fontsize=11, x=0.01, ha="left")
    # fixed margins (tight_layout is slow and its result depends on text extents)
    figure.subplots_adjust(left=0.08, right=0.98, top=1 - 0.75 / (2.6 * rows + 1.2), bottom=0.08 + 0.5 / (2.6 * rows + 1.2),
                           hspace=0.55, wspace=0.25)
    return png_bytes(figure)


#: Panels of ``margins.png``: (point key, spec names (lower, upper), title, log y); the unit is the
#: registry's (:mod:`gainloom.spec_registry`).
_MARGIN_PANELS = (
    ("damping", ("min_damping", None), "smallest damping ratio ζ (judged poles)", False),
    ("natural_frequency", ("min_natural_frequency", "max_natural_frequency"), "dominant natural frequency ωn", True),
    ("gain_margin_db", ("min_gain_margin", None), "gain margin", False),
    ("phase_margin_deg", ("min_phase_margin", None), "phase margin", False),
    ("delay_margin_s", ("min_delay_margin", None), "delay margin", True),
    ("sensitivity_peak", (None, "max_sensitivity_peak"), "sensitivity peak Ms", False),
    ("crossover_rad_s", ("min_crossover", "max_crossover"), "gain crossover ωc", True),
    ("bandwidth_rad_s", ("min_bandwidth", None), "closed-loop bandwidth ωb", True),
)


def _finite(values: np.ndarray) -> np.ndarray:
    return np.where(np.isfinite(values), values, np.nan)


def plot_margins(table: Any, points: list[dict[str, Any]]) -> bytes:
    """Damping, natural frequency and margins against the scheduling variable(s).

    Parameters
    ----------
    table : GainTable
    points : list of dict
        The log's per-point entries (grid order).
    """
    figure = new_figure((9.0, 11.0))
    shape = table.shape
    for k, (key, (low, high), title, log) in enumerate(_MARGIN_PANELS):
        unit = spec_info(low or high).unit
        ax = figure.add_subplot(4, 2, k + 1)
        values = np.array([_as_float(e[key]) for e in points]).reshape(shape)
        # limits of all lines, grouped: lines that share a limit share one
        # dashed line, named at its right end when the limits differ
        groups: dict[tuple, list[int]] = {}
        drawn: dict[tuple, tuple] = {}
        for n, (label, x, y, flat) in enumerate(grid_lines(table, values)):
            colour = SERIES[n % len(SERIES)]
            ax.plot(x, _finite(y), marker="o", ms=3.2, lw=1.3, color=colour, label=label)
            for spec in (low, high):
                if spec is None:
                    continue
                limits = np.array([_as_float(points[i]["specs"][spec]["limit"]) if spec in points[i]["specs"]
                                   else np.nan for i in flat])
                if np.all(np.isnan(limits)):
                    continue
                signature = (spec,) + tuple(np.round(limits, 12).tolist())
                groups.setdefault(signature, []).append(n)
                drawn[signature] = (x, limits)
                bad = np.array([spec in points[i]["specs"] and not points[i]["specs"][spec]["pass"] for i in flat])
                if bad.any():
                    ax.plot(x[bad], _finite(y[bad]), ls="none", marker="o", ms=9, mfc="none", mec=LIMIT, mew=1.4)
        labels = [label for label, *_ in grid_lines(table, values)]
        several = len({sig[0] for sig in groups}) < len(groups)
        for signature, members in groups.items():
            x, limits = drawn[signature]
            colour = SERIES[members[0] % len(SERIES)] if several and len(members) == 1 else LIMIT
            ax.step(x, limits, where="mid", color=colour, lw=1.1, ls=(0, (5, 3)))
            if several and labels[0] is not None:
                names = ", ".join(labels[m].split(" = ", 1)[1] for m in members)
                ax.annotate(f"{labels[0].split(' = ')[0]} = {names}", (x[-1], limits[-1]), fontsize=6.5,
                            color=colour, xytext=(-2, 2), textcoords="offset points", ha="right", va="bottom")
        infinite = [i for i, e in enumerate(points) if _as_float(e[key]) == math.inf]
        if infinite:
            ax.text(0.99, 0.02, f"∞ at {len(infinite)} point(s) (no crossover): not drawn", transform=ax.transAxes,
                    ha="right", va="bottom", fontsize=7, color="#555555")
        _y_axis(ax, log)
        ax.set_title(title + (f"  [{unit}]" if unit else ""), fontsize=9.5, loc="left")
        ax.set_xlabel(axis_label(table.axes[0]), fontsize=8.5)
        ax.grid(True, color="#e4e4e4", lw=0.6)
        ax.tick_params(labelsize=8)
    handles = [Line2D([], [], color=SERIES[0], marker="o", ms=3.2, lw=1.3, label="designed table"),
               Line2D([], [], color=LIMIT, lw=1.1, ls=(0, (5, 3)), label="spec limit (per point)"),
               Line2D([], [], ls="none", marker="o", ms=9, mfc="none", mec=LIMIT, mew=1.4, label="spec fails")]
    if len(table.axes) == 2:
        handles = [Line2D([], [], color=SERIES[n % len(SERIES)], marker="o", ms=3.2, lw=1.3, label=label)
                   for n, (label, *_rest) in enumerate(grid_lines(table, np.zeros(table.shape)))]
        handles += [Line2D([], [], color=LIMIT, lw=1.1, ls=(0, (5, 3)),
                           label="dashed: spec limit (named where it differs between lines)"),
                    Line2D([], [], ls="none", marker="o", ms=9, mfc="none", mec=LIMIT, mew=1.4, label="spec fails")]
    figure.legend(handles=handles, loc="lower center", ncol=min(4, len(handles)), fontsize=8, frameon=False)
    figure.suptitle("Closed-loop damping, margins, crossover and bandwidth of the sampled loop", fontsize=11,
                    x=0.01, ha="left")
    figure.subplots_adjust(left=0.08, right=0.98, top=0.935, bottom=0.1 + 0.02 * (len(handles) > 4),
                           hspace=0.6, wspace=0.25)
    return png_bytes(figure)


def _y_axis(ax: Any, log: bool) -> None:
    """Log scale only over a wide range; never an offset; flat data keep a readable span."""
    low, high = ax.dataLim.y0, ax.dataLim.y1
    if log and np.isfinite(low) and low > 0 and high / low > 20:
        from matplotlib.ticker import LogLocator, NullFormatter

        ax.set_yscale("log")
        ax.yaxis.set_major_locator(LogLocator(base=10.0))
        ax.yaxis.set_minor_formatter(NullFormatter())
        return
    ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    with np.errstate(over="ignore", invalid="ignore"):  # data limits of a diverged response may be infinite
        middle, span = 0.5 * (low + high), high - low
    if np.isfinite(span) and span < 0.02 * abs(middle):
        half = 0.05 * abs(middle)
        ax.set_ylim(middle - half, middle + half)


def _as_float(value: Any) -> float:
    if isinstance(value, str):
        return float(value)
    return float("nan") if value is None else float(value)


def step_response(loop: Loop, p: int, samples: int) -> np.ndarray:
    """Unit step response of the unity-feedback loop ``N/(D + N)`` at point ``p``.

    Parameters
    ----------
    loop : Loop
        Discrete open loop ``L = C P`` (batched).
    p : int
        Point index.
    samples : int
        Number of samples.
    """
    num, den = loop.num[p], loop.den[p]
    return scipy.signal.lfilter(num, den + num, np.ones(samples))


def plot_steps(loop: Loop, chosen: list[tuple[int, str]], points: list[dict[str, Any]]) -> bytes:
    """Sampled step responses at the chosen points (stairs, one per point).

    The horizon is three times the slowest logged settling time (at least
    60 samples), so the settled tail is visible.
    """
    figure = new_figure((9.0, 4.8))
    ax = figure.add_axes((0.08, 0.22, 0.9, 0.68))
    horizon = []
    for p, _ in chosen:
        settle = _as_float(points[p]["settling_time_s"])
        ts = float(loop.ts[p])
        horizon.append(3 * settle / ts if math.isfinite(settle) and settle > 0 else 200)
    samples = int(min(20000, max(60, max(horizon, default=60))))
    overshoot_limits = set()
    for n, (p, label) in enumerate(chosen):
        ts = float(loop.ts[p])
        y = step_response(loop, p, samples)
        t = np.arange(samples) * ts
        colour = SERIES[n % len(SERIES)]
        # later lines dashed so that identical responses stay visible
        ax.step(t, np.where(np.isfinite(y), y, np.nan), where="post", lw=1.6 - 0.3 * n, color=colour,
                ls=("-", (0, (6, 3)), (0, (2, 2)))[n % 3], label=f"{label}: {points[p]['label']}")
        spec = points[p]["specs"].get("max_overshoot")
        if spec is not None:
            overshoot_limits.add(_as_float(spec["limit"]))
    final = [float(np.sum(loop.num[p]) / np.sum(loop.den[p] + loop.num[p])) for p, _ in chosen]
    if final and all(math.isfinite(f) for f in final) and np.ptp(final) < 1e-9 * max(1.0, abs(final[0])):
        level = final[0]
        ax.axhspan(level * 0.98, level * 1.02, color="#dcebdc", zorder=0, label="±2 % settling band")
        for limit in sorted(overshoot_limits):
            ax.axhline(level * (1 + limit / 100), color=LIMIT, lw=1.0, ls=(0, (5, 3)),
                       label=f"overshoot limit {limit:g} %")
    ax.set_xlabel("time [s]", fontsize=9)
    ax.set_ylabel("output y / reference step", fontsize=9)
    ax.grid(True, color="#e4e4e4", lw=0.6)
    ax.tick_params(labelsize=8)
    ax.set_title("Unit step response of the sampled closed loop (controller output not saturated)", fontsize=10,
                 loc="left")
    figure.legend(loc="lower center", ncol=2, fontsize=8, frameon=False)
    return png_bytes(figure)


def chosen_points(points: list[dict[str, Any]]) -> list[tuple[int, str]]:
    """First, last and worst point (smallest relative distance to a spec limit).

    Returns ``(index, role)`` pairs without repeats; a failing point is
    always worst (most failed specs first).
    """
    count = len(points)
    if count == 0:
        return []

    def score(e: dict[str, Any]) -> tuple[float, float]:
        rel = []
        for name, spec in e["specs"].items():
            if name in ("stable", "system_type"):
                # |z| < 1 sits near its limit at any fast sampling, and the
                # system type is met with equality: neither tells which
                # point is closest to trouble.
                continue
            margin, limit = _as_float(spec["margin"]), _as_float(spec["limit"])
            if math.isnan(margin):
                continue
            rel.append(margin / abs(limit) if limit not in (0.0,) and math.isfinite(limit) else margin)
        return (-len(e["failed"]), min(rel, default=math.inf))

    worst = min(range(count), key=lambda i: (score(points[i]), i))
    out: list[tuple[int, str]] = []
    for index, role in ((0, "first"), (count - 1, "last"), (worst, "worst")):
        if all(index != i for i, _ in out):
            out.append((index, role))
        else:
            out = [(i, r + " and " + role if i == index else r) for i, r in out]
    return out


def _region(spec: dict[str, Any], ts: float | None) -> list[tuple[str, np.ndarray]]:
    """Labelled boundary curves of a point's spec region in the s- or z-plane."""

    def limit(name: str) -> float | None:
        entry = spec.get(name)
        if entry is None:
            return None
        value = _as_float(entry["limit"])
        return value if math.isfinite(value) else None

    curves: list[tuple[str, np.ndarray]] = []
    zeta, decay = limit("min_damping"), limit("min_decay")
    low, high = limit("min_natural_frequency"), limit("max_natural_frequency")
    radius = limit("max_pole_radius")
    reach = [v for v in (decay, low, high) if v]
    extent = 3.0 * max(reach) if reach else None
    if zeta and 0 < zeta < 1:
        found = SpecRegion(min_damping=zeta, ts=ts).boundary_curves(extent=extent if ts is None else None)
        curves += [(f"ζ ≥ {zeta:.3g}", c) for c in found[1:3]]
    if decay and decay > 0:
        curves.append((f"decay ≥ {decay:.4g}/s", SpecRegion(min_decay=decay, ts=ts).boundary_curves(
            extent=extent if ts is None else None)[0]))
    for value, sign in ((low, "≥"), (high, "≤")):
        if value and value > 0:
            lo, hi = (value, math.inf) if sign == "≥" else (0.0, value)
            found = SpecRegion(wn_range=(lo, hi), ts=ts).boundary_curves(extent=extent if ts is None else None)
            curves += [(f"dominant ωn {sign} {value:.4g} rad/s", c) for c in found[1:]]
    if radius and ts is not None:
        curves.append((f"|z| ≤ {radius:.4g}", SpecRegion(max_pole_radius=radius, ts=ts).boundary_curves()[-1]))
    return curves


def _s_half_width(entry: dict[str, Any]) -> float:
    """Half-width (rad/s) of the s-plane view: the dominant pole and the low spec limits."""
    reach = [_as_float(entry["natural_frequency"])]
    for key in ("min_decay", "min_natural_frequency"):
        if key in entry["specs"]:
            reach.append(_as_float(entry["specs"][key]["limit"]))
    reach = [v for v in reach if math.isfinite(v) and v > 0]
    return 2.5 * max(reach) if reach else 10.0


def _mark_design(ax: Any, poles: np.ndarray) -> None:
    ax.plot(poles.real, poles.imag, ls="none", marker="*", ms=13, mfc="#ffd23f", mec=MARK, mew=0.9, zorder=8)


def _z_layers(ax: Any, facts: Any, branches: np.ndarray, view: tuple[float, float, float, float],
              labels: bool) -> None:
    """Unit circle, branches, open-loop poles and zeros, |z| = 1 crossings (with K) in one view."""
    x0, x1, y0, y1 = view
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect("equal", adjustable="box")
    circle = np.exp(1j * np.linspace(0.0, 2 * math.pi, 1441))
    ax.fill(circle.real, circle.imag, color=STABLE_FILL, zorder=0)
    ax.plot(circle.real, circle.imag, color=BOUNDARY, lw=1.1, zorder=1)
    ax.axhline(0.0, color="#c8c8c8", lw=0.8, zorder=1)
    ax.grid(True, color="#e2e2e2", lw=0.6, zorder=0)
    for k in range(branches.shape[1] if branches.ndim == 2 else 0):
        column = np.where(np.isfinite(branches[:, k]), branches[:, k], np.nan)
        ax.plot(column.real, column.imag, color=SERIES[k % len(SERIES)], lw=1.5, zorder=3)
    if facts is None:
        return
    poles = np.array([r.value for r in facts.poles], dtype=complex)
    zeros = np.array([r.value for r in facts.zeros], dtype=complex)
    ax.plot(poles.real, poles.imag, marker="x", ms=9, mew=2.0, color="#202020", ls="none", zorder=5)
    if zeros.size:
        ax.plot(zeros.real, zeros.imag, marker="o", ms=8, mfc="white", mec="#202020", mew=1.6, ls="none", zorder=5)
    for crossing in facts.crossings:
        point = crossing.point
        if not (x0 <= point.real <= x1 and y0 <= abs(point.imag) <= y1 or y0 <= point.imag <= y1):
            continue
        ax.plot([point.real] * 2, [point.imag, -point.imag], marker="s", ms=6.5, color=LIMIT, mec="white",
                mew=0.8, ls="none", zorder=6)
        if labels:
            ax.annotate(f"K={crossing.gain:.4g}", (point.real, abs(point.imag)), fontsize=8, color=LIMIT,
                        xytext=(7, 4), textcoords="offset points", zorder=7,
                        bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": LIMIT, "lw": 0.6})


def _traced(one: Loop, facts: Any, step: float) -> np.ndarray:
    """Continuous branches of ``K L`` (the tracer) far enough to show every crossing and K = 1.

    ``step`` is the tracer's largest root move as a fraction of the plot
    scale: small enough to draw smooth curves in the magnified view.
    """
    from ..lti.trace import trace_covering

    traced = trace_covering(one, [c.gain for c in facts.crossings] + [1.0], max_step=step)
    return traced.roots[0, : int(traced.counts[0])]


def plot_locus_point(loop: Loop, p: int, entry: dict[str, Any], role: str) -> bytes:
    """Root locus of ``K L(z)`` at point ``p``: z-plane, z near 1 magnified, s-plane.

    Branches come from :func:`gainloom.lti.trace.trace_locus`, open-loop
    poles, zeros and unit-circle crossings from
    :func:`gainloom.lti.facts.locus_facts` (the computations behind
    ``gainloom locus``); the spec region of the point from
    :class:`gainloom.lti.regions.SpecRegion`.  ``K`` multiplies the table's
    loop gain, so the designed poles sit at ``K = 1`` and a crossing's ``K``
    is the gain margin as a factor.

    Parameters
    ----------
    loop : Loop
        Discrete open loop ``L = C P`` with the table's coefficients.
    p : int
        Point index.
    entry : dict
        The log's entry for that point (spec limits, label).
    role : str
        Why the point was chosen (``first``, ``last``, ``worst``).
    """
    ts = float(loop.ts[p])
    one = loop.select(np.array([p]))
    design = closed_loop_poles(one, np.ones((1, 1)))[0, 0]
    half_s = _s_half_width(entry)
    # Near z = 1, z ~ 1 + s ts: the magnified z view matches the s view.
    half_z = min(1.2, half_s * ts)
    try:
        facts = locus_facts(one.num[0], one.den[0], ts, delta=one.delta(0))
        branches = _traced(one, facts, step=float(np.clip(0.02 * half_z, 1e-4, 0.02)))
    except GainloomError:
        # a loop the facts or the tracer cannot describe: a plain gain sweep
        # drawn as dots, no facts
        facts = None
        branches = closed_loop_poles(one, LOCUS_GAINS[None, :])[0]
    zoom = (1.0 - 1.6 * half_z, 1.0 + 0.4 * half_z, -half_z, half_z)
    region_z = _region(entry["specs"], ts)

    figure = new_figure((15.0, 6.0))
    full, near, splane = [figure.add_axes((0.045 + 0.33 * k, 0.24, 0.28, 0.64)) for k in range(3)]
    for ax, view, title in ((full, (-1.45, 1.45, -1.45, 1.45), f"z-plane, ts = {ts:.4g} s"),
                            (near, zoom, "z-plane near z = 1, magnified")):
        _z_layers(ax, facts, branches if facts is not None else np.zeros((0, 0)), view, labels=True)
        if facts is None:
            ax.plot(branches.real.ravel(), branches.imag.ravel(), ls="none", marker=".", ms=2, color=SERIES[0])
        for _label, curve in region_z:
            ax.plot(curve.real, curve.imag, color=REGION, lw=1.2, ls=(0, (3, 2)), zorder=2)
        _mark_design(ax, design)
        ax.set_title(title, fontsize=10, loc="left")
        ax.set_xlabel("Re(z)")
        ax.set_ylabel("Im(z)")
    full.add_patch(_box(zoom))

    with np.errstate(divide="ignore", invalid="ignore"):
        s_branches = np.log(np.asarray(branches, dtype=complex)) / ts
        s_design = np.log(design) / ts
    splane.axvspan(-20 * half_s, 0, color=STABLE_FILL, zorder=0)
    splane.axvline(0.0, color=BOUNDARY, lw=1.1, zorder=1)
    splane.axhline(0.0, color="#c8c8c8", lw=0.8, zorder=1)
    named: set[str] = set()
    for label, curve in _region(entry["specs"], None):
        splane.plot(curve.real, curve.imag, color=REGION, lw=1.2, ls=(0, (3, 2)), zorder=2)
        # name each boundary once, on its upper half inside the view
        inside = np.flatnonzero((curve.real > -1.55 * half_s) & (curve.real < 0.35 * half_s)
                                & (curve.imag > 0.05 * half_s) & (curve.imag < 0.9 * half_s))
        if inside.size and label not in named:
            named.add(label)
            spot = curve[inside[int(0.6 * (inside.size - 1))]]
            right = spot.real > -0.5 * half_s  # keep the text inside the axes
            splane.annotate(label, (spot.real, spot.imag), fontsize=7.5, color=REGION,
                            xytext=(-4 if right else 4, 3), textcoords="offset points",
                            ha="right" if right else "left", zorder=7)
    if facts is None:
        splane.plot(s_branches.real.ravel(), s_branches.imag.ravel(), ls="none", marker=".", ms=2, color=SERIES[0])
    else:
        for k in range(s_branches.shape[1]):
            column = np.where(np.isfinite(s_branches[:, k]), s_branches[:, k], np.nan)
            # ln z jumps by 2 pi j / ts where a branch crosses the negative real z axis
            cut = np.flatnonzero(np.abs(np.diff(column.imag)) > math.pi / ts) + 1
            column = np.insert(column, cut, np.nan)
            splane.plot(column.real, column.imag, color=SERIES[k % len(SERIES)], lw=1.5, zorder=3)
    shown = np.isfinite(s_design)
    _mark_design(splane, s_design[shown])
    splane.set_xlim(-1.6 * half_s, 0.4 * half_s)
    splane.set_ylim(-half_s, half_s)
    splane.set_aspect("equal", adjustable="box")
    splane.grid(True, color="#e2e2e2", lw=0.6, zorder=0)
    outside = int(np.count_nonzero(shown & (np.abs(s_design) > 1.6 * half_s)))
    if outside:
        splane.text(0.02, 0.02, f"{outside} faster designed pole(s) outside this view", transform=splane.transAxes,
                    fontsize=7.5, color="#444444")
    splane.set_title("the same locus in s = ln(z)/ts", fontsize=10, loc="left")
    splane.set_xlabel("Re(s)  [rad/s]")
    splane.set_ylabel("Im(s)  [rad/s]")

    handles = [
        Line2D([], [], color=SERIES[0], lw=1.5, label="closed-loop pole branches as K rises from 0 (one colour each)"),
        Line2D([], [], ls="none", marker="*", ms=12, mfc="#ffd23f", mec=MARK,
               label="designed closed-loop poles (K = 1)"),
        Line2D([], [], color=REGION, lw=1.2, ls=(0, (3, 2)), label="spec region boundary at this point"),
        Line2D([], [], marker="x", ms=8, mew=2, color="#202020", ls="none", label="open-loop pole"),
        Line2D([], [], marker="o", ms=7, mfc="white", mec="#202020", ls="none", label="open-loop zero"),
        Line2D([], [], marker="s", ms=6, color=LIMIT, ls="none", label="on |z| = 1 at K (gain margin factor)"),
        Line2D([], [], color=STABLE_FILL, lw=6, label="stable region"),
    ]
    figure.legend(handles=handles, loc="lower center", ncol=4, fontsize=8, frameon=False)
    figure.suptitle(f"Root locus of K·L(z) at the {role} point: {entry['label']}   "
                    "(K multiplies the table's loop gain)", fontsize=11, x=0.01, ha="left")
    return png_bytes(figure)


def _box(view: tuple[float, float, float, float]):
    from matplotlib.patches import Rectangle

    x0, x1, y0, y1 = view
    return Rectangle((x0, y0), x1 - x0, y1 - y0, fill=False, ec="#555555", lw=0.8, zorder=9)
