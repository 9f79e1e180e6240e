"""Why a point fails: the binding spec and the best value reachable there.

For a point where no gain of any searched shape meets every spec, each
pole-region spec is tried *alone* over the searched family: decay rate and
pole radius (and damping under ``specs: {poles: all}``) with the exact
interval solver (so "unreachable" is a proof over all positive gains of
every searched shape, not a sampling artefact), the natural-frequency band
(and damping of the dominant poles) on the coarse gain samples, then the
crossover and bandwidth specs from the frequency response with the exact
stable intervals (:mod:`gainloom.design.frequency_reach`).  The first spec
(in that order) that is unreachable alone is the binding one; its best
value is quoted (for pole specs with the gain and shape reaching it).
If every spec is reachable alone, they conflict: the binding spec is the one
that fails at the best compromise design (the sample with the largest
smallest normalised slack), which also fills the table at that point.
"""

from __future__ import annotations

import numpy as np

from ..lti.closed_loop import closed_loop_poles
from ..lti.intervals import spec_gain_intervals, stable_gain_intervals
from ..lti.regions import SpecRegion
from ..spec_registry import spec_info
from .analysis import PointAnalysis, pole_metrics
from .cancel import cancelled_zeros, deflate, mask_cancelled
from .frequency_reach import FREQUENCY_SPECS, frequency_reach
from .search import Choice, GainSamples, Shapes, shape_loops
from .spec_limits import SpecLimits

__all__ = ["diagnose", "compromise", "limit_text"]

_SAMPLED = {
    "min_damping": "damping",
    "min_decay": "decay",
    "max_pole_radius": "radius",
    "min_natural_frequency": "dominant_frequency",
    "max_natural_frequency": "dominant_frequency",
}


def _slack(metrics: dict[str, np.ndarray], limits: SpecLimits, p: int, grid: np.ndarray) -> np.ndarray:
    """Smallest normalised slack over the sampled specs (positive = all met)."""
    parts = [1.0 - metrics["radius"]]
    L = {k: float(v[p]) for k, v in limits.as_dict().items()}
    if np.isfinite(L["min_damping"]):
        parts.append((metrics["damping"] - L["min_damping"]) / max(L["min_damping"], 0.05))
    if np.isfinite(L["min_decay"]):
        parts.append(metrics["decay"] / L["min_decay"] - 1.0)
    if np.isfinite(L["max_pole_radius"]):
        parts.append((L["max_pole_radius"] - metrics["radius"]) / L["max_pole_radius"])
    if np.isfinite(L["min_natural_frequency"]):
        parts.append(metrics["dominant_frequency"] / L["min_natural_frequency"] - 1.0)
    if np.isfinite(L["max_natural_frequency"]):
        parts.append(1.0 - metrics["dominant_frequency"] / L["max_natural_frequency"])
    if np.isfinite(L["max_gain"]):
        parts.append(1.0 - grid / L["max_gain"])
    stacked = np.stack([np.nan_to_num(np.asarray(x, float), nan=-np.inf) for x in np.broadcast_arrays(*parts)])
    return stacked.min(axis=0)


