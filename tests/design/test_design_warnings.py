"""Per-point warnings: no silent fallbacks (checked against python-control and numpy roots)."""

from __future__ import annotations

import json
import math
import re
import warnings

import control
import numpy as np
import pytest
import yaml

import gainloom

TS = 1.0e-4
# Invented speed loop: torque constant 0.05 N m/A, inertia rising with speed.
SCHEDULE = """\
name: warn-check
variables:
  - name: speed
    unit: rpm
    values: [0, 3000]
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
  method: zoh
  delay: 1
controller:
  structure: pi
{controller}
  output_limits: [-10, 10]
specs:
{specs}
codegen:
  prefix: wrn
  format: float32
"""


def _write(tmp_path, controller: str, specs: str):
    path = tmp_path / "loop.yaml"
    path.write_text(SCHEDULE.format(controller=controller, specs=specs), encoding="utf-8")
    return path


def _plant(speed: float):
    # Independent path: python-control's ZOH and one sample of delay.
    J = 2.0e-4 * (1 + speed / 6000)
    return control.c2d(control.tf([0.05], [J, 1.0e-4]), TS) * control.tf([1], [1, 0], TS)


def _number(pattern: str, text: str) -> float:
    return float(re.search(pattern, text).group(1))


def test_dominant_pair_fallback_names_the_spec_and_the_target_miss(tmp_path):
    path = _write(tmp_path, "  strategy: dominant-pair\n  target: {damping: 0.7, natural_frequency: 1500}",
                  "  min_gain_margin: 16\n  min_phase_margin: 45\n  max_overshoot: 40")
    result = gainloom.design_table(path)
    assert result.status == ("pass", "pass")
    for p, texts in enumerate(result.point_warnings):
        own = next(t for t in texts if "magnitude-condition gain" in t)
        target = next(t for t in texts if t.startswith("target pole"))
        assert "min_gain_margin" in own
        # Reference: python-control's gain margin at the magnitude-condition gain
        # (same zero as the table's PI: the strategy only moves the gain)
        kp = result.table.coefficients["kp"].ravel()[p]
        ki_ts = result.table.coefficients["ki_ts"].ravel()[p]
        zero = kp / (kp + ki_ts)
        asked = _number(r"gain K = ([0-9.e+-]+) fails", own)
        loop = control.tf([asked, -asked * zero], [1, -1], TS) * _plant(result.points[p, 0])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            gm, *_ = control.stability_margins(loop)
        assert _number(r"gain margin ([0-9.e+-]+) dB", own) == pytest.approx(20 * math.log10(gm), rel=1e-5)
        assert 20 * math.log10(gm) < 16
        # Reference: numpy roots of the closed loop of the table's gains; the
        # dominant pole's distance to the target pole in units of wn
        chosen = control.tf([kp + ki_ts, -kp], [1, -1], TS) * _plant(result.points[p, 0])
        num, den = control.tfdata(chosen)
        roots = np.roots(np.polyadd(den[0][0], num[0][0])).astype(complex)
        s = np.log(roots[np.argmax(np.abs(roots))]) / TS
        s_target = complex(-0.7 * 1500, 1500 * math.sqrt(1 - 0.49))
        miss = abs(complex(s.real, abs(s.imag)) - s_target) / 1500
        assert miss > 0.05
        assert _number(r"missed by ([0-9.e+-]+) %", target) == pytest.approx(100 * miss, rel=1e-2)
    document = result.as_document()
    assert all(e["warnings"] == list(result.point_warnings[e["index"]]) for e in document["points"])
    assert not any(e["compromise"] for e in document["points"])


