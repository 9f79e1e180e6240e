"""Crossover objectives (design/crossover.py) against outside references.

Every designed loop is rebuilt here with python-control only (``control.c2d``
ZOH plant, the computation delay as ``z^-d``, the PI of DEVELOPERS.md
``kp + ki_ts z/(z - 1)``) and judged with ``control.margin``.  The largest
reachable crossover comes from a brute-force search written in this file: a
dense grid of PI zeros and, for each, every frequency of a dense grid taken as
the crossover (the gain is then ``1/|C P|`` there), with phase and gain
margins read off ``scipy.signal.freqz``.  Loops are invented test data.
"""

import math

import control
import numpy as np
import pytest
import scipy.signal

import gainloom
from gainloom.design.crossover_job import MARGIN_BACKOFF

BACKOFF_GM, BACKOFF_PM = MARGIN_BACKOFF

RL = """
name: rl-current
variables:
  - name: current
    unit: A
    values: {{start: 0, stop: 30, count: {count}}}
parameters:
  L: "2.0e-3 - 1.2e-3 * current / 30"   # saturating inductance, H
  R: 0.5
plant:
  transfer_function:
    numerator: ["1"]
    denominator: ["L", "R"]
sampling:
  period: 6.25e-5
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: shape-sweep
  objective: {objective}
{extra}
  output_limits: [-27, 27]
specs:
  min_phase_margin: {pm}
  min_gain_margin: {gm}
{more}
"""

TS = 6.25e-5


def reference_loop(L, R, ts, kp, ki_ts, delay=1):
    """Open loop with python-control only: c2d(ZOH) of 1/(L s + R), z^-delay, PI."""
    plant = control.c2d(control.tf([1.0], [L, R]), ts, method="zoh")
    z = control.tf([1.0, 0.0], [1.0], ts)
    return (kp + ki_ts * z / (z - 1)) * plant * z ** (-delay)


def brute_force_crossover(L, R, ts, pm, gm, delay=1, table=False):
    """Largest crossover of any PI with PM >= pm and GM >= gm (brute force, see module doc).

    With ``table`` also its ``(kp, ki_ts)`` (DEVELOPERS.md: PI zero at ``kp/(kp + ki_ts)``,
    loop gain ``kp + ki_ts``)."""
    plant = control.c2d(control.tf([1.0], [L, R]), ts, method="zoh")
    a = np.concatenate([np.asarray(plant.den[0][0], float), np.zeros(delay)])  # times z^delay
    b = np.asarray(plant.num[0][0], float)
    b = np.concatenate([np.zeros(a.size - b.size), b])  # same length: freqz reads powers of z^-1
    w = np.geomspace(10.0, math.pi / ts, 5000)
    _, hp = scipy.signal.freqz(b, a, worN=w * ts)
    zi = np.exp(1j * w * ts)
    best, coefficients = 0.0, (math.nan, math.nan)
    for c in 1.0 - np.geomspace(1e-5, 0.9, 300):  # PI zero in z
        h = hp * (zi - c) / (zi - 1)  # PI shape, gain left out
        mag = np.abs(h)
        phase = np.unwrap(np.angle(h))
        turns = np.floor((phase + np.pi) / (2 * np.pi))  # phase crossovers: -180 deg (mod 360) passed
        cross = np.flatnonzero(turns[1:] != turns[:-1])
        peak_pc = mag[cross].max() if cross.size else 0.0
        k = 1.0 / mag  # gain putting the crossover at each w
        later = np.r_[np.maximum.accumulate(mag[::-1])[::-1][1:], 0.0]  # max |h| above each w
        margin = np.degrees(np.remainder(phase, 2 * np.pi)) - 180.0
        ok = (k * later <= 1) & (margin >= pm) & (20 * np.log10(1.0 / np.maximum(k * peak_pc, 1e-300)) >= gm)
        for j in np.flatnonzero(ok)[::-1]:
            if w[j] <= best:
                break
            # closed-loop poles by numpy.roots: (z - 1) a + k (z - c) b
            char = np.polyadd(np.polymul([1.0, -1.0], a), k[j] * np.polymul([1.0, -c], b))
            if np.all(np.abs(np.roots(char)) < 1):
                best = w[j]
                coefficients = (k[j] * c, k[j] * (1 - c))
                break
    return (best, coefficients) if table else best


def design(tmp_path, objective="max-crossover", extra="", pm=45, gm=6, more="", count=3):
    path = tmp_path / "s.yaml"
    path.write_text(RL.format(objective=objective, extra=extra, pm=pm, gm=gm, more=more, count=count))
    return gainloom.design_table(path)


