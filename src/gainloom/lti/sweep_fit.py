"""Rational models with dead time fitted to measured frequency responses.

Model per operating point: ``P(s) = N(s)/D(s) exp(-s tau)`` with ``D`` of
degree ``n`` (the pole count) and ``N`` of degree ``m <= n``.  Method, for a
fixed dead time ``tau``:

1. the delay is taken out of the data, ``G_k = H_k exp(j w_k tau)``;
2. Sanathanan-Koerner iterations: the weighted linear least-squares problem
   ``min sum |W_k (N(x_k) - G_k D(x_k)) / D_prev(x_k)|^2`` (linear in the
   coefficients) is solved repeatedly, each time divided by the previous
   denominator, so that at convergence the output error ``N/D - G`` is what
   is minimised.  ``x = s/w0`` with ``w0`` the geometric mean of the data's
   band keeps the columns of powers well scaled; ``D`` is monic in ``x``;
   the weight ``W_k = 1/|H_k|`` makes the error relative, so decades of
   small magnitude count as much as the low-frequency plateau;
3. the dead time is chosen by a grid search over ``[0, tau_max]`` refined by
   golden-section steps on the rms relative error.

Outliers are isolated samples, far from the line through their two
neighbours, that the model fitted without them does not follow either; they
are left out of the fit and reported (data-judged margins still use every
sample: a sharp resonance can look like an outlier to a model that misses it).  Everything is
batched over operating points: data of different lengths are padded with
``nan`` and carry zero weight there.

References
----------
C. K. Sanathanan and J. Koerner, "Transfer function synthesis as a ratio of
two complex polynomials", IEEE Trans. Automatic Control 8(1), 1963.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .polynomials import polyval_rows

__all__ = ["ResponseFit", "fit_response", "model_response", "relative_error"]

#: Sanathanan-Koerner iterations per dead-time candidate.
SK_ITERATIONS = 12
#: Dead-time candidates of the coarse grid, then golden-section steps.
DELAY_GRID = 33
DELAY_REFINE = 24
#: A sample is suspect when its distance exceeds this many robust standard
#: deviations (1.4826 x median) of the row's distances, and at least
#: OUTLIER_FLOOR (common practice, no source: a 5-sigma rule).
OUTLIER_SIGMAS = 5.0
OUTLIER_FLOOR = 0.05
#: At most this fraction of a point's samples may be set aside as outliers.
OUTLIER_SHARE = 0.1


@dataclass(frozen=True, eq=False)
class ResponseFit:
    """Fitted models of a batch of measured responses.

    Attributes
    ----------
    num, den : ndarray, shape (P, n + 1)
        Coefficients in descending powers of ``s`` (``den`` monic), numerator
        left-padded to the denominator's length.
    dead_time : ndarray, shape (P,)
        Fitted dead time, seconds.
    rms_error : ndarray, shape (P,)
        Root-mean-square relative error ``|model - data|/|data|`` over the
        samples used.
    max_error : ndarray, shape (P,)
        Largest relative error over the samples used.
    outliers : ndarray of bool, shape (P, M)
        Samples left out as outliers.
    poles, zeros : int
        Model order.
    """

    num: np.ndarray
    den: np.ndarray
    dead_time: np.ndarray
    rms_error: np.ndarray
    max_error: np.ndarray
    outliers: np.ndarray
    poles: int
    zeros: int


def _powers(x: np.ndarray, count: int) -> np.ndarray:
    """``x**0 .. x**(count - 1)`` on a new last axis."""
    return x[..., np.newaxis] ** np.arange(count)


def _solve_least_squares(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Batched real least squares ``min |a c - b|`` by QR of column-scaled ``a``."""
    scale = np.linalg.norm(a, axis=1, keepdims=True)
    scale = np.where(scale > 0, scale, 1.0)
    q, r = np.linalg.qr(a / scale)
    rhs = np.einsum("pmk,pm->pk", q, b)
    with np.errstate(all="ignore"):
        c = np.linalg.solve(r, rhs[..., np.newaxis])[..., 0]
    return c / scale[:, 0, :]


def _sk_fit(x: np.ndarray, g: np.ndarray, weight: np.ndarray, poles: int, zeros: int) -> tuple[np.ndarray, np.ndarray]:
    """SK iterations; ascending coefficients in ``x``: numerator (P, m+1), monic denominator (P, n+1)."""
    count = x.shape[0]
    xn = _powers(x, poles + 1)
    xm = _powers(x, zeros + 1)
    den_prev = np.ones_like(x)
    num = np.zeros((count, zeros + 1))
    den = np.zeros((count, poles + 1))
    for _ in range(SK_ITERATIONS):
        w = weight / np.abs(den_prev)
        # unknowns b_0..b_m, a_0..a_(n-1):  N(x) - G sum a_i x^i = G x^n
        columns = np.concatenate([xm, -g[..., np.newaxis] * xn[..., :poles]], axis=-1) * w[..., np.newaxis]
        rhs = g * xn[..., poles] * w
        c = _solve_least_squares(np.concatenate([columns.real, columns.imag], axis=1),
                                 np.concatenate([rhs.real, rhs.imag], axis=1))
        num = c[:, : zeros + 1]
        den = np.concatenate([c[:, zeros + 1 :], np.ones((count, 1))], axis=1)
        den_value = np.einsum("pmk,pk->pm", xn, den)
        den_prev = np.where(np.abs(den_value) > 0, den_value, 1.0)
    return num, den


