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
from gainloom.schedule import TableChecks, Tolerances

SCHEDULES = Path(__file__).resolve().parents[2] / "schedules"


@pytest.fixture(scope="module")
def two_mass():
    schedule = load_schedule(SCHEDULES / "two_mass_speed.yaml")
    return schedule, gainloom.design_table(schedule)


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
    bare = gainloom.design_table(_without_filters(schedule))
    assert bare.passed
    # each design may insert its own breakpoints; compare on the loads both have
    without = dict(zip(bare.points[:, 0], bare.analysis.crossover))
    ratio = [wc / without[load] for load, wc in zip(result.points[:, 0], result.analysis.crossover) if load in without]
    assert len(ratio) >= schedule.points.shape[0]
    assert min(ratio) > 1.5 and np.median(ratio) > 3.0, ratio


def _auto_notch(schedule):
    from gainloom.schedule.filters import read_filters
    from gainloom.schedule.nodes import compose_text

    sections = read_filters(compose_text("{notch: auto}", "test.yaml"))
    return replace(schedule, controller=replace(schedule.controller, filters=sections))


def test_auto_notch_sits_on_the_resonance_and_says_where(two_mass):
    schedule, written = two_mass
    auto = _auto_notch(schedule)
    values = auto.filters_at(schedule.points)
    load = schedule.points[:, 0]
    # closed form: the two-mass resonance wr = sqrt(k (Jm + JL)/(Jm JL)), damping c (Jm + JL)/(2 wr Jm JL)
    jm, k, c = 2.0e-4, 474.0, 0.015
    wr = np.sqrt(k * (1 + load) / (jm * load))
    np.testing.assert_allclose(values.values[0]["frequency"], wr, rtol=1e-9)
    np.testing.assert_allclose(values.resonance[0][1], c * (1 + load) / (2 * wr * jm * load), rtol=1e-6)
    np.testing.assert_allclose(values.values[0]["width"], 0.4 * wr, rtol=1e-9)
    result = gainloom.design_table(auto)
    # the demo's written notch is the same section (centre wr, 20 dB, 0.4 wr): the same design
    assert result.passed
    for name, table in written.table.coefficients.items():
        np.testing.assert_allclose(result.table.coefficients[name], table, rtol=1e-6)
    warning = next(w for w in result.warnings if "notch auto" in w)
    assert f"{wr.min() / (2 * np.pi):.4g} Hz to {wr.max() / (2 * np.pi):.4g} Hz" in warning
    assert any(f"({wr[0] / (2 * np.pi):.4g} Hz)" in n for n in result.notes[0])


def test_the_least_damped_pole_is_named_as_the_resonance(two_mass):
    schedule, result = two_mass
    # the closed loop keeps the shaft mode lightly damped (the notch lowers the gain there, it adds no damping)
    assert set(result.analysis.damping_pole_origin) == {"resonance"}
    assert np.all(result.analysis.damping < 0.1)
    # asking for damping the PI cannot give fails at that pole, and the note says it is the resonance
    # (nominal plant only: a design that cannot pass is diagnosed at every corner otherwise, slowly)
    strict = replace(_without_filters(schedule), specs=replace(schedule.specs, min_damping=0.3),
                     tolerances=Tolerances(), table_checks=TableChecks())
    failed = gainloom.design_table(strict)
    assert not failed.passed
    p = failed.status.index("fail")
    assert failed.binding[p] == "min_damping"
    assert failed.analysis.damping_pole_origin[p] == "resonance"
    assert any("comes from the plant's resonance" in n for n in failed.notes[p])


def test_emit_writes_the_sections_of_a_table_designed_with_filters(two_mass, tmp_path):
    import os
    import subprocess
    import sys

    from gainloom.design.gainsfile import write_gains

    schedule, result = two_mass
    gains = write_gains(result, tmp_path / "two_mass.gains.yaml")
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    done = subprocess.run([sys.executable, "-m", "gainloom", "emit", str(gains), "--out", str(tmp_path / "c"),
                           "--schedule", str(schedule.path)], env=env, capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    source = (tmp_path / "c" / "tms.c").read_text()
    assert "tms_f1_b0_table" in source and "tms_filters_pass" in source


def test_simulation_refuses_a_table_without_the_schedules_filters(two_mass):
    from gainloom import InputError
    from gainloom.job.design_job import default_scenario
    from gainloom.simulation import run_scenario

    schedule, result = two_mass
    scenario, _ = default_scenario(schedule, result)
    bare = replace(result.table, filters=())
    # the table's sections are what the C runs: a table without them is another controller
    with pytest.raises(InputError, match=r"1 controller\.filters section\(s\) and the gain table 0"):
        run_scenario(schedule, bare, scenario, "float32")
    ideal = run_scenario(schedule, result.table, scenario, "float64")
    assert ideal.stable and ideal.passed


def test_verify_judges_the_grid_points_with_the_tables_own_sections(two_mass):
    from gainloom.design.engine import verify
    from gainloom.design.table import FilterTable

    schedule, result = two_mass
    table = result.table
    # the same table with its notch moved to 0.6 x the resonance: the loop at the grid points must
    # change (the C would run this notch), while the designed sections give the design's numbers
    (notch,) = table.filters
    load = table.axes[0].values
    jm, k = 2.0e-4, 474.0  # schedules/two_mass_speed.yaml
    wr = np.sqrt(k * (jm + load * jm) / (jm * load * jm))
    depth, zeta_p = 0.1, 0.4 / (2 * np.sqrt(0.1))
    moved = []
    for w in 0.6 * wr:
        # Tustin prewarped at the centre: scipy.signal.bilinear with fs = w / tan(w ts / 2) / 2
        b, a = scipy.signal.bilinear([1, 2 * depth * zeta_p * w, w**2], [1, 2 * zeta_p * w, w**2],
                                     fs=w / np.tan(w * 1.25e-4 / 2) / 2)
        moved.append(np.concatenate([b / a[0], a[1:] / a[0]]))
    grid = np.array(moved)
    shifted = replace(table, filters=(FilterTable("notch", {n: grid[:, i] for i, n in
                                                            enumerate(("b0", "b1", "b2", "a1", "a2"))}),))
    as_designed = verify(schedule, table)
    as_moved = verify(schedule, shifted)
    np.testing.assert_allclose(as_designed.analysis.phase_margin, result.analysis.phase_margin, rtol=1e-9)
    assert np.max(np.abs(as_moved.analysis.phase_margin - as_designed.analysis.phase_margin)) > 1.0
    assert not as_moved.passed and notch.kind == "notch"
