"""Hold equivalents of continuous plants, batched across operating points.

Every method returns the discrete loop twice: in ``z`` (descending powers,
monic denominator) and in the delta operator ``g = (z - 1)/ts`` (monic in
``g``), the second computed *without* passing through z coefficients so that
its roots stay accurate at fast sampling.  Methods (``names.HOLD_METHODS``):

``zoh``
    Zero-order hold (step invariant).  ``Phi = e^{A ts}`` and
    ``Gamma = integral_0^ts e^{A t} dt`` come from one matrix exponential of
    the augmented matrix ``[[A, I], [0, 0]] ts``; the z form is
    ``(Phi, Gamma B, C, D)`` and the delta form
    ``(A Gamma / ts, Gamma B / ts, C, D)`` (``Phi - I = A Gamma`` exactly, so
    nothing cancels).  A fractional computation delay is exact: the
    modified z-transform of a ZOH input delayed by a fraction of a sample.
``foh``
    First-order (triangle, non-causal ramp-invariant) hold: the input is the
    straight line through the samples.  Same state-space result as
    ``scipy.signal.cont2discrete(method="foh")``.
``tustin``
    Bilinear ``s = c (z - 1)/(z + 1)`` with ``c = 2/ts``, or, with a prewarp
    frequency ``w`` (rad/s, below Nyquist ``pi/ts``),
    ``c = w / tan(w ts / 2)`` so the frequency response matches at ``w``.
    The delta form substitutes ``s = c ts g / (2 + ts g)`` directly.
``matched``
    Matched pole-zero: poles and finite zeros map by ``exp(x ts)``; every
    zero at infinity maps to ``z = -1`` (so the result has as many zeros as
    poles, i.e. direct feedthrough; add ``delay=1`` for the usual one sample
    of computation delay).  The gain matches the low-frequency behaviour:
    if the plant behaves like ``G0 s^-l`` near ``s = 0`` (``l`` = poles minus
    zeros at the origin), the discrete loop behaves like ``G0 g^-l`` near
    ``z = 1`` with ``g = (z - 1)/ts``.  For ``l = 0`` that is the DC gain; for
    a plant with an integrator it matches the low-frequency asymptote (the
    velocity constant) instead of an infinite DC gain.  Poles and zeros at
    the origin map exactly to ``z = 1``; no NaN appears.
``impulse``
    Impulse invariant with scipy's convention
    (``scipy.signal.cont2discrete(method="impulse")``): ``G(z) = ts * sum_k
    g(k ts) z^-k`` where ``g`` is the impulse response, i.e. scaled by ``ts``
    so the DC gain is approximately preserved at fast sampling.  Only for
    strictly proper plants.

Computation delay ``d`` (samples) multiplies by ``z^-d``; the plant's dead
time (seconds) adds ``dead_time / ts`` samples.  A fractional total is only
supported with ``zoh``.  In the delta form ``z^d = (1 + ts g)^d``.

When points of a batch have different whole-sample delays the arrays still
need one width: every point's denominator is ``z^M D(z)`` with ``M`` the
largest delay (plus one for a fractional part), and points with less delay
carry the matching extra powers of ``z`` in their numerators.  Those factors
cancel exactly in the transfer function; they only appear as fixed
closed-loop poles at ``z = 0`` in a root locus.

References
----------
G. F. Franklin, J. D. Powell, M. Workman, *Digital Control of Dynamic
Systems*, 3rd ed., chapters 4 and 6 (hold equivalents, modified z-transform).
C. F. Van Loan, "Computing integrals involving the matrix exponential",
IEEE Trans. Automatic Control 23(3), 1978 (block-triangular exponentials).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..limits import MAX_DELAY_SAMPLES, MAX_PLANT_ORDER, SAMPLE_PERIOD_RANGE
from ..names import HOLD_METHODS, unknown_name_message
from .convert import poly_from_roots, roots_with_origin, ss_to_tf, tf_to_ss, tf_to_zpk
from .expm import batched_expm
from .loop import Loop

__all__ = ["discretize", "discretize_loop", "total_delay", "discrete_roots"]

#: A total delay within this many samples of a whole number counts as whole,
#: so ``dead_time = 3 * ts`` written in decimals is not "fractional".
_WHOLE_TOLERANCE = 1e-9


@dataclass(frozen=True)
class _Rational:
    """Discrete rational part before delay factors: z and delta forms."""

    num: np.ndarray  # (P, w)
    den: np.ndarray  # (P, w)
    dnum: np.ndarray  # (P, w)
    dden: np.ndarray  # (P, w)


def _per_point(value: object, points: int, what: str) -> np.ndarray:
    array = np.asarray(value, dtype=float)
    if array.ndim > 1 or (array.ndim == 1 and array.shape[0] not in (1, points)):
        raise InputError(f"{what} must be a scalar or have one value per point ({points}); got shape {array.shape}")
    return np.array(np.broadcast_to(array, (points,)), dtype=float)


def total_delay(plant: Loop, ts: object, delay: object = 0.0) -> np.ndarray:
    """Total delay in samples per point: ``delay + dead_time / ts``.

    Totals within 1e-9 of a whole number are rounded to it.

    Parameters
    ----------
    plant : Loop
        Continuous plant (its ``dead_time`` in seconds is used).
    ts : float or array_like, shape (P,)
        Sample period in seconds.
    delay : float or array_like, shape (P,)
        Computation delay in samples.
    """
    ts = _per_point(ts, plant.points, "ts")
    delay = _per_point(delay, plant.points, "delay")
    total = delay + plant.dead_time / ts
    whole = np.round(total)
    return np.where(np.abs(total - whole) <= _WHOLE_TOLERANCE * np.maximum(1.0, whole), whole, total)


def _validate(plant: Loop, ts, method, delay, prewarp):
    if not isinstance(plant, Loop):
        raise InputError(f"plant must be a gainloom Loop; got {type(plant).__name__}")
    if plant.is_discrete:
        raise InputError("plant is already discrete (ts is set); discretise a continuous loop")
    if method not in HOLD_METHODS:
        raise InputError(unknown_name_message("hold method", method, HOLD_METHODS))
    points = plant.points
    ts = _per_point(ts, points, "ts")
    if not np.all(np.isfinite(ts) & (ts > 0)):
        raise InputError(f"sample period ts must be finite and positive (seconds); got {ts}")
    low, high = SAMPLE_PERIOD_RANGE
    if np.any((ts < low) | (ts > high)):
        bad = int(np.flatnonzero((ts < low) | (ts > high))[0])
        raise InputError(f"sample period {ts[bad]:.3g} s (point {bad}) is outside {low:g} .. {high:g} s")
    if plant.order > MAX_PLANT_ORDER:
        raise InputError(f"plant of order {plant.order}; at most {MAX_PLANT_ORDER} is accepted")
    delay_arr = _per_point(delay, points, "delay")
    if not np.all(np.isfinite(delay_arr) & (delay_arr >= 0)):
        raise InputError(f"delay must be finite and non-negative (samples); got {delay_arr}")
    if not np.all(np.isfinite(plant.dead_time) & (plant.dead_time >= 0)):
        raise InputError(f"dead_time must be finite and non-negative (seconds); got {plant.dead_time}")
    with np.errstate(over="ignore"):
        total = total_delay(plant, ts, delay_arr)
    if not np.all(total <= MAX_DELAY_SAMPLES):
        bad = int(np.flatnonzero(~(total <= MAX_DELAY_SAMPLES))[0])
        raise InputError(
            f"delay of {total[bad]:.4g} samples (point {bad}, dead time included); at most {MAX_DELAY_SAMPLES} are "
            "accepted (each sample is one more pole of the discrete loop)"
        )
    fractional = total != np.floor(total)
    if np.any(fractional) and method != "zoh":
        bad = int(np.flatnonzero(fractional)[0])
        raise InputError(
            f"fractional delay of {total[bad]:g} samples (point {bad}, including dead time) is only "
            f"supported with method 'zoh' (modified z-transform); got method {method!r}. "
            "Use whole samples or method 'zoh'."
        )
    if prewarp is not None:
        if method != "tustin":
            raise InputError(f"prewarp applies only to method 'tustin'; got method {method!r}")
        prewarp = float(prewarp)
        if not (np.isfinite(prewarp) and prewarp > 0):
            raise InputError(f"prewarp frequency must be finite and positive (rad/s); got {prewarp}")
        limit = np.pi / ts
        past = prewarp >= limit
        if np.any(past):
            bad = int(np.flatnonzero(past)[0])
            raise InputError(
                f"prewarp frequency {prewarp:g} rad/s is at or past Nyquist for ts = {ts[bad]:g} s "
                f"(point {bad}): it must be below pi/ts = {limit[bad]:g} rad/s "
                f"({limit[bad] / (2 * np.pi):g} Hz)"
            )
    return ts, total, prewarp


def _integrals(A: np.ndarray, h: np.ndarray, ramp: bool = False):
    """``e^{A h}``, ``integral_0^h e^{A t} dt`` and (``ramp``) the ramp integral.

    One batched exponential of ``[[A h, I h, 0], [0, 0, I], [0, 0, 0]]``
    (Van Loan): its blocks in the first row are ``Phi``, ``Gamma`` and
    ``Lambda = integral_0^h e^{A (h - r)} (r / h) dr``.
    """
    points, n = A.shape[0], A.shape[-1]
    size = 3 * n if ramp else 2 * n
    eye = np.eye(n)
    block = np.zeros((points, size, size))
    block[:, :n, :n] = A * h[:, None, None]
    block[:, :n, n : 2 * n] = eye * h[:, None, None]
    if ramp:
        block[:, n : 2 * n, 2 * n :] = eye
    big = batched_expm(block)
    phi = big[:, :n, :n]
    gamma = big[:, :n, n : 2 * n]
    lam = big[:, :n, 2 * n :] if ramp else None
    return phi, gamma, lam


def _snap(eigs: np.ndarray, count: np.ndarray, target: float) -> np.ndarray:
    """Set the ``count`` eigenvalues nearest ``target`` exactly to ``target``.

    Poles at ``s = 0`` (exact trailing zeros of the continuous denominator)
    map exactly to ``z = 1`` / ``g = 0``; an eigen-solver returns them only
    to rounding, which would turn an infinite DC gain into a huge finite one.
    """
    if eigs.shape[-1] == 0:
        return eigs
    order = np.argsort(np.abs(eigs - target), axis=-1, kind="stable")
    rank = np.argsort(order, axis=-1, kind="stable")
    return np.where(rank < count[:, None], target + 0j, eigs)


def _origin_poles(den: np.ndarray) -> np.ndarray:
    nonzero = den != 0
    return np.argmax(nonzero[:, ::-1], axis=1)


def _ss_num(A: np.ndarray, B: np.ndarray, C: np.ndarray, D: np.ndarray, den: np.ndarray) -> np.ndarray:
    return ss_to_tf(A, B, C, D, den)[0]


def _state_space_hold(num, den, ts, method) -> _Rational:
    """zoh, foh and impulse: all via the augmented matrix exponential."""
    A, B, C, D = tf_to_ss(num, den, scaled=True)
    points = A.shape[0]
    if method == "impulse" and np.any(D != 0):
        bad = int(np.flatnonzero(D != 0)[0])
        raise InputError(
            f"method 'impulse' needs a strictly proper plant (numerator degree below denominator); "
            f"point {bad} has direct feedthrough {D[bad]:g}"
        )
    origin = _origin_poles(den)
    phi, gamma, lam = _integrals(A, ts, ramp=(method == "foh"))
    a_delta = A @ gamma / ts[:, None, None]  # (Phi - I)/ts without cancellation
    if method == "zoh":
        bz = np.einsum("pij,pj->pi", gamma, B)
        dz = D
    elif method == "foh":
        m0 = np.einsum("pij,pj->pi", gamma, B)
        m1 = np.einsum("pij,pj->pi", lam, B)
        bz = m0 - m1 + np.einsum("pij,pj->pi", phi, m1)
        dz = D + np.einsum("pi,pi->p", C, m1)
    den_z = poly_from_roots(_snap(np.linalg.eigvals(phi), origin, 1.0))
    den_d = poly_from_roots(_snap(np.linalg.eigvals(a_delta), origin, 0.0))
    if method == "impulse":
        # scipy's realisation (Phi, Phi B ts, C, C B ts) is ts z C (zI - Phi)^-1 B;
        # build it as that product so the factor z (a zero exactly at the
        # origin) is exact rather than a rounding residue.  In g:
        # z = 1 + ts g and (zI - Phi) = ts (gI - A_delta).
        strict_z = _ss_num(phi, B * ts[:, None], C, np.zeros(points), den_z)
        strict_d = _ss_num(a_delta, B, C, np.zeros(points), den_d)
        num_z = np.concatenate([strict_z[:, 1:], np.zeros((points, 1))], axis=1)
        num_d = _times_linear(strict_d * ts[:, None], 1.0 / ts)[:, 1:]
        return _Rational(num_z, den_z, num_d, den_d)
    num_z = _ss_num(phi, bz, C, dz, den_z)
    num_d = _ss_num(a_delta, bz / ts[:, None], C, dz, den_d)
    return _Rational(num_z, den_z, num_d, den_d)


def _zoh_fractional(num, den, ts, frac, plain: _Rational) -> _Rational:
    """ZOH with the input delayed by ``frac * ts`` (0 < frac < 1): exact.

    Over one period the held input is ``u[k-1]`` for the first ``frac ts``
    seconds and ``u[k]`` for the rest, so with ``m = 1 - frac``::

        x[k+1] = Phi x[k] + Gamma0 u[k] + Gamma1 u[k-1]
        Gamma0 = integral_0^{m ts} e^{A t} dt B
        Gamma1 = e^{A m ts} integral_0^{frac ts} e^{A t} dt B
        y[k]   = C x[k] + D u[k-1]

    hence the modified z-transform of the ZOH equivalent::

        G(z) = [z N0(z) + N1(z) + D den(z)] / (z den(z))

    with ``N0/den = C (zI - Phi)^-1 Gamma0`` and ``N1/den`` likewise.  In g,
    ``zI - Phi = ts (gI - A_delta)`` and ``z = ts (g + 1/ts)``::

        G = [(g + 1/ts) M0(g) + (M1(g) + D den_delta(g)) / ts] / ((g + 1/ts) den_delta(g))

    with ``M0/den_delta = C (gI - A_delta)^-1 Gamma0 / ts`` (and ``M1``).
    Building the numerator from these pieces keeps ``1/ts``-sized entries
    out of every matrix, so the delta form stays accurate at fast sampling.
    ``plain`` holds the plain ZOH denominators so both share one rounding.
    """
    A, B, C, D = tf_to_ss(num, den, scaled=True)
    points = A.shape[0]
    horizons = np.concatenate([(1.0 - frac) * ts, frac * ts])
    phi_all, gamma_all, _ = _integrals(np.concatenate([A, A]), horizons)
    phi_m, phi_f = phi_all[:points], phi_all[points:]
    gamma_m, gamma_f = gamma_all[:points], gamma_all[points:]
    phi = phi_m @ phi_f
    # Gamma over the whole period, split at m ts; Phi - I = A Gamma_total.
    gamma_total = gamma_m + phi_m @ gamma_f
    a_delta = A @ gamma_total / ts[:, None, None]
    gamma0 = np.einsum("pij,pj->pi", gamma_m, B)
    gamma1 = np.einsum("pij,pj->pi", phi_m @ gamma_f, B)
    no_d = np.zeros(points)
    inv = 1.0 / ts

    def assemble(n0, n1, den_plain, scale):
        # [x-factor * n0 + (n1 + D den) * scale] on one more coefficient
        head = _times_linear(n0, inv) if scale is not None else _times_linear(n0, no_d)
        tail = n1 + D[:, None] * den_plain
        tail = tail * scale[:, None] if scale is not None else tail
        return head + np.concatenate([np.zeros((points, 1)), tail], axis=1)

    n0z = _ss_num(phi, gamma0, C, no_d, plain.den)
    n1z = _ss_num(phi, gamma1, C, no_d, plain.den)
    num_z = assemble(n0z, n1z, plain.den, None)
    den_z = np.concatenate([plain.den, np.zeros((points, 1))], axis=1)  # times z
    n0d = _ss_num(a_delta, gamma0 * inv[:, None], C, no_d, plain.dden)
    n1d = _ss_num(a_delta, gamma1 * inv[:, None], C, no_d, plain.dden)
    num_d = assemble(n0d, n1d, plain.dden, inv)
    den_d = _times_linear(plain.dden, inv)  # times (g + 1/ts)
    return _Rational(num_z, den_z, num_d, den_d)


def _times_linear(poly: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Multiply each row by ``(x + c)``; width grows by one."""
    points = poly.shape[0]
    out = np.zeros((points, poly.shape[1] + 1), dtype=poly.dtype)
    out[:, :-1] += poly
    out[:, 1:] += poly * c[:, None]
    return out