def test_max_crossover_pi_meets_margins_and_reaches_the_brute_force_crossover(tmp_path):
    result = design(tmp_path)
    assert result.status == ("pass",) * 3, result.notes
    for p, point in enumerate(result.points):
        L = 2.0e-3 - 1.2e-3 * point[0] / 30
        kp = float(result.analysis.coefficients["kp"][p])
        ki_ts = float(result.analysis.coefficients["ki_ts"][p])
        gm, pm, wg, wp = control.margin(reference_loop(L, 0.5, TS, kp, ki_ts))
        # control.margin: the written margins hold
        assert 20 * math.log10(gm) >= 6 - 1e-6
        assert pm >= 45 - 1e-6
        # the design aims at the backed-off margins (design/crossover_job.py MARGIN_BACKOFF)
        reference = brute_force_crossover(L, 0.5, TS, 45 + BACKOFF_PM, 6 + BACKOFF_GM)
        assert wp >= 0.95 * reference, (wp, reference)
        assert wp <= reference * 1.01  # the brute force is an upper bound up to its grid


def test_pi_zero_keeps_integral_action(tmp_path):
    # docs/design.md: the PI zero is no slower than the crossover lets it be at 3 % crossover cost;
    # a zero within two decades of crossover keeps the integral mode (common practice, no source)
    result = design(tmp_path)
    for p in range(3):
        kp = float(result.analysis.coefficients["kp"][p])
        ki_ts = float(result.analysis.coefficients["ki_ts"][p])
        zero_rate = -math.log(kp / (kp + ki_ts)) / TS  # DEVELOPERS.md: zero at kp/(kp + ki_ts)
        L = 2.0e-3 - 1.2e-3 * result.points[p][0] / 30
        _, _, _, wp = control.margin(reference_loop(L, 0.5, TS, kp, ki_ts))
        assert wp / 100 < zero_rate < wp / 2, (zero_rate, wp)


def test_nearest_target_crossover(tmp_path):
    result = design(tmp_path, objective="nearest-target", extra="  target: {crossover: 2000}")
    assert result.status == ("pass",) * 3, result.notes
    for p in range(3):
        kp = float(result.analysis.coefficients["kp"][p])
        ki_ts = float(result.analysis.coefficients["ki_ts"][p])
        L = 2.0e-3 - 1.2e-3 * result.points[p][0] / 30
        gm, pm, _, wp = control.margin(reference_loop(L, 0.5, TS, kp, ki_ts))
        assert wp == pytest.approx(2000, rel=0.01)  # control.margin crossover
        assert pm >= 45 and 20 * math.log10(gm) >= 6


SPINDLE = """
name: spindle-like
variables:
  - name: inertia
    unit: ""
    values: [1, 3, 10]
parameters:
  J: "2.5e-3 * inertia"
  B: 2.0e-4
  Kt: 0.35
  tau_i: 5.0e-4
plant:
  transfer_function:
    numerator: ["Kt"]
    denominator: ["J * tau_i", "J + B * tau_i", "B"]
sampling:
  period: 1.25e-4
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: shape-sweep
  objective: max-crossover
  output_limits: [-20, 20]
specs:
  min_phase_margin: 50
  min_gain_margin: 8
{tolerances}
"""


def spindle_loop(J, Kt, kp, ki_ts, ts=1.25e-4, B=2.0e-4, tau_i=5.0e-4):
    plant = control.c2d(control.tf([Kt], [J * tau_i, J + B * tau_i, B]), ts, method="zoh")
    z = control.tf([1.0, 0.0], [1.0], ts)
    return (kp + ki_ts * z / (z - 1)) * plant / z


def poly_margins(loop):
    """control.stability_margins with its polynomial method: (GM factor, PM deg)."""
    gm, pm, *_ = control.stability_margins(loop, method="poly")
    return gm, pm


