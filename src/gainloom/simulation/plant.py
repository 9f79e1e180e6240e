"""The plant between samples: one fixed state-space realisation, exact ZOH.

Why one fixed realisation matters
---------------------------------
When the operating point moves, the transfer function changes but the
*state* must be carried from one model to the next.  Two realisations of the
same transfer function agree at a frozen point but not while the
coefficients move: in the controllable canonical form used here the plant
gain sits in the output row ``C`` (the state is the input filtered by the
poles), so a jump of the gain makes the output jump at once; a form with the
gain in ``B`` would make it change only through the dynamics.  The true
answer depends on the physics (which quantities are states of the machine);
a transfer-function schedule does not say.  gainloom uses the controllable
canonical form of :func:`gainloom.lti.convert.tf_to_ss` (the convention of
``scipy.signal.tf2ss``) for every point and states so in the log.

Delays
------
The input reaching the plant is the controller output delayed by the
computation delay (samples) and the plant's dead time (s).  Together they are
``L = delay * T + dead_time = d T + theta`` with integer ``d`` and
``0 <= theta < T``.  Over one sample interval ``[t_k, t_k + T)`` the plant
sees ``u[k-d-1]`` for ``theta`` seconds and then ``u[k-d]`` (the modified
z-transform picture), so exact integration needs the matrix exponential at
the two step lengths ``theta`` and ``T - theta``::

    x[k+1] = Phi(T) x[k] + Gamma(T - theta) u[k-d]
             + Phi(T - theta) Gamma(theta) u[k-d-1] + Gamma(T) w[k]

with ``Phi(h) = exp(A h)``, ``Gamma(h) = int_0^h exp(A s) ds B``, and the
load ``w`` held over the interval.  When the delay or the period changes
along the path, ``d`` and ``theta`` are those of the current point: exact at
a frozen point, a stated approximation while they move.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..lti.convert import tf_to_ss
from ..lti.discretize import total_delay
from ..lti.expm import batched_expm
from ..lti.loop import Loop

__all__ = ["SampledPlant", "sample_plant", "split_delay"]

def split_delay(total: np.ndarray, period: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split a delay in samples into whole samples and a remainder in seconds.

    Parameters
    ----------
    total : ndarray, shape (K,)
        Total loop delay in samples (``>= 0``), already snapped to whole
        numbers where within rounding of one (``lti.discretize.total_delay``).
    period : ndarray, shape (K,)
        Sample period in seconds.

    Returns
    -------
    whole : ndarray of int, shape (K,)
        ``d``, whole samples.
    fraction : ndarray, shape (K,)
        ``theta``, the remainder in seconds, ``0 <= theta < period``.
    """
    total = np.asarray(total, dtype=float)
    if not np.all(np.isfinite(total)) or np.any(total < 0):
        raise InputError(f"loop delays must be finite and >= 0 samples; got minimum {np.min(total)}")
    whole = np.floor(total)
    return whole.astype(int), (total - whole) * np.asarray(period, dtype=float)


@dataclass(frozen=True, eq=False)
class SampledPlant:
    """Per-sample update matrices of the plant along a run.

    ``x[k+1] = phi[k] x[k] + late[k] u[k-d_k] + early[k] u[k-d_k-1] + load[k] w[k]``,
    ``y[k] = c[k] x[k] + d[k] * (plant input at the end of interval k-1)``.
    """

    phi: np.ndarray
    late: np.ndarray
    early: np.ndarray
    load: np.ndarray
    c: np.ndarray
    d: np.ndarray
    whole_delay: np.ndarray
    fraction_delay: np.ndarray

    @property
    def order(self) -> int:
        """Number of plant states."""
        return self.phi.shape[-1]


def _zoh_blocks(A: np.ndarray, B: np.ndarray, steps: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``Phi(h)`` and ``Gamma(h)`` for a batch, from the exponential of the
    augmented matrix ``[[A, B], [0, 0]] h`` (Van Loan's block form), all
    samples in one stacked call of :func:`gainloom.lti.expm.batched_expm`."""
    points, order = B.shape
    augmented = np.zeros((points, order + 1, order + 1))
    augmented[:, :order, :order] = A * steps[:, np.newaxis, np.newaxis]
    augmented[:, :order, order] = B * steps[:, np.newaxis]
    block = batched_expm(augmented)
    return block[:, :order, :order], block[:, :order, order]


def sample_plant(plant: Loop, period: np.ndarray, computation_delay: np.ndarray) -> SampledPlant:
    """Exact zero-order-hold update of the plant at every sample of a run.

    Parameters
    ----------
    plant : Loop
        Continuous plant at the operating point of each sample (K points),
        with its dead time (s).
    period : ndarray, shape (K,)
        Sample period at each sample, s.
    computation_delay : ndarray, shape (K,)
        Computation delay at each sample, samples (may be fractional).

    Returns
    -------
    SampledPlant
    """
    period = np.asarray(period, dtype=float)
    A, B, C, D = tf_to_ss(plant.num, plant.den)
    whole, theta = split_delay(total_delay(plant, period, computation_delay), period)
    count = period.size
    if A.shape[-1] == 0:
        empty = np.zeros((count, 0))
        return SampledPlant(np.zeros((count, 0, 0)), empty, empty, empty, empty, D, whole, theta)
    # Two step lengths per sample in one stacked call: theta and T - theta.
    phi_both, gamma_both = _zoh_blocks(
        np.concatenate([A, A]), np.concatenate([B, B]), np.concatenate([theta, period - theta])
    )
    phi_early, gamma_early = phi_both[:count], gamma_both[:count]
    phi_late, gamma_late = phi_both[count:], gamma_both[count:]
    phi = phi_late @ phi_early
    early = np.einsum("kij,kj->ki", phi_late, gamma_early)
    load = gamma_late + early
    return SampledPlant(phi, gamma_late, early, load, C, D, whole, theta)
