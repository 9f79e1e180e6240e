"""Feedforward and run-time output limits of the controller step: the same
in the generated C (host harness, bit for bit), the Python mirror and the
simulator, and the textbook properties they must have."""

import numpy as np
import pytest
from cases import make_table
from scipy.signal import cont2discrete

from gainloom.codegen.emit import emit_c
from gainloom.codegen.harness import _mirror_outputs, generated_files, harness_program
from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import FixedStepper, lookup_gains, run_steps
from gainloom.design.table import GainTable, TableAxis
from gainloom.simulation.controller import TableController

# A current loop of our own invention: R = 0.5 ohm, L = 2 mH, back-EMF 6 V,
# PI with its zero on the electrical pole, 10 kHz, output limits +-24 V.
R, L, TS, BEMF = 0.5, 2e-3, 1e-4, 6.0
KP, KI = 4.0, 4.0 * R / L


def _current_table(limits=(-24.0, 24.0)):
    axis = (TableAxis("speed", "rpm", np.array([0.0, 1000.0])),)
    return GainTable("pi", axis, {"kp": np.full(2, KP), "ki_ts": np.full(2, KI * TS)}, TS, limits)


def _plant():
    # Reference: scipy.signal.cont2discrete (zero-order hold) of L di/dt = v - R i.
    a, b, _, _, _ = cont2discrete((np.array([[-R / L]]), np.array([[1 / L]]), np.eye(1), np.zeros((1, 1))), TS)
    return float(a[0, 0]), float(b[0, 0])


def _run_loop(number_format, reference, feedforward, samples=4000):
    a, b = _plant()
    scales = {} if number_format.startswith("float") else {"error_full_scale": 10.0, "output_full_scale": 32.0}
    controller = TableController(_current_table(), number_format, np.zeros((samples, 1)), **scales)
    i, integrator = 0.0, []
    for k in range(samples):
        v, _ = controller.step(k, reference, i, feedforward)
        i = a * i + b * (v - BEMF)  # the back-EMF opposes the applied voltage
        integrator.append(controller.states()[0])
    return i, np.array(integrator)


@pytest.mark.parametrize("number_format", ["float64", "float32", "q15", "q31"])
def test_feedforward_of_the_back_emf_leaves_the_integrator_nothing_to_learn(number_format):
    # Reference: at DC the inductor drops nothing, so the applied voltage is
    # R i + e (Ohm's law); an integrating controller at zero error holds all
    # of it in its integrator (final value theorem).  Fed the back-EMF
    # forward, the integrator holds only R i, and with i_ref = 0 it never
    # moves from zero.
    lsb = 0.0 if number_format.startswith("float") else 32.0 * 2.0**-14
    i, x = _run_loop(number_format, 2.0, 0.0)
    assert i == pytest.approx(2.0, abs=1e-3) and x[-1] == pytest.approx(R * 2.0 + BEMF, abs=1e-3 + lsb)
    i, x = _run_loop(number_format, 2.0, BEMF)
    assert i == pytest.approx(2.0, abs=1e-3) and x[-1] == pytest.approx(R * 2.0, abs=1e-3 + lsb)
    i, x = _run_loop(number_format, 0.0, BEMF)
    assert np.all(np.abs(x) <= lsb) and abs(i) <= 1e-3


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_integrator_never_winds_beyond_run_time_limits_with_feedforward(number_format):
    # Reference: the definition of conditional integration (DEVELOPERS.md):
    # while the output is held at a limit by a sustained error, the
    # integrator stops within one increment of the value that puts the
    # unsaturated output (feedforward included) on that limit, instead of
    # growing by ki_ts e every sample; and the output leaves the limit on
    # the first sample whose error reverses (no windup to unwind).
    table = _current_table()
    scales = {} if number_format == "float32" else {"error_full_scale": 10.0, "output_full_scale": 32.0}
    controller = TableController(table, number_format, np.zeros((3000, 1)), **scales)
    low, high, ff, error = -5.0, 9.0, 3.0, 1.5
    tol = 1e-5 if number_format == "float32" else 32.0 * 2.0**-13
    u = []
    for k in range(2000):
        out, _ = controller.step(k, error, 0.0, ff, (low, high))
        u.append(out)
        x = controller.states()[0]
        assert x <= high - ff - KP * error + KI * TS * error + tol
        assert low - tol <= out <= high + tol
    assert u[-1] == pytest.approx(high, abs=tol)
    out, _ = controller.step(2000, -0.5, 0.0, ff, (low, high))
    assert out < high - KP * 0.5  # out of saturation at once: nothing wound up


def test_invalid_run_time_limits_fall_back_to_the_table_limits():
    layout = layout_table(make_table("pid", dims=1), "q15", error_full_scale=20.0)
    gains = lookup_gains(layout, np.full(300, int(layout.axes[0].stored[3])))
    errors = np.full(300, 30000)
    plain = run_steps(layout, gains, errors)
    swapped = run_steps(layout, gains, errors, None, (np.ones(300, bool), np.full(300, 500), np.full(300, -500)))
    # u_max = 12 is the output full scale: the largest Q15 code
    assert np.array_equal(plain.output, swapped.output) and plain.output[-1] == 32767
    narrowed = run_steps(layout, gains, errors, None, (np.ones(300, bool), np.full(300, -500), np.full(300, 500)))
    assert narrowed.output.max() == 500


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_harness_vectors_exercise_feedforward_and_run_time_limits(tmp_path, number_format):
    # The bit-for-bit comparison of C and mirror (tests/codegen/test_codegen_harness.py)
    # is only as good as its vectors: feedforward and run-time limits must
    # change what the controller does, at and away from the limits.
    table = make_table("pid", dims=2, seed=11)
    scale = None if number_format == "float32" else 20.0
    files = emit_c(table, tmp_path, number_format, "motor_ctl", None, error_full_scale=scale)
    program = harness_program(table, generated_files(files))
    assert np.any(program.feedforward != 0) and program.use_limits.mean() > 0.3
    assert np.any(program.use_limits & (program.low > program.high))  # invalid pairs are exercised
    bare = type(program)(**{**program.__dict__, "feedforward": np.zeros_like(program.feedforward),
                            "use_limits": np.zeros_like(program.use_limits)})
    with_extras, without = _mirror_outputs(program)[1], _mirror_outputs(bare)[1]
    changed = np.any(with_extras != without, axis=1)
    assert changed.mean() > 0.5


def test_fixed_stepper_applies_feedforward_before_saturation():
    # u = sat(kp e + x + ff): with ff at +full scale and a small error the
    # output sits on the upper limit; the same ff negated, on the lower one.
    layout = layout_table(_current_table(), "q15", error_full_scale=10.0, output_full_scale=32.0)
    gains = lookup_gains(layout, np.zeros(1, dtype=np.int64))
    up, down = FixedStepper(layout, gains), FixedStepper(layout, gains)
    assert up.step(0, 100, 32767)[0] == round(24 / 32 * 32768)
    assert down.step(0, 100, -32768)[0] == -round(24 / 32 * 32768)
