"""Transfer functions interpolated through their gain, poles and zeros on log scales.

Between two operating points where a model is known (e.g. fitted to a
measured sweep) nothing says what the plant is; the interpolation is an
assumption.  Interpolating the polynomial coefficients linearly is the
simplest one, but it has no physical meaning: for a gain that goes as
1/inertia it overstates the gain midway between inertia 1x and 2x by 12 %,
and the segment between two stable polynomials of degree three or more may
hold unstable ones.

Here every model is written as

    P(s) = k  prod (s - z_i) / prod (s - p_i)

and interpolated in these coordinates: ``log |k|``; ``log |r|`` of every
real root; ``log wn`` and the damping ratio ``zeta`` of every complex pair.
Linear interpolation of these is linear interpolation of the Bode
asymptotes in dB with the corner frequencies on a log axis (what a drive
engineer reads off two measured sweeps); a root never crosses the imaginary
axis on the way, and a pole that moves as ``1/J`` is off by
``sqrt(2)/1.5 - 1 = 6 %`` midway between ``J`` and ``2 J`` instead of 12 %.

The coordinates only make sense when every point has the same structure:
the same numbers of real roots of each sign and of complex pairs, in
numerator and denominator, and a gain of one sign.  Roots are matched
between points by rising magnitude within each kind.
:func:`root_coordinates` returns ``None`` when the structures differ (the
caller then interpolates coefficients and says so).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .convert import tf_to_zpk, zpk_to_tf

__all__ = ["RootCoordinates", "coefficients_at", "root_coordinates"]

#: A root whose imaginary part is below this fraction of its magnitude is real.
REAL_ROOT = 1e-9


@dataclass(frozen=True)
class _RootKinds:
    """Shape of one polynomial's roots: counts of negative reals, positive reals, complex pairs."""

    negative: int
    positive: int
    pairs: int

    @property
    def width(self) -> int:
        """Coordinates it takes: one per real root, two per pair."""
        return self.negative + self.positive + 2 * self.pairs


@dataclass(frozen=True, eq=False)
class RootCoordinates:
    """Models of a batch of points in log gain/root coordinates.

    Attributes
    ----------
    values : ndarray, shape (P, K)
        Per point: ``log |k|``, then for the zeros and then the poles:
        ``log |r|`` of the negative reals, of the positive reals (each
        rising), then ``log wn`` and ``zeta`` of each complex pair (``wn``
        rising).
    gain_sign : float
        Sign of ``k``, the same at every point.
    zeros, poles : _RootKinds
    order : int
        Denominator degree ``n``; numerators are returned left-padded to
        ``n + 1`` coefficients.
    """

    values: np.ndarray
    gain_sign: float
    zeros: _RootKinds
    poles: _RootKinds
    order: int


def _kinds(roots: np.ndarray) -> list[_RootKinds] | None:
    """Root kinds of every row of ``roots`` (finite entries only), ``None`` where a root is 0."""
    finite = np.isfinite(roots)
    if np.any(finite & (roots == 0)):
        return None
    real = finite & (np.abs(roots.imag) <= REAL_ROOT * np.abs(roots))
    upper = finite & ~real & (roots.imag > 0)
    return [_RootKinds(int(np.sum(real[p] & (roots[p].real < 0))), int(np.sum(real[p] & (roots[p].real > 0))),
                       int(np.sum(upper[p]))) for p in range(roots.shape[0])]


def _coordinates(roots: np.ndarray, kinds: _RootKinds) -> np.ndarray:
    """Coordinates (P, kinds.width) of rows that all have ``kinds``."""
    finite = np.isfinite(roots)
    real = finite & (np.abs(roots.imag) <= REAL_ROOT * np.abs(roots))
    magnitude = np.where(finite, np.abs(roots), np.inf)
    parts = []
    for mask, count in ((real & (roots.real < 0), kinds.negative), (real & (roots.real > 0), kinds.positive)):
        parts.append(np.log(np.sort(np.where(mask, magnitude, np.inf), axis=1)[:, :count]))
    upper = finite & ~real & (roots.imag > 0)
    order = np.argsort(np.where(upper, magnitude, np.inf), axis=1)[:, : kinds.pairs]
    pairs = np.take_along_axis(roots, order, axis=1)
    wn = np.abs(pairs)
    # zeta and log wn side by side per pair
    parts.append(np.stack([np.log(wn), -pairs.real / wn], axis=2).reshape(roots.shape[0], 2 * kinds.pairs))
    return np.concatenate(parts, axis=1)


def root_coordinates(num: np.ndarray, den: np.ndarray) -> RootCoordinates | None:
    """Log gain/root coordinates of a batch of models, or ``None`` when their structures differ.

    Parameters
    ----------
    num, den : ndarray, shape (P, n + 1)
        Descending coefficients in ``s``; ``num`` may carry leading zeros.

    Returns
    -------
    RootCoordinates or None
        ``None`` when the points differ in root structure (see the module
        docstring), the gain changes sign, or a root is at the origin.
    """
    zeros, poles, gain = tf_to_zpk(num, den)
    zero_kinds, pole_kinds = _kinds(zeros), _kinds(poles)
    if zero_kinds is None or pole_kinds is None or np.any(gain == 0):
        return None
    if len(set(zero_kinds)) != 1 or len(set(pole_kinds)) != 1 or len(set(np.sign(gain).tolist())) != 1:
        return None
    values = np.concatenate([np.log(np.abs(gain))[:, np.newaxis], _coordinates(zeros, zero_kinds[0]),
                             _coordinates(poles, pole_kinds[0])], axis=1)
    return RootCoordinates(values=values, gain_sign=float(np.sign(gain[0])), zeros=zero_kinds[0],
                           poles=pole_kinds[0], order=den.shape[1] - 1)


def _roots(values: np.ndarray, kinds: _RootKinds) -> np.ndarray:
    """Roots (Q, count) from coordinates (Q, kinds.width)."""
    reals = kinds.negative + kinds.positive
    negative = -np.exp(values[:, : kinds.negative])
    positive = np.exp(values[:, kinds.negative : reals])
    pair = values[:, reals:].reshape(values.shape[0], kinds.pairs, 2)
    wn, zeta = np.exp(pair[..., 0]), np.clip(pair[..., 1], -1.0, 1.0)
    upper = wn * (-zeta + 1j * np.sqrt(1.0 - zeta**2))
    return np.concatenate([negative, positive, upper, np.conj(upper)], axis=1)


def coefficients_at(coordinates: RootCoordinates, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Transfer functions back from (interpolated) coordinates.

    Parameters
    ----------
    coordinates : RootCoordinates
        The structure the values belong to.
    values : ndarray, shape (Q, K)
        Coordinates, e.g. interpolated between the rows of
        ``coordinates.values``.

    Returns
    -------
    num, den : ndarray, shape (Q, n + 1)
        Descending coefficients in ``s``, monic ``den``, ``num`` left-padded.
    """
    split = 1 + coordinates.zeros.width
    zeros = _roots(values[:, 1:split], coordinates.zeros)
    poles = _roots(values[:, split:], coordinates.poles)
    infinite = np.full((values.shape[0], coordinates.order - zeros.shape[1]), np.inf)
    return zpk_to_tf(np.concatenate([zeros, infinite], axis=1), poles, coordinates.gain_sign * np.exp(values[:, 0]))
