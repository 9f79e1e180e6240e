"""Filters in the designed loop: the two-mass demo against python-control."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import control
import numpy as np
import pytest
import scipy.signal

import gainloom
from gainloom import load_schedule
from gainloom.design.engine import sampled_plant

SCHEDULES = Path(__file__).resolve().parents[2] / "schedules"


@pytest.fixture(scope="module")
def two_mass():
    schedule = load_schedule(SCHEDULES / "two_mass_speed.yaml")
    return schedule, gainloom.design(schedule)


def _reference_loop(load: float, kp: float, ki_ts: float) -> control.TransferFunction:
    """The demo's loop built from its written numbers with python-control and scipy only."""
    kt, jm, k, c, tau, ts = 0.5, 2.0e-4, 474.0, 0.015, 3.0e-4, 1.25e-4  # schedules/two_mass_speed.yaml
    jl = load * jm
    s = control.tf("s")
    # two-mass plant, motor speed per torque, current loop as a lag
    plant = kt * (jl * s**2 + c * s + k) / (s * (jm * jl * s**2 + c * (jm + jl) * s + k * (jm + jl))) / (tau * s + 1)
    sampled = control.sample_system(plant, ts, method="zoh") * control.tf([1], [1, 0], ts)  # one sample of delay
    wr = np.sqrt(k * (jm + jl) / (jm * jl))
    depth, width = 10 ** (-20 / 20), 0.4 * wr
    zeta_p = width / (2 * wr * np.sqrt(depth))
    notch_s = ([1, 2 * depth * zeta_p * wr, wr**2], [1, 2 * zeta_p * wr, wr**2])
    # Tustin prewarped at wr: scipy.signal.bilinear with 2 fs = wr / tan(wr ts / 2)
    b, a = scipy.signal.bilinear(*notch_s, fs=wr / np.tan(wr * ts / 2) / 2)
    notch = control.tf(b, a, ts)
    pi = control.tf([kp + ki_ts, -kp], [1, -1], ts)  # kp + ki_ts z/(z - 1), DEVELOPERS.md
    return pi * notch * sampled


def test_two_mass_demo_passes_with_the_scheduled_notch(two_mass):
    _, result = two_mass
    assert result.passed, result.binding
    # every spec as written: GM >= 6 dB, PM >= 45 deg, Ms <= 2
    assert np.all(result.analysis.gain_margin_db >= 6 - 1e-9)
    assert np.all(result.analysis.phase_margin >= 45 - 1e-9)
    assert np.all(result.analysis.sensitivity_peak <= 2 + 1e-9)


def _dense_margins(loop: control.TransferFunction) -> tuple[float, float, float]:
    """GM (dB), PM (deg) and Ms of a discrete loop by brute force on 400,000 frequencies.

    python-control's own ``stability_margins`` differs from this by 0.05-0.2 deg on
    these 10th-order loops with its polynomial method (root-finding on the expanded
    polynomial) and agrees to 1e-8 deg with its FRD method where that finishes.
    """
    w = np.linspace(1.0, np.pi / loop.dt, 400_001)[:-1]
    h = loop(np.exp(1j * w * loop.dt))
    magnitude = np.abs(h)
    gain_cross = np.flatnonzero(np.diff(np.sign(magnitude - 1.0)))
    pm = np.min(np.abs(np.degrees(np.angle(-h[gain_cross]))))
    # phase crossovers: L crosses the negative real axis
    phase_cross = np.flatnonzero((np.diff(np.sign(h.imag)) != 0) & (h.real[:-1] < 0))
    gm = np.min(np.abs(20 * np.log10(magnitude[phase_cross])))
    return gm, pm, float(np.max(np.abs(1 / (1 + h))))


def test_margins_with_the_notch_match_python_control(two_mass):
    schedule, result = two_mass
    analysis = result.analysis
    coefficients = result.table.coefficients
    for p, load in enumerate(schedule.points[:, 0]):
        loop = _reference_loop(float(load), float(coefficients["kp"][p]), float(coefficients["ki_ts"][p]))
        # reference: the loop built with python-control and scipy, margins by brute force
        gm, pm, ms = _dense_margins(loop)
        np.testing.assert_allclose(analysis.gain_margin_db[p], gm, atol=0.01)
        np.testing.assert_allclose(analysis.phase_margin[p], pm, atol=0.01)
        np.testing.assert_allclose(analysis.sensitivity_peak[p], ms, rtol=1e-4)


def test_the_notch_is_in_the_loop_every_analysis_sees(two_mass):
    schedule, _ = two_mass
    plant = sampled_plant(schedule, schedule.points)
    # the plant is of order 4, the delay adds a pole at z = 0, the notch two poles
    assert plant.order == 4 + 1 + 2
    # its response at the resonance is the plant's times the notch depth (-20 dB, exact after prewarping)
    bare = sampled_plant(_without_filters(schedule), schedule.points)
    wr = np.sqrt(474.0 * (1 + schedule.points[:, 0]) / (2.0e-4 * schedule.points[:, 0]))
    z = np.exp(1j * wr * plant.ts)
    ratio = [np.polyval(plant.num[p], z[p]) / np.polyval(plant.den[p], z[p])
             / (np.polyval(bare.num[p], z[p]) / np.polyval(bare.den[p], z[p])) for p in range(plant.points)]
    np.testing.assert_allclose(ratio, 0.1, rtol=1e-8)  # closed form: |N(j w0)| = 10^(-20/20)


def _without_filters(schedule):
    return replace(schedule, controller=replace(schedule.controller, filters=()))


def test_without_the_notch_the_crossover_is_far_lower(two_mass):
    # the point of the notch: the same specs reach a much higher crossover with it
    schedule, result = two_mass
    bare = gainloom.design(_without_filters(schedule))
    assert bare.passed
    # each design may insert its own breakpoints; compare on the loads both have
    without = dict(zip(bare.points[:, 0], bare.analysis.crossover))
    ratio = [wc / without[load] for load, wc in zip(result.points[:, 0], result.analysis.crossover) if load in without]
    assert len(ratio) >= schedule.points.shape[0]
    assert min(ratio) > 1.5 and np.median(ratio) > 3.0, ratio


def test_design_job_on_the_demo_passes_and_generates_no_c_without_the_filters(tmp_path):
    from gainloom.report.run import run_design_job

    job = run_design_job(SCHEDULES / "two_mass_speed.yaml", tmp_path / "out", target=False)
    stages = {s.stage: s for s in job.stages}
    assert stages["design"].status == "pass"
    # the C does not carry the filters yet: none is generated, nothing that runs it is run
    assert stages["C code"].status == "not generated" and job.c_files == ()
    assert stages["C check"].status == stages["simulation"].status == "not checked"
    assert not any(s.failed for s in job.stages)
    assert (tmp_path / "out" / "frequency.png").is_file() and not list((tmp_path / "out").glob("*.c"))
