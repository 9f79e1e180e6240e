"""measured.png: the measured plant's data, fit and fit error (report/measured_plot.py)."""

from __future__ import annotations

from pathlib import Path

import control as ct
import numpy as np
import pytest

import gainloom
from gainloom.report.log import MEASURED_PLOT, render_verification
from gainloom.report.measured_plot import measured_curves, plot_measured

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "measured_speed.yaml"


@pytest.fixture(scope="module")
def demo():
    return gainloom.load_schedule(DEMO)


def test_curves_are_the_fit_and_the_samples(demo):
    measured = demo.family.plant.measured
    fit = measured.fit
    curves = measured_curves(measured, 1)
    np.testing.assert_array_equal(curves.data, measured.response[1][np.isfinite(measured.w[1])])
    # the drawn model is the fitted transfer function: python-control's frequency response of
    # num/den times the dead-time factor
    response = ct.frequency_response(ct.tf(fit.num[1], fit.den[1]), curves.w_model)
    reference = response.magnitude * np.exp(1j * response.phase) * np.exp(-1j * curves.w_model * fit.dead_time[1])
    np.testing.assert_allclose(curves.model, reference, rtol=1e-10)
    used = ~curves.outliers
    assert np.sqrt(np.mean(curves.error[used] ** 2)) == pytest.approx(fit.rms_error[1], rel=1e-9)


def test_plot_is_deterministic_png(demo):
    labels = tuple(demo.describe_point(p) for p in demo.points)
    first = plot_measured(demo.family.plant.measured, labels, np.full(4, 980.0))
    assert first[:8] == b"\x89PNG\r\n\x1a\n"
    assert first == plot_measured(demo.family.plant.measured, labels, np.full(4, 980.0))


def test_the_log_of_a_measured_design_has_the_plot(demo):
    result = gainloom.design_table(demo)
    files = render_verification(schedule=demo, result=result, table=result.table)
    assert MEASURED_PLOT in files
    assert files[MEASURED_PLOT][:8] == b"\x89PNG\r\n\x1a\n"


def test_the_log_carries_the_data_verdict_and_fits_its_schema(demo):
    import json

    from gainloom.report.schema import validate

    result = gainloom.design_table(demo)
    files = render_verification(schedule=demo, result=result, table=result.table, plots=False)
    document = json.loads(files["verification.json"])
    assert validate(document) == []
    assert document["measured"]["passed"] is True
    assert [e["index"] for e in document["measured"]["points"]] == [0, 1, 2, 3]
    assert "## Measured data" in files["verification.md"]
