"""Quantisation re-check: rounded coefficients verified again.

References: python-control (``c2d`` ZOH, ``stability_margins``) for the gain
margins of the rounded and unrounded loops; the codegen Python mirror
(``mirror.lookup_gains``) for the stored integers.
"""

from __future__ import annotations

import math
import textwrap
import warnings

import control
import numpy as np
import pytest

import gainloom
from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import lookup_gains
from gainloom.codegen.qformat import dequantize
from gainloom.codegen.quantisation import check_quantisation, dequantised_table, pole_shift
from gainloom.errors import InputError

# An invented speed loop (test variant of the spindle demo) with relaxed
# step specs so that the design passes everywhere.
SCHEDULE = textwrap.dedent(
    """\
    name: quantisation-test
    variables:
      - name: speed
        unit: rpm
        values: {start: 0, stop: 6000, count: 5}
    parameters:
      Kt: 0.35
      J: "2.5e-3 * (1 + 0.15 * speed / 6000)"
      B: "2.0e-4 + 1.5e-4 * speed / 1000"
      tau_i: 5.0e-4
    plant:
      transfer_function:
        numerator: ["Kt"]
        denominator: ["J * tau_i", "J + B * tau_i", "B"]
    sampling:
      period: 1.0e-4
      method: zoh
      delay: 1
    controller:
      structure: pi
      strategy: dominant-pair
      target: {damping: 0.7, natural_frequency: 300}
      output_limits: [-20, 20]
    specs:
      min_damping: 0.6
      natural_frequency: [50, 2000]
      min_phase_margin: 45
      system_type: 1
    {extra}
    table:
      between_points: 2
    """
)
TS = 1.0e-4


def _write(tmp_path, name: str, extra: str = "") -> str:
    path = tmp_path / name
    path.write_text(SCHEDULE.replace("{extra}", extra), encoding="utf-8")
    return str(path)


@pytest.fixture(scope="module")
def designed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("quant")
    path = _write(folder, "demo.yaml")
    result = gainloom.design_table(path)
    assert result.passed, result.as_document()["points"]
    return path, result


def _reference_gain_margin(speed: float, kp: float, ki_ts: float) -> float:
    """Gain margin (factor) of the sampled loop, built with python-control only.

    Plant Kt/((J s + B)(tau s + 1)) with the demo's parameter formulas,
    zero-order hold (python-control c2d 'zoh'), one sample of computation
    delay z^-1, PI controller kp + ki_ts z/(z - 1) (DEVELOPERS.md form).
    """
    kt, tau = 0.35, 5.0e-4
    j = 2.5e-3 * (1 + 0.15 * speed / 6000)
    b = 2.0e-4 + 1.5e-4 * speed / 1000
    plant = control.c2d(control.tf([kt], np.polymul([j, b], [tau, 1.0])), TS, method="zoh")
    delay = control.tf([1.0], [1.0, 0.0], TS)
    pi = control.tf([kp + ki_ts, -kp], [1.0, -1.0], TS)
    with warnings.catch_warnings():
        # python-control evaluates the loop at its integrator pole z = 1
        # internally and warns about it (its warning, not ours)
        warnings.simplefilter("ignore", RuntimeWarning)
        gm, _pm, _sm, _wpc, _wgc, _wms = control.stability_margins(pi * delay * plant, method="poly")
    return float(gm)


def test_q15_table_of_demo_passes(designed):
    path, result = designed
    quant = check_quantisation(path, result.table, "q15")
    assert quant.passed and quant.rounded.passed
    # Rounding did happen (the check cannot pass vacuously) ...
    assert quant.max_pole_shift > 0
    # ... and is bounded: Q15 keeps 15 bits below the largest magnitude of
    # each array, so every coefficient moves by at most half an LSB:
    # 2**-16 * 2**ceil(log2 max|c|) (definition of rounding to nearest).
    for item in quant.layout.coefficients:
        top = float(np.max(np.abs(result.table.coefficients[item.name])))
        assert quant.coefficient_errors[item.name] <= 0.5 * 2.0 ** -item.frac * item.scale * (1 + 1e-12)
        assert quant.coefficient_errors[item.name] <= 2.0 ** -15 * 2 ** math.ceil(math.log2(top))
    doc = quant.as_document()
    assert doc["number_format"] == "q15" and doc["broken"] == []


