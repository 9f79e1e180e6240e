"""Textbook controller designs by root locus in the z-plane, reproduced by the scheduler.

1. Lead compensation of the ZOH-sampled servo 1/(s(s+1)) at T = 1 s.  The
   sampled plant is the standard textbook example
   G(z) = (0.3679 z + 0.2642) / ((z - 1)(z - 0.3679)) (e.g. Ogata,
   Discrete-Time Control Systems, root-locus design chapter; from memory).
   The textbook method: the lead zero cancels the plant pole at z = e^-1,
   the lead pole comes from the angle condition at the desired dominant pole,
   the gain from the magnitude condition.  We ask for zeta = 0.5 and
   wn = 1 rad/s and check the dominant pair lands there.
2. PI control of a ZOH-sampled first-order plant b/(s + a) by placing the
   closed-loop pair: the characteristic polynomial (z-1)(z-p) + K g (z - c)
   matched to (z - z_t)(z - conj z_t) gives K g = 1 + p - 2 Re z_t and
   c = (p - |z_t|^2)/(K g) (coefficient matching, the textbook closed form of
   pole placement for a second-order loop; from memory).
"""

import cmath
import math

import control
import numpy as np
import pytest

import gainloom

LEAD = """
name: textbook-lead
variables:
  - name: x
    values: [0.0, 1.0]
parameters:
  a: 1.0
plant:
  transfer_function:
    numerator: ["1"]
    denominator: ["1", "a", "0"]
sampling:
  period: 1.0
  method: zoh
  delay: 0
controller:
  structure: lead
  strategy: dominant-pair
  target: {damping: 0.5, natural_frequency: 1.0}
  output_limits: [-1, 1]
specs:
  min_damping: 0.45
table:
  between_points: 1
codegen:
  prefix: tb
  format: float32
"""

PI = """
name: textbook-pi
variables:
  - name: x
    values: [0.0, 1.0]
parameters:
  a: 10.0
  b: "20.0 + 10.0 * x"
plant:
  transfer_function:
    numerator: ["b"]
    denominator: ["1", "a"]
sampling:
  period: 0.01
  method: zoh
  delay: 0
controller:
  structure: pi
  strategy: dominant-pair
  target: {damping: 0.7, natural_frequency: 30.0}
  output_limits: [-1, 1]
specs:
  min_damping: 0.6
table:
  between_points: 0
codegen:
  prefix: tb
  format: float32
"""


def dominant(poles, ts):
    """Damping and natural frequency of the slowest pole, via s = ln(z)/ts (python-control's convention)."""
    pole = poles[np.argmax(np.abs(poles))]
    s = cmath.log(complex(pole)) / ts
    return -s.real / abs(s), abs(s)


def test_lead_on_sampled_servo_lands_on_target(tmp_path):
    path = tmp_path / "lead.yaml"
    path.write_text(LEAD)
    result = gainloom.design_table(path)
    c = {k: float(v[0]) for k, v in result.analysis.coefficients.items()}
    # the textbook sampled plant (from memory: 0.3679 z + 0.2642 over (z-1)(z-0.3679))
    plant = control.c2d(control.tf([1.0], [1.0, 1.0, 0.0]), 1.0, method="zoh")
    np.testing.assert_allclose(plant.num[0][0], [math.exp(-1), 1 - 2 * math.exp(-1)], rtol=1e-9)
    assert round(plant.num[0][0][0], 4) == 0.3679 and round(plant.num[0][0][1], 4) == 0.2642
    # zero cancels the plant pole at e^-1 (the textbook choice)
    assert c["zc"] == pytest.approx(math.exp(-1), rel=1e-9)
    # angle condition at z_t, solved here independently for the pole
    s_t = complex(-0.5, math.sqrt(0.75))
    z_t = cmath.exp(s_t * 1.0)
    g = np.polyval(plant.num[0][0], z_t) / np.polyval(plant.den[0][0], z_t)
    angle_needed = cmath.phase(g) + cmath.phase(z_t - c["zc"]) + math.pi  # = arg(z_t - pc)
    pc = z_t.real - z_t.imag / math.tan(angle_needed)
    assert c["pc"] == pytest.approx(pc, rel=1e-9, abs=1e-12)
    # closed loop from python-control: the dominant pair at zeta = 0.5, wn = 1 rad/s
    controller = control.tf([c["kc"], -c["kc"] * c["zc"]], [1.0, -c["pc"]], 1.0)
    poles = control.feedback(controller * plant, 1).poles()
    zeta, wn = dominant(poles, 1.0)
    assert zeta == pytest.approx(0.5, abs=1e-6)
    assert wn == pytest.approx(1.0, rel=1e-6)
    assert result.status[0] == "pass"


def test_pi_pole_placement_matches_coefficient_matching(tmp_path):
    path = tmp_path / "pi.yaml"
    path.write_text(PI)
    result = gainloom.design_table(path)
    ts = 0.01
    s_t = complex(-0.7 * 30.0, 30.0 * math.sqrt(1 - 0.49))
    z_t = cmath.exp(s_t * ts)
    for p, x in enumerate(result.points[:, 0]):
        a, b = 10.0, 20.0 + 10.0 * x
        pole = math.exp(-a * ts)
        g = b / a * (1 - pole)  # ZOH of b/(s+a): g/(z - e^{-a ts}) (closed form)
        Kg = 1 + pole - 2 * z_t.real
        zero = (pole - abs(z_t) ** 2) / Kg
        K = Kg / g
        expected = {"kp": K * zero, "ki_ts": K * (1 - zero)}  # C = K (z - c)/(z - 1)
        for name, value in expected.items():
            assert result.analysis.coefficients[name][p] == pytest.approx(value, rel=1e-8)
        # python-control closed loop lands on the target
        plant = control.c2d(control.tf([b], [1.0, a]), ts, method="zoh")
        c = {k: float(v[p]) for k, v in result.analysis.coefficients.items()}
        controller = control.tf([c["kp"] + c["ki_ts"], -c["kp"]], [1.0, -1.0], ts)
        zeta, wn = dominant(control.feedback(controller * plant, 1).poles(), ts)
        assert zeta == pytest.approx(0.7, abs=1e-6) and wn == pytest.approx(30.0, rel=1e-6)
