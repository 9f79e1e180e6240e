"""The controller as the firmware runs it, one sample at a time.

The difference equations, saturation and conditional-integration anti-windup
are those of DEVELOPERS.md ("Discrete controller forms"), evaluated left to
right in the number format's own arithmetic:

- ``float64``: ideal reference arithmetic (not a firmware format);
- ``float32``: numpy single precision, one IEEE rounding per operation;
- ``q15`` / ``q31``: the code-generation layer's fixed-point mirror (the only
  fixed-point implementation in gainloom; the simulator does not have its own).

All states start at zero and ``e[-1] = 0`` (a controller switched on at
``t = 0``), so a derivative sees the first error as a step.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..names import CONTROLLER_COEFFICIENTS, NUMBER_FORMATS, unknown_name_message

__all__ = ["SIMULATION_FORMATS", "FloatController", "make_controller"]

#: Number formats the simulator can run the controller in: the emitted C
#: formats plus ``float64`` as an ideal reference.
SIMULATION_FORMATS: tuple[str, ...] = ("float64",) + NUMBER_FORMATS

_FLOAT_TYPES = {"float64": np.float64, "float32": np.float32}

#: State names each structure records per sample (for the log and plots).
STATE_NAMES: dict[str, tuple[str, ...]] = {
    "p": (),
    "pi": ("integrator",),
    "pd": ("derivative",),
    "pid": ("integrator", "derivative"),
    "lead": ("section",),
    "lag": ("section",),
    "leadlag": ("section1", "section2"),
}


class FloatController:
    """One controller in float arithmetic with per-sample coefficients.

    Parameters
    ----------
    structure : str
        One of :data:`gainloom.names.CONTROLLER_STRUCTURES`.
    gains : dict of str to ndarray, shape (K,)
        Interpolated coefficients at every sample, already in ``dtype``.
    limits : tuple of float
        Output saturation ``(u_min, u_max)``, controller-output units.
    dtype : numpy float type
        ``np.float32`` or ``np.float64``.
    """

    def __init__(self, structure: str, gains: dict[str, np.ndarray], limits: tuple[float, float], dtype) -> None:
        self.structure = structure
        self.dtype = dtype
        self.gains = {name: np.asarray(gains[name]).astype(dtype) for name in CONTROLLER_COEFFICIENTS[structure]}
        self.low = dtype(limits[0])
        self.high = dtype(limits[1])
        zero = dtype(0)
        self.error_prev = zero
        self.integrator = zero
        self.derivative = zero
        self.section1 = zero
        self.section2 = zero

    def quantise(self, value: float):
        """A measured or reference value as the firmware holds it."""
        return self.dtype(value)

    def states(self) -> tuple:
        """Current internal states, in :data:`STATE_NAMES` order."""
        structure = self.structure
        if structure == "pi":
            return (self.integrator,)
        if structure == "pd":
            return (self.derivative,)
        if structure == "pid":
            return (self.integrator, self.derivative)
        if structure in ("lead", "lag"):
            return (self.section1,)
        if structure == "leadlag":
            return (self.section1, self.section2)
        return ()

    def step(self, k: int, reference: float, measured: float):
        """Advance one sample.

        Parameters
        ----------
        k : int
            Sample index (selects the interpolated coefficients).
        reference, measured : float
            ``r[k]`` and ``y[k]``, output units.

        Returns
        -------
        output : dtype
            Saturated controller output ``u[k]``.
        unsaturated : dtype
            The output before saturation (after anti-windup).
        """
        g = self.gains
        error = self.quantise(reference) - self.quantise(measured)
        structure = self.structure
        if structure == "p":
            value = g["kp"][k] * error
        elif structure in ("pi", "pd", "pid"):
            proportional = g["kp"][k] * error
            if structure != "pi":
                derivative = g["kd_a"][k] * self.derivative + g["kd_b"][k] * (error - self.error_prev)
            if structure == "pd":
                value = proportional + derivative
            else:
                candidate = self.integrator + g["ki_ts"][k] * error
                value = proportional + candidate
                if structure == "pid":
                    value = value + derivative
                # Conditional integration: refuse the new integrator value
                # when the output is beyond a limit and e pushes further out.
                if (value > self.high and error > 0) or (value < self.low and error < 0):
                    candidate = self.integrator
                    value = proportional + candidate
                    if structure == "pid":
                        value = value + derivative
                self.integrator = candidate
            if structure != "pi":
                self.derivative = derivative
        elif structure in ("lead", "lag"):
            value = g["pc"][k] * self.section1 + g["kc"][k] * (error - g["zc"][k] * self.error_prev)
            self.section1 = value
        elif structure == "leadlag":
            first = g["pc1"][k] * self.section1 + g["kc"][k] * (error - g["zc1"][k] * self.error_prev)
            value = g["pc2"][k] * self.section2 + (first - g["zc2"][k] * self.section1)
            self.section1 = first
            self.section2 = value
        else:  # pragma: no cover - structures come from the validated table
            raise InputError(f"no controller form for structure {structure!r}")
        self.error_prev = error
        output = min(max(value, self.low), self.high)
        return self.dtype(output), self.dtype(value)


def make_controller(number_format: str, structure: str, gains: dict[str, np.ndarray], limits: tuple[float, float]):
    """Build the per-sample controller for ``number_format``.

    Parameters
    ----------
    number_format : str
        One of :data:`SIMULATION_FORMATS`.
    structure : str
        Controller structure of the table.
    gains : dict of str to ndarray, shape (K,)
        Interpolated coefficients per sample, in the format's type.
    limits : tuple of float
        Output saturation ``(u_min, u_max)``.
    """
    if number_format not in SIMULATION_FORMATS:
        raise InputError(unknown_name_message("number format", number_format, SIMULATION_FORMATS))
    if number_format in _FLOAT_TYPES:
        return FloatController(structure, gains, limits, _FLOAT_TYPES[number_format])
    raise InputError(
        f"number format {number_format!r} needs the code-generation layer's fixed-point mirror, "
        "which this build does not have yet; simulate with float32 or float64"
    )


def float_type(number_format: str):
    """numpy type the coefficients are interpolated in for ``number_format``."""
    if number_format not in SIMULATION_FORMATS:
        raise InputError(unknown_name_message("number format", number_format, SIMULATION_FORMATS))
    return _FLOAT_TYPES.get(number_format, np.float64)
