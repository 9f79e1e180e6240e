"""Root-locus branches of many loops, traced with adaptive gain samples.

The branches of the locus of ``D + K N = 0`` are traced for every loop of a
batch at once (details and the reasons for each choice:
``docs/tracing-and-margins.md``):

1. **Gain range.**  Unless given, ``k_max`` is the smallest scanned gain at
   which the locus is in its asymptotic regime: every finite zero has a
   closed-loop root within ``zero_tol`` plot scales and the other ``n - m``
   roots are farther than ``far_factor`` plot scales from the centroid, each
   within ``asymptote_tol`` degrees of an asymptote.  The smallest positive
   sample is the largest scanned gain at which no root has moved by a
   hundredth of its step.  The scan runs every three decades between gain
   scales estimated from each pole (``|p D'(p)/N(p)|``) and from the
   asymptotes, then at extra points near both ends.
2. **Samples.**  The scanned gains are refined in rounds.  In each round
   every new interval between neighbouring samples (of every loop) is
   checked at once and split where a matched root moves farther than the
   allowed step (``max_step`` plot scales by default, finer near the origin
   with ``step_floor < 1``, coarser beyond the plot), which concentrates
   samples where poles move fast and near breakaways (``dK/ds -> 0``), or
   where the match is ambiguous.
3. **Matching.**  Roots of neighbouring samples are matched on the distance
   from a first-order prediction ``r + dK dr/dK`` with
   ``dr/dK = -N(r)/(D'(r) + K N'(r))`` (the step clipped to the allowed
   step, so a prediction never flies off at a collision).  Per-interval
   matches are composed into branches by a log-depth scan: no Python loop
   runs per gain sample.
4. **Crossings.**  Where a branch crosses the stability boundary the gain is
   found by regula falsi to ``crossing_rtol`` and a sample is put there.

New samples get their roots from Newton (then Aberth-Ehrlich) iteration seeded
by the matched neighbours, with companion eigenvalues as the fallback.
Discrete loops with a delta-operator form are traced in ``g = (z - 1)/ts``
(the plane in which fast-sampled poles are well separated) and returned in
``z``.  The angle condition ``arg L(r) = 180 deg`` (``K > 0``) or ``0 deg``
(``K < 0``) is evaluated at every traced root and returned as a residual.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import cached_property, partial

import numpy as np

from ..errors import InputError
from .loop import Loop
from .polynomials import batched_roots

__all__ = ["LocusBranches", "trace_locus", "trace_covering", "angle_residual"]

#: Relative distance below which a root counts as sitting on an open-loop
#: pole or zero for the angle residual.
_ON_FEATURE = 1e-8

#: Most points of the coarse gain scan (spaced at most 3 decades otherwise).
_MAX_SCAN = 40
#: Beyond the plot scale the allowed step grows by this fraction of the
#: distance past it (branches there run straight out along asymptotes).
_FAR_GROWTH = 0.25


@dataclass(frozen=True, eq=False)
class LocusBranches:
    """Continuous root-locus branches of a batch of loops.

    Attributes
    ----------
    gains : ndarray, shape (P, G)
        Gain samples per loop, increasing in ``|K|`` from 0; loops with fewer
        than ``G`` samples repeat their last sample (see ``counts``).
    roots : ndarray of complex, shape (P, G, n)
        Closed-loop roots in ``s`` (rad/s) or ``z``; ``roots[p, :, b]`` is
        branch ``b`` of loop ``p``, continuous in the gain.
    counts : ndarray of int, shape (P,)
        Number of distinct samples per loop.
    residual : ndarray, shape (P, G, n)
        Angle-condition residual in degrees, computed on first access,
        ``|arg(-K L(r))|`` (see
        :func:`angle_residual`; ``nan`` where the angle is undefined: ``K = 0``,
        roots at infinity, roots within 1e-8 of an open-loop pole or zero).
    k_max : ndarray, shape (P,)
        Largest ``|K|`` traced per loop.
    crossing_gains : tuple of ndarray
        Per loop, gains (bracketed to ``crossing_rtol``) at which a branch
        crosses the stability boundary (imaginary axis or unit circle).
    negative : bool
        True for the complementary locus (``K <= 0``).
    discrete : bool
        Roots are in ``z``.
    warnings : tuple of str
        Conditions a reader must know (e.g. the asymptotic regime not
        reached, sample cap hit).
    """

    gains: np.ndarray
    roots: np.ndarray
    counts: np.ndarray
    k_max: np.ndarray
    crossing_gains: tuple[np.ndarray, ...]
    negative: bool
    discrete: bool
    warnings: tuple[str, ...] = ()
    # What the residual is computed from (on first access, then kept): the
    # loop polynomials, poles and zeros per loop in the traced plane, and the
    # traced roots in that plane.
    _check: tuple = field(default=(), repr=False)

    @cached_property
    def residual(self) -> np.ndarray:
        """Angle-condition residual in degrees, shape (P, G, n) (see above)."""
        num, den, poles, zeros, work_roots, period = self._check
        P, G = self.gains.shape
        loop_of = np.repeat(np.arange(P), G)
        roots = work_roots.reshape(P * G, -1)
        value = angle_residual(
            num[loop_of], den[loop_of], self.gains.ravel(), roots, poles[loop_of], zeros[loop_of]
        )
        return value.reshape(work_roots.shape)

    @property
    def max_residual(self) -> float:
        """Largest angle-condition residual over all traced roots, degrees."""
        finite = self.residual[np.isfinite(self.residual)]
        return float(finite.max()) if finite.size else 0.0


def _horner_rows(coeffs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Evaluate row-wise polynomials ``coeffs`` (C, n + 1) at ``x`` (C, k)."""
    acc = np.broadcast_to(coeffs[:, :1].astype(complex), x.shape).copy()
    for k in range(1, coeffs.shape[1]):
        acc = acc * x + coeffs[:, k : k + 1]
    return acc


def _derivative(coeffs: np.ndarray) -> np.ndarray:
    n = coeffs.shape[1] - 1
    return coeffs[:, :-1] * np.arange(n, 0, -1)


