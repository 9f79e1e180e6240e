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
  ``|D|^2 + |N|^2`` on a fine grid, refined by bisection (all cells at once).
  Cells with a sign change and the cells around every dip of the measure are
  resampled first (several crossings in one cell), and the grid's end points
  (real-axis points, where the measure is zero up to rounding) are sampled a
  hair inside.  Tangencies (a root touching the curve without crossing it)
  can be missed; they do not change which side of the curve the roots are
  on.  Crossings closer together than the resampled grid can still merge.

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

from ..errors import InputError
from .polynomials import batched_roots, polymul

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

#: Relative size of |N| (against the size of its terms) below which N counts as zero.
_ZERO_N = 1e-10
#: Largest |Im t| / max(1, |t|) for which a root of the Im polynomial counts as real.
_REAL_ROOT = 1e-6


@dataclass(frozen=True)
class Crossings:
    """Real gains at which a closed-loop root lies on one curve (one loop).

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


# -- batched polynomial helpers -------------------------------------------------


def _batch(num: object, den: object) -> tuple[np.ndarray, np.ndarray, bool]:
    """(P, n+1) numerator and denominator, each row scaled by its max |den|.

    A common scale of N and D leaves every gain unchanged.
    """
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    single = num.ndim <= 1 and den.ndim <= 1
    if single:
        den = np.trim_zeros(np.atleast_1d(den), "f")
        num = np.trim_zeros(np.atleast_1d(num), "f")
        if den.size == 0:
            raise InputError("denominator is identically zero")
        if num.size == 0:
            num = np.zeros(1)
    num, den = np.atleast_2d(num), np.atleast_2d(den)
    if num.ndim != 2 or den.ndim != 2:
        raise InputError(f"num and den must be 1-D or 2-D coefficient arrays; got shapes {num.shape} and {den.shape}")
    if not (np.all(np.isfinite(num)) and np.all(np.isfinite(den))):
        raise InputError("loop coefficients must be finite")
    while num.shape[1] > den.shape[1] and np.all(num[:, 0] == 0):
        num = num[:, 1:]
    if num.shape[1] > den.shape[1]:
        raise InputError(
            f"improper loop: numerator degree {num.shape[1] - 1} > denominator degree {den.shape[1] - 1}"
        )
    if np.any(den[:, 0] == 0):
        raise InputError(f"leading denominator coefficient is zero at point {int(np.flatnonzero(den[:, 0] == 0)[0])}")
    points = max(num.shape[0], den.shape[0])
    if num.shape[0] not in (1, points) or den.shape[0] not in (1, points):
        raise InputError(f"num has {num.shape[0]} rows but den has {den.shape[0]}")
    width = den.shape[1]
    num = np.concatenate([np.zeros((num.shape[0], width - num.shape[1])), num], axis=1)
    num = np.broadcast_to(num, (points, width))
    den = np.broadcast_to(den, (points, width))
    scale = np.max(np.abs(den), axis=1, keepdims=True)
    return num / scale, den / scale, single


def _column(values: np.ndarray, k: int, ndim: int) -> np.ndarray:
    return values[:, k].reshape((-1,) + (1,) * (ndim - 1))


def _bpolyval(coeffs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Row-wise Horner: ``coeffs`` (M, n+1), ``x`` (M, ...) -> (M, ...)."""
    x = np.asarray(x)
    out = np.broadcast_to(_column(coeffs, 0, x.ndim), x.shape).astype(complex)
    for k in range(1, coeffs.shape[1]):
        out = out * x + _column(coeffs, k, x.ndim)
    return out


def _bpolyder(coeffs: np.ndarray) -> np.ndarray:
    n = coeffs.shape[1] - 1
    if n == 0:
        return np.zeros_like(coeffs)
    return coeffs[:, :-1] * np.arange(n, 0, -1)


def _basis(top: np.ndarray, bottom: np.ndarray, n: int) -> np.ndarray:
    """``R[p, i] = top^(n-i) bottom^i`` as (P, n+1, n+1) coefficients in ``t``.

    ``top`` and ``bottom`` are (P, 2) linear polynomials; then
    ``sum_i p_i R_i = bottom^n p(top/bottom)``.
    """
    rows = top.shape[0]
    top_powers = [np.ones((rows, 1), dtype=complex)]
    bottom_powers = [np.ones((rows, 1), dtype=complex)]
    for _ in range(n):
        top_powers.append(polymul(top_powers[-1], top))
        bottom_powers.append(polymul(bottom_powers[-1], bottom))
    basis = np.zeros((rows, n + 1, n + 1), dtype=complex)
    for i in range(n + 1):
        product = polymul(top_powers[n - i], bottom_powers[i])
        basis[:, i, n + 1 - product.shape[1] :] = product[:, -(n + 1) :]
    return basis


