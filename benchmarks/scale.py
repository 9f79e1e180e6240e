"""Benchmark: the statistical tolerance study on 1, 2 processes and a Dask LocalCluster.

Schedule (invented for the benchmark): the current loop of an R-L load,
``1 / (L s + R)`` with an inductance that saturates with current, sampled at
20 kHz with ZOH and one sample of computation delay; a PI controller placed
by pole cancellation; specs: damping >= 0.6, phase margin >= 50 deg, gain
margin >= 6 dB.  1,000 operating points over the current; the tolerances
spread L by 20 % and R by 30 % (normal, 3 sigma); 10,000 draws per point
(10^7 loop analyses).

The table is designed first (not timed), then the same study runs
(1) in one process, (2) on two local processes, (3) on a LocalCluster of two
worker processes; the three results must be identical bit for bit.  Printed:
wall time, loop analyses per second, ratio to one process, and a projection
(not a measurement) of 10^6 draws per point on N workers from the measured
per-worker rate and the measured efficiency at two workers.

Usage: ``python benchmarks/scale.py [--small]`` (``--small``: 20 points x 512
draws, for the smoke test of the output's shape).
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
from gainloom.design.spread import run_study  # noqa: E402

SCHEDULE = """\
name: scale-current-loop
description: invented R-L current loop with saturating inductance, for benchmarks/scale.py
variables:
  - name: current
    unit: A
    values: {{start: 0, stop: 40, count: {points}}}
parameters:
  L: "2.0e-3 / (1 + (current / 25) ** 2)"   # H, saturates with current
  R: 0.5                                       # ohm
plant:
  transfer_function: {{numerator: [1], denominator: ["L", "R"]}}
sampling:
  period: 5.0e-5
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [-48, 48]
specs:
  min_damping: 0.6
  natural_frequency: [300, 6000]
  max_pole_radius: 0.97
tolerances:
  parameters: {{L: 0.2, R: 0.3}}
  samples: {draws}
  distribution: normal
  seed: 3
"""

#: Draws per point of the projection.
PROJECTED_DRAWS = 1_000_000
#: Worker counts of the projection.
PROJECTED_WORKERS = (1, 8, 32, 128)


def _identical(left, right) -> bool:
    return all(np.array_equal(getattr(left.totals, f), getattr(right.totals, f), equal_nan=True)
               for f in ("draws", "violations", "any_violations", "worst_draw", "worst_badness", "worst_value",
                         "worst_factors"))


def _timed(label: str, schedule: Path, table, **engine):
    start = time.perf_counter()
    result = run_study(schedule, table, **engine)
    return label, time.perf_counter() - start, result


def _hours(seconds: float) -> str:
    return f"{seconds / 3600:.3g} h" if seconds >= 3600 else f"{seconds / 60:.3g} min"


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print its figures; 0 when the three results agree."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--small", action="store_true", help="20 points x 512 draws (checks the output, not speed)")
    args = parser.parse_args(argv)
    points, draws = (20, 512) if args.small else (1000, 10_000)
    from distributed import LocalCluster

    with tempfile.TemporaryDirectory() as tmp:
        schedule = Path(tmp) / "scale.yaml"
        schedule.write_text(SCHEDULE.format(points=points, draws=draws), encoding="utf-8")
        table = gainloom.design_table(schedule).table
        loops = points * draws
        print(f"tolerance study: {points} points x {draws} draws = {loops:.3g} loop analyses "
              "(specs: stable, min_damping, natural_frequency, max_pole_radius; normal spread of L and R)")
        runs = [_timed("1 process", schedule, table, workers=1), _timed("2 processes", schedule, table, workers=2)]
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                          silence_logs=50) as cluster:
            runs.append(_timed("LocalCluster, 2 workers", schedule, table, cluster=cluster.scheduler_address))
    base = runs[0][1]
    print(f"{'engine':<26} {'wall s':>8} {'loops/s':>10} {'ratio to 1 process':>19}")
    for label, seconds, _ in runs:
        print(f"{label:<26} {seconds:>8.3f} {loops / seconds:>10.3g} {base / seconds:>19.2f}")
    same = all(_identical(runs[0][2], r[2]) for r in runs[1:])
    print(f"results identical bit for bit: {'yes' if same else 'NO'}")
    rate = loops / base
    efficiency = min(1.0, base / runs[2][1] / 2)
    print(f"projection, not a measurement: {PROJECTED_DRAWS:.0e} draws x {points} points = "
          f"{PROJECTED_DRAWS * points:.3g} loop analyses at {rate:.3g} loops/s per worker (measured, 1 process) "
          f"and {efficiency:.2f} efficiency (measured at 2 cluster workers, assumed to hold for N):")
    for workers in PROJECTED_WORKERS:
        seconds = PROJECTED_DRAWS * points / (rate * workers * (1.0 if workers == 1 else efficiency))
        print(f"  N = {workers:>3} workers: {_hours(seconds)}")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
