"""A fast-rate discrete system seen by a loop that runs ``N`` times slower.

The outer loop of a cascade updates its output (the inner loop's reference)
every ``N``-th inner sample and holds it in between, and reads its
measurement at the same instants.  For a system at the inner period ``ts``

    x[k+1] = A x[k] + B r[k],    y[k] = C x[k] + D r[k]

with ``r[k] = r_o[m]`` for ``k = mN .. mN + N - 1`` and ``y_o[m] = y[mN]``,
iterating ``N`` steps gives the exact system at ``N ts`` (lifting):

    x[(m+1)N] = A^N x[mN] + (A^(N-1) + ... + A + I) B r_o[m],
    y_o[m]    = C x[mN] + D r_o[m].

Its poles are the inner poles raised to the ``N``-th power (exactly, so
they are taken from the roots, not from the powered matrix), and its
numerator comes from the Markov parameters (:func:`gainloom.lti.convert.ss_to_tf`).
Derivation and conventions: docs/cascade.md.

References
----------
T. Chen, B. Francis, *Optimal Sampled-Data Control Systems*, Springer 1995,
chapter 8 (lifting of multirate systems).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .convert import poly_from_roots, ss_to_tf, tf_to_ss
from .polynomials import batched_roots

__all__ = ["lift"]


def lift(num: np.ndarray, den: np.ndarray, factor: int) -> tuple[np.ndarray, np.ndarray]:
    """Input held over ``factor`` samples, output read every ``factor``-th sample.

    Parameters
    ----------
    num, den : array_like, shape (P, n + 1)
        Discrete transfer functions at the fast period, descending powers of
        ``z``, proper.
    factor : int
        Rate ratio ``N >= 1`` (slow period / fast period).

    Returns
    -------
    num, den : ndarray, shape (P, n + 1)
        The same systems at the slow period ``N ts``: monic denominator whose
        roots are the fast poles to the power ``N``, numerator padded to its
        length.

    Raises
    ------
    InputError
        ``factor`` is not a whole number of at least 1.
    """
    if int(factor) != factor or factor < 1:
        raise InputError(f"the rate factor must be a whole number of at least 1; got {factor!r}")
    A, B, C, D = tf_to_ss(num, den, scaled=True)
    power = np.broadcast_to(np.eye(A.shape[-1]), A.shape).copy()
    held = np.zeros_like(B)
    for _ in range(int(factor)):  # over the rate factor, batched over points
        held = held + np.einsum("...ij,...j->...i", power, B)
        power = power @ A
    den_lifted = poly_from_roots(batched_roots(np.asarray(den, dtype=float)) ** int(factor))
    return ss_to_tf(power, held, C, D, den=den_lifted)
