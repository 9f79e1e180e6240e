"""``compare_continuous``: the common shortcut of designing in ``s``, measured on the true sampled loop.

The continuous design uses the schedule's continuous plant with its dead
time **ignored** and no model of the hold or the computation delay (what a
designer working from the continuous root locus does), the same strategy
translated to ``s`` (zeros at ``-ln(z)/ts`` for swept z-plane locations;
the slowest/fastest stable real pole of the continuous plant; the angle
condition at ``s_t``), and only the pole-region specs (damping, decay rate)
with the objective on 400 geometric gain samples (batched).  Its physical
gains are turned into the table forms (:func:`structures.discretize_continuous`)
and analysed on the sampled loop next to the sampled design.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..lti.convert import poly_from_roots
from ..lti.polynomials import batched_roots, polymul
from .analysis import analyse
from .structures import (
    continuous_fixed_poles,
    continuous_physical_from_locus,
    discretize_continuous,
    zero_count,
)

__all__ = ["compare_continuous", "continuous_design"]

GAIN_SAMPLES = 400


def _plant_value(num: np.ndarray, den: np.ndarray, s: np.ndarray) -> np.ndarray:
    return np.array([np.polyval(n, x) / np.polyval(d, x) for n, d, x in zip(num, den, s)])


def _stable_real_poles_s(den: np.ndarray) -> list[np.ndarray]:
    out = []
    for row in batched_roots(den):
        real = row[np.abs(row.imag) <= 1e-9 * np.maximum(np.abs(row), 1e-300)].real
        out.append(np.sort(real[real < 0])[::-1])  # slowest (closest to 0) first
    return out


def continuous_design(sched, point_design) -> dict[str, np.ndarray] | None:
    """Physical gains of the continuous design per point (None for leadlag)."""
    controller = sched.controller
    structure = controller.structure
    if structure == "leadlag":
        return None
    models = sched.evaluate(point_design.points)
    num = np.asarray(models.plant.num, float)
    den = np.asarray(models.plant.den, float)
    ts = np.asarray(point_design.plant.ts, float)
    P = num.shape[0]
    tf = controller.derivative_filter
    nz = zero_count(structure)
    slow = _stable_real_poles_s(den)
    # candidate zeros in s (positive numbers c: zero at s = -c)
    if controller.strategy == "shape-sweep" and nz:
        (low, high), count = controller.sweep.range, controller.sweep.count
        values = -np.log(np.linspace(low, high, count)) / ts[:, None]  # (P, S)
        if nz == 1:
            zeros = values[..., None]
        else:
            i, j = np.triu_indices(count)
            zeros = np.stack([values[:, i], values[:, j]], axis=-1)
    elif nz:
        which = controller.zero_on or "slowest"
        zeros = np.full((P, 1, nz), np.nan)
        for p, poles in enumerate(slow):
            chosen = -(poles if which == "slowest" else poles[::-1])
            zeros[p, 0, : min(nz, chosen.size)] = chosen[:nz]
    else:
        zeros = np.zeros((P, 1, 0))
    if controller.strategy == "dominant-pair" and nz:
        zeta, wn = controller.target.damping, controller.target.natural_frequency
        s_t = complex(-zeta * wn, wn * math.sqrt(1 - zeta * zeta))
        s_t = np.full(P, s_t)
        value = _plant_value(num, den, s_t)
        fixed = continuous_fixed_poles(structure if structure not in ("lead", "lag") else "p", tf)
        known = np.ones(P, dtype=complex)
        for k in range(fixed.shape[-1]):
            known /= s_t - fixed[..., k]
        cancel = np.array([-(p[0]) if p.size else np.nan for p in slow])
        if structure in ("lead", "lag"):
            known *= s_t + cancel
            needed = -(-np.pi - np.angle(value) - np.angle(known))
            pole = -(s_t.real - s_t.imag / np.tan(np.mod(needed + np.pi, 2 * np.pi) - np.pi))
            zeros = cancel[:, None, None]
            wp = pole
        else:
            if structure == "pid":
                known *= s_t + cancel
            needed = np.mod(-np.pi - np.angle(value) - np.angle(known) + np.pi, 2 * np.pi) - np.pi
            c = -(s_t.real - s_t.imag / np.tan(needed))
            zeros = (np.stack([cancel, c], axis=-1) if structure == "pid" else c[:, None])[:, None, :]
    S = zeros.shape[1]
    if structure in ("lead", "lag"):
        if controller.strategy != "dominant-pair":
            ratio = 10.0 if structure == "lead" else 0.1
            wp = zeros[..., 0] * ratio
        wp = np.broadcast_to(np.asarray(wp, float).reshape(P, -1), (P, S))
        poles = -wp[..., None]
    else:
        poles = np.broadcast_to(continuous_fixed_poles(structure, tf), (P, S, max(0, {"p": 0, "pi": 1, "pd": 1, "pid": 2}[structure])))
    Z = poly_from_roots(-np.nan_to_num(zeros, nan=1.0))
    Q = poly_from_roots(np.asarray(poles, float))
    N = polymul(Z, num[:, None, :])
    D = polymul(Q, den[:, None, :])
    width = D.shape[-1]
    N = np.concatenate([np.zeros(N.shape[:-1] + (width - N.shape[-1],)), N], axis=-1)
    scale = np.max(np.abs(D), axis=-1) / np.maximum(np.max(np.abs(N), axis=-1), 1e-300)
    gains = scale[..., None] * np.geomspace(1e-6, 1e4, GAIN_SAMPLES)
    roots = batched_roots(D[..., None, :] + gains[..., None] * N[..., None, :])
    with np.errstate(invalid="ignore", divide="ignore"):
        zeta_all = np.where(np.abs(roots) > 0, -roots.real / np.abs(roots), 1.0)
    damping = zeta_all.min(axis=-1)
    decay = (-roots.real).min(axis=-1)
    limits = point_design.limits
    ok = decay > 0
    ok &= np.isnan(limits.min_damping)[:, None, None] | (damping >= limits.min_damping[:, None, None])
    ok &= np.isnan(limits.min_decay)[:, None, None] | (decay >= limits.min_decay[:, None, None])
    objective = controller.objective if controller.strategy == "shape-sweep" else "fastest"
    score = decay if objective == "fastest" else damping
    if controller.strategy == "dominant-pair" or objective == "nearest-target":
        zeta_t, wn_t = controller.target.damping, controller.target.natural_frequency
        target = complex(-zeta_t * wn_t, wn_t * math.sqrt(1 - zeta_t**2))
        dom = np.take_along_axis(roots, np.argmax(roots.real, axis=-1)[..., None], axis=-1)[..., 0]
        score = -np.abs(dom.real + 1j * np.abs(dom.imag) - target)
    score = np.where(ok & np.isfinite(zeros).all(axis=-1)[..., None], score, -np.inf)
    flat = score.reshape(P, -1)
    best = np.argmax(flat, axis=1)
    s_idx, k_idx = np.unravel_index(best, score.shape[1:])
    rows = np.arange(P)
    K = gains[rows, s_idx, k_idx]
    if controller.strategy == "dominant-pair":
        # magnitude condition at the target, when it is inside the spec region
        s_t0 = complex(-controller.target.damping * controller.target.natural_frequency,
                       controller.target.natural_frequency * math.sqrt(1 - controller.target.damping**2))
        mag = np.array([abs(np.polyval(N[p, 0], s_t0) / np.polyval(D[p, 0], s_t0)) for p in range(P)])
        K = np.where(np.isfinite(mag) & (mag > 0), 1.0 / mag, K)
        s_idx = np.zeros(P, dtype=int)
    zsel = zeros[rows, s_idx]
    if structure in ("lead", "lag"):
        return {"kc": K, "wz": zsel[:, 0], "wp": -np.asarray(poles)[rows, s_idx, 0]}
    return continuous_physical_from_locus(structure, K, Z[rows, s_idx], tf)


def compare_continuous(sched, point_design) -> dict[str, Any]:
    """Per-point report: the continuous design analysed on the sampled loop vs the sampled design."""
    structure = sched.controller.structure
    physical = continuous_design(sched, point_design)
    if physical is None:
        return {"done": False, "reason": "no continuous form for leadlag in this comparison"}
    ts = np.asarray(point_design.plant.ts, float)
    coefficients = discretize_continuous(structure, physical, ts)
    finite = np.all([np.isfinite(v) for v in coefficients.values()], axis=0)
    coefficients = {k: np.where(finite, v, 0.0) for k, v in coefficients.items()}
    sampled = point_design.analysis
    cont = analyse(point_design.plant, structure, coefficients, point_design.limits, step=False)
    points = []
    for p in range(ts.size):
        points.append({
            "at": {a.name: float(v) for a, v in zip(sched.axes, point_design.points[p])},
            "continuous_gains": {k: float(v[p]) for k, v in physical.items()},
            "on_sampled_loop": {
                "stable": bool(cont.verdicts["stable"][p]) and bool(finite[p]),
                "damping": float(cont.damping[p]),
                "phase_margin_deg": float(cont.phase_margin[p]),
                "gain_margin_db": float(cont.gain_margin_db[p]),
            },
            "sampled_design": {
                "damping": float(sampled.damping[p]),
                "phase_margin_deg": float(sampled.phase_margin[p]),
                "gain_margin_db": float(sampled.gain_margin_db[p]),
            },
            "damping_lost": float(sampled.damping[p] - cont.damping[p]),
            "phase_margin_lost_deg": float(sampled.phase_margin[p] - cont.phase_margin[p]),
        })
    unstable = sum(not e["on_sampled_loop"]["stable"] for e in points)
    return {
        "done": True,
        "method": "continuous plant, dead time ignored, no hold or computation delay; PID gains mapped by the "
        "table's backward-Euler forms, lead/lag by matched pole-zero with the DC gain kept",
        "unstable_on_sampled_loop": unstable,
        "worst_damping_lost": max(e["damping_lost"] for e in points),
        "worst_phase_margin_lost_deg": max(e["phase_margin_lost_deg"] for e in points),
        "points": points,
    }