def angle_residual(
    num: np.ndarray,
    den: np.ndarray,
    gains: np.ndarray,
    roots: np.ndarray,
    poles: np.ndarray | None = None,
    zeros: np.ndarray | None = None,
) -> np.ndarray:
    """Angle-condition residual of closed-loop roots, in degrees.

    The angle condition in its textbook form: ``arg L(r) = arg(n_m/d_n) +
    sum arg(r - z_i) - sum arg(r - p_i)`` must be 180 deg (``K > 0``) or
    0 deg (``K < 0``) modulo 360 deg.  The factored form keeps its digits
    where a root sits close to an open-loop pole (small gains), where
    evaluating ``N/D`` from coefficients would cancel.

    Parameters
    ----------
    num, den : ndarray, shape (C, n + 1)
        Loop polynomials per row, in the variable of ``roots``.
    gains : ndarray, shape (C,)
        Gain of each row.
    roots : ndarray, shape (C, k)
        Roots of ``den + gain num`` to check.
    poles, zeros : ndarray, shape (C, n), optional
        Open-loop poles and finite zeros per row (zeros ``nan``-padded); by
        default computed from ``num`` and ``den``.

    Returns
    -------
    ndarray, shape (C, k)
        Residual in degrees, in ``[0, 180]``; ``nan`` where the angle is
        undefined: at ``K = 0``, at infinite roots, and at roots within 1e-8
        (relative) of an open-loop pole or zero, where the distance, and so
        the angle, is set by rounding.
    """
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    gains = np.asarray(gains, dtype=float)
    roots = np.asarray(roots, dtype=complex)
    if poles is None or zeros is None:
        poles, zeros, _, _, _, _, lead_n = _features(num, den)
    else:
        nonzero = num != 0
        lead_n = num[np.arange(num.shape[0]), np.argmax(nonzero, axis=1)]
    with np.errstate(all="ignore"):
        finite = np.isfinite(roots)
        r = np.where(finite, roots, 0.0)
        r2 = r.real**2 + r.imag**2
        # The product of the factors carries the summed angle with one
        # arctangent per root; it is renormalised as it goes (no under- or
        # overflow).  A root within _ON_FEATURE (relative) of an open-loop
        # pole or zero has its angle set by rounding, not by the locus (the
        # limits K -> 0 and K -> infinity): undefined there.
        tiny2 = _ON_FEATURE**2
        phasor = np.ones(roots.shape, dtype=complex)
        on_feature = np.zeros(roots.shape, dtype=bool)
        for j in range(poles.shape[1]):  # loops over the order only
            pj = poles[:, j : j + 1]
            to_p = r - pj
            size = to_p.real**2 + to_p.imag**2
            on_feature |= size <= tiny2 * np.maximum(r2, pj.real**2 + pj.imag**2)
            phasor *= np.conj(to_p)
            zj = zeros[:, j : j + 1]
            has = ~np.isnan(zj)
            to_z = np.where(has, r - np.where(has, zj, 0.0), 1.0)
            size = to_z.real**2 + to_z.imag**2
            zj2 = np.where(has, zj.real**2 + zj.imag**2, 0.0)
            on_feature |= has & (size <= tiny2 * np.maximum(r2, zj2))
            phasor *= to_z
            size = np.abs(phasor)
            phasor = np.where(size > 0, phasor / np.where(size > 0, size, 1.0), phasor)
        # -K L(r) must be a positive real number: its argument is the residual.
        phasor = phasor * np.sign(-gains * lead_n / den[:, 0])[:, np.newaxis]
        residual = np.abs(np.angle(phasor))
    ok = finite & (gains[:, np.newaxis] != 0) & ~on_feature
    return np.where(ok, np.rad2deg(residual), np.nan)


def _roots(num: np.ndarray, den: np.ndarray, gains: np.ndarray) -> np.ndarray:
    """Roots of ``den + gains num`` row by row, shape (C, n); ``inf`` for lost degree."""
    poly = den + gains[:, np.newaxis] * num
    lead_terms = np.abs(den[:, 0]) + np.abs(gains * num[:, 0])
    vanished = np.abs(poly[:, 0]) <= 8 * np.finfo(float).eps * lead_terms
    if not np.any(vanished):
        return batched_roots(poly)
    out = np.full(poly.shape[:1] + (poly.shape[1] - 1,), np.inf + 0j)
    out[~vanished] = batched_roots(poly[~vanished])
    # A biproper loop at K = -d0/n0: one root is at infinity; the others are
    # the roots of the lower-degree polynomial.  (Deeper degeneracies, all
    # gains exactly cancelling two coefficients, are left at infinity.)
    low = poly[vanished][:, 1:]
    usable = low[:, 0] != 0
    if np.any(usable):
        sub = np.full((low.shape[0], poly.shape[1] - 1), np.inf + 0j)
        sub[usable, :-1] = batched_roots(low[usable])
        out[vanished] = sub
    return out


def _polish(poly, dpoly, seeds, scale, simultaneous, iterations=8):
    """Newton (or Aberth-Ehrlich) iterations from seeds, and a verdict per row.

    The verdict checks convergence, root separation (two seeds on one root)
    and Vieta's sum of the roots.
    """
    r = np.where(np.isfinite(seeds), seeds, 0.0)
    n = r.shape[1]
    off = ~np.eye(n, dtype=bool)
    with np.errstate(all="ignore"):
        if not simultaneous:
            # Plain Newton: most rows settle in three steps; only the rest
            # iterate on.
            step = np.zeros_like(r)
            rows = np.arange(r.shape[0])
            pr, dr, rr, sc = poly, dpoly, r.copy(), scale[:, np.newaxis]
            for it in range(iterations):
                st = _horner_rows(pr, rr) / _horner_rows(dr, rr)
                rr = rr - st
                if it >= 2:
                    done = np.all(np.abs(st) <= 1e-13 * np.maximum(np.abs(rr), sc), axis=1)
                    if np.any(done):
                        r[rows[done]] = rr[done]
                        step[rows[done]] = st[done]
                        keep = ~done
                        rows, pr, dr, rr, sc, st = rows[keep], pr[keep], dr[keep], rr[keep], sc[keep], st[keep]
                    if rows.size == 0:
                        break
            r[rows] = rr
            step[rows] = st
        for _ in range(iterations if simultaneous else 0):
            step = _horner_rows(poly, r) / _horner_rows(dpoly, r)
            if simultaneous:
                # Aberth-Ehrlich: Newton's step corrected by the other roots,
                # so two seeds do not slide onto one root.
                diff = r[:, :, np.newaxis] - r[:, np.newaxis, :]
                repel = np.sum(np.divide(1.0, diff, where=off, out=np.zeros_like(diff)), axis=2)
                aberth = step / (1.0 - step * repel)
                step = np.where(np.isfinite(aberth), aberth, step)
            r = r - step
        ok = np.all(np.isfinite(seeds), axis=1)
        ok &= np.all(np.abs(step) <= 1e-11 * np.maximum(np.abs(r), scale[:, np.newaxis]), axis=1)
        if n > 1:
            gap = np.abs(r[:, :, np.newaxis] - r[:, np.newaxis, :])
            gap[:, np.arange(n), np.arange(n)] = np.inf
            ok &= np.min(gap, axis=(1, 2)) > 1e-6 * scale
        vieta = -poly[:, 1] / poly[:, 0]
        ok &= np.abs(r.sum(axis=1) - vieta) <= 1e-9 * (np.sum(np.abs(r), axis=1) + scale)
    return r, ok