def test_infeasible_point_is_a_marked_compromise_everywhere(tmp_path, capsys):
    from gainloom.cli import main

    path = _write(tmp_path, "  strategy: pole-cancel", "  min_phase_margin: 50\n  min_crossover: 20000")
    code = main(["design", str(path), "--out", str(tmp_path / "out"), "--quiet", "--no-simulate"])
    out = capsys.readouterr().out
    assert code == 1
    table_rows = [line for line in out.splitlines() if line.startswith("speed=") and " fail !" in line]
    assert len(table_rows) == 2  # the marker in the CLI table
    assert out.count("warning: no design found meets every spec (min_crossover binds)") == 2
    gains = yaml.safe_load((tmp_path / "out" / "gains.yaml").read_text())
    assert gains["passed"] is False
    assert [e["compromise"] for e in gains["points"]] == [True, True]
    log = json.loads((tmp_path / "out" / "verification.json").read_text())
    for entry in log["points"]:
        assert entry["compromise"] is True
        assert any("min_crossover: gain crossover" in w and "needs >= 20000 rad/s" in w for w in entry["warnings"])
    markdown = (tmp_path / "out" / "verification.md").read_text()
    section = markdown.split("## Warnings", 1)[1].split("\n## ", 1)[0]
    assert section.count("no design found meets every spec") == 2
    assert "None." not in section
    # emit marks the compromise: the header is not verified and the report names the points
    capsys.readouterr()
    assert main(["emit", str(tmp_path / "out" / "gains.yaml"), "--out", str(tmp_path / "c"), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["compromise_points"] == [0, 1] and report["verified"] is False
    assert any("best compromise" in note for note in report["warnings"])
    assert "#define CTL_VERIFIED (0)" in (tmp_path / "c" / "ctl.h").read_text()  # emit's default prefix
    # verify keeps the marking: on a schedule relaxed so the compromise now meets every spec
    # (python-control margins of the same table below), the marked points still count as failing
    relaxed = _write(tmp_path, "  strategy: pole-cancel", "  min_phase_margin: 50")
    capsys.readouterr()
    assert main(["verify", str(relaxed), "--gains", str(tmp_path / "out" / "gains.yaml"), "--json", "--quiet"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["compromise_points"] == [0, 1] and report["status"] == ["fail", "fail"]
    assert report["failed_specs"] == [[], []]  # the numbers themselves pass the relaxed specs
    assert sum("marks this point compromise" in w for w in report["warnings"]) == 2
    table, _ = gainloom.read_gains(tmp_path / "out" / "gains.yaml")
    for p, speed in enumerate((0.0, 3000.0)):
        kp, ki_ts = (float(np.ravel(table.coefficients[k])[p]) for k in ("kp", "ki_ts"))
        z = control.tf([1, 0], [1], TS)
        loop = (kp + ki_ts * z / (z - 1)) * _plant(speed)  # DEVELOPERS.md "Discrete controller forms"
        _gm, pm, _wg, _wp = control.margin(loop)  # python-control
        assert pm >= 50 - 0.05
        assert np.all(np.abs(control.feedback(loop, 1).poles()) < 1)


STEP_RETRY = """\
name: step-retry-warning
variables:
  - name: speed
    unit: rpm
    values: [0, 500]
parameters:
  Kt: 0.35
  J: 2.5e-3
  B: 2.0e-4
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
  target: {damping: 0.8, natural_frequency: 150}
  output_limits: [-20, 20]
specs:
  min_damping: 0.6
  max_overshoot: 10
  poles: all
"""


def test_step_retry_warning_quotes_the_overshoot_of_the_objectives_gain(tmp_path):
    # Invented speed loop whose target pair's gain overshoots more than 10 %.
    path = tmp_path / "retry.yaml"
    path.write_text(STEP_RETRY)
    result = gainloom.design_table(path)
    assert result.status == ("pass", "pass")
    plant = control.c2d(control.tf([0.35], [2.5e-3 * 5.0e-4, 2.5e-3 + 2.0e-4 * 5.0e-4, 2.0e-4]), TS) * control.tf(
        [1], [1, 0], TS)
    for p, texts in enumerate(result.point_warnings):
        text = next(t for t in texts if "the objective's best gain" in t)
        assert "max_overshoot: step overshoot" in text and "needs <= 10 %" in text
        best = _number(r"best gain K = ([0-9.e+-]+) fails", text)
        kp = result.table.coefficients["kp"].ravel()[p]
        zero = kp / (kp + result.table.coefficients["ki_ts"].ravel()[p])
        closed = control.feedback(control.tf([best, -best * zero], [1, -1], TS) * plant, 1)
        # Reference: python-control step_info of the objective's gain (same zero)
        info = control.step_info(closed, T=np.arange(0, 0.5, TS), SettlingTimeThreshold=0.02)
        quoted = _number(r"step overshoot ([0-9.e+-]+) %", text)
        assert quoted == pytest.approx(info["Overshoot"], rel=1e-4)
        assert quoted > 10


def test_unreachable_crossover_is_diagnosed_with_its_best_value(tmp_path):
    # Pole-region objective (pole-cancel, fastest) with a crossover no gain reaches.  The zero
    # cancels the plant pole, leaving L = K b / (z (z - 1)): stable for K b < 1 (Jury), with
    # |e^{jθ} - 1| = 2 sin(θ/2) the crossover is θ_c = 2 asin(K b / 2) per sample, so the
    # largest one any stable gain reaches is 2 asin(1/2) / ts = π / (3 ts) (closed form,
    # derived here).  Before, the note said every spec was reachable alone.
    path = _write(tmp_path, "  strategy: pole-cancel", "  min_phase_margin: 10\n  min_crossover: 20000")
    result = gainloom.design_table(path)
    assert result.status == ("fail", "fail")
    for notes, binding in zip(result.notes, result.binding):
        assert binding == "min_crossover"
        note = next(n for n in notes if n.startswith("min_crossover binds"))
        best = _number(r"gain crossover at most ([0-9.e+-]+) rad/s", note)
        assert best == pytest.approx(math.pi / (3 * TS), rel=0.02)
        assert "reachable alone" not in " ".join(notes)
