"""Gain tables of our own invention for the code-generation tests, and checks
of how they are laid out in each number format."""

import numpy as np
import pytest
from cases import make_table

from gainloom import CodegenError
from gainloom.codegen.layout import GAIN_COEFFICIENTS, layout_table
from gainloom.design.table import GainTable, TableAxis
from gainloom.names import CONTROLLER_STRUCTURES, NUMBER_FORMATS


@pytest.mark.parametrize("number_format", NUMBER_FORMATS)
@pytest.mark.parametrize("structure", CONTROLLER_STRUCTURES)
def test_stored_coefficients_are_within_half_an_lsb(number_format, structure):
    # Reference: round-to-nearest puts every value within half an LSB of the
    # real number (definition of rounding); float32 within half an ulp
    # (IEEE 754 round to nearest).
    table = make_table(structure, dims=2)
    layout = layout_table(table, number_format)
    for item in layout.coefficients:
        designed = table.coefficients[item.name]
        if item.frac is None:
            bound = np.spacing(np.abs(designed).astype(np.float32)).astype(float) / 2
        else:
            bound = 2.0 ** -item.frac / 2 * item.scale
        assert np.all(np.abs(item.physical - designed) <= bound * (1 + 1e-12)), item.name
        if item.frac is not None:
            # the largest magnitude uses the top bit: one more fraction bit would overflow
            peak = np.max(np.abs(designed / item.scale))
            assert round(peak * 2.0 ** (item.frac + 1)) > 2 ** (layout.fmt.bits - 1) - 1


def test_gain_coefficients_are_normalised_by_the_full_scales():
    # kp_stored = kp * E / U (our documented scaling); kd_a is dimensionless.
    table = make_table("pid")
    layout = layout_table(table, "q31", error_full_scale=2.0, output_full_scale=20.0)
    kp = layout.coefficient("kp")
    assert kp.scale == pytest.approx(10.0)
    np.testing.assert_allclose(kp.stored * 2.0**-kp.frac, table.coefficients["kp"] * 2.0 / 20.0, atol=2.0**-kp.frac)
    assert layout.coefficient("kd_a").scale == 1.0
    assert set(GAIN_COEFFICIENTS) == {"kp", "ki_ts", "kd_b", "kc"}
    # output limits in Q3.28 of full scale: -10/20 * 2^28 and 12/20 * 2^28
    assert layout.limits == (-(2**27), round(0.6 * 2**28))


def test_layout_refuses_what_does_not_fit():
    table = make_table("pi")
    with pytest.raises(CodegenError, match="does not cover the output limits"):
        layout_table(table, "q15", output_full_scale=5.0)
    with pytest.raises(CodegenError, match="float32 works in physical units"):
        layout_table(table, "float32", error_full_scale=1.0)
    big = GainTable("p", table.axes, {"kp": np.full(7, 1e6)}, 1e-4, (-1.0, 1.0))
    with pytest.raises(CodegenError, match="kp.*reaches 1e\\+06.*below 32768"):
        layout_table(big, "q15")
    with pytest.raises(CodegenError, match="unknown number format 'q16'"):
        layout_table(table, "q16")


def test_uniform_fixed_point_axis_is_exactly_uniform():
    layout = layout_table(make_table("pi", dims=2, uniform=True), "q15")
    for axis in layout.axes:
        assert axis.uniform
        assert np.all(np.diff(axis.stored) == axis.step)
        assert np.max(np.abs(axis.stored)) <= 2**30
        # stored breakpoints stay within (n - 1)/2 LSB of the rounded designed ones
        assert np.max(np.abs(axis.stored - np.round(axis.values * 2.0**axis.frac))) <= (axis.size - 1) / 2


def test_axis_too_fine_for_float32_is_refused():
    axes = (TableAxis("speed", "rpm", np.array([1e8, 1e8 + 1, 1e8 + 2])),)
    table = GainTable("p", axes, {"kp": np.ones(3)}, 1e-4, (-1.0, 1.0))
    with pytest.raises(CodegenError, match="not strictly increasing once rounded to float32"):
        layout_table(table, "float32")
