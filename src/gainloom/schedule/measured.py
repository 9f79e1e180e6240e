"""``plant.measured``: the plant as measured frequency responses per operating point.

The section names one CSV file per grid point (``files``) or one file whose
columns include every scheduling variable (``file``); paths are relative to
the schedule file.  At load time every point's data are read, checked and
fitted with a rational model with dead time
(:func:`gainloom.lti.sweep_fit.fit_response`); the fitted models are the
plant the design works on.  Between grid points the models are interpolated
(no extrapolation) through their gain, poles and zeros on log scales
(:mod:`gainloom.lti.root_blend`), the dead time linearly; where the models'
structures differ (a pole pair real at one point and complex at another)
their coefficients are interpolated linearly instead, with a warning.  The
raw data stay with the schedule so that the design can be re-judged on them
(:mod:`gainloom.design.measured_check`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from scipy.interpolate import RegularGridInterpolator

from .. import limits
from ..errors import InputError, ScheduleError
from ..lti.data_margins import GAP_RATIO, data_gaps
from ..lti.polynomials import batched_roots
from ..lti.root_blend import RootCoordinates, coefficients_at, root_coordinates
from ..lti.sweep_fit import ResponseFit, fit_response
from .model import Axis
from .nodes import Node
from .response_csv import UNITS, ResponseTable, read_response_csv, to_response

__all__ = ["FIT_KEYS", "MEASURED_KEYS", "FitSettings", "MeasuredPlant", "grid_index", "read_measured"]

MEASURED_KEYS = ("files", "file", "units", "fit")
FIT_KEYS = ("poles", "zeros", "dead_time", "max_poles", "tolerance")
#: Default rms relative fit error accepted when the order is chosen, and
#: above which a warning is given (common practice, no source: a few
#: percent is the repeatability of a good sweep).
DEFAULT_TOLERANCE = 0.05
DEFAULT_MAX_POLES = 4
#: A right-half-plane pole closer to the origin than the lowest measured
#: frequency over this factor is left unresolved (a warning), not an error.
UNRESOLVED_FACTOR = 10.0
# Grid values of a point in the data match the schedule's within this (relative).
_MATCH = 1e-9


@dataclass(frozen=True)
class FitSettings:
    """``plant.measured.fit``: the order (``None`` = chosen), dead time on/off, tolerance."""

    poles: int | None = None
    zeros: int | None = None
    dead_time: bool = True
    max_poles: int = DEFAULT_MAX_POLES
    tolerance: float = DEFAULT_TOLERANCE


@dataclass(frozen=True, eq=False)
class MeasuredPlant:
    """Measured responses on the grid and the models fitted to them.

    Attributes
    ----------
    node : Node
        The ``plant.measured`` section (for located errors).
    files : tuple of str
        The file each grid point's data came from.
    w : ndarray, shape (P, M)
        Frequencies, rad/s, rising along each row; ``nan`` pads.
    response : ndarray of complex, shape (P, M)
        Measured plant response; ``nan`` pads.
    lines : ndarray of int, shape (P, M)
        Line of each sample in its file (0 pads).
    fit : ResponseFit
        The model per grid point.
    settings : FitSettings
    axes_values : tuple of ndarray
        The grid the models are interpolated over.
    blend : RootCoordinates or None
        The models in log gain/root coordinates, interpolated between grid
        points; ``None`` where their structures differ (coefficients are
        interpolated then).
    warnings : tuple of str
    """

    node: Node
    files: tuple[str, ...]
    w: np.ndarray
    response: np.ndarray
    lines: np.ndarray
    fit: ResponseFit
    settings: FitSettings
    axes_values: tuple[np.ndarray, ...]
    blend: RootCoordinates | None
    warnings: tuple[str, ...]

    def summary(self) -> dict:
        """Plain data: the model order and, per grid point, file, samples, band and fit error."""
        fit = self.fit
        points = []
        for p, file in enumerate(self.files):
            w = self.w[p][np.isfinite(self.w[p])]
            points.append({"file": file, "samples": int(w.size), "band_rad_s": [float(w[0]), float(w[-1])],
                           "rms_error": float(fit.rms_error[p]), "max_error": float(fit.max_error[p]),
                           "outliers": int(np.count_nonzero(fit.outliers[p])),
                           "dead_time_s": float(fit.dead_time[p])})
        return {"poles": fit.poles, "zeros": fit.zeros, "dead_time": self.settings.dead_time, "order": "given" if self.settings.poles is not None
                else "chosen", "tolerance": self.settings.tolerance, "points": points}

    @property
    def between_rule(self) -> str:
        """The assumption that makes the plant between grid points, in words (for the log)."""
        made = ("the fitted models' gain, poles and zeros interpolated on log scales (Bode asymptotes in dB, "
                "corner frequencies on a log axis)" if self.blend is not None else
                "the fitted models' coefficients interpolated linearly (their root structures differ)")
        return f"between grid points the plant is an assumption, nothing was measured there: {made}, the dead " \
               "time linearly"

    def source(self, point: int, sample: int) -> str:
        """``file:line`` of one sample."""
        return f"{self.files[point]}:{int(self.lines[point, sample])}"

    def models_at(self, points: np.ndarray, where) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Fitted ``num``, ``den`` (descending in ``s``) and dead time at ``points`` (Q, n_axes).

        Between grid points: the gain, poles and zeros interpolated on log
        scales (``blend``), or the coefficients where the structures differ;
        the dead time linearly.  ``where(bad, points)`` describes the first
        point outside the grid for the error message.
        """
        fit = self.fit
        models = self.blend.values if self.blend is not None else np.concatenate([fit.num, fit.den], axis=1)
        out = self._interpolate(np.concatenate([models, fit.dead_time[:, np.newaxis]], axis=1), points)
        bad = ~np.all(np.isfinite(out), axis=1)
        if np.any(bad):
            raise self.node.error(f"measured data cover only the grid; a model is asked for {where(bad, points)} "
                                  "(no extrapolation)")
        if self.blend is not None:
            num, den = coefficients_at(self.blend, out[:, :-1])
            return num, den, out[:, -1]
        order = fit.poles + 1
        return out[:, :order], out[:, order : 2 * order], out[:, -1]

    def _interpolate(self, values: np.ndarray, points: np.ndarray) -> np.ndarray:
        """Rows of ``values`` (one per grid point) interpolated (multi)linearly at ``points``, ``nan`` outside."""
        shape = tuple(v.size for v in self.axes_values)
        table = RegularGridInterpolator(self.axes_values, values.reshape(shape + (values.shape[1],)),
                                        bounds_error=False, fill_value=np.nan)
        return table(points)


