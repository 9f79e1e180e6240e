"""Margins judged on frequency samples (lti/data_margins.py)."""

import control as ct
import numpy as np
import pytest
from scipy.optimize import brentq

from gainloom.lti.data_margins import data_margins, sampled_loop_on_data, zoh_response
from gainloom.lti.sweep_fit import model_response

# Invented speed loop: Kt / ((J s + B)(tau s + 1)), one sample of sensor dead time,
# one sample of computation delay, PI at 10 kHz.
KT, J, B, TAU, TS = 0.35, 2.5e-3, 5e-3, 5e-4, 1e-4
KP, KI_TS = 0.5, 0.5 * 100 * 1e-4
PI_NUM, PI_DEN = np.array([[KP + KI_TS, -KP]]), np.array([[1.0, -1.0]])


def _grid(count=400, top_hz=4000.0):
    return np.geomspace(2 * np.pi * 0.5, 2 * np.pi * top_hz, count)[np.newaxis, :]


def _plant(w, dead_time=TS):
    return model_response(np.array([[0, 0, KT]]), np.array([[J * TAU, J + B * TAU, B]]), np.array([dead_time]), w)


def _loop(w):
    return sampled_loop_on_data(w, _plant(w), np.array([TS]), np.array([1.0]), PI_NUM, PI_DEN)


def test_zoh_response_closed_form():
    # |H(jw)| = |sinc(w ts / 2)|, phase -w ts / 2 (textbook closed form of the zero-order hold)
    w = np.array([[0.0, 100.0, 3000.0, 20000.0]])
    h = zoh_response(w, np.array([TS]))
    x = w[0] * TS / 2
    np.testing.assert_allclose(np.abs(h[0]), np.abs(np.sinc(x / np.pi)), rtol=1e-12)
    np.testing.assert_allclose(np.angle(h[0][1:]), -x[1:], rtol=1e-12)


def test_margins_agree_with_python_control_on_the_same_grid():
    w = _grid()
    loop = _loop(w)
    m = data_margins(w, loop)
    ok = np.isfinite(loop[0])
    # python-control stability_margins on an FRD of the same samples (its own interpolation)
    gm, pm, sm, wpc, wgc, _wms = ct.stability_margins(ct.frd(loop[0][ok], w[0][ok]))
    assert m.judged[0] and m.coverage[0] == ()
    assert m.phase_margin[0] == pytest.approx(pm, abs=0.05)
    assert m.gain_crossover[0] == pytest.approx(wgc, rel=1e-3)
    assert m.gain_margin_db[0] == pytest.approx(20 * np.log10(gm), abs=0.05)
    assert m.phase_crossover[0] == pytest.approx(wpc, rel=1e-3)
    assert 1 / m.sensitivity_peak[0] == pytest.approx(sm, rel=2e-3)
    assert m.crossover[0] == m.last_crossover[0] == pytest.approx(wgc, rel=1e-3)


def test_margins_agree_with_the_exact_sampled_loop():
    # The data loop neglects the aliased terms of the sampled plant; against python-control's
    # exact ZOH discretisation (c2d, then two samples of delay) the margins agree closely
    # because the plant rolls off at -40 dB/decade well before Nyquist.
    w = _grid(2000, top_hz=4999.0)
    m = data_margins(w, _loop(w))
    plant = ct.c2d(ct.tf([KT], [J * TAU, J + B * TAU, B]), TS, "zoh")
    delay = ct.tf([1], [1, 0, 0], TS)  # sensor dead time (one sample) + computation delay
    pi = ct.tf(PI_NUM[0], PI_DEN[0], TS)
    gm, pm, sm, wpc, wgc, _wms = ct.stability_margins(pi * plant * delay, method="poly")
    assert m.phase_margin[0] == pytest.approx(pm, abs=0.3)
    assert m.gain_crossover[0] == pytest.approx(wgc, rel=5e-3)
    assert m.gain_margin_db[0] == pytest.approx(20 * np.log10(gm), abs=0.5)
    assert m.phase_crossover[0] == pytest.approx(wpc, rel=0.02)
    assert m.sensitivity_peak[0] == pytest.approx(1 / sm, rel=0.01)
    closed = ct.feedback(pi * plant * delay)
    # half-power point of |T(exp(jw ts))| (python-control evaluation, scipy root)
    level = abs(closed(1.0)) / np.sqrt(2)
    bandwidth = brentq(lambda x: abs(closed(np.exp(1j * x * TS))) - level, 10.0, 2000.0)
    assert m.bandwidth[0] == pytest.approx(bandwidth, rel=0.01)


