"""Confidence intervals for an estimated fraction (violations among draws)."""

from __future__ import annotations

import numpy as np
import scipy.stats

__all__ = ["clopper_pearson", "CONFIDENCE"]

#: Two-sided confidence level of the intervals the study reports.
CONFIDENCE = 0.95


def clopper_pearson(successes: np.ndarray, trials: np.ndarray, confidence: float = CONFIDENCE) -> tuple[np.ndarray, np.ndarray]:
    """Clopper-Pearson ("exact") interval of a binomial proportion.

    Inverts the binomial test through beta quantiles:
    ``lower = B(a/2; k, n - k + 1)``, ``upper = B(1 - a/2; k + 1, n - k)``
    with ``a = 1 - confidence``; ``lower = 0`` at ``k = 0`` and ``upper = 1``
    at ``k = n``.  Its coverage is at least ``confidence`` for every true
    fraction (it is conservative), which suits rare violations: with no
    violation in ``n`` draws the upper bound is ``1 - (a/2)**(1/n)``, about
    ``3.7/n`` at 95 %.

    Parameters
    ----------
    successes : ndarray of int
        Counted events ``k`` (violating draws), any shape.
    trials : ndarray of int
        Draws ``n >= 1``, broadcast against ``successes``.
    confidence : float
        Two-sided level in ``(0, 1)``.

    Returns
    -------
    (ndarray, ndarray)
        Lower and upper bounds, fractions in ``[0, 1]``.

    References
    ----------
    C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
    illustrated in the case of the binomial", Biometrika 26 (1934).
    """
    k = np.asarray(successes, dtype=float)
    n = np.broadcast_to(np.asarray(trials, dtype=float), k.shape)
    alpha = 1.0 - confidence
    with np.errstate(invalid="ignore", divide="ignore"):
        lower = np.where(k > 0, scipy.stats.beta.ppf(alpha / 2, k, n - k + 1), 0.0)
        upper = np.where(k < n, scipy.stats.beta.ppf(1 - alpha / 2, k + 1, n - k), 1.0)
    return lower, upper