def _real_roots_rows(q: np.ndarray) -> list[np.ndarray]:
    """Real roots (t > 0) of each row of ``q``, rounding noise trimmed.

    Rows are trimmed of leading zeros (after the noise threshold) and of
    trailing zeros (roots at ``t = 0``, never kept), then grouped by degree
    so that each group is one batched companion-matrix eigenvalue call: the
    same matrices ``np.roots`` would build row by row, in one call per
    degree instead of one per row.
    """
    count = q.shape[0]
    out = [np.zeros(0)] * count
    size = np.max(np.abs(q), axis=1) if q.shape[1] else np.zeros(count)
    q = np.where(np.abs(q) <= 1e-14 * size[:, None], 0.0, q)
    nonzero = q != 0.0
    first = np.argmax(nonzero, axis=1)
    last = q.shape[1] - 1 - np.argmax(nonzero[:, ::-1], axis=1)
    degree = np.where(np.any(nonzero, axis=1) & (size > 0), last - first, 0)
    for n in np.unique(degree[degree > 0]):
        rows = np.flatnonzero(degree == n)
        index = first[rows][:, None] + np.arange(n + 1)[None, :]
        roots = batched_roots(np.take_along_axis(q[rows], index, axis=1))
        keep = (np.abs(roots.imag) <= _REAL_ROOT * np.maximum(1.0, np.abs(roots))) & (roots.real > 0)
        for j, row in enumerate(rows):
            out[row] = np.sort(roots[j][keep[j]].real)
    return out