def _times_linear_power(poly: np.ndarray, c: np.ndarray, power: np.ndarray, width: int) -> np.ndarray:
    """Multiply row ``i`` by ``(x + c_i)^power_i``, right-aligned in ``width`` columns."""
    points = poly.shape[0]
    out = np.zeros((points, width))
    out[:, width - poly.shape[1] :] = poly
    for step in range(int(power.max(initial=0))):
        grown = np.zeros_like(out)
        grown[:, :-1] = out[:, 1:]
        grown += out * c[:, None]
        out = np.where((step < power)[:, None], grown, out)
    return out


def _tustin(num, den, ts, prewarp) -> _Rational:
    """Bilinear substitution in z and directly in g."""
    points, width = den.shape
    n = width - 1
    c = 2.0 / ts if prewarp is None else prewarp / np.tan(prewarp * ts / 2.0)
    ct = c * ts

    def substitute(coeffs, u, v):
        # sum_i coeffs_i u^(n-i) v^i for linear polynomials u, v (P, 2)
        upow = [np.ones((points, 1))]
        vpow = [np.ones((points, 1))]
        for _ in range(n):
            upow.append(_conv_linear(upow[-1], u))
            vpow.append(_conv_linear(vpow[-1], v))
        out = np.zeros((points, width))
        for i in range(width):
            term = _conv(upow[n - i], vpow[i])
            out += coeffs[:, i : i + 1] * term
        return out

    ones = np.ones(points)
    # z form: s = c (z - 1)/(z + 1), times (z + 1)^n
    u_z = np.stack([c, -c], axis=1)
    v_z = np.stack([ones, ones], axis=1)
    # delta form: s = c ts g / (2 + ts g), times (2 + ts g)^n
    u_d = np.stack([ct, 0.0 * ones], axis=1)
    v_d = np.stack([ts, 2.0 * ones], axis=1)
    num_z, den_z = substitute(num, u_z, v_z), substitute(den, u_z, v_z)
    num_d, den_d = substitute(num, u_d, v_d), substitute(den, u_d, v_d)
    if np.any(den_z[:, 0] == 0) or np.any(den_d[:, 0] == 0):
        raise InputError(
            "a plant pole sits at s = c (the Tustin pole that maps to z = infinity, c = 2/ts or "
            "w/tan(w ts/2)); choose another ts or prewarp"
        )
    return _Rational(num_z / den_z[:, :1], den_z / den_z[:, :1], num_d / den_d[:, :1], den_d / den_d[:, :1])


