"""Python mirror of the generated C: gain lookup and controller step.

Same operations in the same order as the templates in
``codegen_templates/``.  Q15/Q31: the lookup uses the numpy ``int64``
helpers of :mod:`.qformat` (vectorised over points); the step
(``FixedStepper``, one sample at a time, shared with the simulator) uses
Python integers with the same rounding and saturation.
Both are bit-identical to the C because no intermediate of the C reaches
``2**63`` (products of a coefficient and a 32-bit signal stay below
``2**62``, sums of three 32-bit values below ``2**34``, interpolation
products below ``2**62``), so 64-bit and unbounded integers agree.
float32: numpy ``float32`` arithmetic, each operation rounded to single
precision as C does with ``FLT_EVAL_METHOD == 0``.

Lookup rules (both variants)
----------------------------
- An input at or below the first breakpoint (and, for float32, NaN) uses the
  first segment with weight 0: the result is the first breakpoint's values.
- An input at or above the last breakpoint uses the last segment with weight
  1: the last breakpoint's values.  No extrapolation.
- Inside, segment ``i`` satisfies ``a[i] <= x < a[i+1]``; the weight is
  ``t = (x - a[i]) / (a[i+1] - a[i])``.  Fixed point: no division; the
  width's reciprocal is stored per segment and ``t`` is the floor of the
  product, never above ``floor(t * 2**interp_frac)`` and at most one below
  it (:func:`.qformat.segment_reciprocals`).
- float32 interpolation: ``(1 - t) * g0 + t * g1`` (exact at both ends).
  Fixed point: ``g0 + round((g1 - g0) * t / 2**interp_frac)``.
- 2-D: interpolate along the second (fast) axis at rows ``i`` and ``i + 1``,
  then along the first axis.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CodegenError
from .layout import AxisLayout, TableLayout
from .qformat import (
    STATE_FRAC,
    lerp_fixed,
    mul_frac,
    rshift_round,
    saturate,
    weight_fixed,
)

__all__ = [
    "FixedStepper",
    "FloatStepper",
    "StepTrace",
    "locate",
    "lookup_gains",
    "output_code",
    "run_steps",
    "section_fields",
    "state_fields",
]

_STATE_FIELDS = {
    "p": ("e1",),
    "pi": ("e1", "x"),
    "pd": ("e1", "d"),
    "pid": ("e1", "x", "d"),
    "lead": ("e1", "v"),
    "lag": ("e1", "v"),
    "leadlag": ("e1", "v1", "v2"),
}


#: State fields of one filter section ``n``: its input and output one and two samples back.
_SECTION_FIELDS = ("x1", "x2", "y1", "y2")


def section_fields(sections: int) -> tuple[str, ...]:
    """State fields of the filter sections: ``f1_x1, f1_x2, f1_y1, f1_y2, f2_x1, ...``."""
    return tuple(f"f{n + 1}_{name}" for n in range(sections) for name in _SECTION_FIELDS)


def state_fields(structure: str, sections: int = 0) -> tuple[str, ...]:
    """Fields of ``<prefix>_state_t`` for a structure, in declaration order.

    ``e1`` is the previous error (state format), ``x`` the integrator, ``d``
    the filtered derivative, ``v``/``v1``/``v2`` the lead/lag section outputs;
    then per filter section its past inputs and outputs (:func:`section_fields`).
    """
    return _STATE_FIELDS[structure] + section_fields(sections)


def _section_count(gains: dict) -> int:
    count = 0
    while f"f{count + 1}_b0" in gains:
        count += 1
    return count


def locate(axis: AxisLayout, fmt_is_fixed: bool, interp_frac: int, x) -> tuple[np.ndarray, np.ndarray]:
    """Segment index and weight for inputs ``x`` on one axis.

    Parameters
    ----------
    axis : AxisLayout
        The stored axis.
    fmt_is_fixed : bool
        Fixed-point (integer inputs in the axis format) or float32 inputs.
    interp_frac : int
        Fraction bits of the weight (fixed point).
    x : array_like
        Inputs: int (axis format) or float32 (physical units).

    Returns
    -------
    index : ndarray of int64
    weight : ndarray
        int64 in ``[0, 2**interp_frac]`` or float32 in ``[0, 1]``.
    """
    a = axis.stored
    n = a.size
    if fmt_is_fixed:
        x = np.asarray(x, dtype=np.int64)
        if np.any((x < -(2**31)) | (x > 2**31 - 1)):
            raise CodegenError("fixed-point axis inputs must be int32 values")
        low = x <= a[0]
        high = x >= a[-1]
        # the C finds the same segment: binary search, or on a uniform axis a
        # reciprocal estimate never above the true index and one step up
        index = np.clip(np.searchsorted(a, x, side="right") - 1, 0, n - 2)
        one = np.int64(1) << interp_frac
        inside = ~(low | high)
        offset = np.where(inside, x - a[index], 0)
        if axis.weight_shift is None or axis.weight_scale is None:
            raise CodegenError("a fixed-point axis needs its per-segment reciprocals (layout_table sets them)")
        weight = weight_fixed(offset, axis.weight_shift[index], axis.weight_scale[index])
        index = np.where(low, 0, np.where(high, n - 2, index))
        weight = np.where(low, 0, np.where(high, one, weight)).astype(np.int64)
        return index.astype(np.int64), weight
    x = np.asarray(x, dtype=np.float32)
    with np.errstate(invalid="ignore"):
        low = ~(x > a[0])  # NaN lands here, as in the C
        high = x >= a[-1]
    index = np.clip(np.searchsorted(a, np.where(low | high, a[0], x), side="right") - 1, 0, n - 2)
    inside = ~(low | high)
    safe_x = np.where(inside, x, a[index])
    weight = (safe_x - a[index]) / (a[index + 1] - a[index])
    index = np.where(low, 0, np.where(high, n - 2, index))
    weight = np.where(low, np.float32(0), np.where(high, np.float32(1), weight)).astype(np.float32)
    return index.astype(np.int64), weight


def _lerp(a, b, t, layout: TableLayout):
    if layout.fmt.is_fixed:
        return lerp_fixed(a, b, t, layout.fmt.interp_frac)
    return (np.float32(1) - t) * a + t * b


def lookup_gains(layout: TableLayout, *inputs) -> dict[str, np.ndarray]:
    """Interpolated coefficients at the given scheduling inputs, as stored.

    Parameters
    ----------
    layout : TableLayout
        The stored table.
    *inputs : array_like
        One array per axis (broadcast together): integers in each axis's
        format (fixed point) or float32 physical values.

    Returns
    -------
    dict of str to ndarray
        Coefficient name to int64 (stored integers) or float32 values.
    """
    if len(inputs) != len(layout.axes):
        raise CodegenError(f"table has {len(layout.axes)} axes; got {len(inputs)} inputs")
    inputs = np.broadcast_arrays(*[np.asarray(v) for v in inputs])
    located = [locate(axis, layout.fmt.is_fixed, layout.fmt.interp_frac, x) for axis, x in zip(layout.axes, inputs)]
    result = {}
    for coefficient in layout.looked_up:
        table = coefficient.stored
        if len(located) == 1:
            (i, t), = located
            value = _lerp(table[i], table[i + 1], t, layout)
        else:
            (i, t0), (j, t1) = located
            row0 = _lerp(table[i, j], table[i, j + 1], t1, layout)
            row1 = _lerp(table[i + 1, j], table[i + 1, j + 1], t1, layout)
            value = _lerp(row0, row1, t0, layout)
        result[coefficient.name] = value.astype(np.int64 if layout.fmt.is_fixed else np.float32)
    return result


@dataclass(frozen=True)
class StepTrace:
    """Outputs and states of a run of the controller step.

    Parameters
    ----------
    output : ndarray
        ``u`` per step: int64 (Q15/Q31 integers) or float32.
    states : dict of str to ndarray
        Each state field after each step (fixed point: Q3.28 integers).
    """

    output: np.ndarray
    states: dict[str, np.ndarray]


def run_steps(
    layout: TableLayout, gains: dict[str, np.ndarray], errors, feedforward=None, limits=None
) -> StepTrace:
    """Run the controller step from a cleared state, one step per error sample.

    Parameters
    ----------
    layout : TableLayout
        The stored table (structure, format, limits, fraction bits).
    gains : dict of str to ndarray
        Coefficients per step, as returned by :func:`lookup_gains`.
    errors : array_like
        Error input per step: Q15/Q31 integers or float32 (physical units;
        non-finite samples count as 0).
    feedforward : array_like, optional
        Feedforward per step, in the output's format (default 0).
    limits : tuple of three array_like, optional
        ``(use, low, high)`` per step: where ``use`` is true the run-time
        limits ``(low, high)`` are passed (the C gets a pointer, else NULL).

    Returns
    -------
    StepTrace
    """
    fixed = layout.fmt.is_fixed
    dtype = np.int64 if fixed else np.float32
    errors = np.asarray(errors, dtype=dtype)
    feed = np.zeros(errors.shape, dtype=dtype) if feedforward is None else np.asarray(feedforward, dtype=dtype)
    if limits is None:
        use, low, high = np.zeros(errors.shape, dtype=bool), feed, feed
    else:
        use, low, high = (np.asarray(limits[0], dtype=bool), np.asarray(limits[1], dtype=dtype),
                          np.asarray(limits[2], dtype=dtype))
    if fixed:
        return _run(FixedStepper(layout, gains), errors, feed, use, low, high, np.int64)
    stepper = FloatStepper(layout.structure, gains, layout.limits, np.float32)
    with np.errstate(all="ignore"):  # overflow to inf is float32 behaviour the C shares
        return _run(stepper, errors, feed, use, low, high, np.float32)


def output_code(layout: TableLayout, u: int) -> int:
    """Fixed-point output integer for an internal Q3.28 value ``u`` (as the C
    ``return`` of the step function: rounded and saturated to Q15/Q31)."""
    shift = layout.fmt.signal_frac - STATE_FRAC
    if shift < 0:
        return saturate(rshift_round(int(u), -shift), layout.fmt.bits)
    return saturate(int(u) * (1 << shift), layout.fmt.bits)


class FloatStepper:
    """The float controller step (float32 as the C; float64 as the ideal).

    Parameters
    ----------
    structure : str
        Controller structure.
    gains : dict of str to ndarray, shape (K,)
        Coefficients per sample, already in ``dtype``.
    limits : tuple
        Output limits ``(u_min, u_max)`` in ``dtype``.
    dtype : numpy float type
    """

    def __init__(self, structure: str, gains: dict[str, np.ndarray], limits: tuple, dtype) -> None:
        self.structure = structure
        self.dtype = dtype
        self.sections = _section_count(gains)
        self.fields = state_fields(structure, self.sections)
        self.g = {name: np.asarray(values).astype(dtype) for name, values in gains.items()}
        self.u_min, self.u_max = dtype(limits[0]), dtype(limits[1])
        self.in_force = (self.u_min, self.u_max)
        self.tabulated = "u_min" in self.g  # limits looked up per sample with the coefficients
        self.zero = dtype(0)
        self.state = dict.fromkeys(self.fields, self.zero)

    def step(self, k: int, error, feedforward=None, limits=None):
        """One step on the error ``e[k]`` (in ``dtype``); returns ``(u, u_unsaturated)``.

        ``feedforward`` (default 0) is added before saturation; ``limits``
        ``(low, high)`` replace the table's for this step when ``low <= high``
        (as the C's optional run-time limits; ``None``: the table's).  The
        limits the step used are left in ``in_force``.
        """
        g, state, structure, zero, run = self.g, self.state, self.structure, self.zero, self._filters
        e = error if np.isfinite(error) else zero
        f = zero if feedforward is None or not np.isfinite(feedforward) else self.dtype(feedforward)
        u_min, u_max = (g["u_min"][k], g["u_max"][k]) if self.tabulated else (self.u_min, self.u_max)
        if limits is not None and limits[0] <= limits[1]:
            u_min, u_max = self.dtype(limits[0]), self.dtype(limits[1])
        self.in_force = (u_min, u_max)  # read by the simulator (time in saturation)
        if structure in ("lead", "lag"):
            state["v"] = g["pc"][k] * state["v"] + g["kc"][k] * (e - g["zc"][k] * state["e1"])
            u = run(k, state["v"], True) + f
        elif structure == "leadlag":
            v1 = g["pc1"][k] * state["v1"] + g["kc"][k] * (e - g["zc1"][k] * state["e1"])
            state["v2"] = g["pc2"][k] * state["v2"] + (v1 - g["zc2"][k] * state["v1"])
            state["v1"] = v1
            u = run(k, state["v2"], True) + f
        else:
            proportional = g["kp"][k] * e
            if "d" in self.fields:
                state["d"] = g["kd_a"][k] * state["d"] + g["kd_b"][k] * (e - state["e1"])
            if "x" in self.fields:
                increment = g["ki_ts"][k] * e
                candidate = state["x"] + increment
                trial = proportional + candidate
                if "d" in self.fields:
                    trial = trial + state["d"]
                trial = run(k, trial, False) + f
                if not ((trial > u_max and increment > zero) or (trial < u_min and increment < zero)):
                    state["x"] = candidate
                u = proportional + state["x"]
            else:
                u = proportional
            if "d" in self.fields:
                u = u + state["d"]
            u = run(k, u, True) + f
        state["e1"] = e
        unsaturated = u
        if u > u_max:
            u = u_max
        elif u < u_min:
            u = u_min
        return self.dtype(u), self.dtype(unsaturated)

    def _filters(self, k: int, value, commit: bool):
        """The filter sections on ``value``, direct form I, as the C sums them:
        ``b0 x + (((b1 x1 + b2 x2) - a1 y1) - a2 y2)``; ``commit`` stores the sections'
        new past inputs and outputs (the trial of the conditional integration does not)."""
        g, state = self.g, self.state
        for n in range(1, self.sections + 1):
            f = f"f{n}_"
            past = ((g[f + "b1"][k] * state[f + "x1"] + g[f + "b2"][k] * state[f + "x2"])
                    - g[f + "a1"][k] * state[f + "y1"]) - g[f + "a2"][k] * state[f + "y2"]
            y = g[f + "b0"][k] * value + past
            if commit:
                state[f + "x2"], state[f + "x1"] = state[f + "x1"], value
                state[f + "y2"], state[f + "y1"] = state[f + "y1"], y
            value = y
        return value


class FixedStepper:
    """The Q15/Q31 controller step in the code-generation layer's integer arithmetic.

    Parameters
    ----------
    layout : TableLayout
        The table laid out in ``q15`` or ``q31``.
    gains : dict of str to ndarray of int64, shape (K,)
        Stored coefficients per sample (from ``lookup_gains``).
    """

    def __init__(self, layout, gains: dict[str, np.ndarray]) -> None:
        self.layout = layout
        self.structure = layout.structure
        self.sections = layout.sections
        self.fields = state_fields(self.structure, self.sections)
        self.frac = {c.name: c.frac for c in layout.coefficients + layout.filter_tables}
        self.g = {name: [int(v) for v in values] for name, values in gains.items()}
        self.u_min, self.u_max = layout.limits
        self.in_force = (self.u_min, self.u_max)
        self.to_state_shift = layout.fmt.signal_frac - STATE_FRAC
        self.state = dict.fromkeys(self.fields, 0)

    def _mul(self, name: str, k: int, signal: int) -> int:
        return mul_frac(self.g[name][k], signal, self.frac[name], 32)

    def _to_state(self, code: int) -> int:
        shift = self.to_state_shift
        return int(code) * (1 << -shift) if shift < 0 else rshift_round(int(code), shift)

    def step(self, k: int, error: int, feedforward: int = 0, limits: tuple[int, int] | None = None):
        """One step on the error integer; returns ``(output code, internal u before the clamp)``.

        ``feedforward`` and ``limits`` ``(low, high)`` are output codes (Q15/Q31
        of output full scale), as the C's feedforward and run-time limits;
        the limits apply when ``low <= high``.  The limits the step used
        (Q3.28) are left in ``in_force``.
        """
        state, structure, mul, run = self.state, self.structure, self._mul, self._filters
        es = self._to_state(error)
        fs = self._to_state(feedforward)
        u_min, u_max = self.u_min, self.u_max
        if "u_min" in self.g:  # tabulated limits, in the output's format
            u_min, u_max = self._to_state(self.g["u_min"][k]), self._to_state(self.g["u_max"][k])
        if limits is not None and int(limits[0]) <= int(limits[1]):
            u_min, u_max = self._to_state(limits[0]), self._to_state(limits[1])
        self.in_force = (u_min, u_max)  # Q3.28; read by the simulator (time in saturation)
        if structure in ("lead", "lag"):
            w = saturate(es - mul("zc", k, state["e1"]), 32)
            state["v"] = saturate(mul("pc", k, state["v"]) + mul("kc", k, w), 32)
            u = saturate(run(k, state["v"], True) + fs, 32)
        elif structure == "leadlag":
            w1 = saturate(es - mul("zc1", k, state["e1"]), 32)
            v1 = saturate(mul("pc1", k, state["v1"]) + mul("kc", k, w1), 32)
            w2 = saturate(v1 - mul("zc2", k, state["v1"]), 32)
            state["v2"] = saturate(mul("pc2", k, state["v2"]) + w2, 32)
            state["v1"] = v1
            u = saturate(run(k, state["v2"], True) + fs, 32)
        else:
            proportional = mul("kp", k, es)
            derivative = 0
            if "d" in self.fields:
                derivative = saturate(mul("kd_a", k, state["d"]) + mul("kd_b", k, saturate(es - state["e1"], 32)), 32)
                state["d"] = derivative
            if "x" in self.fields:
                increment = mul("ki_ts", k, es)
                candidate = saturate(state["x"] + increment, 32)
                trial = self._sum(k, proportional + candidate + derivative, fs, False)
                if not ((trial > u_max and increment > 0) or (trial < u_min and increment < 0)):
                    state["x"] = candidate
                u = self._sum(k, proportional + state["x"] + derivative, fs, True)
            else:
                u = self._sum(k, proportional + derivative, fs, True)
        state["e1"] = es
        return output_code(self.layout, min(max(u, u_min), u_max)), u

    def _sum(self, k: int, controller: int, fs: int, commit: bool) -> int:
        """Controller sum, through the filter sections when there are any, plus feedforward (Q3.28)."""
        if not self.sections:
            return saturate(controller + fs, 32)  # one saturation of the whole sum, as without filters
        return saturate(self._filters(k, saturate(controller, 32), commit) + fs, 32)

    def _filters(self, k: int, value: int, commit: bool) -> int:
        """The filter sections on a Q3.28 value, direct form I: each product rounded to
        Q3.28, the five summed exactly (64 bits in the C, where the four of past values are
        summed once per step), saturated once to 32 bits."""
        state, mul = self.state, self._mul
        for n in range(1, self.sections + 1):
            f = f"f{n}_"
            y = saturate(mul(f + "b0", k, value) + mul(f + "b1", k, state[f + "x1"]) + mul(f + "b2", k, state[f + "x2"])
                         - mul(f + "a1", k, state[f + "y1"]) - mul(f + "a2", k, state[f + "y2"]), 32)
            if commit:
                state[f + "x2"], state[f + "x1"] = state[f + "x1"], value
                state[f + "y2"], state[f + "y1"] = state[f + "y1"], y
            value = y
        return value


def _run(stepper, errors, feed, use, low, high, dtype) -> StepTrace:
    outputs = []
    history: dict[str, list] = {name: [] for name in stepper.fields}
    for k, error in enumerate(errors):
        outputs.append(stepper.step(k, error, feed[k], (low[k], high[k]) if use[k] else None)[0])
        for name in stepper.fields:
            history[name].append(stepper.state[name])
    return StepTrace(np.array(outputs, dtype=dtype), {name: np.array(v, dtype=dtype) for name, v in history.items()})
