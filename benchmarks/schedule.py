"""Benchmark: the scheduler against two peers on the same sampled loops, in one process.

Schedules (invented for the benchmark): a 4th-order speed loop
``Kt / ((J s + B)(a s + 1)(b s + 1)(c s + 1))`` sampled at 10 kHz with ZOH and
one sample of computation delay, with a PI controller whose zero is swept
(``shape-sweep``, objective ``fastest``), specs: damping >= 0.5 on every pole
and a 6 dB gain margin.  1-D: 200 points over speed; 2-D: 40 x 25 points
over speed and load.

Peers, both on the scheduler's own sampled plant and zero candidates, with
400 gain samples per (point, zero) on a geometric grid:

(a) naive per-point python-control: ``control.feedback`` and ``.poles()`` for
    every gain sample of every zero at every point.  It is run on a few
    points and its time per point extrapolated (stated in the output).
(b) brute-force batched eigenvalues: every characteristic polynomial of every
    point, zero and gain sample in one numpy eigenvalue call.

Check: for the zero each method chose, the scheduler's exact upper boundary
gain (from the exact interval solver, with the specs as written) must lie
within one grid step above the sweep's largest feasible sample (the sweep's
choice is on the feasible side, the next sample beyond is not).

Usage: ``python benchmarks/schedule.py [--quick]`` (``--quick``: a few points,
for the smoke test).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

import gainloom  # noqa: E402
from gainloom.design.engine import design_points, limits_at, sampled_plant  # noqa: E402
from gainloom.design.search import exact_feasible, shape_loops  # noqa: E402
from gainloom.design.strategies import make_shapes  # noqa: E402
from gainloom.lti.polynomials import batched_roots  # noqa: E402

GAIN_SAMPLES = 400
ZETA = 0.5
GM_DB = 6.0
A, B_, C = 5e-4, 2e-4, 1e-3  # current loop, sensor filter, torque-ripple filter time constants, s
Q3, Q2, Q1 = A * B_ * C, A * B_ + A * C + B_ * C, A + B_ + C


def schedule_text(speed_count: int, load_count: int | None, sweep_count: int) -> str:
    variables = f"""  - name: speed
    unit: rpm
    values: {{start: 0, stop: 6000, count: {speed_count}}}
"""
    load = "0"
    if load_count:
        variables += f"""  - name: load
    unit: ""
    values: {{start: 0, stop: 1, count: {load_count}}}
"""
        load = "load"
    return f"""
name: benchmark-4th-order
variables:
{variables}parameters:
  Kt: 0.35
  J: "2.5e-3 * (1 + 0.15 * speed / 6000) * (1 + 2 * {load})"
  B: "2.0e-4 + 1.5e-4 * speed / 1000"
plant:
  transfer_function:
    numerator: ["Kt"]
    denominator: ["J * {Q3!r}", "J * {Q2!r} + B * {Q3!r}", "J * {Q1!r} + B * {Q2!r}", "J + B * {Q1!r}", "B"]
sampling:
  period: 1.0e-4
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: shape-sweep
  objective: fastest
  sweep: {{range: [0.95, 0.999], count: {sweep_count}}}
  output_limits: [-20, 20]
specs:
  min_damping: {ZETA}
  min_gain_margin: {GM_DB}
  poles: all   # the peers judge every closed-loop pole
table:
  between_points: 0
codegen:
  prefix: bench
  format: float32