def _conv_linear(poly: np.ndarray, lin: np.ndarray) -> np.ndarray:
    out = np.zeros((poly.shape[0], poly.shape[1] + 1))
    out[:, :-1] += poly * lin[:, :1]
    out[:, 1:] += poly * lin[:, 1:2]
    return out


def _conv(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    out = np.zeros((a.shape[0], a.shape[1] + b.shape[1] - 1))
    for j in range(b.shape[1]):  # over the degree, not the points
        out[:, j : j + a.shape[1]] += a * b[:, j : j + 1]
    return out


def _phi(x: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """``expm1(x ts) / x`` with its limit ``ts`` at ``x = 0``."""
    xt = x * ts
    safe = np.where(x == 0, 1.0, x)
    return np.where(x == 0, ts + 0j, np.expm1(xt) / safe)


def _matched(num, den, ts) -> _Rational:
    """Matched pole-zero; see the module docstring for the conventions."""
    zeros, poles, gain = tf_to_zpk(num, den)
    points, n = poles.shape
    t = ts[:, None]
    finite = np.isfinite(zeros)
    r = np.sum(~finite, axis=1)
    zfin = np.where(finite, zeros, 0.0)
    # K = k prod_p phi(p) / (prod_z phi(z) 2^r): DC gain (or low-frequency
    # asymptote with integrators) matched; phi(0) = ts carries the origin.
    pole_part = np.prod(_phi(poles, t), axis=1)
    zero_part = np.prod(np.where(finite, _phi(zfin, t), 1.0), axis=1)
    k_disc = (gain * pole_part / zero_part).real / 2.0**r
    z_zeros = np.where(finite, np.exp(zfin * t), -1.0 + 0j)
    d_zeros = np.where(finite, np.expm1(zfin * t) / t, -2.0 / t + 0j)
    z_poles = np.exp(poles * t)
    d_poles = np.expm1(poles * t) / t
    num_z = poly_from_roots(z_zeros) * k_disc[:, None]
    den_z = poly_from_roots(z_poles)
    # In g both sides have n factors, so ts^n cancels: same gain.
    num_d = poly_from_roots(d_zeros) * k_disc[:, None]
    den_d = poly_from_roots(d_poles)
    return _Rational(num_z, den_z, num_d, den_d)


def discretize_loop(
    plant: Loop,
    ts: float | np.ndarray,
    method: str = "zoh",
    *,
    delay: float | np.ndarray = 0.0,
    prewarp: float | None = None,
) -> Loop:
    """Discretise a batch of continuous plants.

    Parameters
    ----------
    plant : Loop
        Continuous plant batch (``ts is None``); its ``dead_time`` (seconds)
        is absorbed into the delay.
    ts : float or array_like, shape (P,)
        Sample period in seconds, per point or shared.  A plant batch of one
        point is repeated to match per-point ``ts`` or ``delay``.
    method : str
        One of :data:`gainloom.names.HOLD_METHODS`.
    delay : float or array_like, shape (P,)
        Computation delay in samples (non-negative).  Fractional values are
        only accepted with ``"zoh"``.
    prewarp : float, optional
        Tustin prewarp frequency in rad/s, below Nyquist ``pi/ts`` at every
        point.  Only with ``"tustin"``.

    Returns
    -------
    Loop
        Discrete loop: monic ``den`` in ``z``, ``num`` padded to its length,
        ``ts``, ``hold=method``, ``delay`` = total delay in samples including
        dead time, ``prewarp``, and the delta-operator form
        (``delta_num``/``delta_den``, monic in ``g = (z - 1)/ts``).

    Raises
    ------
    InputError
        Unknown method, bad ``ts``/``delay``/``prewarp``, a fractional delay
        with a method other than ``zoh``, ``impulse`` on a plant with direct
        feedthrough; a sample period, total delay or plant order beyond
        :mod:`gainloom.limits`.

    Notes
    -----
    Conventions of each method (matched gain, impulse scaling, foh form) are
    in the module docstring of :mod:`gainloom.lti.discretize` and in
    ``docs/discretisation.md``.
    """
    if isinstance(plant, Loop) and plant.points == 1:
        # One plant sampled at several periods (or delays): repeat it.
        sizes = {np.size(ts), np.size(delay)} - {1}
        if len(sizes) == 1:
            plant = plant.select(np.zeros(sizes.pop(), dtype=int))
    periods, total, prewarp = _validate(plant, ts, method, delay, prewarp)
    num = np.array(plant.num)
    den = np.array(plant.den)
    lead = den[:, :1]
    num, den = num / lead, den / lead
    points, width = den.shape
    whole = np.floor(total)
    frac = total - whole
    has_frac = frac > 0
    if width == 1:
        # A static gain has no dynamics to hold; every method leaves it alone.
        if method == "impulse" and np.any(num[:, 0] != 0):
            raise InputError("method 'impulse' needs a strictly proper plant; got a static gain")
        rational = _Rational(num, den, num, den)
    elif method in ("zoh", "foh", "impulse"):
        rational = _state_space_hold(num, den, periods, method)
    elif method == "tustin":
        rational = _tustin(num, den, periods, prewarp)
    else:
        rational = _matched(num, den, periods)
    # Point i is N_i / (z^k_i D_i) with D_i = z^e_i D_plain_i (e_i = 1 where
    # the modified z-transform added a state).  One width for the batch:
    # den = z^top D_plain, num = N_i z^(top - k_i - e_i); in g, z = ts (g + 1/ts).
    extra = has_frac.astype(int)
    top = int((whole + extra).max(initial=0))
    final_width = width + top
    inv = 1.0 / periods
    zero = np.zeros(points)
    top_all = np.full(points, top)
    num_shift = (top - whole - extra).astype(int)
    den_z = _times_linear_power(rational.den, zero, top_all, final_width)
    den_d = _times_linear_power(rational.dden, inv, top_all, final_width)
    num_z = np.zeros((points, final_width))
    num_d = np.zeros((points, final_width))
    plain = np.flatnonzero(~has_frac)
    if plain.size:
        num_z[plain] = _times_linear_power(rational.num[plain], zero[plain], num_shift[plain], final_width)
        num_d[plain] = _times_linear_power(
            rational.dnum[plain], inv[plain], num_shift[plain], final_width
        )
    if np.any(has_frac):
        rows = np.flatnonzero(has_frac)
        plain_rows = _Rational(rational.num[rows], rational.den[rows], rational.dnum[rows], rational.dden[rows])
        modified = _zoh_fractional(num[rows], den[rows], periods[rows], frac[rows], plain_rows)
        num_z[rows] = _times_linear_power(modified.num, zero[rows], num_shift[rows], final_width)
        num_d[rows] = _times_linear_power(modified.dnum, inv[rows], num_shift[rows], final_width)
    num_d = num_d * (periods ** -whole)[:, None]
    return Loop(
        num=num_z,
        den=den_z,
        ts=periods,
        hold=method,
        delay=total,
        prewarp=prewarp,
        delta_num=num_d,
        delta_den=den_d,
    )


def discrete_roots(z_coeffs: object, delta_coeffs: object, ts: object) -> np.ndarray:
    """Roots in ``z`` of a discrete polynomial known in both ``z`` and ``g`` form.

    Parameters
    ----------
    z_coeffs : array_like, shape (P, w)
        Descending coefficients in ``z``.
    delta_coeffs : array_like, shape (P, w)
        The same polynomial in ``g = (z - 1)/ts`` (e.g. ``Loop.delta_den``).
    ts : float or array_like, shape (P,)
        Sample period in seconds.

    Returns
    -------
    ndarray of complex, shape (P, w - 1)
        ``z = 1 + ts g`` from the roots in ``g`` (accurate at fast sampling),
        except that roots at ``z = 0`` (exact trailing zeros of the z
        coefficients, e.g. from computation delay) are exactly zero; ``inf``
        for roots at infinity (degree drop).
    """
    z_coeffs = np.atleast_2d(np.asarray(z_coeffs, dtype=float))
    delta_coeffs = np.atleast_2d(np.asarray(delta_coeffs, dtype=float))
    ts = np.broadcast_to(np.asarray(ts, dtype=float), (z_coeffs.shape[0],))
    g = roots_with_origin(delta_coeffs)
    finite = np.isfinite(g)
    z = np.where(finite, 1.0 + ts[:, None] * np.where(finite, g, 0.0), np.inf)
    return _snap(z, _origin_poles(z_coeffs), 0.0)


def discretize(
    num: object,
    den: object,
    ts: float,
    method: str = "zoh",
    *,
    delay: float = 0.0,
    prewarp: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Discretise one continuous transfer function.

    Parameters
    ----------
    num, den : array_like
        Continuous numerator and denominator, descending powers of ``s``.
    ts : float
        Sample period in seconds.
    method : str
        One of :data:`gainloom.names.HOLD_METHODS`.
    delay : float
        Computation delay in samples (fractional only with ``"zoh"``).
    prewarp : float, optional
        Tustin prewarp frequency in rad/s (below ``pi/ts``).

    Returns
    -------
    num_z, den_z : ndarray
        1-D, descending powers of ``z``; ``den_z`` monic, ``num_z`` left-padded
        with zeros to the same length.
    """
    num = np.atleast_1d(np.asarray(num, dtype=float))
    den = np.atleast_1d(np.asarray(den, dtype=float))
    if num.ndim != 1 or den.ndim != 1:
        raise InputError(f"num and den must be 1-D; got shapes {num.shape} and {den.shape}")
    den = np.trim_zeros(den, "f")
    if den.size == 0:
        raise InputError("denominator is zero")
    extra = num.size - den.size
    if extra > 0 and not np.any(num[:extra]):
        num = num[extra:]  # leading zeros only; the degree is what counts
    if np.asarray(ts).ndim != 0:
        raise InputError("ts must be a scalar here; use discretize_loop for per-point periods")
    loop = discretize_loop(Loop(num=num, den=den), ts, method=method, delay=delay, prewarp=prewarp)
    return np.array(loop.num[0]), np.array(loop.den[0])
