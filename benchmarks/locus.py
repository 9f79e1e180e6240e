"""Benchmark: batched root-locus tracing against python-control, same loops, same run.

Traces seeded random 6th-order loops (half continuous, half discrete: a 5th-order
plant under zero-order hold with one sample of computation delay) with
:func:`gainloom.lti.trace.trace_locus` and with python-control's own
``root_locus_map`` (its default, adaptive gain selection), one loop at a time
as python-control works; python-control sees the discrete loops as z
transfer functions, gainloom traces them in the delta operator.  Prints wall and CPU times, their ratio, gain samples
per loop, the largest angle-condition residual of each method (same formula,
:func:`gainloom.lti.trace.angle_residual`) and the largest step between
neighbouring samples inside the plot region, as a fraction of the plot scale.

Run:  PYTHONPATH=src python benchmarks/locus.py [--loops 1000] [--seed 0] [--max-step 0.05]
"""

from __future__ import annotations

import argparse
import time
import warnings

import control
import numpy as np

from gainloom import Loop
from gainloom.lti.discretize import discretize_loop
from gainloom.lti.polynomials import pad_left
from gainloom.lti.trace import angle_residual, trace_locus


def _random_poles(rng: np.random.Generator, count: int, unstable: bool) -> np.ndarray:
    """Real poles and complex pairs, magnitudes 0.5..50 rad/s; optionally one unstable."""
    poles: list[complex] = []
    while len(poles) < count:
        if count - len(poles) >= 2 and rng.random() < 0.5:
            wn, zeta = rng.uniform(0.5, 50.0), rng.uniform(0.05, 0.9)
            pair = complex(-zeta * wn, wn * np.sqrt(1 - zeta**2))
            poles += [pair, pair.conjugate()]
        else:
            poles.append(complex(-rng.uniform(0.5, 50.0), 0.0))
    if unstable:
        poles[-1] = complex(rng.uniform(0.2, 5.0), 0.0)
    return np.array(poles)


def make_loops(count: int, seed: int = 0) -> tuple[Loop, Loop]:
    """Seeded random loops of order 6: (continuous batch, discrete batch).

    Continuous: 6 poles (every third loop open-loop unstable), 0-2 real zeros.
    Discrete: 5 such poles and 0-2 zeros under zero-order hold at
    ts = 1-5 ms with one sample of computation delay, by gainloom's
    discretiser (which also gives the delta-operator form).
    """
    rng = np.random.default_rng(seed)
    cont_num, cont_den, plant_num, plant_den, periods = [], [], [], [], []
    for i in range(count):
        is_discrete = i % 2 == 1
        order = 5 if is_discrete else 6
        poles = _random_poles(rng, order, unstable=(i % 3 == 0))
        zeros = -rng.uniform(0.5, 40.0, rng.integers(0, 3))
        den = np.real(np.poly(poles))
        zpoly = np.atleast_1d(np.real(np.poly(zeros)))
        num = pad_left(zpoly * abs(den[-1] / zpoly[-1]), order + 1)
        if is_discrete:
            plant_num.append(num)
            plant_den.append(den)
            periods.append(rng.uniform(1e-3, 5e-3))
        else:
            cont_num.append(num)
            cont_den.append(den)
    continuous = Loop(num=np.array(cont_num), den=np.array(cont_den))
    plant = Loop(num=np.array(plant_num), den=np.array(plant_den))
    discrete = discretize_loop(plant, np.array(periods), "zoh", delay=1.0)
    return continuous, discrete


def _plot_scale(num: np.ndarray, den: np.ndarray) -> float:
    feats = [np.roots(den)]
    trimmed = np.trim_zeros(num, "f")
    if trimmed.size > 1:
        feats.append(np.roots(trimmed))
    return float(np.max(np.abs(np.concatenate(feats))))


def _inside_step(roots: np.ndarray, scale: float) -> float:
    """Largest move between neighbouring samples of roots inside |r| <= scale."""
    with np.errstate(invalid="ignore"):
        step = np.abs(np.diff(roots, axis=0))
        inside = (np.abs(roots[1:]) <= scale) & (np.abs(roots[:-1]) <= scale)
    step = np.where(inside & np.isfinite(step), step, 0.0)
    return float(step.max() / scale) if step.size else 0.0


def _residual(loop: Loop, p: int, gains: np.ndarray, roots: np.ndarray) -> float:
    """Largest angle-condition residual (deg) of ``roots`` at ``gains`` for loop ``p``.

    Both methods are judged on the same yardstick: for discrete loops the
    roots are mapped to ``g = (z - 1)/ts`` and checked against the delta
    form, the most accurate description of the discretised loop.
    """
    if loop.is_discrete and loop.delta_den is not None:
        num, den = loop.delta_num[p], loop.delta_den[p]
        with np.errstate(invalid="ignore"):
            roots = (roots - 1.0) / loop.ts[p]
    else:
        num, den = loop.num[p], loop.den[p]
    rows = gains.size
    res = angle_residual(np.repeat(num[np.newaxis], rows, 0), np.repeat(den[np.newaxis], rows, 0), gains, roots)
    finite = res[np.isfinite(res)]
    return float(finite.max()) if finite.size else 0.0