def test_crossover_beyond_the_data_is_not_judged():
    w = np.geomspace(1.0, 50.0, 100)[np.newaxis, :]  # ends below the 99 rad/s crossover
    m = data_margins(w, _loop(w))
    assert not m.judged[0]
    assert np.isnan(m.crossover[0])
    assert "beyond the data" in m.coverage[0][0]


def test_a_gap_at_the_crossover_is_not_judged():
    w = _grid()
    loop = _loop(w)
    gap = (w[0] > 60) & (w[0] < 160)  # the crossover is at 99 rad/s
    m = data_margins(w, np.where(gap, np.nan, loop))
    assert not m.judged[0]
    assert any("gap in the data" in note and "gain crossover" in note for note in m.coverage[0])


def test_a_coarse_grid_is_reported():
    w = np.geomspace(2 * np.pi * 0.5, 2 * np.pi * 4000, 10)[np.newaxis, :]  # 2.5 samples per decade
    m = data_margins(w, _loop(w))
    assert any("coarse at the gain crossover" in note for note in m.coverage[0])


def test_points_are_batched_with_padding():
    w = _grid()
    loop = _loop(w)
    single = data_margins(w, loop)
    w2 = np.vstack([w, np.where(np.arange(w.shape[1]) < 300, w, np.nan)])
    m = data_margins(w2, np.vstack([loop, loop]))
    assert m.phase_margin[0] == single.phase_margin[0] == m.phase_margin[1]
    assert m.gain_margin_db[0] == single.gain_margin_db[0]


def test_step_deviation_bound_holds_for_two_exact_sampled_loops():
    # Two discrete loops known exactly (python-control ZOH of the invented plant with
    # one sample of computation delay, and the same plant with 20 % more inertia): the
    # bound from their responses on the unit circle must hold for the step responses
    # python-control simulates (inverse z-transform bounded by the integral of its
    # modulus, textbook inequality), and be within a factor 3 of it on these loops.
    from gainloom.lti.data_margins import step_deviation_bound

    w = np.geomspace(1e-2, 0.99999 * np.pi / TS, 5000)[np.newaxis, :]
    pi = ct.tf([KP + KI_TS, -KP], [1, -1], TS)
    delay = ct.tf([1], [1, 0], TS)
    loops, steps = [], []
    for inertia in (J, 1.2 * J):
        plant = ct.sample_system(ct.tf([KT], np.polymul([inertia, B], [TAU, 1])), TS, method="zoh")
        loop = pi * delay * plant
        loops.append(ct.frequency_response(loop, w[0]).complex[np.newaxis, :])
        steps.append(ct.step_response(ct.feedback(loop, 1), T=np.arange(4000) * TS).outputs)
    bound = step_deviation_bound(w, loops[0], loops[1], np.array([TS]))[0]
    actual = np.max(np.abs(steps[0] - steps[1]))
    assert actual <= bound <= 3 * actual


def test_a_gap_beside_the_sensitivity_peak_is_noted():
    # Ms of this loop peaks at 105 rad/s, just above the 99 rad/s crossover (dense grid);
    # samples missing from 101 to 400 rad/s leave the crossover judged but not the peak,
    # which the samples underestimate (python-control's stability margin on the full
    # grid is the reference for the peak)
    w = _grid()
    loop = _loop(w)
    reference = 1 / ct.stability_margins(ct.frd(loop[0], w[0]))[2]
    m = data_margins(w, np.where((w > 101) & (w < 400), np.nan, loop))
    assert m.judged[0]
    assert m.sensitivity_peak[0] < reference
    assert any(note.startswith("a gap in the data borders the sensitivity peak") for note in m.coverage[0])


def test_few_samples_near_the_crossover_are_noted():
    # 30 samples over 3.9 decades: 5 within an octave of the 99 rad/s crossover; 400: 62
    thin, dense = (data_margins(w, _loop(w)) for w in (_grid(30), _grid(400)))
    assert any(note.startswith("only 5 samples within an octave of the crossover") for note in thin.coverage[0])
    assert dense.coverage == ((),)