def read_measured(node: Node, axes: tuple[Axis, ...], points: np.ndarray, describe) -> MeasuredPlant:
    """Read, check and fit ``plant.measured``.

    Parameters
    ----------
    node : Node
        The ``plant.measured`` mapping.
    axes : tuple of Axis
    points : ndarray, shape (P, n_axes)
        The grid's operating points, first axis slowest.
    describe : callable
        ``describe(point)`` text of one operating point.

    Raises
    ------
    ScheduleError
        Located in the schedule (keys, units, a grid point without data) or
        in a CSV file (file, line, column).
    """
    keys = node.mapping(MEASURED_KEYS)
    given = [k for k in ("files", "file") if k in keys]
    if len(given) != 1:
        raise node.error("plant.measured needs exactly one of 'files' (one CSV per operating point) and 'file' "
                         f"(one CSV with a column per scheduling variable); found {' and '.join(given) or 'none'}")
    units = _read_units(keys.get("units"))
    settings = _read_fit(keys.get("fit"))
    base = Path(node.file).parent
    if "files" in keys:
        per_point = _per_point_files(keys["files"], axes, points, base, units)
    else:
        per_point = _one_file(keys["file"], axes, points, base, units)
    files = tuple(table.file for table, _ in per_point)
    samples = [to_response(table, rows) for table, rows in per_point]
    for p, ((table, rows), (w, _)) in enumerate(zip(per_point, samples)):
        if w.size < limits.MIN_RESPONSE_SAMPLES:
            raise ScheduleError(f"{w.size} samples for {describe(points[p])}; a measured plant needs at least "
                                f"{limits.MIN_RESPONSE_SAMPLES} per point (limits in docs/schedule-format.md)",
                                file=table.file, line=int(table.lines[rows[-1]]) if rows.size else None)
    width = max(w.size for w, _ in samples)
    w_all = np.full((points.shape[0], width), np.nan)
    h_all = np.full((points.shape[0], width), np.nan + 0j)
    lines = np.zeros((points.shape[0], width), dtype=int)
    for p, ((table, rows), (w, h)) in enumerate(zip(per_point, samples)):
        w_all[p, : w.size], h_all[p, : w.size], lines[p, : w.size] = w, h, table.lines[rows]
    fit = _fit(node, w_all, h_all, settings)
    for array in (w_all, h_all, lines):
        array.setflags(write=False)
    plant = MeasuredPlant(node=node, files=files, w=w_all, response=h_all, lines=lines, fit=fit, settings=settings,
                          axes_values=tuple(a.values for a in axes), blend=root_coordinates(fit.num, fit.den),
                          warnings=())
    return replace(plant, warnings=tuple(_fit_warnings(plant, points, describe)))


