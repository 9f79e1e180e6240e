"""Cases several test modules share: invented gain tables, schedules and
simulation stand-ins (demo data of our own invention, not references).

Shared schedule files as fixtures live in ``conftest.py``; this module holds
the plain values and builders behind them.
"""

from __future__ import annotations

import textwrap
from types import SimpleNamespace

import control
import numpy as np
import scipy.signal

from gainloom import Loop
from gainloom.design.table import FilterTable, GainTable, TableAxis
from gainloom.names import CONTROLLER_COEFFICIENTS

# Plausible ranges per coefficient for a small motor-drive speed loop
# (invented demo data; dimensionless ones inside the unit circle).
_RANGES = {
    "kp": (0.5, 3.0),
    "ki_ts": (0.002, 0.05),
    "kd_b": (0.2, 2.0),
    "kd_a": (0.5, 0.95),
    "kc": (1.0, 4.0),
    "zc": (0.6, 0.95),
    "pc": (0.1, 0.8),
    "zc1": (0.6, 0.95),
    "pc1": (0.1, 0.8),
    "zc2": (0.3, 0.7),
    "pc2": (0.8, 0.97),
}


def make_table(structure="pi", dims=1, uniform=True, seed=3, limits=(-10.0, 12.0)):
    """A table on a speed axis (and a load axis for 2-D)."""
    speed = np.linspace(0.0, 3000.0, 7) if uniform else np.array([0.0, 150.0, 400.0, 900.0, 1700.0, 3000.0])
    axes = (TableAxis("speed", "rpm", speed),)
    if dims == 2:
        load = np.linspace(-2.0, 2.0, 5) if uniform else np.array([0.0, 0.25, 1.0, 2.5])
        axes += (TableAxis("load", "Nm", load),)
    shape = tuple(a.values.size for a in axes)
    rng = np.random.default_rng(seed)
    coefficients = {n: rng.uniform(*_RANGES[n], size=shape) for n in CONTROLLER_COEFFICIENTS[structure]}
    return GainTable(structure, axes, coefficients, 1e-4, limits)


def scipy_sections(centres: np.ndarray, ts: float, kinds=("notch", "low_pass")) -> tuple[FilterTable, ...]:
    """Filter sections built with scipy only: a 20 dB notch of width 0.4 w0 and a
    low-pass at 3 w0 with damping 0.5, Tustin prewarped at each centre
    (``scipy.signal.bilinear`` with ``fs = w0 / tan(w0 ts / 2) / 2``)."""
    sections = []
    for kind in kinds:
        rows = []
        for w0 in np.ravel(centres):
            if kind == "notch":
                zeta_p = 0.4 / (2 * np.sqrt(0.1))  # width = 2 w0 sqrt(zeta_z zeta_p), depth zeta_z / zeta_p = 0.1
                num, den, warp = [1, 2 * 0.1 * zeta_p * w0, w0**2], [1, 2 * zeta_p * w0, w0**2], w0
            else:
                warp = 3 * w0
                num, den = [warp**2], [1, 2 * 0.5 * warp, warp**2]
            b, a = scipy.signal.bilinear(num, den, fs=warp / np.tan(warp * ts / 2) / 2)
            b = np.concatenate([np.zeros(3 - b.size), b]) / a[0]
            rows.append([b[0], b[1], b[2], a[1] / a[0], a[2] / a[0]])
        grid = np.array(rows).reshape(np.shape(centres) + (5,))
        sections.append(FilterTable(kind, {name: grid[..., i] for i, name in enumerate(("b0", "b1", "b2", "a1", "a2"))}))
    return tuple(sections)


def filtered_table(structure="pi", dims=1, kinds=("notch", "low_pass")):
    """:func:`make_table` with filter sections whose notch centre moves along the speed axis
    (invented: 1,500 to 2,500 rad/s at ts = 1e-4 s)."""
    table = make_table(structure, dims)
    centres = np.broadcast_to(np.linspace(1500.0, 2500.0, table.shape[0]).reshape((-1,) + (1,) * (dims - 1)),
                              table.shape)
    return GainTable(table.structure, table.axes, table.coefficients, 1e-4, table.output_limits,
                     scipy_sections(centres, 1e-4, kinds))


# Invented: speed loop of a small fan, PI, Q15.  Duty 10..100 %, ts 1 ms.
PASSING = textwrap.dedent(
    """\
    name: fan-speed
    variables:
      - name: duty
        unit: "%"
        values: [10, 40, 70, 100]
    parameters:
      k: "0.8 + 0.01 * duty"
      tau: "0.05 - 0.0002 * duty"
    plant:
      transfer_function:
        numerator: ["k"]
        denominator: ["tau", "1"]
    sampling:
      period: 0.001
      method: zoh
      delay: 1
    controller:
      structure: pi
      strategy: dominant-pair
      target: {damping: 0.8, natural_frequency: 150}
      output_limits: [-10, 10]
    specs:
      min_damping: 0.6
      min_phase_margin: 40
    table:
      between_points: 2
    codegen:
      prefix: fan
      format: q15
    """
)