def _roots_from_seeds(num, den, gains, seeds, scale):
    """Roots of ``den + gains num`` from branch seeds, cheaply.

    Seeds interpolated between matched neighbours are close to the roots, so
    a few Newton steps per root are much cheaper than an eigenvalue problem.
    Rows where Newton does not settle (a multiple root, a seed that slid to a
    neighbour's root: caught by root separation and Vieta's sum) are retried
    with Aberth-Ehrlich iteration, and what still fails falls back to the
    companion eigenvalues.
    """
    poly = den + gains[:, np.newaxis] * num
    dpoly = _derivative(poly)
    r, ok = _polish(poly, dpoly, seeds, scale, simultaneous=False)
    ok &= np.abs(poly[:, 0]) > 8 * np.finfo(float).eps * (np.abs(den[:, 0]) + np.abs(gains * num[:, 0]))
    if not np.all(ok):
        bad = np.flatnonzero(~ok)
        r2, ok2 = _polish(poly[bad], dpoly[bad], seeds[bad], scale[bad], simultaneous=True)
        ok2 &= np.abs(poly[bad, 0]) > 8 * np.finfo(float).eps * (np.abs(den[bad, 0]) + np.abs(gains[bad] * num[bad, 0]))
        r[bad[ok2]] = r2[ok2]
        worst = bad[~ok2]
        if worst.size:
            r[worst] = _roots(num[worst], den[worst], gains[worst])
    return r


