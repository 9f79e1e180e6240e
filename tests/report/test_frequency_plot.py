"""frequency.png data against python-control; the drawing is deterministic."""

from __future__ import annotations

import warnings

import control
import numpy as np
import pytest

from gainloom import Loop
from gainloom.report.frequency_plot import frequency_curves, plot_frequency

TS = 1e-3
# Invented sampled loop: ZOH of 40/(0.02 s + 1), one sample of delay,
# PI C(z) = 0.1 (z - 0.95)/(z - 1) (stable, PM ~73 deg).
PLANT = control.c2d(control.tf([40.0], [0.02, 1]), TS) * control.tf([1], [1, 0], TS)
SYS = control.tf([0.1, -0.095], [1, -1], TS) * PLANT


def test_curves_match_python_control():
    curves = frequency_curves(Loop.from_control([SYS]), 0)
    # Reference: python-control's frequency response and margins of the same loop
    response = control.frequency_response(SYS, curves.w)
    np.testing.assert_allclose(np.abs(curves.loop), response.magnitude.ravel(), rtol=1e-9)
    closed = control.feedback(SYS, 1)
    t_ref = control.frequency_response(closed, curves.w).magnitude.ravel()
    np.testing.assert_allclose(np.abs(curves.complementary), t_ref, rtol=1e-8)
    np.testing.assert_allclose(np.abs(curves.sensitivity + curves.complementary), 1.0, rtol=1e-12)  # S + T = 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, pm, wpc, wgc = control.margin(SYS)
    assert curves.crossover == pytest.approx(wgc, rel=1e-7)
    assert curves.phase_margin_deg == pytest.approx(pm, rel=1e-7)
    assert curves.gain_margin_db == pytest.approx(20 * np.log10(gm), rel=1e-7)
    assert curves.phase_crossover == pytest.approx(wpc, rel=1e-7)
    assert curves.w[-1] == pytest.approx(np.pi / TS, rel=1e-15)


def test_plot_is_deterministic_png():
    loop = Loop.from_control([SYS, 1.3 * SYS])
    points = [{"label": "a"}, {"label": "b"}]
    first = plot_frequency(loop, [(0, "first"), (1, "last")], points)
    assert first[:8] == b"\x89PNG\r\n\x1a\n"
    assert first == plot_frequency(loop, [(0, "first"), (1, "last")], points)


def test_plot_with_filters_draws_a_fourth_panel_deterministically():
    from gainloom.lti.filters import notch_continuous, tustin_prewarped

    # invented notch at 400 rad/s, 20 dB deep, on the same two points
    w0 = np.array([400.0, 400.0])
    num, den = tustin_prewarped(*notch_continuous(w0, np.full(2, 20.0), 0.4 * w0), w0, np.full(2, TS))
    filters = (Loop(num=num, den=den, ts=TS), w0[np.newaxis, :])
    loop = Loop.from_control([SYS, 1.3 * SYS])
    points = [{"label": "a"}, {"label": "b"}]
    plain = plot_frequency(loop, [(0, "first"), (1, "last")], points)
    first = plot_frequency(loop, [(0, "first"), (1, "last")], points, filters)
    assert first[:8] == b"\x89PNG\r\n\x1a\n" and first != plain
    assert first == plot_frequency(loop, [(0, "first"), (1, "last")], points, filters)
    # taller figure: four panels (PNG height in the IHDR chunk, bytes 20-24)
    assert int.from_bytes(first[20:24], "big") > int.from_bytes(plain[20:24], "big")