# Invented: an open-loop unstable pole a = 200..250 rad/s, ts = 5 ms (a ts >= 1)
# and 3 samples of computation delay: no P gain stabilises it.
UNSTABLE = textwrap.dedent(
    """\
    name: balance-beam
    variables:
      - name: load
        values: [0, 1]
    parameters:
      a: "200 + 50 * load"
    plant:
      transfer_function:
        numerator: ["a"]
        denominator: ["1", "-a"]
    sampling:
      period: 0.005
      method: zoh
      delay: 3
    controller:
      structure: p
      strategy: dominant-pair
      target: {damping: 0.7, natural_frequency: 100}
      output_limits: [-5, 5]
    specs:
      min_damping: 0.5
    codegen:
      prefix: beam
      format: float32
    """
)

STRICT = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Wconversion", "-Wshadow", "-Werror", "-c"]


class FunctionSchedule:
    """A stand-in for a loaded schedule: plant, period and delays as functions of the points."""

    def __init__(self, plant, period=1e-3, delay=0.0, dead_time=0.0, axes=("speed",)):
        self.axes = tuple(SimpleNamespace(name=name) for name in axes)
        self.plant, self.period, self.delay, self.dead_time = plant, period, delay, dead_time

    def _field(self, value, points):
        value = value(points) if callable(value) else value
        return np.broadcast_to(np.asarray(value, dtype=float), (points.shape[0],)).copy()

    def evaluate(self, points, scale=None):
        points = np.asarray(points, dtype=float)
        num, den = self.plant(points)
        plant = Loop(num=num, den=den, dead_time=self._field(self.dead_time, points))
        return SimpleNamespace(
            points=points,
            parameters={},
            plant=plant,
            sample_period=self._field(self.period, points),
            delay=self._field(self.delay, points),
        )


def constant_plant(num, den):
    num, den = np.asarray(num, float), np.asarray(den, float)

    def plant(points):
        q = points.shape[0]
        return np.tile(num, (q, 1)), np.tile(den, (q, 1))

    return plant


def flat_table(structure, limits=(-1e6, 1e6), period=1e-3, values=(0.0, 100.0), **coefficients):
    axis = TableAxis("speed", "rpm", np.asarray(values, float))
    n = axis.values.size
    return GainTable(
        structure, (axis,), {k: np.full(n, float(v)) for k, v in coefficients.items()}, np.full(n, period), limits
    )


def controller_tf(structure, ts, **c):
    """C(z) from the table of DEVELOPERS.md 'Discrete controller forms', built in python-control."""
    z = control.tf([1, 0], [1], ts)
    if structure == "p":
        return c["kp"] * z / z
    if structure == "pi":
        return c["kp"] + c["ki_ts"] * z / (z - 1)
    if structure == "pid":
        return c["kp"] + c["ki_ts"] * z / (z - 1) + c["kd_b"] * (z - 1) / (z - c["kd_a"])
    if structure == "leadlag":
        return c["kc"] * (z - c["zc1"]) * (z - c["zc2"]) / ((z - c["pc1"]) * (z - c["pc2"]))
    raise AssertionError(structure)


SECOND_ORDER = ([0.0, 0.0, 900.0], [1.0, 18.0, 900.0])  # wn = 30 rad/s, zeta = 0.3


def small_servo_cascade(current_tolerances: str = "", speed_tolerances: str = "") -> str:
    """The servo cascade demo on a 2 x 2 grid per loop, with ``tolerances`` sections added.

    ``current_tolerances`` / ``speed_tolerances`` are the YAML flow mappings
    of each loop's ``tolerances`` (e.g. ``"parameters: {L: 0.4}"``), empty
    for none.  Invented demo data, as the demo file itself.
    """
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "schedules" / "servo_cascade.yaml").read_text(encoding="utf-8")
    edits = {
        "        values: [0, 10, 20, 30]\n": "        values: [0, 30]\n",
        "        values: [-20, 40, 100]\n": "        values: [40, 100]\n",
        "        values: [0, 2000, 4000, 6000]\n": "        values: [0, 6000]\n",
        "        values: [1, 3, 10] ": "        values: [1, 10] ",
    }
    for loop, tolerances in (("40", current_tolerances), ("700", speed_tolerances)):
        if tolerances:
            marker = f"    codegen:\n      error_full_scale: {loop}"
            edits[marker] = f"    tolerances: {{{tolerances}}}\n{marker}"
    for old, new in edits.items():
        assert text.count(old) == 1, old
        text = text.replace(old, new)
    return text