def _classify(num: np.ndarray, den: np.ndarray, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gains for candidate points (row-aligned coefficients and points).

    Returns ``(finite, gains, fixed)``: ``finite`` marks points with
    ``N != 0``; ``fixed`` marks points where ``N`` and ``D`` both vanish.
    """
    d = _bpolyval(den, points)
    n = _bpolyval(num, points)
    # Size of the terms that make up D and N: a value below a small fraction
    # of it is zero up to rounding.
    modulus = np.abs(points)
    n_size = _bpolyval(np.abs(num), modulus).real
    d_size = _bpolyval(np.abs(den), modulus).real
    n_zero = np.abs(n) <= _ZERO_N * np.maximum(n_size, 1e-300)
    d_zero = np.abs(d) <= _ZERO_N * np.maximum(d_size, 1e-300)
    finite = ~n_zero
    gains = np.full(points.shape, np.nan)
    gains[finite] = -(d[finite] / n[finite]).real
    return finite, gains, n_zero & d_zero


def _split(rows: np.ndarray, count: int, *arrays: np.ndarray) -> list[list[np.ndarray]]:
    order = np.argsort(rows, kind="stable")
    bounds = np.searchsorted(rows[order], np.arange(count + 1))
    return [[a[order][bounds[p] : bounds[p + 1]] for a in arrays] for p in range(count)]


def _finish(
    num: np.ndarray,
    den: np.ndarray,
    rows: np.ndarray,
    points: np.ndarray,
    gains: np.ndarray,
    fixed_rows: np.ndarray,
    fixed_points: np.ndarray,
    real_points: np.ndarray,
    single: bool,
) -> Crossings | list[Crossings]:
    """Add the real-axis points and split the flat results per loop."""
    count = num.shape[0]
    if real_points.size:
        real_points = np.broadcast_to(np.asarray(real_points, dtype=complex), (count, real_points.shape[-1]))
        valid = np.isfinite(real_points)
        r_rows = np.broadcast_to(np.arange(count)[:, None], real_points.shape)[valid]
        r_points = real_points[valid]
        finite, r_gains, r_fixed = _classify(num[r_rows], den[r_rows], r_points)
        rows = np.concatenate([rows, r_rows[finite]])
        points = np.concatenate([points, r_points[finite]])
        gains = np.concatenate([gains, r_gains[finite]])
        fixed_rows = np.concatenate([fixed_rows, r_rows[r_fixed]])
        fixed_points = np.concatenate([fixed_points, r_points[r_fixed]])
    per_loop = _split(rows, count, gains, points)
    per_fixed = _split(fixed_rows, count, fixed_points)
    out = []
    for (g, x), (f,) in zip(per_loop, per_fixed):
        order = np.argsort(g, kind="stable")
        out.append(Crossings(g[order], x[order].astype(complex), f.astype(complex)))
    return out[0] if single else out


def _rational_crossings(
    num: np.ndarray,
    den: np.ndarray,
    top: np.ndarray,
    bottom: np.ndarray,
    real_points: np.ndarray,
    single: bool,
) -> Crossings | list[Crossings]:
    """Crossings of the curve ``top(t)/bottom(t)``, ``t > 0`` (both linear, per loop)."""
    count, width = den.shape
    n = width - 1
    top = np.broadcast_to(np.asarray(top, dtype=complex), (count, 2))
    bottom = np.broadcast_to(np.asarray(bottom, dtype=complex), (count, 2))
    basis = _basis(top, bottom, n)
    a = np.einsum("pi,pik->pk", den.astype(complex), basis)
    b = np.einsum("pi,pik->pk", num.astype(complex), basis)
    q = polymul(a, np.conj(b)).imag
    # t = 0 is the curve's real-axis point: there A and B are real, so the
    # constant coefficient is an exact zero; the real point is added exactly.
    q = q[:, :-1]
    t_lists = _real_roots_rows(q)
    rows = np.concatenate([np.full(t.size, p) for p, t in enumerate(t_lists)] + [np.zeros(0, dtype=int)]).astype(int)
    t = np.concatenate(t_lists + [np.zeros(0)])

    def curve(tt: np.ndarray) -> np.ndarray:
        return (top[rows, 0] * tt + top[rows, 1]) / (bottom[rows, 0] * tt + bottom[rows, 1])

    def slope(tt: np.ndarray) -> np.ndarray:
        upper = top[rows, 0] * tt + top[rows, 1]
        lower = bottom[rows, 0] * tt + bottom[rows, 1]
        return (top[rows, 0] * lower - upper * bottom[rows, 0]) / lower**2

    nums, dens = num[rows], den[rows]
    points = curve(t)
    finite, gains, fixed = _classify(nums, dens, points)
    fixed_rows, fixed_points = rows[fixed], points[fixed]
    keep = finite
    rows, t, gains = rows[keep], t[keep], gains[keep]
    nums, dens = nums[keep], dens[keep]
    if t.size:
        t, gains = _polish(nums, dens, t, gains, curve, slope)
    points = curve(t)
    return _finish(num, den, rows, points, gains, fixed_rows, fixed_points, np.asarray(real_points), single)


def _polish(
    num: np.ndarray,
    den: np.ndarray,
    t: np.ndarray,
    gains: np.ndarray,
    curve: Callable[[np.ndarray], np.ndarray],
    slope: Callable[[np.ndarray], np.ndarray],
    iterations: int = 6,
) -> tuple[np.ndarray, np.ndarray]:
    """Newton steps on ``D(c(t)) + K N(c(t)) = 0`` in real ``(t, K)``, all crossings at once."""
    dden, dnum = _bpolyder(den), _bpolyder(num)
    t, gains = t.astype(float), gains.astype(float)

    def residual(tt: np.ndarray, kk: np.ndarray) -> np.ndarray:
        x = curve(tt)
        return _bpolyval(den, x) + kk * _bpolyval(num, x)

    f = residual(t, gains)
    for _ in range(iterations):
        x = curve(t)
        fx = (_bpolyval(dden, x) + gains * _bpolyval(dnum, x)) * slope(t)
        nx = _bpolyval(num, x)
        a, b, c, d = fx.real, nx.real, fx.imag, nx.imag
        det = a * d - b * c
        ok = np.abs(det) > 1e-300
        safe = np.where(ok, det, 1.0)
        step_t = np.where(ok, -(d * f.real - b * f.imag) / safe, 0.0)
        step_k = np.where(ok, -(-c * f.real + a * f.imag) / safe, 0.0)
        t_new, k_new = t + step_t, gains + step_k
        with np.errstate(over="ignore", invalid="ignore"):
            f_new = residual(t_new, k_new)
        better = (np.abs(f_new) < np.abs(f)) & (t_new > 0)
        if not np.any(better):
            break
        t = np.where(better, t_new, t)
        gains = np.where(better, k_new, gains)
        f = np.where(better, f_new, f)
    return t, gains


# -- public curve solvers ------------------------------------------------------


def line_crossings(num: object, den: object, origin: object, direction: object) -> Crossings | list[Crossings]:
    """Gains putting a closed-loop root on the half-line ``origin + direction t``, ``t >= 0``.

    Parameters
    ----------
    num, den : array_like, shape (m + 1,), (n + 1,) or (P, n + 1)
        Loop numerator and denominator, descending powers of the variable;
        a leading axis gives ``P`` loops.
    origin : float or array_like of shape (P,)
        Real start of the half-line (same units as the variable).
    direction : complex or array_like of shape (P,)
        Direction, ``Im > 0``: the imaginary axis is ``origin=0,
        direction=1j`` (its lower half is the mirror image), the line
        ``Re s = -sigma`` is ``origin=-sigma, direction=1j``, a
        constant-damping ray is ``origin=0, direction=-zeta + 1j sqrt(1 -
        zeta^2)``.

    Returns
    -------
    Crossings, or list of Crossings (one per loop) for 2-D input
        Includes the real-axis point ``origin``.
    """
    num, den, single = _batch(num, den)
    origin = np.broadcast_to(np.asarray(origin, dtype=float), (den.shape[0],))
    direction = np.broadcast_to(np.asarray(direction, dtype=complex), (den.shape[0],))
    if np.any(direction.imag <= 0):
        raise InputError("line direction must point into the upper half-plane (Im > 0)")
    top = np.stack([direction, origin.astype(complex)], axis=1)
    bottom = np.array([[0.0, 1.0]], dtype=complex)
    return _rational_crossings(num, den, top, bottom, origin[:, None], single)


def circle_crossings(num: object, den: object, right: object, left: object) -> Crossings | list[Crossings]:
    """Gains putting a closed-loop root on the circle through real points ``right > left``.

    The circle is symmetric about the real axis: centre ``(right + left)/2``,
    radius ``(right - left)/2``.  ``|s| = wn`` is ``(wn, -wn)``; ``|z| = r``
    is ``(r, -r)``; in the delta variable ``g = (z - 1)/ts`` the circle
    ``|z| = r`` is ``((r - 1)/ts, -(r + 1)/ts)``; pass ``r - 1`` computed
    without cancellation (e.g. ``expm1``) when ``r`` is near 1.

    Parameters
    ----------
    num, den : array_like, shape (n + 1,) or (P, n + 1)
        Loop numerator and denominator, descending powers of the variable.
    right, left : float or array_like of shape (P,)
        Real-axis points of the circle, same units as the variable.

    Returns
    -------
    Crossings, or list of Crossings (one per loop) for 2-D input
        Includes both real-axis points.
    """
    num, den, single = _batch(num, den)
    right = np.broadcast_to(np.asarray(right, dtype=float), (den.shape[0],))
    left = np.broadcast_to(np.asarray(left, dtype=float), (den.shape[0],))
    if not np.all(right > left):
        raise InputError(f"circle needs right > left real-axis points; got right={right}, left={left}")
    # c(v) = (right - j left v)/(1 - j v): v = tan(theta/2) over the upper half.
    top = np.stack([-1j * left, right.astype(complex)], axis=1)
    bottom = np.array([[-1j, 1.0]], dtype=complex)
    return _rational_crossings(num, den, top, bottom, np.stack([right, left], axis=1), single)


def _local_dips(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(row, index) of interior local minima of |values| with no sign change either side."""
    size = np.abs(values)
    signs = np.sign(values)
    with np.errstate(invalid="ignore"):
        dip = (
            (size[:, 1:-1] < size[:, :-2])
            & (size[:, 1:-1] < size[:, 2:])
            & (signs[:, 1:-1] == signs[:, :-2])
            & (signs[:, 1:-1] == signs[:, 2:])
        )
    rows, index = np.nonzero(dip)
    return rows, index + 1


def _interesting(values: np.ndarray, grid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Cells worth a closer look: sign changes (one cell) and dips (two cells).

    Returns ``(rows, low, high, is_change)``.
    """
    signs = np.sign(values)
    with np.errstate(invalid="ignore"):
        change = signs[:, :-1] * signs[:, 1:] < 0
    c_rows, c_index = np.nonzero(change)
    d_rows, d_index = _local_dips(values)
    rows = np.concatenate([c_rows, d_rows])
    low = np.concatenate([grid[c_rows, c_index], grid[d_rows, d_index - 1]])
    high = np.concatenate([grid[c_rows, c_index + 1], grid[d_rows, d_index + 1]])
    is_change = np.concatenate([np.ones(c_rows.size, bool), np.zeros(d_rows.size, bool)])
    return rows, low, high, is_change


def _brackets(
    values: np.ndarray,
    grid: np.ndarray,
    measure: Callable[[np.ndarray, np.ndarray], np.ndarray],
    levels: int = 2,
    points: int = 32,
) -> list[tuple[int, float, float]]:
    """Brackets of sign changes of ``values`` on ``grid``, resampled near trouble.

    Several crossings inside one grid cell may show as one sign change (odd
    count) or none at all (even count, a dip of ``|Im(D conj N)|``).  Every
    sign-change cell and the two cells around every dip are resampled with
    ``points`` points, ``levels`` times (all cells at once); the sign changes
    of the last level are the brackets.  A dip that never reaches zero is a
    tangency or nothing and is let go.
    """
    rows, low, high, is_change = _interesting(values, grid)
    share = np.linspace(0.0, 1.0, points + 1)
    for _ in range(levels):
        if rows.size == 0:
            return []
        fine = low[:, None] + (high - low)[:, None] * share
        sampled = measure(fine, rows[:, None])
        sub_rows, low, high, is_change = _interesting(sampled, fine)
        rows = rows[sub_rows]
    return [(int(p), float(a), float(b)) for p, a, b, c in zip(rows, low, high, is_change) if c]


def _nudge_ends(grid: np.ndarray) -> np.ndarray:
    """Move the ends of every run of finite grid points a hair inward.

    The ends of a sampled curve are its real-axis points, where
    ``Im(D conj N)`` is zero up to rounding: its sign there is noise and
    would hide a crossing in the end cell.  The real points themselves are
    evaluated exactly elsewhere.
    """
    grid = np.array(grid, dtype=float)
    valid = np.isfinite(grid)
    padded = np.pad(valid, ((0, 0), (1, 1)), constant_values=False)
    starts = valid & ~padded[:, :-2] & padded[:, 2:]
    stops = valid & ~padded[:, 2:] & padded[:, 1:-1] & padded[:, :-2]
    rows, cols = np.nonzero(starts)
    grid[rows, cols] += 1e-7 * (grid[rows, cols + 1] - grid[rows, cols])
    rows, cols = np.nonzero(stops)
    grid[rows, cols] -= 1e-7 * (grid[rows, cols] - grid[rows, cols - 1])
    return grid


#: Bisection steps at most, and the relative width they stop at.
_CELL_BISECTIONS = 80
_CELL_RTOL = 1e-15


def _bisect_cells(measure, rows: np.ndarray, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Sign changes of ``measure`` in the cells ``(left, right)`` of loops ``rows``, all cells at once.

    Vectorised bisection (one ``measure`` call per step for every cell) to a
    width of ``_CELL_RTOL`` relative; it replaced one scalar brentq per cell,
    whose per-value Python calls were most of the cost of the z-plane
    damping curves (same tolerance, results equal to ~1e-15 relative).
    """
    a, b = left.astype(float).copy(), right.astype(float).copy()
    column = rows[:, None]
    sign_a = np.signbit(measure(a[:, None], column)[:, 0])
    for _ in range(_CELL_BISECTIONS):
        open_ = (b - a) > _CELL_RTOL * np.abs(0.5 * (a + b))
        if not np.any(open_):
            break
        mid = 0.5 * (a + b)
        value = measure(mid[open_][:, None], column[open_])[:, 0]
        exact = value == 0.0
        same = (np.signbit(value) == sign_a[open_]) & ~exact
        idx = np.flatnonzero(open_)
        a[idx] = np.where(same | exact, mid[idx], a[idx])
        b[idx] = np.where(same & ~exact, b[idx], mid[idx])
    return 0.5 * (a + b)


def sampled_crossings(
    num: object,
    den: object,
    curve: Callable[[np.ndarray, np.ndarray], np.ndarray],
    grid: np.ndarray,
    real_points: object = (),
) -> Crossings | list[Crossings]:
    """Gains putting a closed-loop root on a sampled curve, refined by bisection.

    Parameters
    ----------
    num, den : array_like, shape (n + 1,) or (P, n + 1)
        Loop numerator and denominator, descending powers of the variable.
    curve : callable
        ``curve(t, rows)`` maps real parameters ``t`` of loops ``rows``
        (integer array broadcasting with ``t``) to points of the curve's
        upper half, in the polynomial's variable.
    grid : ndarray of float, shape (G,) or (P, G)
        Increasing parameters per loop; ``nan`` marks cells to skip.  The
        ends of each run of finite values are taken as real-axis points of
        the curve (give them in ``real_points``) and sampled a hair inside.  A
        crossing is found in each cell where ``Im(D conj N)`` changes sign
        and refined by bisection to ``~1e-15`` relative in the parameter;
        sign-change cells and dips of ``|Im(D conj N)|`` are resampled first
        (32 points, two levels) so that several crossings in one cell are
        found.
    real_points : array_like of float, shape (r,) or (P, r)
        The curve's points on the real axis (evaluated directly); ``nan``
        entries are skipped.

    Returns
    -------
    Crossings, or list of Crossings (one per loop) for 2-D input
    """
    num, den, single = _batch(num, den)
    count = den.shape[0]
    grid = np.broadcast_to(np.asarray(grid, dtype=float), (count, np.shape(grid)[-1]))
    all_rows = np.arange(count)[:, None]

    def measure(tt: np.ndarray, rows: np.ndarray) -> np.ndarray:
        x = curve(tt, rows)
        d = _bpolyval(den[rows.ravel()].reshape(-1, den.shape[1]), x.reshape(rows.shape[0], -1)).reshape(x.shape)
        n = _bpolyval(num[rows.ravel()].reshape(-1, num.shape[1]), x.reshape(rows.shape[0], -1)).reshape(x.shape)
        with np.errstate(invalid="ignore"):
            return np.imag(d * np.conj(n)) / (np.abs(d) ** 2 + np.abs(n) ** 2)

    grid = _nudge_ends(grid)
    values = measure(grid, all_rows)
    exact = values[:, 1:-1] == 0.0
    found_rows, found_t = [], []
    for p, i in zip(*np.nonzero(exact)):
        found_rows.append(p)
        found_t.append(grid[p, i + 1])
    cells = _brackets(values, grid, measure)
    if cells:
        cell_rows = np.array([c[0] for c in cells], dtype=int)
        found_rows.extend(cell_rows.tolist())
        found_t.extend(_bisect_cells(measure, cell_rows, np.array([c[1] for c in cells]),
                                     np.array([c[2] for c in cells])).tolist())
    rows = np.asarray(found_rows, dtype=int)
    t = np.asarray(found_t, dtype=float)
    points = curve(t, rows) if t.size else np.zeros(0, dtype=complex)
    finite, gains, fixed = _classify(num[rows], den[rows], points)
    real_points = np.asarray(real_points, dtype=float)
    if real_points.size:
        real_points = np.broadcast_to(real_points, (count, real_points.shape[-1]))
    return _finish(
        num,
        den,
        rows[finite],
        points[finite],
        gains[finite],
        rows[fixed],
        points[fixed],
        real_points,
        single,
    )


def imaginary_axis_crossings(num: object, den: object) -> Crossings | list[Crossings]:
    """Gains putting a closed-loop root of ``D + K N`` (in ``s``) on the imaginary axis."""
    return line_crossings(num, den, 0.0, 1j)


def unit_circle_crossings(
    num: object, den: object, ts: object = None, delta: bool = False
) -> Crossings | list[Crossings]:
    """Gains putting a closed-loop root on the unit circle.

    Parameters
    ----------
    num, den : array_like, shape (n + 1,) or (P, n + 1)
        Loop in ``z``, or in ``g = (z - 1)/ts`` when ``delta`` is true.
    ts : float or array_like of shape (P,), optional
        Sample period in seconds; required with ``delta``.
    delta : bool
        Whether ``num``/``den`` are delta-operator polynomials.  Points are
        then returned in ``g``.
    """
    if delta:
        if ts is None or not np.all(np.asarray(ts, dtype=float) > 0):
            raise InputError(f"the delta form needs a positive sample period; got ts={ts}")
        ts = np.asarray(ts, dtype=float)
        return circle_crossings(num, den, np.zeros_like(ts), -2.0 / ts)
    return circle_crossings(num, den, 1.0, -1.0)
