"""Analyse one speed loop in the s-plane and, after sampling, in the z-plane.

An invented fan drive: torque constant 0.08 N m/A, inertia 4e-4 kg m^2,
viscous friction 2e-4 N m s/rad, and a current loop that behaves like a
0.5 ms first-order lag.  The firmware samples at 5 kHz with one sample of
computation delay.  The script prints where the loop goes unstable in s and
in z: sampling and delay take away most of the gain range the continuous
locus promises.

Run: python examples/analyse_one_loop.py
"""

from __future__ import annotations

import numpy as np

import gainloom


def show(intervals: tuple[tuple[float, float], ...]) -> str:
    """Gain intervals as text, e.g. '(0, 18.31)'."""
    return ", ".join(f"({low:.4g}, {high:.4g})" for low, high in intervals) or "none"


kt, inertia, friction, lag = 0.08, 4.0e-4, 2.0e-4, 0.5e-3
# Speed [rad/s] per current command [A]: Kt / ((J s + B)(lag s + 1)).
num = np.array([kt])
den = np.polymul([inertia, friction], [lag, 1.0])

continuous = gainloom.locus_facts(num, den)
print("s-plane:")
print(f"  asymptote centroid {continuous.centroid:.4g} rad/s, angles {continuous.asymptote_angles} deg")
for point in continuous.breakaways:
    print(f"  {point.kind} at s = {point.point.real:.4g} with K = {point.gain:.4g}")
print(f"  stable for K in {show(continuous.stable_gain_intervals)}")

ts = 1.0 / 5000.0
sampled = gainloom.discretize_loop(gainloom.Loop(num, den), ts, method="zoh", delay=1)
discrete = gainloom.locus_facts(
    sampled.num[0], sampled.den[0], ts=ts, delta=(sampled.delta_num[0], sampled.delta_den[0])
)
print(f"z-plane (zoh, ts = {ts * 1e6:.0f} us, one sample of delay):")
for crossing in discrete.crossings:
    print(
        f"  unit-circle crossing at theta = {crossing.theta:.4g} rad "
        f"({crossing.omega:.4g} rad/s) with K = {crossing.gain:.4g}"
    )
print(f"  stable for K in {show(discrete.stable_gain_intervals)}")