def _read_units(node: Node | None) -> dict[str, str]:
    if node is None or node.is_null:
        return {}
    keys = node.mapping(tuple(UNITS))
    return {quantity: keys[quantity].choice(f"{quantity} unit", UNITS[quantity]) for quantity in keys}


def _read_fit(node: Node | None) -> FitSettings:
    if node is None or node.is_null:
        return FitSettings()
    keys = node.mapping(FIT_KEYS)
    max_poles = keys["max_poles"].count("max_poles", 1, limits.MAX_FIT_POLES) if "max_poles" in keys \
        else DEFAULT_MAX_POLES
    poles = keys["poles"].count("fitted pole count", 1, limits.MAX_FIT_POLES) if "poles" in keys else None
    zeros = None
    if "zeros" in keys:
        if poles is None:
            raise keys["zeros"].error("fit.zeros needs fit.poles (the order is given whole or chosen whole)")
        zeros = keys["zeros"].count("fitted zero count", 0, poles)
    elif poles is not None:
        zeros = 0
    tolerance = DEFAULT_TOLERANCE
    if "tolerance" in keys:
        tolerance = keys["tolerance"].number()
        if not 0 < tolerance < 1:
            raise keys["tolerance"].error(f"fit tolerance is a relative error between 0 and 1; found {tolerance:g}")
    dead_time = keys["dead_time"].boolean() if "dead_time" in keys else True
    return FitSettings(poles=poles, zeros=zeros, dead_time=dead_time, max_poles=max_poles, tolerance=tolerance)


def _resolve(item: Node, base: Path) -> str:
    path = Path(item.text())
    return str(path if path.is_absolute() else base / path)


