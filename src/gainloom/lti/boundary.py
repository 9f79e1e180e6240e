"""Gains at which a closed-loop root lies on a boundary curve.

For a loop ``K N(x) / D(x)`` (``x`` is ``s``, ``z`` or the delta variable
``g = (z - 1)/ts``) a real gain ``K`` puts a closed-loop root on a curve
``c(t)`` at parameter ``t`` when ``D(c) + K N(c) = 0``, i.e. ``K = -D/N`` is
real, i.e. ``Im(D(c) conj N(c)) = 0``.

* **Lines** ``c(t) = origin + direction t`` (imaginary axis, vertical lines
  ``Re s = -sigma``, constant-damping rays): ``Im(D conj N)`` is a real
  polynomial in ``t``; its real roots are found with ``numpy.roots``.
* **Circles** symmetric about the real axis, given by their real-axis points
  ``right > left`` (``|s| = wn``, ``|z| = r``, and their images in ``g``):
  the tangent half-angle form ``c(v) = (right - j left v) / (1 - j v)``
  (equivalent to ``c = centre + radius e^{j theta}`` with
  ``v = tan(theta / 2)``) turns ``(1 - jv)^n D(c(v))`` into a polynomial in
  ``v`` of degree ``n``; its real roots are the points on the circle.  This
  is the same condition as roots of the ``e^{j theta}`` polynomial lying on
  the unit circle, but real roots are better conditioned than unit-modulus
  ones when crossings crowd near one point (fast sampling), and the delta
  form keeps ``right = (r - 1)/ts`` exact.
* **Sampled curves** (log-spirals of constant damping and constant-``wn``
  contours in ``z``): sign changes of ``Im(D conj N)`` normalised by
  ``|D|^2 + |N|^2`` on a fine grid, refined by :func:`scipy.optimize.brentq`.
  Tangencies (a root touching the curve without crossing it) can be missed;
  they do not change which side of the curve the roots are on.

Every curve's real-axis points are added directly (``K = -D(x)/N(x)`` at
real ``x``).  Roots of ``Im(D conj N)`` where ``N(c) = 0`` are dropped (they
belong to ``K -> infinity``) unless ``D(c) = 0`` too: then ``N`` and ``D``
share a root on the curve and a closed-loop root sits there for *every*
gain; it is reported in :attr:`Crossings.fixed_points`.

Polynomial crossings are polished by Newton steps on the complex equation
``D(c(t)) + K N(c(t)) = 0`` in the two real unknowns ``(t, K)``, which uses
the loop's own coefficients rather than the squared-up ``Im`` polynomial.
Only the upper half (``Im c >= 0``) of each curve is searched: all curves
here are symmetric about the real axis and closed-loop roots come in
conjugate pairs.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from ..errors import InputError
from .polynomials import pad_left

__all__ = [
    "Crossings",
    "line_crossings",
    "circle_crossings",
    "sampled_crossings",
    "imaginary_axis_crossings",
    "unit_circle_crossings",
    "expm1_complex",
    "log1p_complex",
]

#: Relative size of |N| (against |D| + |N| scale) below which N counts as zero.
_ZERO_N = 1e-10
#: Largest |Im t| / max(1, |t|) for which a root of the Im polynomial counts as real.
_REAL_ROOT = 1e-6


@dataclass(frozen=True)
class Crossings:
    """Real gains at which a closed-loop root lies on one curve.

    Attributes
    ----------
    gains : ndarray of float, shape (m,)
        The gains, sorted ascending (any sign; infinite ones left out).
    points : ndarray of complex, shape (m,)
        The closed-loop root on the curve at each gain, in the polynomial's
        own variable (``s``, ``z`` or ``g``), upper half-plane.
    fixed_points : ndarray of complex, shape (f,)
        Points of the curve where numerator and denominator vanish together:
        a closed-loop root stays there for every gain.
    """

    gains: np.ndarray
    points: np.ndarray
    fixed_points: np.ndarray

    @property
    def fixed(self) -> bool:
        """True when some closed-loop root is pinned to the curve for all gains."""
        return self.fixed_points.size > 0


def expm1_complex(x: np.ndarray) -> np.ndarray:
    """``exp(x) - 1`` for complex ``x`` without cancellation near ``x = 0``."""
    x = np.asarray(x, dtype=complex)
    a, b = x.real, x.imag
    real = np.expm1(a) * np.cos(b) - 2.0 * np.sin(b / 2.0) ** 2
    return real + 1j * np.exp(a) * np.sin(b)


def log1p_complex(x: np.ndarray) -> np.ndarray:
    """Principal ``log(1 + x)`` for complex ``x`` without cancellation near 0.

    ``x = -1`` gives ``-inf`` real part (``z = 0``); no warning is raised.
    """
    x = np.asarray(x, dtype=complex)
    a, b = x.real, x.imag
    with np.errstate(divide="ignore"):
        # |1 + x|^2 - 1 = 2a + a^2 + b^2, formed without subtracting 1.
        real = 0.5 * np.log1p(2.0 * a + a * a + b * b)
    return real + 1j * np.arctan2(b, 1.0 + a)


def _prepare(num: object, den: object) -> tuple[np.ndarray, np.ndarray]:
    den = np.trim_zeros(np.asarray(den, dtype=float), "f")
    num = np.asarray(num, dtype=float)
    if den.size == 0:
        raise InputError("denominator is identically zero")
    num = np.trim_zeros(num, "f")
    if num.size > den.size:
        raise InputError(f"improper loop: numerator degree {num.size - 1} > denominator degree {den.size - 1}")
    num = pad_left(num if num.size else np.zeros(1), den.size)
    # One common scale leaves K unchanged and keeps magnitudes near 1.
    scale = float(np.max(np.abs(den)))
    return num / scale, den / scale


def _empty() -> Crossings:
    return Crossings(np.zeros(0), np.zeros(0, dtype=complex), np.zeros(0, dtype=complex))


def _im_product(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Real coefficients of ``Im(A(t) conj(B(t)))`` for real ``t``."""
    product = np.polymul(a, np.conj(b))
    return np.imag(product)


