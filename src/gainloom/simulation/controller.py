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

The closed loop needs the step one sample at a time: it uses the mirror's
own per-sample steppers (``codegen.mirror.FloatStepper`` / ``FixedStepper``),
the very code the host harness checks bit for bit against the compiled C.

All states start at zero and ``e[-1] = 0`` (a controller switched on at
``t = 0``), so a derivative sees the first error as a step.
"""

from __future__ import annotations

import numpy as np

from ..codegen.layout import LIMIT_TABLES, layout_table
from ..codegen.mirror import FixedStepper, FloatStepper, lookup_gains, state_fields
from ..codegen.qformat import STATE_FRAC, dequantize, quantize
from ..design.lookup import interpolate_grid, interpolate_grids, interpolate_table
from ..design.table import GainTable
from ..errors import InputError
from ..names import NUMBER_FORMATS, unknown_name_message

__all__ = ["SIMULATION_FORMATS", "STATE_NAMES", "TableController"]

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
    """Mirror state fields recorded per sample (the previous error and the filter sections' past
    values are left out: the controller's own states are what a firmware engineer traces)."""
    return tuple(name for name in state_fields(structure) if name != "e1")


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
        Output limits as the format holds them, physical units (tabulated
        limits: their envelope; the step uses the per-sample values).
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
            stepped = dict(gains)
            axes_values = tuple(axis.values for axis in table.axes)
            # the filter sections' coefficients are interpolated like the gains, as the C does
            stepped.update(interpolate_grids(axes_values, table.filter_grids, points, np.float64))
            if table.limits_vary:  # looked up per sample with the coefficients, as the C does
                for name, grid in zip(LIMIT_TABLES, table.limit_grids):
                    stepped[name] = interpolate_grid(axes_values, grid, points, np.float64)
            self.stepper = FloatStepper(table.structure, stepped, table.limit_envelope, np.float64)
            self.gains = gains
            self.limits = table.limit_envelope
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

    def limits_in_force(self) -> tuple[float, float]:
        """The output limits the last step used (the table's, tabulated or
        run-time), physical units."""
        low, high = self.stepper.in_force
        if self.layout is not None and self.layout.fmt.is_fixed:
            scale = self.layout.output_full_scale / 2.0**STATE_FRAC
            return low * scale, high * scale
        return float(low), float(high)

    def step(
        self,
        k: int,
        reference: float,
        measured: float,
        feedforward: float = 0.0,
        limits: tuple[float, float] | None = None,
    ) -> tuple[float, float]:
        """One controller sample on ``r[k]`` and ``y[k]`` (output units).

        The error is formed as the firmware receives it: float formats hold
        ``r`` and ``y`` in their type and subtract there; fixed-point formats
        get ``r - y`` rounded (and saturated) to Q15/Q31 of error full scale.
        ``feedforward`` (output units) is added before saturation and
        ``limits`` ``(low, high)`` (output units) replace the table's for
        this sample, as the generated step's feedforward and run-time limits;
        in fixed point both are rounded to Q15/Q31 of output full scale.

        Returns
        -------
        output, unsaturated : float
            ``u[k]`` after saturation and the value before it, physical units.
        """
        if self.layout is None:
            error = np.float64(reference) - np.float64(measured)
            with np.errstate(over="ignore", invalid="ignore"):
                u, v = self.stepper.step(k, error, np.float64(feedforward), limits)
            return float(u), float(v)
        fmt = self.layout.fmt
        if not fmt.is_fixed:
            with np.errstate(over="ignore", invalid="ignore"):
                # a diverging run passes float32's range before it is stopped
                error = np.float32(reference) - np.float32(measured)
                u, v = self.stepper.step(k, error, np.float32(feedforward), limits)
            return float(u), float(v)
        code = int(quantize((reference - measured) / self.layout.error_full_scale, fmt.signal_frac, fmt.bits))
        out_codes = [
            int(quantize(value / self.layout.output_full_scale, fmt.signal_frac, fmt.bits))
            for value in (feedforward, *(limits or ()))
        ]
        out, internal = self.stepper.step(k, code, out_codes[0], tuple(out_codes[1:]) if limits else None)
        output = float(dequantize(out, fmt.signal_frac)) * self.layout.output_full_scale
        unsaturated = float(dequantize(internal, STATE_FRAC)) * self.layout.output_full_scale
        return output, unsaturated
