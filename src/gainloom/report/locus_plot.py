"""Draw a root locus with its facts into a PNG.

Drawing only: the branches come from :mod:`gainloom.lti.trace`, the facts
from :func:`gainloom.lti.facts.locus_facts`, damping contours from
:class:`gainloom.lti.regions.SpecRegion`.  The output is deterministic: fixed
size and resolution, the Agg canvas (no display, no global pyplot state), and
no software or date entries in the PNG metadata.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.lines import Line2D

from ..errors import InputError
from ..look import BOUNDARY, LIMIT, MARK, SERIES, STABLE_FILL, new_figure, png_bytes
from ..lti.facts import LocusFacts
from ..outputs import write_outputs

__all__ = ["plot_locus", "FIGURE_SIZE"]

#: Figure size in inches (fixed for byte-stable output).
FIGURE_SIZE = (8.0, 6.6)

# The project's look (gainloom.look), plus the marks only a locus has.
_BREAK = "#d98c00"
_ASYMPTOTE = "#8a8a8a"
_DAMPING = "#6a7fb5"


def _view(facts: LocusFacts, branches: np.ndarray) -> tuple[float, float, float, float]:
    """Axis limits around the points that carry information.

    Branches running off to infinity along asymptotes would otherwise shrink
    everything interesting into a dot.
    """
    points = [r.value for r in facts.poles + facts.zeros]
    points += [b.point for b in facts.breakaways] + [c.point for c in facts.crossings]
    if facts.centroid is not None:
        points.append(complex(facts.centroid, 0.0))
    if facts.ts is not None:
        points += [1.0, -1.0, 1j, -1j]
    values = np.asarray(points, dtype=complex)
    values = values[np.isfinite(values)]
    if values.size == 0:
        values = np.array([0.0j])
    lo_re, hi_re = values.real.min(), values.real.max()
    # The locus is symmetric about the real axis: centre the view on it.
    top = float(np.max(np.abs(values.imag)))
    span = max(hi_re - lo_re, 2 * top, 1e-3 * max(1.0, float(np.max(np.abs(values)))))
    if facts.ts is None:
        span = max(span, 0.5)
    pad = 0.3 * span
    # As tall as wide (equal aspect), so angles look like angles.
    half = 0.5 * span + pad
    mid_re, mid_im = 0.5 * (lo_re + hi_re), 0.0
    if facts.ts is None:
        # Keep the imaginary axis in view: stability is judged against it.
        if mid_re - half > -0.1 * half:
            mid_re = half * 0.9
        elif mid_re + half < 0.1 * half:
            mid_re = -half * 0.9
    return mid_re - half, mid_re + half, mid_im - half, mid_im + half


def _crowded_view(facts: LocusFacts) -> tuple[float, float, float, float] | None:
    """A magnified view near z = 1 when the poles there crowd together.

    Returns None unless the poles, zeros, breakaways and crossings within
    0.45 of ``z = 1`` span less than 0.6 (under 30 % of the unit circle's
    width), which is where a full-circle view hides the locus.
    """
    points = [r.value for r in facts.poles + facts.zeros]
    points += [b.point for b in facts.breakaways] + [c.point for c in facts.crossings]
    near = np.array([p for p in points if abs(p - 1.0) < 0.45], dtype=complex)
    if near.size < 2:
        return None
    half_width = 0.5 * max(near.real.max() - near.real.min(), 2 * np.abs(near.imag).max())
    if not 0 < half_width < 0.3:
        return None
    half = 1.4 * half_width
    middle = 0.5 * (near.real.max() + near.real.min())
    return middle - half, middle + half, -half, half


def _poly_text(coeffs: tuple[float, ...], var: str) -> str:
    terms = []
    degree = len(coeffs) - 1
    for k, c in enumerate(coeffs):
        if c == 0:
            continue
        power = degree - k
        mag = f"{abs(c):.4g}"
        body = mag if power == 0 else (("" if mag == "1" else mag + " ") + var + ("" if power == 1 else f"^{power}"))
        terms.append(("- " if c < 0 else "+ ") + body)
    text = " ".join(terms) or "0"
    return text[2:] if text.startswith("+ ") else "-" + text[2:]


def _loop_caption(facts: LocusFacts) -> str:
    var = "s" if facts.ts is None else "z"
    top = "K" if facts.num == (1.0,) else f"K ({_poly_text(facts.num, var)})"
    text = f"L = {top} / ({_poly_text(facts.den, var)})"
    if len(text) > 150:
        text = text[:147] + "..."
    if facts.ts is not None:
        text += f"    ts = {facts.ts:.4g} s"
    return text


def _fmt_gain(gain: float) -> str:
    return f"K={gain:.4g}"


def _draw(
    ax,
    facts: LocusFacts,
    branches: np.ndarray,
    damping_curves: Sequence[tuple[str, np.ndarray]],
    gain_marks: Sequence[tuple[float, np.ndarray]],
    view: tuple[float, float, float, float],
    quiet: tuple[float, float, float, float] | None = None,
) -> None:
    """Draw every layer into ``ax`` with the given view (x0, x1, y0, y1).

    Gain labels are left out inside the box ``quiet`` (shown magnified in an
    inset instead).
    """
    x0, x1, y0, y1 = view
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect("equal", adjustable="box")

    discrete = facts.ts is not None
    # Stability boundary and the stable side, lightly tinted.
    if discrete:
        circle = np.exp(1j * np.linspace(0.0, 2 * math.pi, 721))
        ax.fill(circle.real, circle.imag, color=STABLE_FILL, zorder=0)
        ax.plot(circle.real, circle.imag, color=BOUNDARY, lw=1.1, zorder=1)
        ax.axhline(0.0, color="#c8c8c8", lw=0.8, zorder=1)
        ax.axvline(0.0, color="#c8c8c8", lw=0.8, zorder=1)
    else:
        big = 10 * (abs(x0) + abs(x1) + abs(y0) + abs(y1))
        ax.fill([-big, 0, 0, -big], [-big, -big, big, big], color=STABLE_FILL, zorder=0)
        ax.axvline(0.0, color=BOUNDARY, lw=1.1, zorder=1)
        ax.axhline(0.0, color="#c8c8c8", lw=0.8, zorder=1)
    ax.grid(True, color="#e2e2e2", lw=0.6, zorder=0)

    shown: set[str] = set()
    for label, curve in damping_curves:
        curve = np.asarray(curve, dtype=complex)
        ax.plot(curve.real, curve.imag, color=_DAMPING, lw=1.0, ls=(0, (1, 2)), zorder=2)
        # Label each contour once, on its upper half, well inside the view.
        inside = np.flatnonzero(
            np.isfinite(curve) & (curve.real > x0) & (curve.real < x1) & (curve.imag > 0) & (curve.imag < 0.92 * y1)
        )
        if inside.size and label not in shown:
            shown.add(label)
            spot = curve[inside[int(0.8 * (inside.size - 1))]] if not discrete else curve[inside[inside.size // 2]]
            ax.annotate(label, (spot.real, spot.imag), fontsize=7.5, color=_DAMPING,
                        xytext=(3, 0), textcoords="offset points", zorder=6)

    # Asymptotes from the centroid, out to the edge of the view.
    if facts.centroid is not None and facts.asymptote_angles:
        reach = 3 * max(x1 - x0, y1 - y0)
        for angle in facts.asymptote_angles:
            end = facts.centroid + reach * complex(math.cos(math.radians(angle)), math.sin(math.radians(angle)))
            ax.plot([facts.centroid, end.real], [0.0, end.imag], color=_ASYMPTOTE, lw=0.9,
                    ls=(0, (7, 4)), zorder=2)
        ax.plot([facts.centroid], [0.0], marker="D", ms=5, mfc="white", mec=_ASYMPTOTE, mew=1.2,
                ls="none", zorder=4)

    for k in range(branches.shape[1] if branches.ndim == 2 else 0):
        column = branches[:, k]
        column = np.where(np.isfinite(column), column, np.nan)
        ax.plot(column.real, column.imag, color=SERIES[k % len(SERIES)], lw=1.7,
                zorder=3, solid_capstyle="round")

    poles = np.array([r.value for r in facts.poles], dtype=complex)
    zeros = np.array([r.value for r in facts.zeros], dtype=complex)
    ax.plot(poles.real, poles.imag, marker="x", ms=9, mew=2.0, color=MARK, ls="none", zorder=5)
    for root in facts.poles + facts.zeros:
        if root.multiplicity > 1:
            ax.annotate(f"×{root.multiplicity}", (root.value.real, root.value.imag), fontsize=8,
                        color=MARK, xytext=(6, -11), textcoords="offset points", zorder=6)
    if zeros.size:
        ax.plot(zeros.real, zeros.imag, marker="o", ms=8, mfc="white", mec=MARK, mew=1.8, ls="none",
                zorder=5)

    def in_view(p: complex) -> bool:
        return x0 <= p.real <= x1 and y0 <= p.imag <= y1

    def labelled(p: complex) -> bool:
        return quiet is None or not (quiet[0] <= p.real <= quiet[1] and quiet[2] <= p.imag <= quiet[3])

    for brk in facts.breakaways:
        if not in_view(brk.point):
            continue
        ax.plot([brk.point.real], [brk.point.imag], marker="^", ms=7, color=_BREAK, mec=MARK, mew=0.6,
                ls="none", zorder=6)
        if labelled(brk.point):
            ax.annotate(_fmt_gain(brk.gain), (brk.point.real, brk.point.imag), fontsize=8, color="#7a4f00",
                        xytext=(5, 7), textcoords="offset points", zorder=7)

    for gain, points in gain_marks:
        points = np.asarray(points, dtype=complex)
        points = points[[in_view(p) for p in points]] if points.size else points
        if not points.size:
            continue
        ax.plot(points.real, points.imag, marker="o", ms=5.5, color=_DAMPING, mec="white", mew=0.8,
                ls="none", zorder=6)
        top = points[np.argmax(points.imag)]
        if labelled(top):
            ax.annotate(_fmt_gain(gain), (top.real, top.imag), fontsize=7.5, color=_DAMPING,
                        xytext=(-8, 6), textcoords="offset points", ha="right", zorder=7)

    for crossing in facts.crossings:
        if not in_view(crossing.point):
            continue
        # Closed-loop roots come in conjugate pairs: mark both, label one.
        ax.plot([crossing.point.real] * 2, [crossing.point.imag, -crossing.point.imag], marker="s", ms=6.5,
                color=LIMIT, mec="white", mew=0.8, ls="none", zorder=6)
        if labelled(crossing.point):
            ax.annotate(_fmt_gain(crossing.gain), (crossing.point.real, crossing.point.imag), fontsize=8,
                        color=LIMIT, xytext=(7, 4), textcoords="offset points", zorder=7,
                        bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": LIMIT, "lw": 0.6})



def plot_locus(
    facts: LocusFacts,
    gains: np.ndarray,
    branches: np.ndarray,
    path: str | Path,
    damping_curves: Sequence[tuple[str, np.ndarray]] = (),
    gain_marks: Sequence[tuple[float, np.ndarray]] = (),
    title: str | None = None,
    *,
    force: bool = False,
) -> Path:
    """Draw the locus and its facts into a PNG file.

    The file is written through :func:`gainloom.outputs.write_outputs`: never
    over a file gainloom did not write (unless ``force``), never through a
    link.

    Parameters
    ----------
    facts : LocusFacts
        Facts of the loop (poles, zeros, asymptotes, breakaways, crossings).
    gains : ndarray, shape (G,)
        Gains at which the branches were sampled (signed, dimensionless).
    branches : ndarray of complex, shape (G, n)
        Closed-loop poles, one column per continuous branch (rad/s in s,
        dimensionless in z); non-finite entries are skipped.
    path : str or Path
        Output file; written as PNG.
    damping_curves : sequence of (label, ndarray of complex)
        Contours of constant damping ratio to draw, e.g. from
        ``SpecRegion.boundary_curves()``; NaN entries break a curve.
    gain_marks : sequence of (gain, ndarray of complex)
        Closed-loop poles to mark at a gain of interest (e.g. where the
        locus meets a damping contour), labelled with the gain.
    title : str, optional
        Figure title; a default names the plane and gain sign.
    force : bool
        Overwrite a file at ``path`` that gainloom did not write.

    Returns
    -------
    Path
        The written file.
    """
    if not str(path).strip() or not Path(path).name:
        raise InputError(f"plot file {str(path)!r} is empty or names no file; give a file such as locus.png")
    path = Path(path)
    branches = np.asarray(branches, dtype=complex)
    figure = new_figure(FIGURE_SIZE)
    ax = figure.add_axes((0.09, 0.20, 0.86, 0.72))
    view = _view(facts, branches)
    discrete = facts.ts is not None
    zoom = _crowded_view(facts) if discrete else None
    _draw(ax, facts, branches, damping_curves, gain_marks, view, quiet=zoom)
    if zoom is not None:
        # Fast sampling crowds the poles near z = 1: a magnified inset shows
        # the same layers there (labels only in the inset).
        inset = ax.inset_axes((0.60, 0.60, 0.38, 0.38))
        _draw(inset, facts, branches, damping_curves, gain_marks, zoom)
        inset.set_xticks([])
        inset.set_yticks([])
        inset.text(0.03, 0.03, "near z = 1, magnified", transform=inset.transAxes, fontsize=7, color="#333333",
                   zorder=8, bbox={"boxstyle": "square,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.85})
        ax.indicate_inset_zoom(inset, edgecolor="#555555", lw=0.8)
    plane = "z-plane" if discrete else "s-plane"
    sign = "K < 0" if facts.negative else "K > 0"
    ax.set_title(title or f"Root locus, {sign}, {plane}", fontsize=11, loc="left")
    ax.set_xlabel("Re(z)" if discrete else "Re(s)  [rad/s]")
    ax.set_ylabel("Im(z)" if discrete else "Im(s)  [rad/s]")

    handles = [
        Line2D([], [], color=SERIES[0], lw=1.7, label="closed-loop pole branches (one colour each)"),
        Line2D([], [], marker="x", ms=8, mew=2, color=MARK, ls="none", label="open-loop pole"),
    ]
    if facts.zeros:
        handles.append(
            Line2D([], [], marker="o", ms=7, mfc="white", mec=MARK, mew=1.6, ls="none", label="open-loop zero")
        )
    if facts.crossings:
        handles.append(Line2D([], [], marker="s", ms=6, color=LIMIT, ls="none",
                              label="root on " + ("|z| = 1" if discrete else "jω axis") + " at gain K"))
    if facts.breakaways:
        handles.append(Line2D([], [], marker="^", ms=7, color=_BREAK, mec=MARK, mew=0.6, ls="none",
                              label="breakaway / break-in at gain K"))
    if facts.asymptote_angles:
        handles.append(Line2D([], [], color=_ASYMPTOTE, lw=0.9, ls=(0, (7, 4)), label="asymptotes from centroid"))
    if damping_curves:
        handles.append(Line2D([], [], color=_DAMPING, lw=1.0, ls=(0, (1, 2)), label="constant damping ratio"))
    if gain_marks:
        handles.append(Line2D([], [], marker="o", ms=5.5, color=_DAMPING, mec="white", ls="none",
                              label="poles at the damping-limit gain K"))
    handles.append(Line2D([], [], color=STABLE_FILL, lw=6, label="stable region"))
    figure.legend(handles=handles, loc="lower center", ncol=3, fontsize=8, frameon=False,
                  bbox_to_anchor=(0.5, 0.035))
    figure.text(0.01, 0.008, _loop_caption(facts), ha="left", va="bottom", fontsize=7.5, color="#555555")
    (written,) = write_outputs(path.parent, {path.name: png_bytes(figure)}, force=force)
    return written