"""


def gain_grid(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    """400 geometric gains per loop around its coefficient scale (same for both peers)."""
    scale = np.max(np.abs(den), axis=-1) / np.max(np.abs(num), axis=-1)
    return scale[:, None] * np.geomspace(1e-7, 1e3, GAIN_SAMPLES)[None, :]


def sweep_choice(radius, zeta, ts, grid):
    """Feasibility and 'fastest' choice from sampled poles: damping, stability, 6 dB GM on the sampled boundary."""
    stable = radius < 1
    # largest stable gain on the grid (stability boundary as the sweep sees it)
    unstable_above = ~stable
    first_unstable = np.where(unstable_above.any(axis=-1), np.argmax(unstable_above, axis=-1), grid.shape[-1])
    k_unstable = np.take_along_axis(grid, np.minimum(first_unstable, grid.shape[-1] - 1)[..., None], axis=-1)
    k_unstable = np.where(first_unstable[..., None] < grid.shape[-1], k_unstable, np.inf)
    feasible = stable & (zeta >= ZETA) & (grid <= k_unstable / 10 ** (GM_DB / 20))
    decay = np.where(feasible, -np.log(radius) / ts, -np.inf)
    return feasible, decay


def brute_force(loops_num, loops_den, ts):
    """Peer (b): all points x zeros x 400 gains in one batched eigenvalue call."""
    grid = gain_grid(loops_num, loops_den)
    polys = loops_den[:, None, :] + grid[..., None] * loops_num[:, None, :]
    roots = batched_roots(polys)
    radius = np.abs(roots).max(axis=-1)
    s = np.log(roots.astype(complex)) / ts[:, None, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        zeta = np.min(np.where(np.abs(s) > 0, -s.real / np.abs(s), 1.0), axis=-1)
    feasible, decay = sweep_choice(radius, zeta, ts[:, None], grid)
    return grid, feasible, decay


def naive(loops_num, loops_den, ts, rows):
    """Peer (a): python-control feedback + poles for every gain sample, row by row."""
    import control

    grid = gain_grid(loops_num[rows], loops_den[rows])
    feasible = np.zeros(grid.shape, dtype=bool)
    decay = np.full(grid.shape, -np.inf)
    for j, r in enumerate(rows):
        loop = control.tf(np.trim_zeros(loops_num[r], "f"), loops_den[r], float(ts[r]))
        radius = np.empty(GAIN_SAMPLES)
        zeta = np.empty(GAIN_SAMPLES)
        for k, K in enumerate(grid[j]):
            poles = control.feedback(K * loop, 1).poles()
            radius[k] = np.max(np.abs(poles))
            s = np.log(poles.astype(complex)) / ts[r]
            zeta[k] = np.min(-s.real / np.abs(s))
        f, d = sweep_choice(radius[None], zeta[None], float(ts[r]), grid[j][None])
        feasible[j], decay[j] = f[0], d[0]
    return grid, feasible, decay


def run_case(label: str, text: str, naive_points: int) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.yaml"
        path.write_text(text)
        sched = gainloom.load_schedule(path)
        points = sched.points
        P = points.shape[0]
        # the scheduler
        start = time.perf_counter()
        result = design_points(sched, points)
        t_sched = time.perf_counter() - start
        # shared inputs of the peers: the same sampled plant and zero candidates
        plant = sampled_plant(sched, points)
        sweep = (tuple(sched.controller.sweep.range), sched.controller.sweep.count)
        shapes = make_shapes(plant, "pi", "shape-sweep", sweep=sweep)
        S = shapes.count
        rows_p = np.repeat(np.arange(P), S)
        loops = shape_loops(plant, shapes.zeros.reshape(P * S, -1), shapes.poles.reshape(P * S, -1), rows_p)
        num, den, ts = np.asarray(loops.num), np.asarray(loops.den), np.asarray(loops.ts)
        start = time.perf_counter()
        grid_b, feasible_b, decay_b = brute_force(num, den, ts)
        t_brute = time.perf_counter() - start
        sample_points = np.linspace(0, P - 1, min(naive_points, P)).astype(int)
        naive_rows = (sample_points[:, None] * S + np.arange(S)[None, :]).ravel()
        start = time.perf_counter()
        grid_a, feasible_a, decay_a = naive(num, den, ts, naive_rows)
        t_naive_sample = time.perf_counter() - start
        t_naive = t_naive_sample / sample_points.size * P
        # peers agree with each other on the sampled points
        agree = np.array_equal(feasible_a, feasible_b[naive_rows])
        # boundary check: scheduler's exact upper boundary vs the sweep's largest feasible sample
        best_b = decay_b.reshape(P, S, -1).max(axis=-1)
        zero_b = np.argmax(best_b, axis=1)
        rows_b = np.arange(P) * S + zero_b
        sub = loops.select(rows_b)
        limits = limits_at(sched, points)
        exact = exact_feasible(sub, limits, np.arange(P))
        within, checked = 0, 0
        for p in range(P):
            f = feasible_b[rows_b[p]]
            if not f.any() or not exact[p]:
                continue
            g = grid_b[rows_b[p]]
            last = int(np.flatnonzero(f)[-1])
            high = max(hi for lo, hi in exact[p])
            checked += 1
            nxt = g[last + 1] if last + 1 < g.size else np.inf
            if g[last] <= high <= nxt * (1 + 1e-12):
                within += 1
        return {
            "label": label,
            "points": P,
            "zeros": S,
            "passed": int(sum(s == "pass" for s in result.status)),
            "scheduler_s": t_sched,
            "brute_s": t_brute,
            "naive_s": t_naive,
            "naive_points": int(sample_points.size),
            "naive_sample_s": t_naive_sample,
            "peers_agree": bool(agree),
            "boundary_within_step": within,
            "boundary_checked": checked,
        }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny schedules (smoke test)")
    args = parser.parse_args(argv)
    if args.quick:
        cases = [("1-D quick", schedule_text(3, None, 2), 1), ("2-D quick", schedule_text(2, 2, 2), 1)]
    else:
        cases = [("1-D 200", schedule_text(200, None, 12), 3), ("2-D 40x25", schedule_text(40, 25, 12), 3)]
    failures = 0
    for label, text, naive_points in cases:
        r = run_case(label, text, naive_points)
        print(f"{r['label']}: {r['points']} points x {r['zeros']} zeros, {GAIN_SAMPLES} gain samples per peer loop")
        print(f"  scheduler            {r['scheduler_s']:9.3f} s   ({r['passed']}/{r['points']} points pass)")
        print(f"  (b) batched sweep    {r['brute_s']:9.3f} s   ratio {r['brute_s'] / r['scheduler_s']:8.2f}x")
        print(
            f"  (a) naive control    {r['naive_s']:9.3f} s   ratio {r['naive_s'] / r['scheduler_s']:8.1f}x "
            f"(extrapolated from {r['naive_points']} point(s) measured in {r['naive_sample_s']:.2f} s)"
        )
        print(f"  peers agree on feasibility: {r['peers_agree']}")
        print(
            f"  exact boundary within one grid step above the sweep's last feasible gain: "
            f"{r['boundary_within_step']}/{r['boundary_checked']}"
        )
        if r["boundary_within_step"] != r["boundary_checked"] or not r["peers_agree"]:
            failures += 1
    return 1 if failures else 0


if __name__ == "__main__":
    raise SystemExit(main())
