"""The controller as the firmware runs it, one sample at a time.

Difference equations, saturation and conditional-integration anti-windup are
those of DEVELOPERS.md ("Discrete controller forms") in the exact form of
the generated C and its Python mirror (:mod:`gainloom.codegen.mirror`):

- the new integrator value is refused when the trial output is beyond a
  limit and the increment ``ki_ts * e`` points further out;
- sums are evaluated left to right, as written in the C.

Number formats:

- ``float64``: ideal reference arithmetic (not a firmware format); the
  coefficients are interpolated in float64 by :mod:`.interpolation`;
- ``float32``: the table laid out by :func:`gainloom.codegen.layout_table`,
  looked up by :func:`gainloom.codegen.mirror.lookup_gains`, the step in numpy
  float32 (one IEEE rounding per operation);
- ``q15`` / ``q31``: the same layout and lookup in integers, the step in the
  integer arithmetic of :mod:`gainloom.codegen.qformat` (rounding, saturating
  multiply, Q3.28 states).

The closed loop needs the step one sample at a time, while
``codegen.mirror.run_steps`` runs a whole error sequence from reset.  The
stepper here follows ``run_steps`` operation for operation, with all
fixed-point arithmetic taken from ``codegen.qformat``; a test checks it is
bit-identical to ``run_steps`` for every structure and format.  (When the
code-generation layer offers a per-step call, this should become a thin
wrapper around it.)

All states start at zero and ``e[-1] = 0`` (a controller switched on at
``t = 0``), so a derivative sees the first error as a step.
"""

from __future__ import annotations

import numpy as np

from ..codegen.layout import layout_table
from ..codegen.mirror import lookup_gains, output_code, state_fields
from ..codegen.qformat import STATE_FRAC, dequantize, mul_frac, quantize, rshift_round, saturate
from ..design.table import GainTable
from ..errors import InputError
from ..names import NUMBER_FORMATS, unknown_name_message
from .interpolation import interpolate_table

__all__ = ["SIMULATION_FORMATS", "STATE_NAMES", "FloatStepper", "FixedStepper", "TableController"]

#: Number formats the simulator can run the controller in: the emitted C
#: formats plus ``float64`` as an ideal reference.
SIMULATION_FORMATS: tuple[str, ...] = ("float64",) + NUMBER_FORMATS

#: Readable names of the recorded controller states, by mirror state field.
STATE_NAMES: dict[str, str] = {
    "x": "integrator",
    "d": "derivative",
    "v": "section",
    "v1": "section1",
    "v2": "section2",
}


def recorded_fields(structure: str) -> tuple[str, ...]:
    """Mirror state fields recorded per sample (the previous error is left out)."""
    return tuple(name for name in state_fields(structure) if name != "e1")


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
        self.fields = state_fields(structure)
        self.g = {name: np.asarray(values).astype(dtype) for name, values in gains.items()}
        self.u_min, self.u_max = dtype(limits[0]), dtype(limits[1])
        self.zero = dtype(0)
        self.state = dict.fromkeys(self.fields, self.zero)

    def step(self, k: int, error):
        """One step on the error ``e[k]`` (in ``dtype``); returns ``(u, u_unsaturated)``."""
        g, state, structure, zero = self.g, self.state, self.structure, self.zero
        e = error if np.isfinite(error) else zero
        if structure in ("lead", "lag"):
            state["v"] = g["pc"][k] * state["v"] + g["kc"][k] * (e - g["zc"][k] * state["e1"])
            u = state["v"]
        elif structure == "leadlag":
            v1 = g["pc1"][k] * state["v1"] + g["kc"][k] * (e - g["zc1"][k] * state["e1"])
            state["v2"] = g["pc2"][k] * state["v2"] + (v1 - g["zc2"][k] * state["v1"])
            state["v1"] = v1
            u = state["v2"]
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
                if not ((trial > self.u_max and increment > zero) or (trial < self.u_min and increment < zero)):
                    state["x"] = candidate
                u = proportional + state["x"]
            else:
                u = proportional
            if "d" in self.fields:
                u = u + state["d"]
        state["e1"] = e
        unsaturated = u
        if u > self.u_max:
            u = self.u_max
        elif u < self.u_min:
            u = self.u_min
        return self.dtype(u), self.dtype(unsaturated)


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
        self.fields = state_fields(self.structure)
        self.frac = {c.name: c.frac for c in layout.coefficients}
        self.g = {name: [int(v) for v in values] for name, values in gains.items()}
        self.u_min, self.u_max = layout.limits
        self.to_state_shift = layout.fmt.signal_frac - STATE_FRAC
        self.state = dict.fromkeys(self.fields, 0)

    def _mul(self, name: str, k: int, signal: int) -> int:
        return mul_frac(self.g[name][k], signal, self.frac[name], 32)

    def step(self, k: int, error: int):
        """One step on the error integer; returns ``(output code, internal u before the clamp)``."""
        state, structure, mul = self.state, self.structure, self._mul
        shift = self.to_state_shift
        error = int(error)
        es = error * (1 << -shift) if shift < 0 else rshift_round(error, shift)
        if structure in ("lead", "lag"):
            w = saturate(es - mul("zc", k, state["e1"]), 32)
            state["v"] = saturate(mul("pc", k, state["v"]) + mul("kc", k, w), 32)
            u = state["v"]
        elif structure == "leadlag":
            w1 = saturate(es - mul("zc1", k, state["e1"]), 32)
            v1 = saturate(mul("pc1", k, state["v1"]) + mul("kc", k, w1), 32)
            w2 = saturate(v1 - mul("zc2", k, state["v1"]), 32)
            state["v2"] = saturate(mul("pc2", k, state["v2"]) + w2, 32)
            state["v1"] = v1
            u = state["v2"]
        else:
            proportional = mul("kp", k, es)
            derivative = 0
            if "d" in self.fields:
                derivative = saturate(mul("kd_a", k, state["d"]) + mul("kd_b", k, saturate(es - state["e1"], 32)), 32)
                state["d"] = derivative
            if "x" in self.fields:
                increment = mul("ki_ts", k, es)
                candidate = saturate(state["x"] + increment, 32)
                trial = saturate(proportional + candidate + derivative, 32)
                if not ((trial > self.u_max and increment > 0) or (trial < self.u_min and increment < 0)):
                    state["x"] = candidate
                u = saturate(proportional + state["x"] + derivative, 32)
            else:
                u = saturate(proportional + derivative, 32)
        state["e1"] = es
        return output_code(self.layout, min(max(u, self.u_min), self.u_max)), u


