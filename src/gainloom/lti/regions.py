"""Spec regions: where closed-loop poles must lie, in the s- or z-plane.

A :class:`SpecRegion` is defined by s-plane quantities (damping ratio, decay
rate, natural frequency); with a sample period ``ts`` the same specs are read
on z-plane poles through ``s = ln(z) / ts`` (principal logarithm, so
``|Im s| <= pi / ts``).

Conventions
-----------
* Every region also demands strict stability: ``Re s < 0`` (``|z| < 1``).
  The spec limits themselves are closed (``zeta >= min_damping`` etc.).
* ``zeta = -Re s / |s|``; ``s = 0`` (``z = 1``) has ``zeta = 1`` and
  ``wn = 0`` (it fails stability anyway).
* ``z = 0`` has ``zeta = 1`` and ``wn = inf`` (``ln 0 = -inf``): a deadbeat
  pole meets any damping and decay spec but no finite ``wn`` upper limit.
* A real negative ``z`` pole ``-a`` maps to ``s = (ln a + j pi)/ts``: it is
  an oscillation at the Nyquist frequency with ``zeta < 1``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["SpecRegion"]


@dataclass(frozen=True)
class SpecRegion:
    """Where every closed-loop pole must lie.

    Parameters
    ----------
    min_damping : float
        Smallest damping ratio ``zeta``, ``0 <= min_damping < 1``.
    min_decay : float
        Smallest decay rate ``sigma = -Re s`` in 1/s (``>= 0``); settling
        time to 2 % is about ``4 / min_decay`` (common practice, no source).
    wn_range : tuple of float
        ``(low, high)`` natural frequency ``|s|`` in rad/s; ``high`` may be
        ``inf``.
    max_pole_radius : float, optional
        Largest ``|z|``, ``0 < r <= 1``; discrete use only.
    ts : float, optional
        Sample period in seconds; ``None`` for the s-plane.
    """

    min_damping: float = 0.0
    min_decay: float = 0.0
    wn_range: tuple[float, float] = (0.0, math.inf)
    max_pole_radius: float | None = None
    ts: float | None = None

    def __post_init__(self) -> None:
        zeta = float(self.min_damping)
        if not (0.0 <= zeta < 1.0):
            raise InputError(f"min_damping must be in [0, 1); got {self.min_damping}")
        sigma = float(self.min_decay)
        if not (math.isfinite(sigma) and sigma >= 0.0):
            raise InputError(f"min_decay must be a finite rate >= 0 in 1/s; got {self.min_decay}")
        try:
            low, high = (float(v) for v in self.wn_range)
        except (TypeError, ValueError):
            raise InputError(f"wn_range must be (low, high) in rad/s; got {self.wn_range!r}") from None
        if not (math.isfinite(low) and 0.0 <= low < high):
            raise InputError(f"wn_range must satisfy 0 <= low < high (rad/s); got {self.wn_range!r}")
        radius = self.max_pole_radius
        if radius is not None:
            radius = float(radius)
            if not (0.0 < radius <= 1.0):
                raise InputError(f"max_pole_radius must be in (0, 1]; got {self.max_pole_radius}")
        ts = self.ts
        if ts is not None:
            ts = float(ts)
            if not (math.isfinite(ts) and ts > 0):
                raise InputError(f"sample period must be finite and positive; got {self.ts}")
        object.__setattr__(self, "min_damping", zeta)
        object.__setattr__(self, "min_decay", sigma)
        object.__setattr__(self, "wn_range", (low, high))
        object.__setattr__(self, "max_pole_radius", radius)
        object.__setattr__(self, "ts", ts)

    # -- membership -------------------------------------------------------

    def contains(self, poles: object) -> np.ndarray:
        """Which poles lie in the region.

        Parameters
        ----------
        poles : array_like of complex
            Poles in ``s`` (rad/s) when ``ts is None``, else in ``z``.

        Returns
        -------
        ndarray of bool, same shape as ``poles``
        """
        poles = np.asarray(poles, dtype=complex)
        if self.ts is None:
            if self.max_pole_radius is not None:
                raise InputError("max_pole_radius applies to z-plane poles; the region has no sample period ts")
            return self._contains_s(poles)
        with np.errstate(divide="ignore"):
            s = s_from_log(np.log(poles), self.ts)  # z = 0 -> -inf
        return self._contains_s(s, z_abs=np.abs(poles))

    def _contains_s(self, s: np.ndarray, z_abs: np.ndarray | None = None) -> np.ndarray:
        """Membership of poles given as s-plane equivalents.

        ``z_abs`` (``|z|``) is given for z-plane use and carries the radius
        test; ``Re s = -inf`` stands for ``z = 0``.
        """
        s = np.asarray(s, dtype=complex)
        at_zero = np.isneginf(s.real)  # z = 0
        modulus = np.where(at_zero, np.inf, np.abs(np.where(at_zero, 0.0, s)))
        with np.errstate(invalid="ignore", divide="ignore"):
            zeta = np.where(modulus > 0, -s.real / np.where(modulus > 0, modulus, 1.0), 1.0)
        zeta = np.where(at_zero, 1.0, zeta)
        low, high = self.wn_range
        ok = zeta >= self.min_damping
        ok &= -s.real >= self.min_decay
        ok &= (modulus >= low) & (modulus <= high)
        # Strict stability, read on s: Re s = ln|z|/ts < 0 exactly when |z| < 1.
        ok &= s.real < 0
        if z_abs is not None and self.max_pole_radius is not None:
            ok &= z_abs <= self.max_pole_radius
        return ok

    # -- drawing ----------------------------------------------------------

    def boundary_curves(self, n: int = 400, extent: float | None = None) -> list[np.ndarray]:
        """Boundary curves for plotting, in the region's plane.

        Parameters
        ----------
        n : int
            Points per curve.
        extent : float, optional
            s-plane only: how far rays and lines are drawn, rad/s.  Default:
            the finite ``wn`` upper limit, else 10 times the largest finite
            spec frequency, else 1.

        Returns
        -------
        list of ndarray of complex
            In order: the decay boundary (``Re s = -min_decay``, or in ``z``
            the circle ``|z| = exp(-min_decay ts)``; the stability boundary
            when ``min_decay = 0``); the two constant-damping curves (rays
            in ``s``, log-spirals ``exp(s ts)`` in ``z``) when
            ``min_damping > 0``; the ``wn`` contours for a positive lower
            and a finite upper limit (circles in ``s``, their images in
            ``z``, clipped to ``|Im s| <= pi/ts``, one array per arc); the
            ``|z| = max_pole_radius`` circle.
        """
        if n < 2:
            raise InputError(f"boundary_curves needs n >= 2 points per curve; got {n}")
        zeta, sigma = self.min_damping, self.min_decay
        low, high = self.wn_range
        curves: list[np.ndarray] = []
        if self.ts is None:
            if extent is None:
                finite = [v for v in (sigma, low) if v > 0]
                extent = high if math.isfinite(high) else (10.0 * max(finite) if finite else 1.0)
            w = np.linspace(-extent, extent, n)
            curves.append(-sigma + 1j * w)
            if zeta > 0:
                r = np.linspace(0.0, extent, n)
                ray = r * (-zeta + 1j * math.sqrt(1 - zeta**2))
                curves.extend([ray, np.conj(ray)])
            theta = np.linspace(0.0, 2 * math.pi, n)
            for wn in (low, high):
                if 0 < wn < math.inf:
                    curves.append(wn * np.exp(1j * theta))
            return curves
        ts = self.ts
        theta = np.linspace(0.0, 2 * math.pi, n)
        curves.append(math.exp(-sigma * ts) * np.exp(1j * theta))
        if zeta > 0:
            u = np.linspace(0.0, math.pi, n)
            spiral = np.exp(spiral_s(u, zeta, ts) * ts)
            curves.extend([spiral, np.conj(spiral)])
        for wn in (low, high):
            if 0 < wn < math.inf:
                for arc in wn_contour_arcs(wn, ts):
                    psi = np.linspace(arc[0], arc[1], n)
                    image = np.exp(wn * ts * np.exp(1j * psi))
                    curves.extend([image, np.conj(image)])
        if self.max_pole_radius is not None:
            curves.append(self.max_pole_radius * np.exp(1j * theta))
        return curves

    def with_period(self, ts: float | None) -> SpecRegion:
        """The same specs read in another plane (``ts=None``: s-plane)."""
        return SpecRegion(self.min_damping, self.min_decay, self.wn_range, self.max_pole_radius, ts)


def spiral_s(u: np.ndarray, zeta: float, ts: float) -> np.ndarray:
    """s on the constant-damping ray whose z image has angle ``u`` (rad).

    ``u = omega_d ts`` runs over ``[0, pi]`` for the upper half of the
    principal strip; ``z = exp(s ts)`` traces the log-spiral.
    """
    root = math.sqrt(1.0 - zeta**2)
    return (np.asarray(u, dtype=float) / (ts * root)) * (-zeta + 1j * root)


def wn_contour_arcs(wn: float, ts: float) -> list[tuple[float, float]]:
    """Angle ranges ``psi`` of ``s = wn e^{j psi}`` (upper half) inside ``Im s <= pi/ts``."""
    if wn * ts <= math.pi:
        return [(0.0, math.pi)]
    edge = math.asin(math.pi / (wn * ts))
    return [(0.0, edge), (math.pi - edge, math.pi)]


def s_from_log(log_z: np.ndarray, ts: np.ndarray | float) -> np.ndarray:
    """``s = ln(z) / ts`` part by part, so ``ln 0 = -inf`` stays ``-inf`` (no nan)."""
    log_z = np.asarray(log_z, dtype=complex)
    return log_z.real / ts + 1j * (log_z.imag / ts)