def test_near_integrating_speed_loop_is_feasible(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(SPINDLE.format(tolerances=""))
    result = gainloom.design_table(path)
    assert result.status == ("pass",) * 3, result.notes
    for p, point in enumerate(result.points):
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        gm, pm = poly_margins(spindle_loop(2.5e-3 * point[0], 0.35, c["kp"], c["ki_ts"]))
        assert pm >= 50 - 1e-6 and 20 * math.log10(gm) >= 8 - 1e-6  # control.margin
        assert np.all(np.abs(control.feedback(spindle_loop(2.5e-3 * point[0], 0.35, c["kp"], c["ki_ts"]), 1).poles()) < 1)


def test_worst_case_design_passes_at_every_corner(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(SPINDLE.format(tolerances="tolerances:\n  parameters: {J: 0.3, Kt: [-0.1, 0.05]}\n  design: worst-case"))
    result = gainloom.design_table(path)
    assert result.status == ("pass",) * 3, result.notes
    assert not result.table_report.tolerances, result.table_report.tolerances
    for p, point in enumerate(result.points):
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        for j in (0.7, 1.3):
            for kt in (0.9, 1.05):
                loop = spindle_loop(2.5e-3 * point[0] * j, 0.35 * kt, c["kp"], c["ki_ts"])
                gm, pm = poly_margins(loop)
                # control.margin at each tolerance corner
                assert pm >= 50 - 1e-6 and 20 * math.log10(gm) >= 8 - 1e-6, (point, j, kt, pm, gm)


def best_value(notes):
    """The best value the certificate quotes (the number after 'over that space is')."""
    return float(" ".join(notes).split("over that space is ")[1].split(" ")[0])


def test_infeasible_states_binding_spec_and_best_value(tmp_path):
    # every pole inside |z| = 0.6 (decay >= 8173 1/s) with PM >= 60 deg: out of reach of any PI here
    result = design(tmp_path, pm=60, count=2, more="  max_pole_radius: 0.6")
    assert result.status == ("fail", "fail")
    for p in range(2):
        note = " ".join(result.notes[p])
        assert "whole searched space" in note and "max_pole_radius is binding" in note, note
        best = best_value(result.notes[p])
        assert 0.6 < best < 1
        # the compromise in the table meets the other specs and reaches that decay rate:
        # control.margin and the poles of control.feedback
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        L = 2.0e-3 - 1.2e-3 * result.points[p][0] / 30
        loop = reference_loop(L, 0.5, TS, c["kp"], c["ki_ts"])
        gm, pm, _, _ = control.margin(loop)
        assert pm >= 60 - 1e-6 and 20 * math.log10(gm) >= 6 - 1e-6
        assert np.max(np.abs(control.feedback(loop, 1).poles())) <= best + 1e-9


def test_back_off_never_makes_a_point_infeasible(tmp_path):
    first = design(tmp_path, pm=60, count=2, more="  max_pole_radius: 0.6")
    best = max(best_value(n) for n in first.notes)
    # a radius bound just outside the best reachable one: met, though the back-off
    # (design/spec_limits.py: 2 % of 1 - radius further in) may not be
    radius = best + 0.005 * (1 - best)
    result = design(tmp_path, pm=60, count=2, more=f"  max_pole_radius: {radius:.6g}")
    assert result.status == ("pass", "pass"), result.notes


def largest_steps(kp, ki_ts):
    """Largest relative step of each coefficient between neighbouring points."""
    return [float(np.max(np.abs(np.diff(v)) / np.minimum(np.abs(v[1:]), np.abs(v[:-1])))) for v in (kp, ki_ts)]


def test_table_is_as_smooth_as_the_brute_force_reference(tmp_path):
    # issue 9 goal: each coefficient's largest relative step <= 1.5 x the reference's own + 0.05
    result = design(tmp_path, count=7)
    assert all(s == "pass" for s in result.status), result.notes
    ref = [brute_force_crossover(2.0e-3 - 1.2e-3 * pt[0] / 30, 0.5, TS, 45 + BACKOFF_PM, 6 + BACKOFF_GM, table=True)[1]
           for pt in result.points]
    ours = largest_steps(result.analysis.coefficients["kp"], result.analysis.coefficients["ki_ts"])
    theirs = largest_steps(np.array([r[0] for r in ref]), np.array([r[1] for r in ref]))
    for mine, reference in zip(ours, theirs):
        assert mine <= 1.5 * reference + 0.05, (ours, theirs)


SCALED = """
name: scaled-rl
variables:
  - name: scale
    unit: ""
    values: [1, 2, 3]
parameters:
  L: "1.0e-3 * scale"
  R: "0.4 * scale"
plant:
  transfer_function:
    numerator: ["1"]
    denominator: ["L", "R"]
sampling:
  period: 6.25e-5
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: shape-sweep
  objective: max-crossover
  output_limits: [-27, 27]
specs:
  min_phase_margin: 45
  min_gain_margin: 6
"""


def test_identical_normalised_problems_get_the_same_design(tmp_path):
    # L and R scaled together: the same loop up to a gain, so the same PI zero and a gain
    # in proportion (ZOH of 1/(L s + R) scales with 1/R exactly; closed form, from memory)
    path = tmp_path / "s.yaml"
    path.write_text(SCALED)
    result = gainloom.design_table(path)
    assert result.status == ("pass",) * 3
    kp = np.asarray(result.analysis.coefficients["kp"])
    ki_ts = np.asarray(result.analysis.coefficients["ki_ts"])
    np.testing.assert_allclose(kp / (kp + ki_ts), kp[0] / (kp[0] + ki_ts[0]), rtol=1e-9)  # PI zero
    np.testing.assert_allclose(kp / np.array([1, 2, 3]), kp[0], rtol=1e-9)


@pytest.mark.parametrize(
    ("extra", "more", "message"),
    [
        ("  sweep: {range: [0.9, 0.99], count: 5}", "", "searches the whole controller space"),
        ("  target: {crossover: 0}", "", "target crossover"),
        ("  target: {crossover: 100, damping: 0.7}", "", "not both"),
    ],
)
def test_schedule_errors_are_located(tmp_path, extra, more, message):
    path = tmp_path / "s.yaml"
    objective = "nearest-target" if "target" in extra else "max-crossover"
    path.write_text(RL.format(objective=objective, extra=extra, pm=45, gm=6, more=more, count=2))
    with pytest.raises(gainloom.errors.ScheduleError) as caught:
        gainloom.load_schedule(path)
    assert message in str(caught.value) and "s.yaml" in str(caught.value)


def test_worst_case_needs_a_crossover_objective(tmp_path):
    path = tmp_path / "s.yaml"
    text = RL.format(objective="fastest", extra="", pm=45, gm=6, count=2,
                     more="tolerances:\n  parameters: {R: 0.2}\n  design: worst-case")
    path.write_text(text)
    with pytest.raises(gainloom.errors.DesignError, match="worst-case needs objective max-crossover"):
        gainloom.design_table(path)


def test_step_specs_fall_back_over_the_whole_space(tmp_path):
    # overshoot is not a gain set: the largest-crossover PI at PM 50 deg overshoots more than 8 %,
    # so the design takes the best-ranked (shape, gain) whose step response passes
    path = tmp_path / "s.yaml"
    path.write_text(SPINDLE.format(tolerances="").replace("  min_gain_margin: 8", "  min_gain_margin: 8\n  max_overshoot: 8"))
    result = gainloom.design_table(path)
    assert result.status == ("pass",) * 3, result.notes
    assert all("missed overshoot/settling" in " ".join(n) for n in result.notes), result.notes
    for p, point in enumerate(result.points):
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        closed = control.feedback(spindle_loop(2.5e-3 * point[0], 0.35, c["kp"], c["ki_ts"]), 1)
        info = control.step_info(closed, T=np.arange(0, 0.5, 1.25e-4))  # python-control step response
        assert info["Overshoot"] <= 8 + 1e-6
        gm, pm = poly_margins(spindle_loop(2.5e-3 * point[0], 0.35, c["kp"], c["ki_ts"]))
        assert pm >= 50 - 1e-6 and 20 * math.log10(gm) >= 8 - 1e-6


def test_lead_keeps_low_frequency_gain(tmp_path):
    # docs/design.md tracking rule: without an integrator the loop gain at zero frequency is >= 1
    path = tmp_path / "s.yaml"
    path.write_text(RL.format(objective="max-crossover", extra="", pm=45, gm=6, more="", count=2)
                    .replace("structure: pi", "structure: lead"))
    result = gainloom.design_table(path)
    assert result.status == ("pass", "pass"), result.notes
    for p, point in enumerate(result.points):
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        L = 2.0e-3 - 1.2e-3 * point[0] / 30
        plant = control.c2d(control.tf([1.0], [L, 0.5]), TS, method="zoh")
        z = control.tf([1.0, 0.0], [1.0], TS)
        loop = c["kc"] * (z - c["zc"]) / (z - c["pc"]) * plant / z  # DEVELOPERS.md lead form
        assert abs(control.dcgain(loop)) >= 1 - 1e-9  # python-control: L(z = 1)
        gm, pm, _, _ = control.margin(loop)
        assert pm >= 45 - 1e-6 and 20 * math.log10(gm) >= 6 - 1e-6


def test_worst_case_step_specs_hold_at_every_corner(tmp_path):
    # worst case means every spec at each tolerance corner, the step-response ones too:
    # overshoot checked with python-control's step response at all four corners (before, the
    # nominal-only step check left 3 of these points over 15 % at a corner)
    tolerances = "tolerances:\n  parameters: {J: 0.3, Kt: [-0.1, 0.05]}\n  design: worst-case"
    path = tmp_path / "s.yaml"
    path.write_text(SPINDLE.format(tolerances=tolerances).replace("  min_gain_margin: 8", "  min_gain_margin: 8\n  max_overshoot: 15"))
    result = gainloom.design_table(path)
    assert result.status == ("pass",) * 3, result.notes
    assert not result.table_report.tolerances, result.table_report.tolerances
    worst = 0.0
    for p, point in enumerate(result.points):
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        for j in (0.7, 1.3):
            for kt in (0.9, 1.05):
                closed = control.feedback(spindle_loop(2.5e-3 * point[0] * j, 0.35 * kt, c["kp"], c["ki_ts"]), 1)
                info = control.step_info(closed, T=np.arange(0, 0.5, 1.25e-4))  # python-control step response
                assert info["Overshoot"] <= 15 + 0.05, (point, j, kt, info["Overshoot"])
                worst = max(worst, info["Overshoot"])
    assert worst > 10  # near the bound at some corner at some corner: the check is not vacuous