class TableController:
    """Coefficients looked up along a run and the controller stepped on them.

    Parameters
    ----------
    table : GainTable
        The gain table.
    number_format : str
        One of :data:`SIMULATION_FORMATS`.
    points : ndarray, shape (K, n_axes)
        Scheduling-variable values per sample, in the table's axis order.
    error_full_scale, output_full_scale : float, optional
        Fixed point only: physical error and output of full scale (as for
        :func:`gainloom.codegen.layout_table`).

    Attributes
    ----------
    gains : dict of str to ndarray, shape (K,)
        Coefficients per sample in physical units, exactly the values the
        step uses (float32 values, or stored integers scaled back).
    limits : tuple of float
        Output limits as the format holds them, physical units.
    """

    def __init__(
        self,
        table: GainTable,
        number_format: str,
        points: np.ndarray,
        error_full_scale: float | None = None,
        output_full_scale: float | None = None,
    ) -> None:
        if number_format not in SIMULATION_FORMATS:
            raise InputError(unknown_name_message("number format", number_format, SIMULATION_FORMATS))
        self.number_format = number_format
        self.fields = recorded_fields(table.structure)
        fixed = number_format in ("q15", "q31")
        if not fixed and (error_full_scale is not None or output_full_scale is not None):
            raise InputError("full-scale values apply to q15 and q31 only; float formats work in physical units")
        if number_format == "float64":
            gains = interpolate_table(table, points, np.float64)
            self.layout = None
            self.stepper = FloatStepper(table.structure, gains, table.output_limits, np.float64)
            self.gains = gains
            self.limits = table.output_limits
            return
        layout = layout_table(
            table, number_format, error_full_scale=error_full_scale, output_full_scale=output_full_scale
        )
        self.layout = layout
        if fixed:
            inputs = [quantize(points[:, i], axis.frac, 32) for i, axis in enumerate(layout.axes)]
        else:
            inputs = [points[:, i].astype(np.float32) for i in range(len(layout.axes))]
        stored = lookup_gains(layout, *inputs)
        if fixed:
            self.stepper = FixedStepper(layout, stored)
            self.gains = {c.name: dequantize(stored[c.name], c.frac) * c.scale for c in layout.coefficients}
            scale = layout.output_full_scale / 2.0**STATE_FRAC
            self.limits = (layout.limits[0] * scale, layout.limits[1] * scale)
        else:
            self.stepper = FloatStepper(table.structure, stored, layout.limits, np.float32)
            self.gains = {name: values.astype(float) for name, values in stored.items()}
            self.limits = (float(layout.limits[0]), float(layout.limits[1]))

    @property
    def state_names(self) -> tuple[str, ...]:
        """Readable names of the recorded states."""
        return tuple(STATE_NAMES[name] for name in self.fields)

    def states(self) -> list[float]:
        """Recorded states in physical units (output units)."""
        state = self.stepper.state
        if self.layout is not None and self.layout.fmt.is_fixed:
            scale = self.layout.output_full_scale / 2.0**STATE_FRAC
            return [state[name] * scale for name in self.fields]
        return [float(state[name]) for name in self.fields]

    def step(self, k: int, reference: float, measured: float) -> tuple[float, float]:
        """One controller sample on ``r[k]`` and ``y[k]`` (output units).

        The error is formed as the firmware receives it: float formats hold
        ``r`` and ``y`` in their type and subtract there; fixed-point formats
        get ``r - y`` rounded (and saturated) to Q15/Q31 of error full scale.

        Returns
        -------
        output, unsaturated : float
            ``u[k]`` after saturation and the value before it, physical units.
        """
        if self.layout is None:
            error = np.float64(reference) - np.float64(measured)
            with np.errstate(over="ignore", invalid="ignore"):
                u, v = self.stepper.step(k, error)
            return float(u), float(v)
        fmt = self.layout.fmt
        if not fmt.is_fixed:
            error = np.float32(reference) - np.float32(measured)
            with np.errstate(over="ignore", invalid="ignore"):
                u, v = self.stepper.step(k, error)
            return float(u), float(v)
        code = int(quantize((reference - measured) / self.layout.error_full_scale, fmt.signal_frac, fmt.bits))
        out, internal = self.stepper.step(k, code)
        output = float(dequantize(out, fmt.signal_frac)) * self.layout.output_full_scale
        unsaturated = float(dequantize(internal, STATE_FRAC)) * self.layout.output_full_scale
        return output, unsaturated
