"""Plots of the verification log: the drawn data and the file properties.

References: python-control ``step_response`` of ``feedback(L, 1)`` for the
plotted step; the PNG IHDR layout (width and height as big-endian 32-bit
integers at bytes 16-24) from the PNG specification, from memory.
"""

from __future__ import annotations

import struct

import control
import numpy as np
import pytest

from gainloom import look
from gainloom.lti.loop import Loop
from gainloom.report import plots
from gainloom.report.markdown import number


def _entry(index: int, failed: list[str], margins: dict[str, float]) -> dict:
    return {
        "index": index,
        "label": f"p{index}",
        "failed": failed,
        "specs": {name: {"margin": m, "limit": 1.0, "value": 1.0 + m, "pass": m >= 0} for name, m in margins.items()},
    }


def test_chosen_points_first_last_and_worst():
    points = [
        _entry(0, [], {"min_damping": 0.5}),
        _entry(1, [], {"min_damping": 0.05, "system_type": 0.0, "stable": 0.001}),
        _entry(2, [], {"min_damping": 0.4}),
    ]
    # system_type (met with equality) and stable (near 1 at fast sampling)
    # do not pick the worst point; min_damping's 0.05 does.
    assert plots.chosen_points(points) == [(0, "first"), (2, "last"), (1, "worst")]
    points[0]["failed"] = ["min_damping"]
    assert plots.chosen_points(points) == [(0, "first and worst"), (2, "last")]
    assert plots.chosen_points(points[:1]) == [(0, "first and last and worst")]


def test_plotted_step_is_the_sampled_closed_loop_step():
    # L(z) = 0.2 / (z - 0.9) z^-1: any stable sampled loop will do.
    ts = 0.01
    loop = Loop(num=np.array([[0.0, 0.0, 0.2]]), den=np.array([[1.0, -0.9, 0.0]]), ts=np.array([ts]))
    y = plots.step_response(loop, 0, 80)
    sys = control.feedback(control.tf([0.2], [1.0, -0.9, 0.0], ts), 1)
    reference = control.step_response(sys, T=np.arange(80) * ts).outputs
    np.testing.assert_allclose(y, np.ravel(reference), rtol=1e-12, atol=1e-14)


def test_png_size_is_fixed():
    figure = look.new_figure((4.0, 3.0))
    figure.add_subplot(1, 1, 1).plot([0, 1], [0, 1])
    data = look.png_bytes(figure)
    width, height = struct.unpack(">II", data[16:24])
    assert (width, height) == (4 * look.DPI, 3 * look.DPI)
    assert look.png_bytes(figure) == data


@pytest.mark.parametrize(
    ("value", "text"),
    [(None, "-"), ("inf", "∞"), ("nan", "-"), (0.0, "0"), (1.23456, "1.235"), (1.5e-5, "1.500e-05"), (3, "3"),
     (True, "yes")],
)
def test_numbers_for_reading(value, text):
    assert number(value) == text