@pytest.mark.parametrize("fmt", ["q15", "q31", "float32"])
def test_dequantised_values_equal_the_mirror_bit_for_bit(designed, fmt):
    path, result = designed
    quant = check_quantisation(path, result.table, fmt)
    layout = layout_table(result.table, fmt)
    # The mirror's lookup at each stored breakpoint returns the stored value
    # (weight 0 or 1); back in physical units it must be our value exactly.
    looked_up = lookup_gains(layout, layout.axes[0].stored)
    for item in layout.coefficients:
        if layout.fmt.is_fixed:
            physical = dequantize(looked_up[item.name], item.frac) * item.scale
        else:
            physical = looked_up[item.name].astype(np.float64)
        ours = quant.table.coefficients[item.name]
        assert np.array_equal(physical.view(np.int64), np.asarray(ours, dtype=np.float64).view(np.int64))


def test_gain_margin_at_the_limit_fails_after_rounding(designed, tmp_path):
    _path, result = designed
    table = result.table
    layout = layout_table(table, "q15")
    speeds = table.axes[0].values
    stored = {c.name: c.physical for c in layout.coefficients}
    # python-control gain margins before and after rounding, per point
    before = np.array([_reference_gain_margin(s, table.coefficients["kp"][i], table.coefficients["ki_ts"][i])
                       for i, s in enumerate(speeds)])
    after = np.array([_reference_gain_margin(s, stored["kp"][i], stored["ki_ts"][i]) for i, s in enumerate(speeds)])
    drop = 20 * np.log10(before) - 20 * np.log10(after)
    p = int(np.argmax(drop))
    assert drop[p] > 0, "rounding raised every gain margin: choose another table"
    # Put the spec between the two margins at that point: the table meets it
    # as designed and misses it once rounded (numbers derived above, not
    # taken from the code under test).
    limit_db = float(20 * np.log10(before[p]) - 0.5 * drop[p])
    speed = float(speeds[p])
    extra = (
        "  overrides:\n"
        f"    - where: {{speed: [{speed!r}, {speed!r}]}}\n"
        f"      set: {{min_gain_margin: {limit_db!r}}}\n"
    )
    tight = _write(tmp_path, "tight.yaml", extra)
    quant = check_quantisation(tight, table, "q15")
    assert quant.original.status[p] == "pass"
    assert not quant.passed
    assert {"where": "grid", "point": quant.original.point_labels[p], "spec": "min_gain_margin"} in quant.broken
    assert quant.points[p].broken == ("min_gain_margin",)
    # Our margins agree with python-control's to well inside half the gap,
    # so both tools put the two tables on the same sides of the limit.
    assert quant.points[p].before["gain_margin_db"] == pytest.approx(20 * np.log10(before[p]), abs=0.1 * drop[p])
    assert quant.points[p].after["gain_margin_db"] == pytest.approx(20 * np.log10(after[p]), abs=0.1 * drop[p])


def test_pole_shift_pairs_poles_one_to_one():
    # Hand-made sets: the sort order by |z| swaps but the pairing must not
    # (distance computed by hand: the pair 0.5 -> 0.5001 moves 1e-4).
    before = np.array([0.5, -0.5000001])
    after = np.array([-0.5000002, 0.5001])
    assert pole_shift(before, after) == pytest.approx(1e-4, rel=1e-9)
    assert pole_shift(np.array([0.5]), np.array([np.inf])) == math.inf


def test_q15_rounding_of_the_shipped_spindle_demo_breaks_no_spec():
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "schedules" / "spindle_speed.yaml"
    result = gainloom.design_table(path)
    quant = check_quantisation(path, result.table, "q15")
    # Whatever the design's own verdict, rounding to Q15 must not turn a
    # passing spec into a failing one anywhere (grid, between, tolerances).
    assert quant.passed, quant.broken
    assert [p.index for p in quant.points] == list(range(len(result.status)))
    # the verification of the unrounded table agrees with the design's own
    assert quant.original.status == result.status


def test_a_design_result_as_baseline_gives_the_same_verdicts(designed):
    # The full run hands the design result in instead of verifying the
    # unrounded table a second time; both paths must report the same.
    path, result = designed
    alone = check_quantisation(path, result.table, "q15").as_document()
    reused = check_quantisation(path, result.table, "q15", baseline=result).as_document()
    assert reused == alone
    with pytest.raises(InputError, match="this very table"):
        check_quantisation(path, result.table, "q15", baseline=gainloom.verify(path, dequantised_table(
            layout_table(result.table, "q15"))))