def _real_roots(q: np.ndarray) -> np.ndarray:
    q = np.asarray(q, dtype=float)
    size = np.max(np.abs(q)) if q.size else 0.0
    if size == 0.0:
        return np.zeros(0)
    q = np.trim_zeros(np.where(np.abs(q) <= 1e-14 * size, 0.0, q), "f")
    if q.size < 2:
        return np.zeros(0)
    roots = np.roots(q)
    keep = np.abs(roots.imag) <= _REAL_ROOT * np.maximum(1.0, np.abs(roots))
    return np.sort(roots[keep].real)


def _classify(
    num: np.ndarray, den: np.ndarray, points: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gains for candidate points; split off infinite-gain and fixed points.

    Returns (mask of finite-gain points, gains, fixed points).
    """
    d = np.polyval(den, points)
    n = np.polyval(num, points)
    # Size of the terms that make up D and N at the point: a value below a
    # small fraction of it is a zero up to rounding.
    powers = np.abs(points)[:, None] ** np.arange(den.size - 1, -1, -1)
    d_size = powers @ np.abs(den)
    n_size = powers @ np.abs(num)
    n_zero = np.abs(n) <= _ZERO_N * np.maximum(n_size, 1e-300)
    d_zero = np.abs(d) <= _ZERO_N * np.maximum(d_size, 1e-300)
    fixed = points[n_zero & d_zero]
    finite = ~n_zero
    with np.errstate(divide="ignore", invalid="ignore"):
        gains = np.where(finite, -(d / np.where(finite, n, 1.0)).real, np.nan)
    return finite, gains, fixed


def _polish(
    num: np.ndarray,
    den: np.ndarray,
    t: np.ndarray,
    gains: np.ndarray,
    curve: Callable[[np.ndarray], np.ndarray],
    slope: Callable[[np.ndarray], np.ndarray],
    iterations: int = 6,
) -> tuple[np.ndarray, np.ndarray]:
    """Newton steps on ``D(c(t)) + K N(c(t)) = 0`` in real ``(t, K)``, vectorised."""
    dden, dnum = np.polyder(den), np.polyder(num)
    t = t.astype(float).copy()
    gains = gains.astype(float).copy()

    def residual(tt: np.ndarray, kk: np.ndarray) -> np.ndarray:
        x = curve(tt)
        return np.polyval(den, x) + kk * np.polyval(num, x)

    f = residual(t, gains)
    for _ in range(iterations):
        x = curve(t)
        fx = (np.polyval(dden, x) + gains * np.polyval(dnum, x)) * slope(t)
        nx = np.polyval(num, x)
        a, b, c, d = fx.real, nx.real, fx.imag, nx.imag
        det = a * d - b * c
        ok = np.abs(det) > 1e-300
        safe = np.where(ok, det, 1.0)
        step_t = np.where(ok, -(d * f.real - b * f.imag) / safe, 0.0)
        step_k = np.where(ok, -(-c * f.real + a * f.imag) / safe, 0.0)
        t_new, k_new = t + step_t, gains + step_k
        f_new = residual(t_new, k_new)
        better = np.abs(f_new) < np.abs(f)
        if not np.any(better):
            break
        t = np.where(better, t_new, t)
        gains = np.where(better, k_new, gains)
        f = np.where(better, f_new, f)
    return t, gains


def _assemble(
    num: np.ndarray,
    den: np.ndarray,
    t: np.ndarray,
    curve: Callable[[np.ndarray], np.ndarray],
    slope: Callable[[np.ndarray], np.ndarray] | None,
    real_points: np.ndarray,
) -> Crossings:
    points = curve(t) if t.size else np.zeros(0, dtype=complex)
    finite, gains, fixed = _classify(num, den, points)
    t, gains, points = t[finite], gains[finite], points[finite]
    if slope is not None and t.size:
        t, gains = _polish(num, den, t, gains, curve, slope)
        points = curve(t)
    real_points = np.asarray(real_points, dtype=complex)
    if real_points.size:
        r_finite, r_gains, r_fixed = _classify(num, den, real_points)
        gains = np.concatenate([gains, r_gains[r_finite]])
        points = np.concatenate([points, real_points[r_finite]])
        fixed = np.concatenate([fixed, r_fixed])
    order = np.argsort(gains, kind="stable")
    return Crossings(gains[order], points[order].astype(complex), fixed.astype(complex))


def _compose(poly: np.ndarray, top: np.ndarray, bottom: np.ndarray) -> np.ndarray:
    """Coefficients in ``t`` of ``sum_i p_i top(t)^(n-i) bottom(t)^i``.

    With ``bottom = 1`` this is ``p(top(t))``; with a linear ``bottom`` it is
    ``bottom^n p(top/bottom)``.
    """
    n = poly.size - 1
    top_powers = [np.ones(1, dtype=complex)]
    bottom_powers = [np.ones(1, dtype=complex)]
    for _ in range(n):
        top_powers.append(np.polymul(top_powers[-1], top))
        bottom_powers.append(np.polymul(bottom_powers[-1], bottom))
    total = np.zeros(1, dtype=complex)
    for i, coeff in enumerate(poly):
        total = np.polyadd(total, coeff * np.polymul(top_powers[n - i], bottom_powers[i]))
    return total


def line_crossings(num: object, den: object, origin: complex, direction: complex) -> Crossings:
    """Gains putting a closed-loop root on the half-line ``origin + direction t``, ``t >= 0``.

    Parameters
    ----------
    num, den : array_like, shape (m + 1,), (n + 1,)
        Loop numerator and denominator, descending powers of the variable.
    origin, direction : complex
        The half-line; e.g. the imaginary axis is ``origin=0, direction=1j``
        (its lower half is the mirror image), the line ``Re s = -sigma`` is
        ``origin=-sigma, direction=1j``, a constant-damping ray is
        ``origin=0, direction=-zeta + 1j sqrt(1 - zeta^2)`` (rad/s per unit
        ``t``).

    Returns
    -------
    Crossings
        Includes the real-axis point ``origin`` when it is real.
    """
    num, den = _prepare(num, den)
    origin, direction = complex(origin), complex(direction)
    if direction == 0:
        raise InputError("line direction must be non-zero")
    line = np.array([direction, origin])
    q = _im_product(_compose(den, line, np.ones(1)), _compose(num, line, np.ones(1)))
    t = _real_roots(q)
    # t = 0 is the real-axis point, handled exactly below when origin is real.
    on_axis = abs(origin.imag) == 0.0
    t = t[t > (1e-9 if on_axis else -1e-12) * max(1.0, abs(origin) / abs(direction))]
    t = np.maximum(t, 0.0)

    def curve(tt: np.ndarray) -> np.ndarray:
        return origin + direction * np.asarray(tt, dtype=float)

    def slope(tt: np.ndarray) -> np.ndarray:
        return np.full(np.shape(tt), direction)

    return _assemble(num, den, t, curve, slope, np.array([origin]) if on_axis else np.zeros(0))


def circle_crossings(num: object, den: object, right: float, left: float) -> Crossings:
    """Gains putting a closed-loop root on the circle through real points ``right > left``.

    The circle is symmetric about the real axis: centre ``(right + left)/2``,
    radius ``(right - left)/2``.  ``|s| = wn`` is ``(wn, -wn)``; ``|z| = r``
    is ``(r, -r)``; in the delta variable ``g = (z - 1)/ts`` the circle
    ``|z| = r`` is ``((r - 1)/ts, -(r + 1)/ts)``; pass ``r - 1`` computed
    without cancellation (e.g. ``expm1``) when ``r`` is near 1.

    Parameters
    ----------
    num, den : array_like
        Loop numerator and denominator, descending powers of the variable.
    right, left : float
        Real-axis points of the circle, same units as the variable.

    Returns
    -------
    Crossings
        Includes both real-axis points.
    """
    num, den = _prepare(num, den)
    right, left = float(right), float(left)
    if not right > left:
        raise InputError(f"circle needs right > left real-axis points; got right={right}, left={left}")
    top = np.array([-1j * left, right])
    bottom = np.array([-1j, 1.0])
    q = _im_product(_compose(den, top, bottom), _compose(num, top, bottom))
    v = _real_roots(q)
    # v = 0 is the point `right`, v = inf the point `left`: both handled below.
    v = v[v > 1e-9]

    def curve(vv: np.ndarray) -> np.ndarray:
        vv = np.asarray(vv, dtype=float)
        return (right - 1j * left * vv) / (1.0 - 1j * vv)

    def slope(vv: np.ndarray) -> np.ndarray:
        vv = np.asarray(vv, dtype=float)
        return 1j * (right - left) / (1.0 - 1j * vv) ** 2

    return _assemble(num, den, v, curve, slope, np.array([right, left]))


def sampled_crossings(
    num: object,
    den: object,
    curve: Callable[[np.ndarray], np.ndarray],
    grid: np.ndarray,
    real_points: object = (),
) -> Crossings:
    """Gains putting a closed-loop root on a sampled curve, refined by brentq.

    Parameters
    ----------
    num, den : array_like
        Loop numerator and denominator, descending powers of the variable.
    curve : callable
        Vectorised map from real parameters to points of the curve (upper
        half-plane part), in the polynomial's variable.
    grid : ndarray of float
        Increasing parameters; a crossing is found in each grid cell where
        ``Im(D conj N)`` changes sign and refined to ``~1e-14`` in the
        parameter.
    real_points : array_like of float
        The curve's points on the real axis (evaluated directly).

    Returns
    -------
    Crossings
    """
    num, den = _prepare(num, den)
    grid = np.asarray(grid, dtype=float)

    def measure(tt: np.ndarray) -> np.ndarray:
        x = curve(tt)
        d = np.polyval(den, x)
        n = np.polyval(num, x)
        with np.errstate(invalid="ignore"):
            return np.imag(d * np.conj(n)) / (np.abs(d) ** 2 + np.abs(n) ** 2)

    values = measure(grid)
    signs = np.sign(values)
    found = list(grid[1:-1][signs[1:-1] == 0.0])
    cells = np.flatnonzero(signs[:-1] * signs[1:] < 0)
    for i in cells:
        found.append(
            brentq(lambda tt: float(measure(np.array([tt]))[0]), grid[i], grid[i + 1], xtol=1e-300, rtol=1e-15)
        )
    t = np.sort(np.asarray(found, dtype=float))
    return _assemble(num, den, t, curve, None, np.asarray(real_points, dtype=float))


def imaginary_axis_crossings(num: object, den: object) -> Crossings:
    """Gains putting a closed-loop root of ``D + K N`` (in ``s``) on the imaginary axis."""
    return line_crossings(num, den, 0.0, 1j)


def unit_circle_crossings(num: object, den: object, ts: float | None = None, delta: bool = False) -> Crossings:
    """Gains putting a closed-loop root on the unit circle.

    Parameters
    ----------
    num, den : array_like
        Loop in ``z``, or in ``g = (z - 1)/ts`` when ``delta`` is true.
    ts : float, optional
        Sample period in seconds; required with ``delta``.
    delta : bool
        Whether ``num``/``den`` are delta-operator polynomials.  Points are
        then returned in ``g``.
    """
    if delta:
        if ts is None or not ts > 0:
            raise InputError(f"the delta form needs a positive sample period; got ts={ts}")
        return circle_crossings(num, den, 0.0, -2.0 / ts)
    return circle_crossings(num, den, 1.0, -1.0)