def run(loops: int = 1000, seed: int = 0, max_step: float = 0.05) -> dict:
    """Run the benchmark and return its figures (also printed by :func:`main`)."""
    continuous, discrete = make_loops(loops, seed)
    loop_batches = [b for b in (continuous, discrete) if b.points]
    # python-control gets the same loops as transfer functions (z coefficients).
    systems = [[lb.to_control(p) for p in range(lb.points)] for lb in loop_batches]

    wall0, cpu0 = time.perf_counter(), time.process_time()
    traced = [trace_locus(lb, max_step=max_step) for lb in loop_batches]
    ours_wall, ours_cpu = time.perf_counter() - wall0, time.process_time() - cpu0

    wall0, cpu0 = time.perf_counter(), time.process_time()
    theirs = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # python-control's own warnings are not ours
        for batch in systems:
            theirs.append([control.root_locus_map(sys) for sys in batch])
    peer_wall, peer_cpu = time.perf_counter() - wall0, time.process_time() - cpu0

    ours_res, peer_res, ours_step, peer_step, ours_n, peer_n = 0.0, 0.0, 0.0, 0.0, [], []
    for lb, tr, th in zip(loop_batches, traced, theirs):
        ours_n += list(tr.counts)
        for p, data in enumerate(th):
            gains = np.asarray(data.gains, dtype=float)
            loci = np.asarray(data.loci, dtype=complex)
            peer_n.append(gains.size)
            ours_gains, ours = tr.gains[p, : tr.counts[p]], tr.roots[p, : tr.counts[p]]
            peer_res = max(peer_res, _residual(lb, p, gains, loci))
            ours_res = max(ours_res, _residual(lb, p, ours_gains, ours))
            scale = _plot_scale(lb.num[p], lb.den[p])
            peer_step = max(peer_step, _inside_step(loci, scale))
            ours_step = max(ours_step, _inside_step(ours, scale))
    return {
        "loops": loops,
        "max_step": max_step,
        "ours_wall_s": ours_wall,
        "ours_cpu_s": ours_cpu,
        "peer_wall_s": peer_wall,
        "peer_cpu_s": peer_cpu,
        "wall_ratio": peer_wall / ours_wall,
        "cpu_ratio": peer_cpu / ours_cpu,
        "ours_max_residual_deg": ours_res,
        "peer_max_residual_deg": peer_res,
        "ours_reported_residual_deg": max(tr.max_residual for tr in traced),
        "ours_samples_per_loop": float(np.mean(ours_n)),
        "peer_samples_per_loop": float(np.mean(peer_n)),
        "ours_max_step_per_scale": ours_step,
        "peer_max_step_per_scale": peer_step,
        "warnings": sorted({w for tr in traced for w in tr.warnings}),
    }


def main(argv: list[str] | None = None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--loops", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--max-step", type=float, default=0.05, help="trace_locus max_step (default 0.05)")
    args = parser.parse_args(argv)
    figures = run(args.loops, args.seed, args.max_step)
    print(
        f"loops: {figures['loops']} (order 6; half s, half z: ZOH + 1 sample delay); "
        f"trace_locus max_step {figures['max_step']}"
    )
    print(f"gainloom trace_locus     wall {figures['ours_wall_s']:8.3f} s  cpu {figures['ours_cpu_s']:8.3f} s")
    print(f"python-control rlocus    wall {figures['peer_wall_s']:8.3f} s  cpu {figures['peer_cpu_s']:8.3f} s")
    print(f"speed-up                 wall {figures['wall_ratio']:8.1f} x   cpu {figures['cpu_ratio']:8.1f} x")
    print(
        f"largest angle residual   gainloom {figures['ours_max_residual_deg']:.2e} deg  "
        f"python-control {figures['peer_max_residual_deg']:.2e} deg"
    )
    print(
        f"gain samples per loop    gainloom {figures['ours_samples_per_loop']:.1f}  "
        f"python-control {figures['peer_samples_per_loop']:.1f}"
    )
    print(
        f"largest step / plot scale (inside the plot)  gainloom {figures['ours_max_step_per_scale']:.3f}  "
        f"python-control {figures['peer_max_step_per_scale']:.3f}"
    )
    for w in figures["warnings"]:
        print(f"warning: {w}")
    return figures


if __name__ == "__main__":
    main()
