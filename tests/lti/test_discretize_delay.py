"""Fractional computation delay with ZOH: the modified z-transform."""

import numpy as np
import pytest
import scipy.signal as signal

from gainloom import Loop, discretize
from gainloom.lti.discretize import discretize_loop


@pytest.mark.parametrize("frac", [0.1, 0.5, 0.8])
@pytest.mark.parametrize("a", [2.0, 50.0])
def test_first_order_fractional_delay_closed_form(frac, a):
    ts = 0.01
    num_z, den_z = discretize([a], [1.0, a], ts, "zoh", delay=frac)
    # Derivation (modified z-transform, m = 1 - frac): over one period the
    # held input is u[k-1] for frac*ts seconds, then u[k] for m*ts, so
    #   x[k+1] = e^{-a ts} x[k] + (1 - e^{-a m ts}) u[k]
    #            + (e^{-a m ts} - e^{-a ts}) u[k-1]
    #   G(z) = [(1 - e^{-a m ts}) z + (e^{-a m ts} - e^{-a ts})] / (z (z - e^{-a ts})).
    # Same as the modified-z table entry of standard digital-control texts
    # (Franklin, Powell & Workman; from memory).
    m = 1.0 - frac
    e, em = np.exp(-a * ts), np.exp(-a * m * ts)
    np.testing.assert_allclose(den_z, [1.0, -e, 0.0], rtol=1e-12, atol=1e-16)
    np.testing.assert_allclose(num_z, [0.0, 1.0 - em, em - e], rtol=1e-10, atol=1e-16)


SUBSTEPS = 20  # grid points per sample; every delay below is a multiple of ts/20


def _held_input(u, total, ts):
    """The delayed, held input on a uniform fine grid (lsim needs equal steps).

    On ``[j ts + total ts, (j + 1) ts + total ts)`` the plant sees ``u[j]``;
    with ``total`` a multiple of ``1/SUBSTEPS`` the switching instants are
    grid points, so a zero-order-hold simulation on the grid is exact.
    """
    shift = round(total * SUBSTEPS)
    index = np.arange(len(u) * SUBSTEPS)
    j = np.floor_divide(index - shift, SUBSTEPS)
    values = np.where(j >= 0, u[np.clip(j, 0, len(u) - 1)], 0.0)
    return index * (ts / SUBSTEPS), values


PLANTS = [
    ([3.0], [1.0, 3.0]),
    ([400.0], [1.0, 8.0, 400.0]),  # lightly damped, 20 rad/s
    ([2.0, 6.0], [1.0, 4.0, 3.0, 0.0]),  # integrator with a zero
    ([1.0, 3.0], [1.0, 1.0]),  # biproper: direct feedthrough is delayed too
]


@pytest.mark.parametrize("plant", range(len(PLANTS)))
@pytest.mark.parametrize("total", [0.3, 1.0, 1.75, 2.5])
def test_fractional_delay_matches_continuous_simulation(plant, total):
    num, den = PLANTS[plant]
    ts = 0.02
    rng = np.random.default_rng(5)
    u = rng.normal(size=60)
    num_z, den_z = discretize(num, den, ts, "zoh", delay=total)
    y_discrete = signal.lfilter(num_z, den_z, u)
    times, values = _held_input(u, total, ts)
    # Reference: scipy.signal.lsim (reference library) with a zero-order-hold
    # input (interp=False) on a grid holding every switching instant, so the
    # simulation is exact for the delayed, piecewise-constant input.
    _, y, _ = signal.lsim((num, den), values, times, interp=False)
    y_samples = y[::SUBSTEPS]
    np.testing.assert_allclose(y_discrete, y_samples, rtol=1e-8, atol=1e-9 * np.max(np.abs(y_samples)))


def test_dead_time_gives_the_same_result_as_a_fractional_delay():
    ts = 1e-3
    # 0.4 ms of dead time plus one sample of computation delay = 1.4 samples.
    loop = discretize_loop(Loop([3.0], [1.0, 3.0], dead_time=0.4e-3), ts, "zoh", delay=1.0)
    num_z, den_z = discretize([3.0], [1.0, 3.0], ts, "zoh", delay=1.4)
    assert loop.delay[0] == pytest.approx(1.4, rel=1e-12)
    np.testing.assert_allclose(loop.num[0], num_z, rtol=1e-9)
    np.testing.assert_allclose(loop.den[0], den_z, rtol=1e-12)


def test_batch_mixing_fractional_and_whole_delays():
    ts = np.array([0.01, 0.02, 0.01])
    delay = np.array([0.5, 2.0, 0.0])
    loop = discretize_loop(Loop([[3.0], [3.0], [3.0]], [[1.0, 3.0]] * 3), ts, "zoh", delay=delay)
    rng = np.random.default_rng(1)
    u = rng.normal(size=40)
    for p in range(3):
        times, values = _held_input(u, delay[p], ts[p])
        # Reference: scipy.signal.lsim with a held, delayed input (as above).
        _, y, _ = signal.lsim(([3.0], [1.0, 3.0]), values, times, interp=False)
        y_samples = y[::SUBSTEPS]
        np.testing.assert_allclose(signal.lfilter(loop.num[p], loop.den[p], u), y_samples, rtol=1e-8, atol=1e-12)
