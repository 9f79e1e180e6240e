"""compare_continuous: the continuous shortcut measured on the sampled loop."""


import control
import numpy as np
import pytest

import gainloom

SCHEDULE = """
name: continuous-trap
variables:
  - name: x
    values: [0.0, 1.0]
parameters:
  a: 10.0
  b: "20.0 + 20.0 * x"
plant:
  transfer_function:
    numerator: ["b"]
    denominator: ["1", "a"]
sampling:
  period: {ts}
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 40.0}}
  output_limits: [-1, 1]
  compare_continuous: true
specs:
  min_damping: 0.5
table:
  between_points: 0
codegen:
  prefix: ct
  format: float32
"""


def test_continuous_pi_gains_and_the_loss_on_the_sampled_loop(tmp_path):
    ts = 0.01  # slow sampling (wn ts = 0.4) plus one sample of delay: the trap
    path = tmp_path / "c.yaml"
    path.write_text(SCHEDULE.format(ts=ts))
    result = gainloom.design_table(path)
    report = result.continuous
    assert report["done"]
    for entry in report["points"]:
        x = entry["at"]["x"]
        a, b = 10.0, 20.0 + 20.0 * x
        # PI on b/(s + a): s^2 + (a + b kp) s + b ki matched to s^2 + 2 zeta wn s + wn^2
        # (textbook coefficient matching, from memory)
        kp = (2 * 0.7 * 40.0 - a) / b
        ki = 40.0**2 / b
        assert entry["continuous_gains"]["kp"] == pytest.approx(kp, rel=1e-9)
        assert entry["continuous_gains"]["ki"] == pytest.approx(ki, rel=1e-9)
        # the same gains on the true sampled loop, by python-control only:
        # c2d(ZOH) plant, one sample of delay, backward-Euler PI (DEVELOPERS.md)
        plant = control.c2d(control.tf([b], [1.0, a]), ts, method="zoh") * control.tf([1.0], [1.0, 0.0], ts)
        z = control.tf([1.0, 0.0], [1.0], ts)
        controller = kp + ki * ts * z / (z - 1)
        poles = control.feedback(controller * plant, 1).poles()
        s = np.log(poles.astype(complex)) / ts
        zeta = np.min(-s.real / np.abs(s))
        assert entry["on_sampled_loop"]["damping"] == pytest.approx(zeta, abs=1e-6)
        # the shortcut loses damping the sampled design keeps
        assert entry["sampled_design"]["damping"] >= 0.5
        assert entry["damping_lost"] > 0.1
    assert report["worst_damping_lost"] > 0.1


def test_sampling_rate_warning(tmp_path):
    # target wn = 40 rad/s > 0.1 x 2 pi / ts = 31.4 rad/s at ts = 0.02 s
    # (the 10x rule is common practice, no source)
    path = tmp_path / "w.yaml"
    path.write_text(SCHEDULE.format(ts=0.02).replace("  compare_continuous: true\n", ""))
    result = gainloom.design_table(path)
    assert any("target natural_frequency = 40 rad/s exceeds 0.1 x the sampling rate" in w for w in result.warnings)
    path.write_text(SCHEDULE.format(ts=0.001).replace("  compare_continuous: true\n", ""))
    assert not any("sampling rate" in w for w in gainloom.design_table(path).warnings)
