"""The outer loop of a cascade with the inner loop at its tolerance corners.

The inner plant is scaled at each corner while the inner table's gains stay
as designed; the outer margins there are checked against a lifted
state-space model of the whole sampled-data loop built in this file
(python-control's ZOH matrices at half the PWM period, the PI current
controller's difference equations of DEVELOPERS.md, lifting over the 8 PWM
periods of one speed-loop period written out here) and python-control's
``stability_margins``.
"""

from __future__ import annotations

import control
import numpy as np
import pytest
from cases import small_servo_cascade

from gainloom import design_cascade, load_cascade
from gainloom.design.analysis import analyse
from gainloom.design.cascade import outer_plant, split_scale, with_inner_tolerances
from gainloom.design.engine import design, limits_at
from gainloom.schedule.model import Tolerances

PWM_PERIOD, FACTOR = 6.25e-5, 8  # from schedules/servo_cascade.yaml


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    path = tmp_path_factory.mktemp("corners") / "servo_small.yaml"
    path.write_text(small_servo_cascade("parameters: {L: 0.4, R20: 0.2}"), encoding="utf-8")
    cascade = load_cascade(path)
    return cascade, design(cascade.loops[0].schedule)


def _lifted_speed_plant(R, L, Kt, J, B, kp, ki_ts):
    """Reference -> speed at the speed-loop rate, built independently of gainloom.

    Full-step state ``[i, w, x_pi, u[k-1], u[k-2]]``: the voltage ``u[k-2]``
    drives the first half of step ``k`` and ``u[k-1]`` the second (one sample
    of computation delay plus the half-sample PWM dead time).
    """
    plant = control.ss([[-R / L, 0.0], [Kt / J, -B / J]], [[1.0 / L], [0.0]], np.eye(2), np.zeros((2, 1)))
    half = control.sample_system(plant, PWM_PERIOD / 2, method="zoh")
    Ad, Bd = np.asarray(half.A), np.asarray(half.B)[:, 0]
    M, G = np.zeros((5, 5)), np.zeros(5)
    # e = r - i; x_pi[k] = x_pi[k-1] + ki_ts e; u[k] = kp e + x_pi[k]
    M[:2, :2] = Ad @ Ad
    M[:2, 4] = Ad @ Bd
    M[:2, 3] = Bd
    M[2, 0], M[2, 2], G[2] = -ki_ts, 1.0, ki_ts
    M[3, 0], M[3, 2], G[3] = -(kp + ki_ts), 1.0, kp + ki_ts
    M[4, 3] = 1.0
    # lifting: the reference held over FACTOR steps, speed read at the first
    Phi, Gamma = np.eye(5), np.zeros(5)
    for _ in range(FACTOR):
        Gamma = M @ Gamma + G
        Phi = M @ Phi
    return control.ss(Phi, Gamma[:, None], [[0.0, 1.0, 0.0, 0.0, 0.0]], [[0.0]], FACTOR * PWM_PERIOD)


@pytest.mark.parametrize("factors", [{}, {"L": 1.4, "R20": 0.8}, {"L": 0.6, "R20": 1.2}])
def test_outer_margins_at_an_inner_corner_match_a_lifted_state_space_model(small, factors):
    cascade, inner_result = small
    inner, outer_loop = cascade.loops[0].schedule, cascade.loops[1]
    outer = outer_loop.schedule
    point, inner_point = np.array([[6000.0, 10.0]]), np.array([[30.0, 100.0]])  # grid points of both loops
    plant = outer_plant(outer, inner, inner_result.table, FACTOR, point, inner_point, None, factors or None)
    gains = {"kp": np.array([1.5]), "ki_ts": np.array([0.0225])}  # an invented speed PI, crossover ~300 rad/s
    got = analyse(plant, "pi", gains, limits_at(outer, point), step=False)

    # Parameters written out from the demo file at 30 A, 100 degC, 6000 rpm, 10x inertia.
    R = 0.35 * factors.get("R20", 1.0) * (1 + 0.0039 * 80)
    L = 1.0e-3 * factors.get("L", 1.0)
    table = inner_result.table
    i, j = list(table.axes[0].values).index(30.0), list(table.axes[1].values).index(100.0)
    kp_i, ki_i = (float(table.coefficients[name][i, j]) for name in ("kp", "ki_ts"))
    lifted = _lifted_speed_plant(R, L, 0.12, 6.0e-5 * 10, 2.0e-5 + 6.0e-5, kp_i, ki_i)
    T = FACTOR * PWM_PERIOD
    speed_pi = control.tf([1.5 + 0.0225, -1.5], [1.0, -1.0], T)  # kp + ki_ts z / (z - 1)
    delay = control.tf([1.0], [1.0, 0.0], T)  # one speed-loop sample of computation
    gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(speed_pi * control.tf(lifted) * delay)
    # reference: python-control stability_margins on the lifted model built above
    assert got.phase_margin[0] == pytest.approx(pm, abs=1e-4)
    assert got.gain_margin_db[0] == pytest.approx(20 * np.log10(gm), abs=1e-4)
    assert got.crossover[0] == pytest.approx(wgc, rel=1e-6)


def test_wider_inductance_lowers_the_outer_phase_margin(small):
    # property: a slower current loop (more inductance, same gains) leaves
    # the speed loop less phase at its crossover (common practice, no source)
    cascade, inner_result = small
    inner, outer = cascade.loops[0].schedule, cascade.loops[1].schedule
    point, inner_point = np.array([[0.0, 1.0]]), np.array([[0.0, 40.0]])
    gains = {"kp": np.array([0.15]), "ki_ts": np.array([0.00225])}
    margins = [analyse(outer_plant(outer, inner, inner_result.table, FACTOR, point, inner_point, None, {"L": f}),
                       "pi", gains, limits_at(outer, point), step=False).phase_margin[0] for f in (0.8, 1.0, 1.4)]
    assert margins[0] > margins[1] > margins[2]


def test_inner_tolerances_are_named_by_their_loop_and_split_back():
    outer = Tolerances(parameters={"J": (0.3, 0.3)}, design="worst-case")
    merged = with_inner_tolerances(outer, "current", Tolerances(parameters={"L": (0.2, 0.1)}))
    assert merged.parameters == {"J": (0.3, 0.3), "current.L": (0.2, 0.1)} and merged.design == "worst-case"
    assert split_scale({"J": 0.7, "current.L": 1.1}, "current") == ({"J": 0.7}, {"L": 1.1})
    assert split_scale(None, "current") == (None, None)
    assert with_inner_tolerances(outer, "current", Tolerances()) is outer


def test_worst_case_outer_design_holds_at_every_inner_corner(tmp_path):
    path = tmp_path / "servo_small_worst_case.yaml"
    path.write_text(small_servo_cascade("parameters: {L: 0.4}", "design: worst-case"), encoding="utf-8")
    result = design_cascade(load_cascade(path))
    pair = result.checks.pairs[0]
    assert pair.corners == 2  # L x0.6 and x1.4
    # the outer specs (GM 6 dB, PM 45 deg, the file's) hold at every pair and corner
    assert pair.failed_pairs == 0 and pair.min_phase_margin >= 45 and pair.min_gain_margin_db >= 6
    assert result.results[1].passed
    # the binding corner is the slow current loop: most inductance
    assert all(w["corner"] == {"current.L": 1.4} for w in pair.worst_per_point)