def compromise(samples: GainSamples, limits: SpecLimits, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Shape index and gain of the best compromise sample at each point."""
    shapes = np.zeros(points.size, dtype=int)
    gains = np.zeros(points.size)
    for j, p in enumerate(points):
        metrics = {k: v[p] for k, v in samples.metrics.items()}
        grid = samples.grid[p]
        slack = _slack(metrics, limits, p, grid)
        slack = np.where(samples.valid[p][:, None], slack, -np.inf)
        if not np.any(np.isfinite(slack)):
            # nothing stable anywhere: the smallest gain of the first realisable shape
            s = int(np.argmax(samples.valid[p])) if np.any(samples.valid[p]) else 0
            shapes[j], gains[j] = s, float(grid[s, 0])
            continue
        s, k = np.unravel_index(int(np.argmax(slack)), slack.shape)
        shapes[j], gains[j] = int(s), float(grid[s, k])
    return shapes, gains


def limit_text(name: str, limit: float) -> str:
    """``">= 45 deg"``-style text of a spec's bound."""
    if name == "stable":
        return "|z| < 1"
    spec = spec_info(name)
    return f"{spec.relation} {limit:.6g}{spec.unit_suffix}"


def _exact_alone(plant, shapes: Shapes, p: int, name: str, limits: SpecLimits) -> bool:
    """True when spec ``name`` alone is met by some positive gain of a searched shape (exact)."""
    valid = np.flatnonzero(shapes.valid[p])
    if valid.size == 0:
        return False
    loops = shape_loops(plant, shapes.zeros[p, valid], shapes.poles[p, valid], np.full(valid.size, p))
    cancelled = cancelled_zeros(shapes.zeros[p, valid], plant.den[np.full(valid.size, p)])
    if name != "stable" and np.any(np.isfinite(cancelled)):
        # the pinned (cancelled) pole is not judged by the region specs
        for _, sub in deflate(loops, cancelled):
            if _exact_alone_loops(sub, name, float(getattr(limits, name)[p]) if name != "stable" else 1.0):
                return True
        return False
    return _exact_alone_loops(loops, name, float(getattr(limits, name)[p]) if name != "stable" else 1.0)


def _exact_alone_loops(loops, name: str, value: float) -> bool:
    delta = None if loops.delta_den is None else (loops.delta_num, loops.delta_den)
    if name == "stable":
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            found = stable_gain_intervals(loops.num, loops.den, ts=loops.ts, delta=delta)
    else:
        keyword = {"min_damping": "min_damping", "min_decay": "min_decay", "max_pole_radius": "max_pole_radius"}[name]
        region = SpecRegion(**{keyword: value})
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            found = spec_gain_intervals(loops.num, loops.den, region, ts=loops.ts, delta=delta)
    return any(len(f) > 0 for f in found)


#: Gains sampled per stable interval when quoting the best reachable value.
BEST_SAMPLES = 400


def _best_reachable(
    plant, shapes: Shapes, p: int, key: str, maximise: bool, selection: str = "all"
) -> tuple[float, float, int]:
    """Best value of a pole metric over the stable gains of every valid shape at point ``p``.

    The stable intervals are exact; inside them ``BEST_SAMPLES`` geometric
    gains per interval are evaluated in one batched call.
    """
    valid = np.flatnonzero(shapes.valid[p])
    loops = shape_loops(plant, shapes.zeros[p, valid], shapes.poles[p, valid], np.full(valid.size, p))
    delta = None if loops.delta_den is None else (loops.delta_num, loops.delta_den)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        stable = stable_gain_intervals(loops.num, loops.den, ts=loops.ts, delta=delta)
    gains = np.full((valid.size, BEST_SAMPLES), np.nan)
    for r, intervals in enumerate(stable):
        row = []
        for iv in intervals:
            hi = iv.high if np.isfinite(iv.high) else max(iv.low, 1.0) * 1e6
            lo = iv.low * (1 + 1e-9) if iv.low > 0 else hi * 1e-9
            row.append(np.geomspace(lo, hi * (1 - 1e-9), max(2, BEST_SAMPLES // max(1, len(intervals)))))
        if row:
            row = np.concatenate(row)[:BEST_SAMPLES]
            gains[r, : row.size] = row
    cancelled = cancelled_zeros(shapes.zeros[p, valid], plant.den[np.full(valid.size, p)])
    poles = mask_cancelled(closed_loop_poles(loops, np.nan_to_num(gains, nan=0.0)), cancelled)
    values = pole_metrics(poles, loops.ts[:, None], selection)[key]
    values = np.where(np.isfinite(gains), values, np.nan)
    flat = np.where(np.isnan(values), -np.inf if maximise else np.inf, values)
    r, k = np.unravel_index(int(np.argmax(flat) if maximise else np.argmin(flat)), flat.shape)
    return float(flat[r, k]), float(gains[r, k]), int(valid[r])


def _frequency_binding(plant, shapes: Shapes, p: int, limits: SpecLimits) -> tuple[str, str] | None:
    """The first frequency spec no stable gain of the family meets alone, with its best value (or None)."""
    for name in FREQUENCY_SPECS:
        limit = float(getattr(limits, name)[p])
        if np.isnan(limit):
            continue
        reachable, best = frequency_reach(plant, shapes, p, name, limit)
        if reachable:
            continue
        spec = spec_info(name)
        word = "at most" if spec.better == "higher" else "at least"
        return (name, f"{name} binds: {spec.label} {word} {best:.4g}{spec.unit_suffix} over every stable gain of the searched "
                      f"shapes (needs {limit_text(name, limit)})")
    return None


def diagnose(
    plant,
    shapes: Shapes,
    choice: Choice,
    analysis: PointAnalysis,
    limits: SpecLimits,
    failed: np.ndarray,
) -> dict[int, tuple[str, str]]:
    """Binding spec and a sentence for each failed point (see the module docstring)."""
    out: dict[int, tuple[str, str]] = {}
    samples = choice.samples
    for p in failed:
        p = int(p)
        if choice.feasible[p]:
            # the search found a design; the final analysis (step response,
            # margins) says what it misses
            names = analysis.failed_specs(p)
            name = names[0]
            value = analysis.values[name][p]
            limit = 1.0 if name == "stable" else float(getattr(limits, name)[p])
            spec = spec_info(name)
            out[p] = (
                name,
                f"{name} fails: {spec.label} {value:.6g}{spec.unit_suffix} (needs {limit_text(name, limit)}) at the "
                f"chosen K = {analysis.gain[p]:.6g}; no searched gain met every spec and this one",
            )
            continue
        metrics = {k: v[p] for k, v in samples.metrics.items()}
        grid = samples.grid[p]
        valid = samples.valid[p][:, None] & np.ones_like(grid, dtype=bool)
        stable = valid & (metrics["radius"] < 1)
        found = None
        if not _exact_alone(plant, shapes, p, "stable", limits):
            out[p] = ("stable", "no positive gain of any searched shape stabilises the sampled loop")
            continue
        for name in ("min_damping", "min_decay", "max_pole_radius", "min_natural_frequency", "max_natural_frequency"):
            limit = float(getattr(limits, name)[p])
            if np.isnan(limit):
                continue
            key = _SAMPLED[name]
            values = np.where(stable, metrics[key], np.nan)
            # under poles: dominant the exact solver (every pole) cannot prove
            # a damping bound unreachable; the samples judge it
            exact = name in ("min_decay", "max_pole_radius") or (name == "min_damping" and limits.poles == "all")
            if exact:
                reachable = _exact_alone(plant, shapes, p, name, limits)
            else:
                ok = values >= limit if spec_info(name).better == "higher" else values <= limit
                reachable = bool(np.any(ok))
            if reachable:
                continue
            spec = spec_info(name)
            best_is_max = spec.better == "higher"
            value, gain, s_best = _best_reachable(plant, shapes, p, key, best_is_max, limits.poles)
            word = "at most" if best_is_max else "at least"
            params = shapes.params[p, s_best]
            where = f" with zero(s) at z = {', '.join(f'{v:.6g}' for v in np.ravel(params))}" if params.size else ""
            found = (
                name,
                f"{name} binds: {spec.label} {word} {value:.6g}{spec.unit_suffix} over the searched gains "
                f"(needs {limit_text(name, limit)}), reached at K = {gain:.6g}{where}",
            )
            break
        if found is None:
            found = _frequency_binding(plant, shapes, p, limits)
        if found is None:
            names = analysis.failed_specs(p)
            name = names[0] if names else "min_damping"
            value = analysis.values[name][p]
            limit = 1.0 if name == "stable" else float(getattr(limits, name)[p])
            found = (
                name,
                f"every spec is reachable alone but not together; at the best compromise K = {analysis.gain[p]:.6g} "
                f"{spec_info(name).label} is {value:.6g}{spec_info(name).unit_suffix} (needs {limit_text(name, limit)})"
                + (f"; also failing: {', '.join(names[1:])}" if len(names) > 1 else ""),
            )
        out[p] = found
    return out
