"""Damping ratio and natural frequency of poles in the s- or z-plane.

Every pole is mapped to an equivalent continuous pole ``s`` (itself in the
s-plane; ``s = ln(z) / ts`` with the principal logarithm in the z-plane) and
described by

* natural frequency ``wn = |s|`` in rad/s,
* damping ratio ``zeta = -Re(s) / |s|``.

``zeta`` is negative for an unstable pole, real or complex (a real pole in
the right half-plane has ``zeta = -1``), zero on the imaginary axis or the
unit circle, and one for a stable real pole.

Conventions where the formula has no value (documented choices):

* ``s = 0`` (and ``z = 1``): ``zeta = 1``, ``wn = 0``.  An integrator is a
  real, non-oscillating pole; reporting it as fully damped keeps damping specs
  about oscillation from flagging it (its stability is judged elsewhere, by
  Routh/Jury and the stable gain intervals).  python-control's ``damp()``
  returns NaN there.
* ``z = 0``: ``zeta = 1``, ``wn = inf``.  A deadbeat pole is the limit of
  ``z = exp(-a ts)`` as ``a -> inf`` along the positive real axis.
* a real negative ``z`` has ``Im(ln z) = pi``: an oscillation at the Nyquist
  frequency, ``zeta = -ln|z| / sqrt(ln|z|**2 + pi**2) < 1`` and
  ``wn = sqrt(ln|z|**2 + pi**2) / ts``.
* non-finite poles give NaN for both.

The principal logarithm folds every z-plane pole into the primary strip
``|Im s| <= pi / ts``: frequencies beyond Nyquist are not recoverable from z.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["damping_and_frequency", "root_records"]


def damping_and_frequency(poles: object, ts: object = None) -> tuple[np.ndarray, np.ndarray]:
    """Damping ratio and natural frequency of every pole.

    Parameters
    ----------
    poles : array_like of complex, any shape
        Poles in the s-plane (rad/s) when ``ts`` is None, else in the
        z-plane (dimensionless).
    ts : float or array_like, optional
        Sample period in seconds (positive, finite); broadcast against
        ``poles``, so one period per operating point works with poles of
        shape ``(P, n)`` and ``ts`` of shape ``(P, 1)``.

    Returns
    -------
    zeta : ndarray of float
        Damping ratio, same shape as the broadcast inputs; in ``[-1, 1]``.
    wn : ndarray of float
        Natural frequency in rad/s, same shape; ``inf`` for ``z = 0``.

    Raises
    ------
    InputError
        If ``ts`` is given and is not finite and positive, or does not
        broadcast against ``poles``.

    Notes
    -----
    See the module docstring for the conventions at ``s = 0``, ``z = 1``,
    ``z = 0`` and real negative ``z``.
    """
    p = np.asarray(poles, dtype=complex)
    if ts is None:
        s_re, s_im = p.real, p.imag
        wn = np.abs(p)
    else:
        period = np.asarray(ts, dtype=float)
        if not np.all(np.isfinite(period) & (period > 0)):
            raise InputError(f"sample period must be finite and positive seconds; got {ts!r}")
        try:
            p, period = np.broadcast_arrays(p, period)
        except ValueError:
            raise InputError(
                f"sample periods of shape {period.shape} do not broadcast against poles of shape {p.shape}; "
                "give one period, or one per leading index (e.g. shape (P, 1) for poles (P, n))"
            ) from None
        magnitude = np.abs(p)
        with np.errstate(divide="ignore", invalid="ignore"):
            # ln z = ln|z| + j arg z; arg in (-pi, pi] is the principal branch.
            log_mag = np.log(magnitude)
            s_re = log_mag / period
            s_im = np.angle(p) / period
            wn = np.hypot(log_mag, np.angle(p)) / period
    with np.errstate(divide="ignore", invalid="ignore"):
        zeta = -s_re / wn
    finite = np.isfinite(s_re) & np.isfinite(s_im)
    at_origin = wn == 0
    zeta = np.where(at_origin, 1.0, zeta)
    if ts is not None:
        deadbeat = magnitude == 0
        zeta = np.where(deadbeat, 1.0, zeta)
        wn = np.where(deadbeat, np.inf, wn)
        finite = finite | deadbeat
    nan_in = ~np.isfinite(np.asarray(p).real) | ~np.isfinite(np.asarray(p).imag)
    zeta = np.where(nan_in | ~finite, np.nan, zeta)
    wn = np.where(nan_in, np.nan, wn)
    return np.asarray(zeta, dtype=float), np.asarray(wn, dtype=float)


def root_records(roots: np.ndarray) -> list[dict[str, float]]:
    """Finite roots as plain records in one deterministic order.

    Sorted by real part (rounded to 12 digits so rounding noise cannot swap
    a conjugate pair), then upper half-plane first, so each conjugate pair is
    adjacent with its positive imaginary part leading.

    Parameters
    ----------
    roots : array_like of complex
        Roots of one polynomial (non-finite entries, roots at infinity, are dropped).

    Returns
    -------
    list of dict
        ``real``, ``imag``, ``magnitude`` and ``angle_rad`` of each root.
    """
    values = np.asarray(roots, dtype=complex)
    values = values[np.isfinite(values)]
    ordered = sorted(values, key=lambda r: (round(float(r.real), 12), -float(r.imag)))
    return [
        {"real": float(r.real), "imag": float(r.imag), "magnitude": float(abs(r)), "angle_rad": float(np.angle(r))}
        for r in ordered
    ]