def grid_index(values: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Index of the row of ``points`` (Q, n_axes) each row of ``values`` (R, n_axes) is, -1 for none."""
    scale = np.maximum(np.abs(points).max(axis=0), 1.0)
    close = np.all(np.abs(values[:, np.newaxis, :] - points[np.newaxis, :, :]) <= _MATCH * scale, axis=2)
    return np.where(close.any(axis=1), np.argmax(close, axis=1), -1)


def _grid_text(axes: tuple[Axis, ...]) -> str:
    return "; ".join(f"{a.name}: {', '.join(f'{v:g}' for v in a.values)}" for a in axes)


def _at(node: Node, axes: tuple[Axis, ...]) -> np.ndarray:
    """An ``at`` entry: a number (one variable) or a mapping of every variable."""
    if len(axes) == 1 and not node.is_mapping:
        return np.array([node.number()])
    keys = node.mapping(tuple(a.name for a in axes), required=tuple(a.name for a in axes))
    return np.array([keys[a.name].number() for a in axes])


def _per_point_files(node: Node, axes, points, base: Path, units) -> list[tuple[ResponseTable, np.ndarray]]:
    tables: dict[int, tuple[ResponseTable, np.ndarray]] = {}
    for item in node.sequence(min_length=1, what="files"):
        keys = item.mapping(("at", "file"), required=("at", "file"))
        index = int(grid_index(_at(keys["at"], axes)[np.newaxis, :], points)[0])
        if index < 0:
            raise keys["at"].error(f"'at' is not a grid point ({_grid_text(axes)})")
        if index in tables:
            raise keys["at"].error("this grid point already has a file")
        table = read_response_csv(_resolve(keys["file"], base), (), units)
        tables[index] = (table, np.arange(table.lines.size))
    missing = [p for p in range(points.shape[0]) if p not in tables]
    if missing:
        shown = ", ".join(" ".join(f"{a.name}={v:g}" for a, v in zip(axes, points[p])) for p in missing[:5])
        raise node.error(f"no measured data for {len(missing)} grid point(s): {shown}; every grid point needs a file")
    return [tables[p] for p in range(points.shape[0])]


def _one_file(node: Node, axes, points, base: Path, units) -> list[tuple[ResponseTable, np.ndarray]]:
    names = tuple(a.name for a in axes)
    table = read_response_csv(_resolve(node, base), names, units)
    values = np.stack([table.columns[n.lower()] for n in names], axis=1)
    index = grid_index(values, points)
    if np.any(index < 0):
        row = int(np.flatnonzero(index < 0)[0])
        shown = ", ".join(f"{n}={v:g}" for n, v in zip(names, values[row]))
        raise table.error(f"{shown} is not a grid point ({_grid_text(axes)})", row, names[0].lower())
    missing = [p for p in range(points.shape[0]) if not np.any(index == p)]
    if missing:
        shown = ", ".join(" ".join(f"{a.name}={v:g}" for a, v in zip(axes, points[p])) for p in missing[:5])
        raise node.error(f"{table.file} holds no rows for {len(missing)} grid point(s): {shown}")
    return [(table, np.flatnonzero(index == p)) for p in range(points.shape[0])]


def _orders(settings: FitSettings) -> list[tuple[int, int]]:
    if settings.poles is not None:
        return [(settings.poles, settings.zeros or 0)]
    candidates = [(n, m) for n in range(1, settings.max_poles + 1) for m in range(n)]
    return sorted(candidates, key=lambda order: (order[0] + order[1], order[0]))


def _fit(node: Node, w: np.ndarray, h: np.ndarray, settings: FitSettings) -> ResponseFit:
    """The given order, or the simplest whose rms error meets the tolerance at every point."""
    best = None
    for poles, zeros in _orders(settings):
        try:
            fit = fit_response(w, h, poles, zeros, fit_delay=settings.dead_time)
        except InputError as error:
            raise node.error(str(error)) from None
        stable = not np.any(_right_half_plane(fit, w)[1])
        if stable and np.all(fit.rms_error <= settings.tolerance):
            return fit
        # the best so far: a stable model first, then the smaller worst error
        if best is None or (stable, -np.max(fit.rms_error)) > best[0]:
            best = ((stable, -np.max(fit.rms_error)), fit)
    assert best is not None
    return best[1]


def _right_half_plane(fit: ResponseFit, w: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Poles (P, n), those in the right half plane far below the data (unresolved), and the others."""
    poles = batched_roots(fit.den)
    lowest = np.nanmin(w, axis=1)[:, np.newaxis]
    # a pole far below the data's band is not pinned down: an integrator may come out at +0.01 rad/s
    unresolved = (poles.real > 0) & (np.abs(poles) < lowest / UNRESOLVED_FACTOR)
    return poles, (poles.real > 0) & ~unresolved, unresolved


def _fit_warnings(plant: MeasuredPlant, points: np.ndarray, describe) -> list[str]:
    fit, settings = plant.fit, plant.settings
    warnings = []
    chosen = "given" if settings.poles is not None else "chosen"
    poor = np.flatnonzero(fit.rms_error > settings.tolerance)
    if poor.size:
        p = int(poor[np.argmax(fit.rms_error[poor])])
        warnings.append(
            f"measured plant: the fitted model ({fit.poles} poles, {fit.zeros} zeros, {chosen}) misses the data "
            f"by more than the tolerance {100 * settings.tolerance:g} % (rms relative) at {poor.size} point(s), "
            f"worst {100 * fit.rms_error[p]:.1f} % at {describe(points[p])}; the design on the model is re-judged "
            "on the data, but a better order (plant.measured.fit) gives a better design")
    if plant.blend is None and points.shape[0] > 1:
        other = next((p for p in range(1, points.shape[0])
                      if root_coordinates(fit.num[[0, p]], fit.den[[0, p]]) is None), 0)
        which = (f"the fitted models at {describe(points[0])} and {describe(points[other])} differ in structure "
                 "(real and complex roots, or their signs)" if other else "a fitted model has a root at the origin")
        warnings.append(
            f"measured plant: {which}, so between grid points their coefficients are interpolated linearly instead "
            "of their gain, poles and zeros (docs/schedule-format.md, measured); table.between_points judges that "
            "interpolation")
    for p, k in np.argwhere(data_gaps(plant.w)):
        warnings.append(f"measured plant: a gap in the data between {plant.source(int(p), int(k))} and line "
                        f"{int(plant.lines[p, k + 1])} ({plant.w[p, k] / (2 * np.pi):.4g} .. "
                        f"{plant.w[p, k + 1] / (2 * np.pi):.4g} Hz, more than {GAP_RATIO:g} times the median step): "
                        "the fit does not see it, and a crossover or a peak there cannot be judged on the data")
    for p, k in np.argwhere(fit.outliers):
        warnings.append(f"measured plant: sample at {plant.source(int(p), int(k))} ({plant.w[p, k] / (2 * np.pi):.4g} "
                        "Hz) is an isolated outlier, left out of the fit (the data-judged margins still use it; "
                        "check or delete the row)")
    poles, unstable, unresolved = _right_half_plane(fit, plant.w)
    lowest = np.nanmin(plant.w, axis=1)[:, np.newaxis]
    if np.any(unstable):
        p = int(np.flatnonzero(np.any(unstable, axis=1))[0])
        worst = poles[p][np.argmax(np.where(unstable[p], poles[p].real, -np.inf))]
        raise plant.node.error(
            f"the fitted model at {describe(points[p])} has a right-half-plane pole at {worst:.4g} rad/s "
            f"(rms fit error {100 * fit.rms_error[p]:.1f} %); a plant swept in open loop is stable, so the fit "
            f"failed: give plant.measured.fit an order that follows the data ({fit.poles} poles, {fit.zeros} "
            "zeros now), or check the data there")
    if np.any(unresolved):
        p = int(np.flatnonzero(np.any(unresolved, axis=1))[0])
        warnings.append(f"measured plant: the fitted model has a pole at {np.max(poles[p].real):.3g} rad/s at "
                        f"{describe(points[p])}, far below the lowest measured frequency {lowest[p, 0]:.4g} rad/s: "
                        "the data do not pin it down (an integrator?); the design treats it as it is")
    return warnings