def model_response(num: np.ndarray, den: np.ndarray, dead_time: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``N(jw)/D(jw) exp(-jw tau)`` of (P, n + 1) descending coefficients at ``w`` (P, M), rad/s."""
    s = 1j * np.asarray(w, dtype=float)
    return polyval_rows(num, s) / polyval_rows(den, s) * np.exp(-s * np.asarray(dead_time, dtype=float)[:, np.newaxis])


def relative_error(model: np.ndarray, data: np.ndarray) -> np.ndarray:
    """``|model - data| / |data|`` elementwise (``nan`` where data is ``nan``)."""
    with np.errstate(all="ignore"):
        return np.abs(model - data) / np.abs(data)


def _descending(num_x: np.ndarray, den_x: np.ndarray, w0: np.ndarray, poles: int) -> tuple[np.ndarray, np.ndarray]:
    """Ascending coefficients in ``x = s/w0`` to descending in ``s`` with a monic denominator."""
    num = (num_x * w0[:, np.newaxis] ** -np.arange(num_x.shape[1]))[:, ::-1]
    den = (den_x * w0[:, np.newaxis] ** -np.arange(poles + 1))[:, ::-1]
    lead = den[:, :1]
    num = np.concatenate([np.zeros((num.shape[0], poles + 1 - num.shape[1])), num], axis=1)
    return num / lead, den / lead


def _rms(error: np.ndarray, used: np.ndarray) -> np.ndarray:
    with np.errstate(all="ignore"):
        rms = np.sqrt(np.sum(np.where(used, error, 0) ** 2, axis=1) / np.sum(used, axis=1))
    return np.where(np.isfinite(rms), rms, np.inf)


def _fit_fixed_delay(w, h, weight, w0, tau, poles, zeros):
    """Fit at one dead time per point: descending num, den and the rms relative error."""
    g = h * np.exp(1j * w * tau[:, np.newaxis])
    num_x, den_x = _sk_fit(1j * w / w0[:, np.newaxis], g, weight, poles, zeros)
    num, den = _descending(num_x, den_x, w0, poles)
    error = relative_error(model_response(num, den, tau, w), h)
    return num, den, _rms(error, weight > 0)


def _search_delay(w, h, weight, w0, tau_max, poles, zeros):
    """Dead time minimising the rms relative error: grid, then golden section."""
    grid = np.linspace(0.0, 1.0, DELAY_GRID)[:, np.newaxis] * tau_max
    errors = np.stack([_fit_fixed_delay(w, h, weight, w0, t, poles, zeros)[2] for t in grid])
    best = grid[np.argmin(errors, axis=0), np.arange(w0.size)]
    step = tau_max / (DELAY_GRID - 1)
    lo, hi = np.maximum(best - step, 0.0), np.minimum(best + step, tau_max)
    ratio = (np.sqrt(5.0) - 1.0) / 2.0
    for _ in range(DELAY_REFINE):
        a = hi - ratio * (hi - lo)
        b = lo + ratio * (hi - lo)
        left = (_fit_fixed_delay(w, h, weight, w0, a, poles, zeros)[2]
                <= _fit_fixed_delay(w, h, weight, w0, b, poles, zeros)[2])
        hi = np.where(left, b, hi)
        lo = np.where(left, lo, a)
    return 0.5 * (lo + hi)


def _isolation(w: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Relative distance of each sample from the log-log line through its two neighbours (0 at the ends)."""
    lw = np.log(w)
    with np.errstate(all="ignore"):  # padded rows (w = 1 there) give 0/0, set to 0 below
        t = (lw[:, 1:-1] - lw[:, :-2]) / (lw[:, 2:] - lw[:, :-2])
        log_mag = np.log(np.abs(h))
        # the phase is interpolated as a turn from the left neighbour, so a wrap does no harm
        turn = np.angle(h[:, 2:] / h[:, :-2])
        line = np.exp(log_mag[:, :-2] + t * (log_mag[:, 2:] - log_mag[:, :-2])
                      + 1j * (np.angle(h[:, :-2]) + t * turn))
        inner = np.abs(h[:, 1:-1] - line) / np.abs(line)
    ends = np.zeros((h.shape[0], 1))
    return np.concatenate([ends, np.where(np.isfinite(inner), inner, 0.0), ends], axis=1)


def _beyond_spread(values: np.ndarray, used: np.ndarray) -> np.ndarray:
    """``values`` beyond OUTLIER_SIGMAS robust standard deviations and OUTLIER_FLOOR."""
    spread = 1.4826 * np.nanmedian(np.where(used, values, np.nan), axis=1, keepdims=True)
    return used & (values > np.maximum(OUTLIER_SIGMAS * spread, OUTLIER_FLOOR))


def _worst_share(candidate: np.ndarray, score: np.ndarray, used: np.ndarray) -> np.ndarray:
    """Keep at most OUTLIER_SHARE of each row's samples, those of highest score."""
    allowed = np.floor(OUTLIER_SHARE * np.sum(used, axis=1)).astype(int)
    rank = np.argsort(np.argsort(-np.where(candidate, score, -np.inf), axis=1), axis=1)
    return candidate & (rank < allowed[:, np.newaxis])


def fit_response(
    w: np.ndarray,
    response: np.ndarray,
    poles: int,
    zeros: int,
    *,
    fit_delay: bool = True,
    max_delay: np.ndarray | float | None = None,
) -> ResponseFit:
    """Fit ``N(s)/D(s) exp(-s tau)`` to measured responses, one model per point.

    Parameters
    ----------
    w : ndarray, shape (P, M)
        Frequencies in rad/s, increasing along each row; ``nan`` pads rows
        with fewer samples (at the end).
    response : ndarray of complex, shape (P, M)
        Measured ``H(jw)``; ``nan`` where padded.
    poles, zeros : int
        Model order: ``1 <= poles``, ``0 <= zeros <= poles``.
    fit_delay : bool
        Fit a dead time (else ``tau = 0``).
    max_delay : float or ndarray (P,), optional
        Largest dead time searched, seconds; default ``2 pi / w_max``
        (a full turn of phase at the top frequency).

    Returns
    -------
    ResponseFit

    Raises
    ------
    InputError
        An order out of range, or fewer usable samples than twice the
        unknowns.
    """
    w = np.asarray(w, dtype=float)
    h = np.asarray(response, dtype=complex)
    if poles < 1 or not 0 <= zeros <= poles:
        raise InputError(f"model order needs poles >= 1 and 0 <= zeros <= poles; got {poles} poles, {zeros} zeros")
    usable = np.isfinite(w) & np.isfinite(h) & (np.abs(h) > 0) & (w > 0)
    unknowns = poles + zeros + 1 + int(fit_delay)
    if np.any(np.sum(usable, axis=1) < 2 * unknowns):
        raise InputError(
            f"{int(np.min(np.sum(usable, axis=1)))} usable samples cannot determine {unknowns} unknowns "
            f"({poles} poles, {zeros} zeros{', dead time' if fit_delay else ''}); give at least {2 * unknowns}"
        )
    w_clean = np.where(usable, w, 1.0)
    h_clean = np.where(usable, h, 1.0)
    w0 = np.exp(np.sum(np.where(usable, np.log(w_clean), 0), axis=1) / np.sum(usable, axis=1))
    top = np.max(np.where(usable, w_clean, 0.0), axis=1)
    tau_max = np.broadcast_to(np.asarray(2 * np.pi / top if max_delay is None else max_delay, dtype=float), w0.shape)
    isolation = _isolation(w_clean, h_clean)
    suspect = _worst_share(_beyond_spread(isolation, usable), isolation, usable)
    outliers = suspect
    for attempt in range(2):
        used = usable & ~outliers
        weight = np.where(used, 1.0 / np.abs(h_clean), 0.0)
        tau = (_search_delay(w_clean, h_clean, weight, w0, tau_max, poles, zeros) if fit_delay
               else np.zeros_like(w0))
        num, den, _ = _fit_fixed_delay(w_clean, h_clean, weight, w0, tau, poles, zeros)
        error = relative_error(model_response(num, den, tau, w_clean), h_clean)
        if attempt == 1:
            break
        # a suspect the model (fitted without the suspects) follows is kept
        confirmed = suspect & _beyond_spread(error, usable)
        # a run of neighbours the model misses is a feature of the plant, not a bad sample
        confirmed = confirmed & ~(np.roll(confirmed, 1, axis=1) | np.roll(confirmed, -1, axis=1))
        if np.array_equal(confirmed, suspect):
            break
        outliers = confirmed
    used = usable & ~outliers
    worst = np.max(np.where(used, error, 0.0), axis=1)
    return ResponseFit(num=num, den=den, dead_time=tau, rms_error=_rms(error, used), max_error=worst,
                       outliers=outliers, poles=poles, zeros=zeros)