def _features(num: np.ndarray, den: np.ndarray):
    """Open-loop poles, finite zeros (nan-padded), relative degree, plot scale, centroid."""
    poles = batched_roots(den)
    n = den.shape[1] - 1
    nonzero = num != 0
    first = np.where(nonzero.any(axis=1), np.argmax(nonzero, axis=1), n + 1)
    m = n - first  # numerator degree per loop
    zeros = np.full((num.shape[0], n), np.nan + 0j)
    for degree in np.unique(m):
        if degree <= 0:
            continue
        rows = np.flatnonzero(m == degree)
        zeros[rows, :degree] = batched_roots(num[rows, n - degree :])
    with np.errstate(invalid="ignore"):
        lead_n = num[np.arange(num.shape[0]), np.minimum(first, n)]
    excess = n - m
    # Centroid of the asymptotes: (sum poles - sum zeros)/(n - m).
    sum_p = poles.sum(axis=1)
    sum_z = np.nansum(zeros, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        centroid = np.where(excess > 0, (sum_p - sum_z) / np.maximum(excess, 1), 0.0)
    features = np.concatenate([poles, zeros, centroid[:, np.newaxis]], axis=1)
    scale = np.nanmax(np.abs(features), axis=1)
    scale = np.where(scale > 0, scale, 1.0)
    return poles, zeros, m, excess, scale, centroid, lead_n


def _asymptotic(roots, zeros, excess, scale, centroid, negative, zero_tol, far_factor, asymptote_tol):
    """Per row: is the locus at these roots in its asymptotic regime?"""
    C, n = roots.shape
    ok = np.ones(C, dtype=bool)
    # Every finite zero has a root within zero_tol * scale.
    dist = np.abs(roots[:, :, np.newaxis] - zeros[:, np.newaxis, :])  # (C, n roots, n zeros)
    dist = np.where(np.isnan(dist), np.inf, dist)
    near = np.min(dist, axis=1)
    has_zero = ~np.isnan(zeros)
    ok &= np.all(~has_zero | (near <= zero_tol * scale[:, np.newaxis]), axis=1)
    # The other n - m roots (not those sitting on zeros) are far out and
    # along the asymptotes.
    on_zero = np.min(dist, axis=2) <= zero_tol * scale[:, np.newaxis]
    offset = roots - centroid[:, np.newaxis]
    far = (np.abs(offset) > far_factor * scale[:, np.newaxis]) & ~on_zero
    far_count = np.sum(far | ~np.isfinite(roots), axis=1)
    ok &= far_count >= excess
    angle = np.angle(np.where(np.isfinite(offset), offset, 1.0))
    q = np.maximum(excess, 1)[:, np.newaxis]
    base = 0.0 if negative else np.pi
    # Asymptote angles (base + 2 pi l)/q: distance to the nearest one.
    phase = (angle - base / q) * q / (2 * np.pi)
    miss = np.abs(phase - np.round(phase)) * 2 * np.pi / q
    bad_angle = far & np.isfinite(roots) & (miss > np.deg2rad(asymptote_tol))
    ok &= ~np.any(bad_angle, axis=1)
    return ok


def _allowed_step(roots_a, roots_b, scale, floor, max_step):
    """Largest allowed move of each root between neighbouring samples.

    Inside the plot region ``max_step`` times the root's distance from the
    origin of the plane, clipped to ``[floor, scale]``: slow poles are
    resolved on their own scale (a plant spanning decades, a fast-sampled
    loop in ``g``), fast ones on the plot scale.  Beyond the plot scale the
    bound grows by a quarter of the distance past it, because a branch
    running out along an asymptote is a straight line.
    """
    local = np.minimum(np.abs(roots_a), np.abs(roots_b))
    local = np.where(np.isfinite(local), local, np.inf)
    s = scale[:, np.newaxis]
    inner = max_step * np.clip(local, floor[:, np.newaxis], s)
    return np.maximum(inner, _FAR_GROWTH * (local - s))


def _match(num, den, k_a, k_b, r_a, r_b, allowed, fine=None):
    """Greedy assignment of roots ``r_a`` (at ``k_a``) to ``r_b`` (at ``k_b``).

    Returns ``perm`` (C, n) with ``r_b[perm[:, i]]`` continuing ``r_a[:, i]``,
    the matched displacement (C, n) and an ambiguity flag (C,).  ``fine``
    (C, n) is the step bound on each root's own scale; roots closer than a
    tenth of it count as coincident (default: ``allowed``).
    """
    C, n = r_a.shape
    with np.errstate(all="ignore"):
        finite_a = np.isfinite(r_a)
        ra = np.where(finite_a, r_a, 0.0)
        slope = -_horner_rows(num, ra) / _horner_rows(_derivative(den) + k_a[:, np.newaxis] * _derivative(num), ra)
        step = (k_b - k_a)[:, np.newaxis] * slope
        size = np.abs(step)
        # Clip the predicted step to the step bound on the root's own scale:
        # at a collision the derivative is infinite and the bare position is
        # the better guess.
        clip = allowed if fine is None else fine
        step = np.where(np.isfinite(size) & (size > 0), step * np.minimum(1.0, clip / size), 0.0)
        predicted = np.where(finite_a, r_a + step, r_a)
        cost = np.abs(predicted[:, :, np.newaxis] - r_b[:, np.newaxis, :])
        both_inf = ~np.isfinite(predicted)[:, :, np.newaxis] & ~np.isfinite(r_b)[:, np.newaxis, :]
        cost = np.where(both_inf, 0.0, cost)
        cost = np.where(np.isnan(cost), np.inf, cost)
    big = np.finfo(float).max
    cost = np.where(np.isinf(cost), big, cost)
    # Fast path: every root's nearest neighbour, where that is a permutation.
    perm = np.argmin(cost, axis=2)
    taken = np.zeros((C, n), dtype=int)
    np.add.at(taken, (np.repeat(np.arange(C), n), perm.ravel()), 1)
    clash = np.flatnonzero(np.any(taken != 1, axis=1))
    if clash.size:
        # Greedy global-minimum assignment where nearest neighbours collide:
        # n steps, each over the whole sub-batch.
        work = cost[clash].copy()
        sub = np.zeros((clash.size, n), dtype=int)
        idx = np.arange(clash.size)
        for _ in range(n):
            flat = np.argmin(work.reshape(clash.size, -1), axis=1)
            i, j = np.divmod(flat, n)
            sub[idx, i] = j
            work[idx, i, :] = np.inf
            work[idx, :, j] = np.inf
        perm[clash] = sub
    rows = np.arange(C)
    chosen = cost[rows[:, np.newaxis], np.arange(n), perm]
    # Ambiguous: another root of b is about as close to a's prediction.
    others = cost.copy()
    others[rows[:, np.newaxis], np.arange(n), perm] = np.inf
    if n > 1:
        runner_up = np.min(others, axis=2)
        rival_col = np.argmin(others, axis=2)
        owner = np.empty_like(perm)
        owner[rows[:, np.newaxis], perm] = np.arange(n)
        rival = np.take_along_axis(owner, rival_col, axis=1)
        # Swapping two roots that coincide at sample a (a multiple pole at
        # K = 0, the meeting point of a breakaway) changes no branch: only
        # distinct roots can be mismatched.
        apart = np.abs(r_a - np.take_along_axis(r_a, rival, axis=1)) > 0.1 * (allowed if fine is None else fine)
        apart &= np.isfinite(r_a)
        ambiguous = np.any((chosen > 0.5 * runner_up) & apart, axis=1)
    else:
        ambiguous = np.zeros(C, dtype=bool)
    displacement = np.abs(np.take_along_axis(r_b, perm, axis=1) - r_a)
    displacement = np.where(np.isnan(displacement), np.inf, displacement)
    return perm, displacement, ambiguous


def _compose(perms: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Prefix composition of per-interval matches into branch orders.

    ``perms`` (C, n): sample ``c`` -> ``c + 1``.  Returns ``order`` (C + 1, n)
    with ``order[c, b]`` the index at sample ``c`` of branch ``b``; each loop
    restarts at its ``starts`` sample with the identity.  Log-depth
    (Hillis-Steele) scan.
    """
    total = perms.shape[0] + 1
    n = perms.shape[1]
    # step[c] maps index at sample c - 1 to index at sample c; identity at loop starts.
    step = np.empty((total, n), dtype=int)
    step[0] = np.arange(n)
    step[1:] = perms
    step[starts] = np.arange(n)
    acc = step.copy()  # acc[c] = step[c] o ... o step[c - span + 1] (within the loop)
    index = np.arange(total)
    segment = np.maximum.accumulate(np.where(np.isin(index, starts), index, 0))
    longest = int(np.max(np.diff(np.r_[starts, total])))
    span = 1
    while span < longest:
        prev = index - span
        use = prev >= segment
        # acc[c] o acc[c - span]: the earlier map is applied first.
        composed = np.take_along_axis(acc, acc[np.where(use, prev, 0)], axis=1)
        acc = np.where(use[:, np.newaxis], composed, acc)
        span *= 2
    return acc


def _crossing_gains(num, den, sign, lo, hi, r_lo, r_hi, boundary, rtol):
    """Gains where one tracked root crosses the stability boundary.

    Illinois (modified regula falsi) in ``|K|`` on ``boundary(r(K))``, the
    root ``r(K)`` followed by Newton's method from the interpolated bracket
    ends; all brackets at once.
    """
    f_lo, f_hi = boundary(r_lo), boundary(r_hi)
    poly_n, poly_d = num, den
    d_num, d_den = _derivative(num), _derivative(den)
    last = np.zeros(lo.size, dtype=int)
    # A bracket end exactly on the boundary is the crossing itself.
    active = (f_lo != 0) & (f_hi != 0)
    with np.errstate(all="ignore"):
        for _ in range(60):
            if not np.any(active):
                break
            k = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
            bad = ~np.isfinite(k) | (k <= lo) | (k >= hi)
            k = np.where(bad, 0.5 * (lo + hi), k)
            t = (k - lo) / (hi - lo)
            r = r_lo + t * (r_hi - r_lo)
            gain = (sign * k)[:, np.newaxis]
            poly = poly_d + gain * poly_n
            dpoly = d_den + gain * d_num
            for _ in range(5):
                r = r - _horner_rows(poly, r[:, np.newaxis])[:, 0] / _horner_rows(dpoly, r[:, np.newaxis])[:, 0]
            f = boundary(r)
            ok = np.isfinite(f)
            f = np.where(ok, f, 0.5 * (f_lo + f_hi))
            to_lo = (np.signbit(f) == np.signbit(f_lo)) & active
            to_hi = ~to_lo & active
            # Illinois: halve the stale end's value when one end moves twice.
            f_hi = np.where(to_lo & (last == 1), 0.5 * f_hi, f_hi)
            f_lo = np.where(to_hi & (last == 2), 0.5 * f_lo, f_lo)
            lo, f_lo, r_lo = np.where(to_lo, k, lo), np.where(to_lo, f, f_lo), np.where(to_lo, r, r_lo)
            hi, f_hi, r_hi = np.where(to_hi, k, hi), np.where(to_hi, f, f_hi), np.where(to_hi, r, r_hi)
            last = np.where(to_lo, 1, np.where(to_hi, 2, last))
            active &= (hi - lo) > rtol * hi
            active &= f != 0
    return np.where(np.abs(f_lo) <= np.abs(f_hi), lo, hi)


def _scan_range(
    num: np.ndarray, den: np.ndarray, poles: np.ndarray, lead_n: np.ndarray, excess: np.ndarray, scale: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Lowest gain of the scan (``(P,)``) and the number of scan decades of each loop (``(P,)``, int).

    Gain scales of the loop: the gain at which the root leaving pole p has moved by |p| (first order:
    K |N(p)/D'(p)| = |p|), and the gain at which |K N| and |D| are alike at the plot scale (the
    asymptotic side).  The scan spans 1e-4 of the smallest to 1e4 of the largest, every 3 decades from a
    loop's own start to its own end, so a loop's result does not depend on the batch it is in.
    """
    with np.errstate(all="ignore"):
        k_asym = np.abs(den[:, 0]) / np.abs(lead_n) * scale ** excess.astype(float)
        d_den = _derivative(den)
        at = np.where(poles != 0, poles, scale[:, np.newaxis])
        k_pole = np.abs(at) * np.abs(_horner_rows(d_den, poles)) / np.abs(_horner_rows(num, poles))
        k_pole = np.where(np.isfinite(k_pole) & (k_pole > 0), k_pole, np.nan)
        k_lo = np.nanmin(np.c_[k_pole, k_asym], axis=1)
        k_hi = np.nanmax(np.c_[k_pole, k_asym], axis=1)
    k_asym = np.where(np.isfinite(k_asym) & (k_asym > 0), k_asym, 1.0)
    k_lo = np.where(np.isfinite(k_lo) & (k_lo > 0), k_lo, k_asym) * 1e-4
    k_hi = np.where(np.isfinite(k_hi) & (k_hi > 0), k_hi, k_asym) * 1e4
    own_count = np.clip(np.ceil(np.log10(k_hi / k_lo) / 3.0) + 1, 4, _MAX_SCAN).astype(int)
    return k_lo, own_count


def _scan_at(
    num: np.ndarray,
    den: np.ndarray,
    poles: np.ndarray,
    zeros: np.ndarray,
    excess: np.ndarray,
    scale: np.ndarray,
    centroid: np.ndarray,
    slowest: np.ndarray,
    sign: float,
    asymptote: tuple[bool, float, float, float],
    max_step: float,
    gains_pd: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Roots ``(P, D, n)``, asymptotic flags ``(P, D)`` and "not yet moved" flags ``(P, D)`` at gains ``(P, D)``.

    ``asymptote`` is ``(negative, zero_tol, far_factor, asymptote_tol)`` of :func:`_asymptotic`.
    """
    P, width_d = gains_pd.shape
    rws = np.repeat(np.arange(P), width_d)
    rts = _roots(num[rws], den[rws], sign * gains_pd.ravel())
    asy = _asymptotic(rts, zeros[rws], excess[rws], scale[rws], centroid[rws], *asymptote).reshape(P, -1)
    dist = np.abs(rts[:, :, np.newaxis] - poles[rws][:, np.newaxis, :])
    dist = np.where(np.isnan(dist), np.inf, dist)
    nearest = np.take_along_axis(poles[rws], np.argmin(dist, axis=2), axis=1)
    # "Not moved": every root within a hundredth of its own allowed step
    # of an open-loop pole.
    own = 0.01 * max_step * np.clip(np.abs(nearest), slowest[rws][:, np.newaxis], scale[rws][:, np.newaxis])
    unmoved = np.all(np.min(dist, axis=2) <= own, axis=1).reshape(P, -1)
    return rts.reshape(P, width_d, -1), asy, unmoved


def _boundary(r: np.ndarray, rws: np.ndarray, discrete: bool, delta: bool, ts: np.ndarray | None) -> np.ndarray:
    """Signed distance-like function of roots ``r`` (first axis: loops ``rws``), >= 0 outside the stability region."""
    if not discrete:
        return r.real
    if delta and ts is not None:
        # (|1 + ts g|^2 - 1)/ts without the cancellation of forming z.
        t = ts[rws].reshape((-1,) + (1,) * (r.ndim - 1))
        return 2.0 * r.real + t * (r.real**2 + r.imag**2)
    return r.real**2 + r.imag**2 - 1.0


def _outside(r: np.ndarray, rws: np.ndarray, discrete: bool, delta: bool, ts: np.ndarray | None) -> np.ndarray:
    """Whether each root of ``r`` lies on or outside the stability boundary (see :func:`_boundary`)."""
    with np.errstate(invalid="ignore"):
        return _boundary(r, rws, discrete, delta, ts) >= 0


def _padded_take(rows: np.ndarray, P: int) -> tuple[np.ndarray, np.ndarray]:
    """Indices ``(P, G)`` into the samples sorted by loop, the last sample of a loop repeated to width ``G``,
    and the sample count per loop ``(P,)``."""
    counts = np.bincount(rows, minlength=P)
    width = int(counts.max())
    start_of = np.r_[0, np.cumsum(counts)[:-1]]
    position = np.arange(width)[np.newaxis, :]
    return start_of[:, np.newaxis] + np.minimum(position, counts[:, np.newaxis] - 1), counts


def _refine_samples(
    num: np.ndarray,
    den: np.ndarray,
    sign: float,
    scale: np.ndarray,
    floor: np.ndarray,
    slowest: np.ndarray,
    limits: tuple[float, int, int],
    rows: np.ndarray,
    mags: np.ndarray,
    roots: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[np.ndarray], list[np.ndarray], bool]:
    """Split gain intervals until every root moves at most the allowed step and every match is clear.

    ``rows``, ``mags`` (``|K|``) and ``roots`` (``(S, n)``) are the initial samples sorted by loop and gain;
    ``limits`` is ``(max_step, max_rounds, max_samples)``.  Returns the samples with the new ones appended
    (unsorted), the left sample index and root permutation of every settled interval, and whether the
    round limit stopped the refinement.
    """
    max_step, max_rounds, max_samples = limits
    P = scale.size
    same = rows[1:] == rows[:-1]
    pend_a = np.flatnonzero(same)
    pend_b = pend_a + 1
    settled_a: list[np.ndarray] = []
    settled_perm: list[np.ndarray] = []
    hit_cap = False
    for _ in range(max_rounds):
        if pend_a.size == 0:
            break
        a, b = pend_a, pend_b
        ra, rb = roots[a], roots[b]
        allowed = _allowed_step(ra, rb, scale[rows[a]], floor[rows[a]], max_step)
        # Coincidence is judged on each root's own scale, whatever step_floor:
        # a coarse step bound must not excuse a swap of distinct slow roots.
        fine = _allowed_step(ra, rb, scale[rows[a]], slowest[rows[a]], max_step)
        perm, disp, ambiguous = _match(
            num[rows[a]], den[rows[a]], sign * mags[a], sign * mags[b], ra, rb, allowed, fine
        )
        too_far = np.any(disp > allowed, axis=1)
        width = mags[b] - mags[a]
        resolvable = width > 1e-12 * np.maximum(mags[b], 1e-300)
        split = resolvable & (too_far | ambiguous)
        counts = np.bincount(rows, minlength=P)
        split &= counts[rows[a]] < max_samples
        # Intervals that pass are final, and so is their match.
        settled_a.append(a[~split])
        settled_perm.append(perm[~split])
        # Split into as many pieces as the step excess asks for (geometric in
        # K), so most intervals settle in one or two rounds; ambiguous
        # intervals are bisected.
        excess_step = np.max(np.where(np.isfinite(disp), disp, np.inf) / allowed, axis=1)[split]
        pieces = np.where(too_far[split], np.clip(np.ceil(1.2 * excess_step), 2, 16), 2).astype(int)
        a, b = a[split], b[split]
        if a.size == 0:
            pend_a = a
            break
        lo, hi = mags[a], mags[b]
        pieces = np.where(lo > 0, pieces, 2)
        owner = np.repeat(np.arange(a.size), pieces - 1)
        first = np.r_[0, np.cumsum(pieces - 1)[:-1]]
        j = np.arange(owner.size) - first[owner] + 1
        frac = j / pieces[owner]
        lo_o, hi_o = lo[owner], hi[owner]
        with np.errstate(divide="ignore"):
            mid = np.where(lo_o > 0, lo_o * np.exp(frac * np.log(hi_o / np.where(lo_o > 0, lo_o, 1.0))), hi_o / 4.0)
        new_rows = rows[a][owner]
        matched_b = np.take_along_axis(roots[b], perm[split], axis=1)
        with np.errstate(invalid="ignore"):
            seeds = roots[a][owner] + frac[:, np.newaxis] * (matched_b[owner] - roots[a][owner])
        new_roots = _roots_from_seeds(num[new_rows], den[new_rows], sign * mid, seeds, scale[new_rows])
        new_index = rows.size + np.arange(owner.size)
        rows = np.concatenate([rows, new_rows])
        mags = np.concatenate([mags, mid])
        roots = np.concatenate([roots, new_roots])
        # Chain a -> new_1 -> ... -> new_{q-1} -> b for every split interval.
        left = np.concatenate([a, new_index])
        is_last = np.r_[owner[1:] != owner[:-1], True] if owner.size else np.zeros(0, bool)
        right_of_new = np.where(is_last, b[owner], new_index + 1)
        right = np.concatenate([new_index[first], right_of_new])
        pend_a, pend_b = left, right
    else:
        hit_cap = pend_a.size > 0
    if pend_a.size:
        allowed = _allowed_step(roots[pend_a], roots[pend_b], scale[rows[pend_a]], floor[rows[pend_a]], max_step)
        settled_a.append(pend_a)
        settled_perm.append(
            _match(num[rows[pend_a]], den[rows[pend_a]], sign * mags[pend_a], sign * mags[pend_b],
                   roots[pend_a], roots[pend_b], allowed)[0]
        )
    return rows, mags, roots, settled_a, settled_perm, hit_cap


def _compose_branches(
    rows: np.ndarray,
    mags: np.ndarray,
    roots: np.ndarray,
    settled_a: list[np.ndarray],
    settled_perm: list[np.ndarray],
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Sort the samples by loop and gain and order each sample's roots along the branches.

    Returns ``rows``, ``mags``, the branch-ordered roots ``(S, n)`` and whether each neighbouring pair of
    samples belongs to one loop (``(S - 1,)``).
    """
    n = roots.shape[1]
    order = np.lexsort((mags, rows))
    rows, mags, roots = rows[order], mags[order], roots[order]
    # Every neighbouring pair of samples is exactly one settled interval.
    same = rows[1:] == rows[:-1]
    where_now = np.empty_like(order)
    where_now[order] = np.arange(order.size)
    perms = np.tile(np.arange(n), (rows.size - 1, 1))
    if settled_a:
        perms[where_now[np.concatenate(settled_a)]] = np.concatenate(settled_perm)
    starts = np.flatnonzero(np.r_[True, ~same])
    order = _compose(perms, starts)
    branch_roots = np.take_along_axis(roots, order, axis=1)
    return rows, mags, branch_roots, same


def _boundary_crossings(
    num: np.ndarray,
    den: np.ndarray,
    sign: float,
    scale: np.ndarray,
    floor: np.ndarray,
    max_step: float,
    region: tuple[bool, bool, np.ndarray | None],
    crossing_rtol: float,
    samples: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
) -> tuple[np.ndarray, np.ndarray, np.ndarray, tuple[np.ndarray, ...]]:
    """Gains where a branch crosses the stability boundary, with one sample added exactly at each.

    ``region`` is ``(discrete, delta, ts)`` of :func:`_boundary`; ``samples`` is ``(rows, mags,
    branch_roots, same)`` from :func:`_compose_branches`.  Returns the samples with the crossings added
    (sorted by loop and gain, roots in branch order) and the signed crossing gains of each loop, ascending.
    Regula falsi on the crossing branch (:func:`_crossing_gains`) to ``crossing_rtol``.
    """
    discrete, delta, ts = region
    rows, mags, branch_roots, same = samples
    P = scale.size
    side = _outside(branch_roots, rows, discrete, delta, ts)
    # A root on the boundary at K = 0 (an integrator, a delay pole at z = 0)
    # is no crossing: only intervals with a > 0 count.
    change = (side[1:] != side[:-1]) & same[:, np.newaxis] & (mags[:-1] > 0)[:, np.newaxis]
    # A root of a biproper loop that passes through infinity (K = -d0/n0)
    # changes side without crossing the boundary: not a crossing here (nor
    # anything beyond 1e8 plot scales).
    far_out = 1e8 * scale[rows][:, np.newaxis]
    with np.errstate(invalid="ignore"):
        change &= (np.abs(branch_roots[1:]) < far_out[1:]) & (np.abs(branch_roots[:-1]) < far_out[:-1])
    cross_idx = np.flatnonzero(np.any(change, axis=1))
    crossing = np.zeros(0)
    cross_rows = rows[cross_idx]
    all_crossing, all_rows = crossing, cross_rows
    if cross_idx.size:
        branch = np.argmax(change[cross_idx], axis=1)
        crossing = _crossing_gains(
            num[cross_rows], den[cross_rows], sign, mags[cross_idx], mags[cross_idx + 1],
            branch_roots[cross_idx, branch], branch_roots[cross_idx + 1, branch],
            partial(_boundary, rws=cross_rows, discrete=discrete, delta=delta, ts=ts), crossing_rtol,
        )
        # A crossing found exactly at an existing sample needs no new sample.
        all_crossing, all_rows = crossing, cross_rows
        fresh = (crossing != mags[cross_idx]) & (crossing != mags[cross_idx + 1])
        cross_idx, cross_rows, crossing = cross_idx[fresh], cross_rows[fresh], crossing[fresh]
        frac = (crossing - mags[cross_idx]) / (mags[cross_idx + 1] - mags[cross_idx])
        seeds = branch_roots[cross_idx] + frac[:, np.newaxis] * (branch_roots[cross_idx + 1] - branch_roots[cross_idx])
        new_roots = _roots_from_seeds(num[cross_rows], den[cross_rows], sign * crossing, seeds, scale[cross_rows])
        allowed = _allowed_step(seeds, new_roots, scale[cross_rows], floor[cross_rows], max_step)
        gains_x = sign * crossing
        perm = _match(num[cross_rows], den[cross_rows], gains_x, gains_x, seeds, new_roots, allowed)[0]
        new_roots = np.take_along_axis(new_roots, perm, axis=1)
        rows = np.concatenate([rows, cross_rows])
        mags = np.concatenate([mags, crossing])
        branch_roots = np.concatenate([branch_roots, new_roots])
        order = np.lexsort((mags, rows))
        rows, mags, branch_roots = rows[order], mags[order], branch_roots[order]
    signed = sign * all_crossing
    by_loop = np.lexsort((signed, all_rows))
    splits = np.cumsum(np.bincount(all_rows, minlength=P))[:-1]
    crossing_gains = tuple(np.split(signed[by_loop], splits))
    return rows, mags, branch_roots, crossing_gains


def _two_pass_scan(
    scan_at: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
    k_lo: np.ndarray,
    own_count: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Scan every loop's gains in decades from ``k_lo`` (``(P,)``), ``own_count`` (``(P,)``) of them, then refine.

    ``scan_at`` is :func:`_scan_at` with the loop's data bound.  Returns the scanned gains ``(P, W)``
    ascending, their roots ``(P, W, n)``, asymptotic and "not yet moved" flags ``(P, W)``, and whether
    each loop reached the asymptotic regime within the scan ``(P,)``.
    """
    P = k_lo.size
    count = int(own_count.max())
    valid = np.arange(count) < own_count[:, np.newaxis]
    # Coarse scan, then two points between the first asymptotic gain and its
    # predecessor and two after the last unmoved one.
    g1 = k_lo[:, np.newaxis] * 10.0 ** (3.0 * np.arange(count))
    r1, a1, s1 = scan_at(g1)
    a1 &= valid
    s1 &= valid
    reached_scan = a1.any(axis=1)
    a1[np.arange(P), own_count - 1] |= ~reached_scan  # not reached: stop at the end
    top1 = np.argmax(a1, axis=1)
    still1 = s1 & (np.arange(count) < top1[:, np.newaxis])
    low1 = np.where(still1.any(axis=1), count - 1 - np.argmax(still1[:, ::-1], axis=1), 0)
    top_g = g1[np.arange(P), top1]
    low_g = g1[np.arange(P), low1]
    g2 = np.stack([top_g / 100.0, top_g / 10.0, low_g * 10.0, low_g * 100.0], axis=1)
    r2, a2, s2 = scan_at(g2)
    scan = np.concatenate([g1, g2], axis=1)
    by_gain = np.argsort(scan, axis=1, kind="stable")
    scan = np.take_along_axis(scan, by_gain, axis=1)
    scan_roots_pd = np.take_along_axis(np.concatenate([r1, r2], axis=1), by_gain[:, :, np.newaxis], axis=1)
    asym = np.take_along_axis(np.concatenate([a1, a2], axis=1), by_gain, axis=1)
    still_all = np.take_along_axis(np.concatenate([s1, s2], axis=1), by_gain, axis=1)
    return scan, scan_roots_pd, asym, still_all, np.asarray(reached_scan | a2.any(axis=1))


def trace_locus(
    loop: Loop,
    k_max: object = None,
    negative: bool = False,
    max_step: float = 0.05,
    *,
    zero_tol: float = 0.01,
    far_factor: float = 2.0,
    asymptote_tol: float = 5.0,
    crossing_rtol: float = 1e-6,
    max_rounds: int = 40,
    max_samples: int = 4000,
    step_floor: float = 1.0,
) -> LocusBranches:
    """Trace the root-locus branches of every loop of a batch.

    Parameters
    ----------
    loop : Loop
        ``P`` loops ``N/D`` in ``s`` or ``z``.
    k_max : float or array_like, shape (P,), optional
        Largest ``|K|`` to trace (dimensionless); by default the start of the
        asymptotic regime (module notes).
    negative : bool
        Trace the complementary locus ``K <= 0``.
    max_step : float
        Largest move of a root between neighbouring samples, as a fraction of
        its local scale: its distance from the origin of the plane (``s = 0``,
        ``z = 0``, or ``z = 1`` for delta-form discrete loops, which are traced
        in ``g = (z - 1)/ts``), clipped between ``step_floor`` and 1 times the
        plot scale (the largest magnitude among open-loop poles, finite zeros
        and the centroid).  No step exceeds ``max_step`` plot scales inside
        the plot.  Beyond the plot scale the bound grows by a quarter of the
        distance past it.
    zero_tol, far_factor, asymptote_tol : float
        Asymptotic-regime criterion (fractions of the plot scale; degrees).
    crossing_rtol : float
        Relative gain bracket of stability-boundary crossings.
    max_rounds, max_samples : int
        Refinement limits (a warning says when one was hit).
    step_floor : float
        Smallest local scale as a fraction of the plot scale.  The default 1
        bounds every step inside the plot by ``max_step`` plot scales (what a
        plot at that scale shows).  Smaller values refine roots close to the
        origin on their own scale (at most ``max_step * step_floor`` plot
        scales per sample); ``0`` resolves every pole down to half the
        slowest feature, for plants spanning decades or fast-sampled loops
        near ``z = 1``, at the cost of more samples.

    Returns
    -------
    LocusBranches
    """
    if not isinstance(loop, Loop):
        raise InputError(f"expected a gainloom Loop; got {type(loop).__name__}")
    if not (0 < max_step < 1):
        raise InputError(f"max_step is a fraction of the plot scale in (0, 1); got {max_step}")
    P, n = loop.points, loop.order
    if n == 0:
        raise InputError("a loop of order 0 has no root locus")
    delta = loop.is_discrete and loop.delta_den is not None
    num = np.array(loop.delta_num if delta else loop.num)
    den = np.array(loop.delta_den if delta else loop.den)
    sign = -1.0 if negative else 1.0
    warnings: list[str] = []

    poles, zeros, m, excess, scale, centroid, lead_n = _features(num, den)
    if np.any(m < 0):
        raise InputError("a loop with a zero numerator has no root locus")
    if not (0 <= step_floor <= 1):
        raise InputError(f"step_floor is a fraction of the plot scale in [0, 1]; got {step_floor}")
    # Smallest local scale: step_floor plot scales, but never below half the
    # smallest non-zero |pole| or |zero| (nor a millionth of the plot scale).
    mags_f = np.abs(np.concatenate([poles, zeros], axis=1))
    mags_f = np.where(np.isfinite(mags_f) & (mags_f > 1e-9 * scale[:, np.newaxis]), mags_f, np.inf)
    slowest = np.clip(0.5 * np.min(mags_f, axis=1), 1e-6 * scale, scale)
    floor = np.maximum(slowest, step_floor * scale)

    # --- gain range from a scan (two batched calls) -----------------------
    k_lo, own_count = _scan_range(num, den, poles, lead_n, excess, scale)
    scan_at = partial(
        _scan_at, num, den, poles, zeros, excess, scale, centroid, slowest, sign,
        (negative, zero_tol, far_factor, asymptote_tol), max_step,
    )

    scan, scan_roots_pd, asym, still_all, reached = _two_pass_scan(scan_at, k_lo, own_count)
    width_scan = scan.shape[1]
    flat_rows = np.repeat(np.arange(P), width_scan)
    scan_roots = scan_roots_pd.reshape(-1, n)
    if k_max is None:
        top = np.argmax(asym, axis=1)
        k_top = scan[np.arange(P), top]
        if not np.all(reached):
            warnings.append(
                f"asymptotic regime not reached at {int(np.sum(~reached))} point(s) within the gain scan; "
                "traced to its end"
            )
    else:
        k_top = np.broadcast_to(np.abs(np.asarray(k_max, dtype=float)), (P,)).copy()
        if not np.all(np.isfinite(k_top) & (k_top > 0)):
            raise InputError(f"k_max must be finite and non-zero; got {k_max!r}")
    # Smallest positive sample: the largest scanned gain at which no root has
    # moved by a hundredth of the allowed step.
    still = still_all & (scan < k_top[:, np.newaxis])
    last_still = np.where(still.any(axis=1), width_scan - 1 - np.argmax(still[:, ::-1], axis=1), 0)
    k_low = np.where(still.any(axis=1), scan[np.arange(P), last_still], k_top * 1e-6)

    # --- initial samples: K = 0, the scan decades inside (k_low, k_top), and
    # both ends (no new eigenvalue problems but the two ends) --------------
    inside = (scan > k_low[:, np.newaxis]) & (scan < k_top[:, np.newaxis])
    ends = np.stack([k_low, k_top], axis=1)
    # Both ends are scanned gains unless k_max was given or nothing stood
    # still: only those need an eigenvalue problem.
    end_roots = np.empty((P, 2, n), dtype=complex)
    have_low = still.any(axis=1)
    end_roots[have_low, 0] = scan_roots_pd[have_low, last_still[have_low]]
    have_top = np.zeros(P, dtype=bool) if k_max is not None else np.ones(P, dtype=bool)
    if k_max is None:
        end_roots[:, 1] = scan_roots_pd[np.arange(P), top]
    need = np.concatenate([np.flatnonzero(~have_low) * 2, np.flatnonzero(~have_top) * 2 + 1])
    if need.size:
        flat_end = end_roots.reshape(2 * P, n)
        flat_end[need] = _roots(num[need // 2], den[need // 2], sign * ends.ravel()[need])
    flat_ends = end_roots.reshape(2 * P, n)
    rows = np.concatenate([np.arange(P), np.repeat(np.arange(P), 2), flat_rows[inside.ravel()]])
    mags = np.concatenate([np.zeros(P), ends.ravel(), scan.ravel()[inside.ravel()]])
    roots = np.concatenate([poles, flat_ends, scan_roots[inside.ravel()]])
    order = np.lexsort((mags, rows))
    rows, mags, roots = rows[order], mags[order], roots[order]
    keep = np.r_[True, (rows[1:] != rows[:-1]) | (mags[1:] != mags[:-1])]
    rows, mags, roots = rows[keep], mags[keep], roots[keep]

    ts = None if not loop.is_discrete else loop.ts

    # --- refinement rounds (only intervals created in the previous round are
    # examined: an interval that passed once is final) ----------------------
    rows, mags, roots, settled_a, settled_perm, hit_cap = _refine_samples(
        num, den, sign, scale, floor, slowest, (max_step, max_rounds, max_samples), rows, mags, roots
    )
    if hit_cap or np.any(np.bincount(rows, minlength=P) >= max_samples):
        warnings.append("refinement limit reached: some steps may exceed max_step")

    # --- branch composition -----------------------------------------------
    rows, mags, branch_roots, same = _compose_branches(rows, mags, roots, settled_a, settled_perm)

    # --- boundary crossings: regula falsi on the crossing branch, then one
    # sample exactly there -------------------------------------------------
    rows, mags, branch_roots, crossing_gains = _boundary_crossings(
        num, den, sign, scale, floor, max_step, (loop.is_discrete, delta, ts), crossing_rtol,
        (rows, mags, branch_roots, same),
    )
    work_roots = branch_roots

    if delta and ts is not None:
        with np.errstate(invalid="ignore"):
            branch_roots = np.where(
                np.isfinite(branch_roots), 1.0 + ts[rows][:, np.newaxis] * branch_roots, np.inf + 0j
            )

    # --- pad to (P, G) ------------------------------------------------------
    take, counts = _padded_take(rows, P)
    return LocusBranches(
        gains=sign * mags[take],
        roots=branch_roots[take],
        counts=counts,
        k_max=k_top,
        crossing_gains=crossing_gains,
        negative=bool(negative),
        discrete=loop.is_discrete,
        warnings=tuple(warnings),
        _check=(num, den, poles, zeros, work_roots[take], ts),
    )


def trace_covering(loop: Loop, gains: Sequence[float], *, negative: bool = False, max_step: float = 0.05) -> LocusBranches:
    """Trace one loop far enough that every gain of interest lies on a drawn branch.

    The tracer's default range ends where the locus turns asymptotic; a
    crossing, breakaway or designed gain beyond it would sit off the drawn
    branches, so the range is widened to twice the largest such ``|K|``
    (the factor leaves some branch visible past the last marked point).

    Parameters
    ----------
    loop : Loop
        One loop ``N/D`` (batch of one).
    gains : sequence of float
        Gains that must be covered (crossings, breakaways, ``K = 1``).
    negative, max_step
        As :func:`trace_locus`.

    Returns
    -------
    LocusBranches
    """
    traced = trace_locus(loop, negative=negative, max_step=max_step)
    needed = 2.0 * max((abs(float(g)) for g in gains), default=0.0)
    if needed > float(traced.k_max[0]):
        traced = trace_locus(loop, k_max=needed, negative=negative, max_step=max_step)
    return traced
