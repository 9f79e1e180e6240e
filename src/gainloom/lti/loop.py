"""The one representation of a loop that travels through the pipeline.

A :class:`Loop` is a batch of SISO transfer functions ``N/D``, one per
operating point, as coefficient arrays in descending powers of ``s``
(continuous, ``ts is None``) or ``z`` (discrete).  Discrete loops remember how
they were made (hold method, prewarp, computation delay) so that the
verification log can say how every number came about.  Conversions to and
from python-control objects happen only at the edges.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .polynomials import as_poly_batch, pad_left

__all__ = ["Loop"]


def _readonly(array: np.ndarray) -> np.ndarray:
    array = np.array(array, dtype=float, copy=True)
    array.setflags(write=False)
    return array


def _rows(array: np.ndarray, index: np.ndarray) -> np.ndarray:
    """Read-only copy of the rows ``index`` (fancy indexing copies already)."""
    out = array[index]
    out.setflags(write=False)
    return out


@dataclass(frozen=True, eq=False)
class Loop:
    """A batch of SISO transfer functions, one per operating point.

    Parameters
    ----------
    num : array_like, shape (P, m + 1) or (m + 1,)
        Numerators, descending powers, left-padded with zeros to one length.
    den : array_like, shape (P, n + 1) or (n + 1,)
        Denominators, descending powers, non-zero leading coefficient at every
        point, ``n + 1 >= m + 1`` (proper).
    ts : array_like, shape (P,), or float, or None
        Sample period in seconds per point; ``None`` for a continuous loop.
    hold : str, optional
        Discretisation method that produced a discrete loop (see
        :data:`gainloom.names.HOLD_METHODS`).
    delay : array_like, shape (P,), or float
        Computation delay in samples already included in ``num``/``den``
        (discrete loops only).
    dead_time : array_like, shape (P,), or float
        Pure time delay in seconds *not* included in the rational part
        (continuous loops only; discretisation absorbs it into ``delay``).
    prewarp : float, optional
        Tustin prewarp frequency in rad/s that was used, if any.
    delta_num, delta_den : array_like, shape (P, n + 1), optional
        The same discrete loop in the delta operator ``g = (z - 1) / ts``.
        At fast sampling the poles crowd near ``z = 1`` and expanded
        z-coefficients lose most of their digits; coefficients in ``g`` stay
        close to the continuous ones.  Discretisers fill these where they can
        compute them without passing through z (e.g. ZOH via the matrix
        exponential), and root computations prefer them when present.
    """

    num: np.ndarray
    den: np.ndarray
    ts: np.ndarray | None = None
    hold: str | None = None
    delay: np.ndarray = field(default_factory=lambda: np.zeros(1))
    dead_time: np.ndarray = field(default_factory=lambda: np.zeros(1))
    prewarp: float | None = None
    delta_num: np.ndarray | None = None
    delta_den: np.ndarray | None = None

    def __post_init__(self) -> None:
        num = as_poly_batch(self.num)
        den = as_poly_batch(self.den)
        if num.ndim != 2 or den.ndim != 2:
            raise InputError(
                f"num and den must be 1-D or 2-D coefficient arrays; got shapes {num.shape} and {den.shape}"
            )
        points = max(num.shape[0], den.shape[0])
        if num.shape[0] not in (1, points) or den.shape[0] not in (1, points):
            raise InputError(f"num has {num.shape[0]} points but den has {den.shape[0]}")
        if num.shape[1] > den.shape[1]:
            raise InputError(
                f"improper loop: numerator has {num.shape[1]} coefficients, denominator only {den.shape[1]}"
            )
        if not (np.all(np.isfinite(num)) and np.all(np.isfinite(den))):
            raise InputError("loop coefficients must be finite")
        if np.any(den[:, 0] == 0):
            bad = int(np.flatnonzero(den[:, 0] == 0)[0])
            raise InputError(f"leading denominator coefficient is zero at point {bad}")
        num = np.broadcast_to(pad_left(num, den.shape[1]), (points, den.shape[1]))
        den = np.broadcast_to(den, (points, den.shape[1]))
        object.__setattr__(self, "num", _readonly(num))
        object.__setattr__(self, "den", _readonly(den))
        object.__setattr__(self, "delay", _readonly(np.broadcast_to(np.asarray(self.delay, float), (points,))))
        object.__setattr__(
            self, "dead_time", _readonly(np.broadcast_to(np.asarray(self.dead_time, float), (points,)))
        )
        if self.ts is not None:
            ts = np.broadcast_to(np.asarray(self.ts, dtype=float), (points,))
            if not np.all(np.isfinite(ts) & (ts > 0)):
                raise InputError(f"sample period must be finite and positive; got {ts}")
            object.__setattr__(self, "ts", _readonly(ts))
        elif np.any(self.delay != 0):
            raise InputError("a continuous loop carries dead_time in seconds, not delay in samples")
        if (self.delta_num is None) != (self.delta_den is None):
            raise InputError("delta_num and delta_den come together")
        if self.delta_den is not None:
            if self.ts is None:
                raise InputError("only a discrete loop has a delta-operator form")
            delta_den = np.broadcast_to(as_poly_batch(self.delta_den), den.shape)
            delta_num = np.broadcast_to(pad_left(as_poly_batch(self.delta_num), den.shape[1]), den.shape)
            object.__setattr__(self, "delta_num", _readonly(delta_num))
            object.__setattr__(self, "delta_den", _readonly(delta_den))

    @property
    def points(self) -> int:
        """Number of operating points in the batch."""
        return self.den.shape[0]

    @property
    def order(self) -> int:
        """Degree of the denominator (number of poles)."""
        return self.den.shape[1] - 1

    @property
    def is_discrete(self) -> bool:
        """True for a loop in ``z``."""
        return self.ts is not None

    def delta(self, index: int | None = None) -> tuple[np.ndarray, np.ndarray] | None:
        """The delta-form coefficients ``(num, den)``, or ``None`` when the loop has none.

        Parameters
        ----------
        index : int, optional
            One point's rows (1-D arrays); all points' (2-D) by default.
        """
        if self.delta_num is None or self.delta_den is None:
            return None
        if index is None:
            return self.delta_num, self.delta_den
        return self.delta_num[index], self.delta_den[index]

    def select(self, index: int | slice | np.ndarray) -> Loop:
        """Return the sub-batch at ``index`` (an int keeps a batch of one)."""
        index = np.atleast_1d(np.arange(self.points)[index])
        # Rows of a validated loop are valid: skip __post_init__ (its checks
        # and copies were the largest cost of the margin bisections, which
        # select rows thousands of times per design).
        sub = object.__new__(Loop)
        for name in ("num", "den", "ts", "delay", "dead_time", "delta_num", "delta_den"):
            value = getattr(self, name)
            object.__setattr__(sub, name, None if value is None else _rows(value, index))
        object.__setattr__(sub, "hold", self.hold)
        object.__setattr__(sub, "prewarp", self.prewarp)
        return sub

    def to_control(self, index: int = 0):
        """Return point ``index`` as a python-control ``TransferFunction``.

        Dead time is not representable there and must be zero.
        """
        import control

        if self.dead_time[index] != 0:
            raise InputError("python-control transfer functions cannot carry dead time; discretise first")
        num = np.trim_zeros(self.num[index], "f")
        if num.size == 0:
            num = np.zeros(1)
        dt = True if self.ts is None else float(self.ts[index])
        return control.tf(num, self.den[index], 0 if self.ts is None else dt)

    @classmethod
    def from_control(cls, systems) -> Loop:
        """Build a loop from one or a sequence of python-control SISO systems.

        ``StateSpace`` systems are converted to transfer functions.  Discrete
        systems must share a numeric sample period each (``dt=True`` is
        refused: the period must be known).
        """
        import control

        if not isinstance(systems, (list, tuple)):
            systems = [systems]
        nums, dens, periods = [], [], []
        for system in systems:
            tf = control.tf(system)
            if tf.ninputs != 1 or tf.noutputs != 1:
                raise InputError(f"only SISO systems are supported; got {tf.noutputs}x{tf.ninputs}")
            nums.append(np.atleast_1d(np.asarray(tf.num[0][0], dtype=float)))
            dens.append(np.atleast_1d(np.asarray(tf.den[0][0], dtype=float)))
            if tf.dt is True:
                raise InputError("discrete system has dt=True; give the sample period in seconds")
            periods.append(None if not tf.dt else float(tf.dt))
        if len({p is None for p in periods}) > 1:
            raise InputError("cannot mix continuous and discrete systems in one loop batch")
        width = max(len(d) for d in dens)
        num = np.stack([pad_left(n, width) for n in nums])
        den = np.stack([pad_left(d, width) for d in dens])
        ts = None if periods[0] is None else np.asarray(periods)
        return cls(num=num, den=den, ts=ts)
