"""Loading valid schedules: grid, parameters, plant forms, sampling, sections.

References are named beside each check: numpy/scipy (reference libraries),
hand-written formulas of the demo scenario, or textbook closed forms.
"""

from __future__ import annotations

import builtins
import hashlib
import itertools
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.interpolate
import scipy.signal

import gainloom
from gainloom import load_schedule
from gainloom.errors import InputError, ScheduleError
from gainloom.schedule import overshoot_to_damping

ROOT = Path(__file__).resolve().parents[2]
# cascade demos (top-level `loops`) are loaded by tests/schedule/test_cascade_schedule.py
DEMOS = sorted(p for p in (ROOT / "schedules").glob("*.yaml") if not p.stem.startswith("servo_cascade"))

BASE = """\
name: unit-base
variables:
  - name: speed
    unit: rpm
    values: [0, 1000, 2000, 3000]
parameters:
  Kt: 0.05
  J: "2.0e-4 * (1 + speed / 6000)"
  B: 1.0e-4
plant:
  transfer_function:
    numerator: ["Kt"]
    denominator: ["J", "B"]
sampling:
  period: 1.0e-4
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [-10, 10]
"""


def write(tmp_path: Path, text: str, name: str = "s.yaml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def edited(*edits: tuple[str, str]) -> str:
    text = BASE
    for old, new in edits:
        assert old in text
        text = text.replace(old, new, 1)
    return text


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_schedules_load_cleanly(path):
    schedule = load_schedule(path)
    if path.stem == "measured_speed":
        # its sweep holds three bad samples on purpose (examples/make_measured_data.py)
        assert len(schedule.warnings) == 3
        assert all("isolated outlier" in w for w in schedule.warnings)
    else:
        assert schedule.warnings == ()
    assert schedule.points.shape == (math.prod(schedule.grid_shape), len(schedule.axes))
    assert schedule.plant.points == schedule.points.shape[0]
    assert not schedule.plant.is_discrete


def test_demo_set_is_complete():
    assert {p.stem for p in DEMOS} >= {"spindle_speed", "winding_current", "conveyor_2d"}


def test_never_uses_eval_or_exec(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("eval/exec called")

    monkeypatch.setattr(builtins, "eval", refuse)
    monkeypatch.setattr(builtins, "exec", refuse)
    for path in DEMOS:
        load_schedule(path)


def test_product_grid_first_axis_slowest():
    schedule = load_schedule(ROOT / "schedules" / "winding_current.yaml")
    # reference: itertools.product enumerates the first factor slowest
    expected = np.array(list(itertools.product(*[a.values for a in schedule.axes])))
    np.testing.assert_array_equal(schedule.points, expected)
    assert schedule.grid_shape == (9, 5)


def test_sha256_is_of_the_file_bytes():
    path = ROOT / "schedules" / "spindle_speed.yaml"
    # reference: hashlib over the raw bytes
    assert load_schedule(path).sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_spindle_plant_matches_the_written_model():
    schedule = load_schedule(ROOT / "schedules" / "spindle_speed.yaml")
    speed = schedule.points[:, 0]
    # reference: the scenario's own formulas, written out by hand from the YAML
    j = 2.5e-3 * (1 + 0.15 * speed / 6000)
    b = 2.0e-4 + 1.5e-4 * speed / 1000
    tau = 5.0e-4
    np.testing.assert_allclose(schedule.plant.den, np.stack([j * tau, j + b * tau, b], axis=1), rtol=1e-14)
    np.testing.assert_allclose(schedule.plant.num[:, -1], 0.35)
    np.testing.assert_array_equal(schedule.plant.num[:, :-1], 0.0)
    # 10 kHz up to 3000 rpm, 8 kHz above (scenario statement)
    np.testing.assert_allclose(schedule.sampling.period, np.where(speed > 3000, 1 / 8000, 1 / 10000), rtol=1e-14)
    np.testing.assert_array_equal(schedule.sampling.delay, 1.0)
    assert schedule.sampling.method == "zoh" and schedule.sampling.prewarp is None


def test_table_interpolation_matches_scipy_and_dead_time_uses_ts():
    schedule = load_schedule(ROOT / "schedules" / "winding_current.yaml")
    x = [0, 10, 15, 20, 25, 30, 35, 40]
    y = [2.0e-3, 2.0e-3, 1.9e-3, 1.7e-3, 1.5e-3, 1.35e-3, 1.2e-3, 1.1e-3]
    points = np.array([[12.5, 20.0], [33.0, 100.0], [40.0, -20.0]])
    models = schedule.evaluate(points)
    # reference: scipy.interpolate.interp1d (linear), an independent implementation
    np.testing.assert_allclose(models.parameters["L"], scipy.interpolate.interp1d(x, y)(points[:, 0]), rtol=1e-14)
    # copper: R = R20 (1 + 0.0039 (T - 20)) (coefficient from memory, as in the file)
    np.testing.assert_allclose(models.parameters["R"], 0.12 * (1 + 0.0039 * (points[:, 1] - 20)), rtol=1e-14)
    np.testing.assert_allclose(models.plant.dead_time, 0.5 * 6.25e-5)
    with pytest.raises(ScheduleError, match="current=41 A"):
        schedule.evaluate(np.array([[41.0, 20.0]]))


def test_zpk_plant_matches_scipy_zpk2tf():
    schedule = load_schedule(ROOT / "schedules" / "conveyor_2d.yaml")
    p = schedule.parameters
    for i in range(0, schedule.points.shape[0], 4):
        wa, wr, za, zr = p["wa"][i], p["wr"][i], p["za"][i], p["zr"][i]
        zeros = [complex(-za * wa, s * wa * math.sqrt(1 - za**2)) for s in (1, -1)]
        poles = [-p["B"][i] / p["Jt"][i], -1 / p["tau_i"][i]] + [
            complex(-zr * wr, s * wr * math.sqrt(1 - zr**2)) for s in (1, -1)
        ]
        gain = p["Kt"][i] / (p["Jt"][i] * p["tau_i"][i]) * wr**2 / wa**2
        # reference: scipy.signal.zpk2tf
        num, den = scipy.signal.zpk2tf(zeros, poles, gain)
        np.testing.assert_allclose(schedule.plant.den[i], np.real(den), rtol=1e-12)
        np.testing.assert_allclose(np.trim_zeros(schedule.plant.num[i], "f"), np.real(num), rtol=1e-12)


SS = """\
  state_space:
    A: [[0, 1, 0], ["-k / m", "-c / m", "1 / m"], [0, 0, "-1 / tau"]]
    B: [[0], [0], ["1 / tau"]]
    C: [[1, 0, 0]]
"""


@pytest.mark.parametrize("d_line", ["", "    D: [[0.5]]\n", "    D: 0.25\n"])
def test_state_space_matches_scipy_ss2tf(tmp_path, d_line):
    text = edited(
        ('  transfer_function:\n    numerator: ["Kt"]\n    denominator: ["J", "B"]\n', SS + d_line),
        ("  B: 1.0e-4\n", "  m: 2.0\n  k: \"800 * (1 + speed / 3000)\"\n  c: 4.0\n  tau: 2.0e-3\n"),
    )
    schedule = load_schedule(write(tmp_path, text))
    d = {"": 0.0, "    D: [[0.5]]\n": 0.5, "    D: 0.25\n": 0.25}[d_line]
    for i, speed in enumerate(schedule.points[:, 0]):
        k = 800 * (1 + speed / 3000)
        a = np.array([[0, 1, 0], [-k / 2.0, -4.0 / 2.0, 1 / 2.0], [0, 0, -1 / 2.0e-3]])
        b = np.array([[0], [0], [1 / 2.0e-3]])
        c = np.array([[1.0, 0, 0]])
        # reference: scipy.signal.ss2tf
        num, den = scipy.signal.ss2tf(a, b, c, [[d]])
        np.testing.assert_allclose(schedule.plant.den[i], den, rtol=1e-12)
        scale = np.max(np.abs(num))
        np.testing.assert_allclose(schedule.plant.num[i], num[0], rtol=1e-10, atol=1e-12 * scale)
        if d == 0.0:
            # relative degree 3: C B = C A B = 0 exactly, so no residue may survive (no spurious zeros)
            np.testing.assert_array_equal(schedule.plant.num[i, :3], 0.0)


def test_evaluate_scale_applies_before_dependent_parameters(tmp_path):
    text = edited(("  B: 1.0e-4\n", '  B: 1.0e-4\n  tau: "J / B"\n'))
    schedule = load_schedule(write(tmp_path, text))
    points = np.array([[500.0], [2500.0]])
    models = schedule.evaluate(points, scale={"J": 1.3, "Kt": 0.9})
    j = 1.3 * 2.0e-4 * (1 + points[:, 0] / 6000)  # hand formula from the YAML above
    np.testing.assert_allclose(models.parameters["J"], j, rtol=1e-14)
    np.testing.assert_allclose(models.parameters["tau"], j / 1.0e-4, rtol=1e-14)
    np.testing.assert_allclose(models.plant.den[:, 0], j, rtol=1e-14)
    np.testing.assert_allclose(models.plant.num[:, -1], 0.9 * 0.05, rtol=1e-14)
    with pytest.raises(InputError, match="computed from B, J"):
        schedule.evaluate(points, scale={"tau": 1.1})
    with pytest.raises(InputError, match="unknown parameter"):
        schedule.evaluate(points, scale={"Jm": 1.1})
    with pytest.raises(InputError, match="shape"):
        schedule.evaluate(np.zeros((2, 2)))


def test_evaluate_names_an_intermediate_point_that_fails(tmp_path):
    text = edited(("  B: 1.0e-4\n", '  B: "1.0e-4 / (speed - 1500)"\n'))
    schedule = load_schedule(write(tmp_path, text))  # grid points avoid 1500
    with pytest.raises(ScheduleError, match="speed=1500 rpm") as caught:
        schedule.evaluate(np.array([[1200.0], [1500.0]]))
    assert caught.value.key_path == "parameters.B"


OVERSHOOT_SPECS = """\
specs:
  min_damping: 0.6
  max_overshoot: 10
  natural_frequency: [50, 2000]
  overrides:
    - where: {speed: [0, 500]}
      set: {min_damping: 0.5, max_overshoot: 15}
"""


def test_spec_values_overrides_and_overshoot(tmp_path):
    schedule = load_schedule(write(tmp_path, BASE + OVERSHOOT_SPECS))
    points = np.array([[0.0], [500.0], [501.0], [6000.0]])
    specs = schedule.spec_values(points)
    # reference: textbook second-order step response, overshoot = exp(-pi z / sqrt(1 - z^2)) (closed form)
    z10 = overshoot_to_damping(10.0)
    assert math.exp(-math.pi * z10 / math.sqrt(1 - z10**2)) == pytest.approx(0.10, rel=1e-12)
    z15 = overshoot_to_damping(15.0)
    assert math.exp(-math.pi * z15 / math.sqrt(1 - z15**2)) == pytest.approx(0.15, rel=1e-12)
    # override region speed in [0, 500]: min_damping 0.5, overshoot 15 % -> stricter of the two
    np.testing.assert_allclose(specs["min_damping"], [max(0.5, z15)] * 2 + [max(0.6, z10)] * 2)
    np.testing.assert_allclose(specs["max_overshoot"], [15, 15, 10, 10])
    np.testing.assert_allclose(specs["min_natural_frequency"], 50)
    np.testing.assert_allclose(specs["max_natural_frequency"], 2000)
    assert np.all(np.isnan(specs["max_pole_radius"])) and np.all(np.isnan(specs["min_delay_margin"]))
    # a textbook value from memory: 0.5 damping gives about 16.3 % overshoot
    assert overshoot_to_damping(16.3) == pytest.approx(0.5, abs=1e-3)


def test_override_can_remove_a_requirement(tmp_path):
    text = BASE + "specs:\n  min_phase_margin: 45\n  overrides:\n    - where: {speed: [2000, 3000]}\n      set: {min_phase_margin: null}\n"
    specs = load_schedule(write(tmp_path, text)).spec_values(np.array([[1000.0], [2000.0]]))
    assert specs["min_phase_margin"][0] == 45 and np.isnan(specs["min_phase_margin"][1])


def test_slow_sampling_is_a_warning_not_an_error(tmp_path):
    # |pole| = B/J is tiny here; add a fast pole: 1/(tau s + 1) with tau = 1e-4 s at ts = 1e-4 s -> 1 rad
    text = edited(('denominator: ["J", "B"]', 'denominator: ["J * 1e-4", "J + B * 1e-4", "B"]'))
    schedule = load_schedule(write(tmp_path, text))
    assert len(schedule.warnings) == 1 and "common practice" in schedule.warnings[0]
    assert "speed=" in schedule.warnings[0]


def test_sections_defaults(tmp_path):
    schedule = load_schedule(write(tmp_path, BASE))
    assert schedule.controller.zero_on == "slowest" and schedule.controller.objective is None
    assert schedule.controller.compare_continuous is False
    assert schedule.codegen.prefix == "unit_base" and schedule.codegen.format == "float32"
    assert schedule.table_checks.between_points == 3 and schedule.table_checks.refine_max_inserted == 0
    assert schedule.tolerances.parameters == {} and schedule.tolerances.samples == "corners"
    assert schedule.specs.min_damping is None and schedule.specs.overrides == ()
    assert schedule.description == "" and schedule.axes[0].unit == "rpm"
    sweep = load_schedule(
        write(tmp_path, edited(("strategy: pole-cancel", "strategy: shape-sweep")), "sweep.yaml")
    ).controller
    assert sweep.objective == "fastest" and sweep.sweep.range == (0.5, 0.999) and sweep.sweep.count == 60


def test_tolerances_are_magnitudes_minus_plus():
    schedule = load_schedule(ROOT / "schedules" / "spindle_speed.yaml")
    assert schedule.tolerances.parameters == {"J": (0.3, 0.3), "Kt": (0.1, 0.05)}
    assert load_schedule(ROOT / "schedules" / "winding_current.yaml").tolerances.samples == (32, 7)


def test_fractional_delay_with_zoh_may_use_ts(tmp_path):
    text = edited(("  period: 1.0e-4\n", '  period: 1.0e-4\n  delay: "1 + 2.0e-5 / ts"\n'))
    schedule = load_schedule(write(tmp_path, text))
    np.testing.assert_allclose(schedule.sampling.delay, 1.2)


def test_tustin_prewarp_is_one_value(tmp_path):
    text = edited(("  period: 1.0e-4\n", "  period: 1.0e-4\n  method: tustin\n  prewarp: \"2 * pi * 500\"\n"))
    assert load_schedule(write(tmp_path, text)).sampling.prewarp == pytest.approx(2 * math.pi * 500)


def test_schedule_error_is_a_gainloom_error(tmp_path):
    with pytest.raises(gainloom.GainloomError):
        load_schedule(tmp_path / "missing.yaml")
    path = tmp_path / "latin1.yaml"
    path.write_bytes(b"name: caf\xe9\n")
    with pytest.raises(ScheduleError, match="not UTF-8"):
        load_schedule(path)


def test_table_over_a_parameter_is_evaluated_after_it(tmp_path):
    # the table is written before the parameter it reads: order in the file does not matter
    text = edited(
        ("  Kt: 0.05\n", "  Kt: {table: {over: flux, x: [0.5, 1.0], y: [0.02, 0.06]}}\n  flux: \"1 - speed / 6000\"\n")
    )
    schedule = load_schedule(write(tmp_path, text))
    flux = 1 - schedule.points[:, 0] / 6000
    # reference: numpy.interp on the same data, written out here
    np.testing.assert_allclose(schedule.parameters["Kt"], np.interp(flux, [0.5, 1.0], [0.02, 0.06]), rtol=1e-14)
    assert not schedule.family.parameters[[p.name for p in schedule.family.parameters].index("Kt")].independent


def test_later_override_wins_and_open_frequency_bounds(tmp_path):
    text = BASE + (
        "specs:\n  min_damping: 0.7\n  natural_frequency: [null, 800]\n  overrides:\n"
        "    - where: {speed: [0, 2000]}\n      set: {min_damping: 0.6}\n"
        "    - where: {speed: [2000, 3000]}\n      set: {min_damping: 0.5, natural_frequency: [10, null]}\n"
    )
    specs = load_schedule(write(tmp_path, text)).spec_values(np.array([0.0, 1000.0, 2000.0, 3000.0]))
    np.testing.assert_array_equal(specs["min_damping"], [0.6, 0.6, 0.5, 0.5])
    np.testing.assert_array_equal(specs["min_natural_frequency"][2:], [10, 10])
    assert np.all(np.isnan(specs["min_natural_frequency"][:2]))
    np.testing.assert_array_equal(specs["max_natural_frequency"][:2], [800, 800])
    assert np.all(np.isnan(specs["max_natural_frequency"][2:]))


def test_two_axis_point_description_in_errors():
    schedule = load_schedule(ROOT / "schedules" / "winding_current.yaml")
    with pytest.raises(ScheduleError) as caught:
        schedule.evaluate(np.array([[10.0, 20.0], [45.0, 60.0]]))
    assert "current=45 A, temperature=60 degC" in caught.value.message
    assert caught.value.key_path == "parameters.L.table.x"


def test_codegen_full_scales_are_read_and_checked(tmp_path):
    text = BASE + "codegen:\n  prefix: spd\n  format: q15\n  error_full_scale: 20\n  output_full_scale: 12.5\n"
    codegen = load_schedule(write(tmp_path, text)).codegen
    assert (codegen.format, codegen.error_full_scale, codegen.output_full_scale) == ("q15", 20.0, 12.5)
    assert load_schedule(write(tmp_path, BASE, "plain.yaml")).codegen.error_full_scale is None
    bad = BASE + "codegen:\n  error_full_scale: -1\n"
    with pytest.raises(ScheduleError) as caught:
        load_schedule(write(tmp_path, bad, "bad.yaml"))
    line = bad.splitlines().index("  error_full_scale: -1") + 1
    assert caught.value.key_path == "codegen.error_full_scale" and caught.value.line == line
    assert "must be positive" in str(caught.value)
