"""Second-order filter sections in cascade after the controller: notch and low-pass.

Each section is defined in ``s`` and discretised with Tustin prewarped at its
own centre frequency ``w0`` (``s = c (z - 1)/(z + 1)``, ``c = w0 / tan(w0 ts / 2)``),
so the discrete section has exactly the continuous gain and phase at ``w0``:
the notch is deepest exactly where it was asked for.

Notch (depth ``d`` in dB, width ``W`` in rad/s)::

    N(s) = (s^2 + 2 zeta_z w0 s + w0^2) / (s^2 + 2 zeta_p w0 s + w0^2)

with ``|N(j w0)| = zeta_z / zeta_p = 10^(-d/20)`` and ``W`` the distance
between the two frequencies where the attenuation is half the depth in dB
(``|N| = 10^(-d/40)``); with ``x = (w0^2 - w^2)/(w0 w)``,
``|N|^2 = (x^2 + 4 zeta_z^2)/(x^2 + 4 zeta_p^2)`` reaches that value at
``|x| = 2 sqrt(zeta_z zeta_p)``, so ``W = 2 w0 sqrt(zeta_z zeta_p)``.  Unity
gain at zero frequency and at high frequency.

Low-pass (damping ``zeta``)::

    L(s) = w0^2 / (s^2 + 2 zeta w0 s + w0^2)

with unity gain at zero frequency and ``|L(j w0)| = 1/(2 zeta)``.

Pure math on arrays, batched over points: no files, YAML or C.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import InputError
from .loop import Loop
from .polynomials import batched_roots, polymul, z_to_delta

__all__ = [
    "RESONANCE_DAMPING",
    "cascade",
    "lightly_damped_pair",
    "low_pass_continuous",
    "notch_continuous",
    "notch_damping",
    "tustin_prewarped",
    "with_filter",
]

#: A pole pair below this damping ratio is a resonance: ``notch: auto`` may
#: notch it and the reports name it so (common practice, no source: a pair
#: this lightly damped peaks by 1/(2 zeta) >= 2.5, i.e. 8 dB or more).
RESONANCE_DAMPING = 0.2


def notch_damping(frequency: np.ndarray, depth_db: np.ndarray, width: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Damping ratios of the notch's zeros and poles.

    Parameters
    ----------
    frequency : array_like, shape (P,)
        Centre frequency ``w0``, rad/s.
    depth_db : array_like, shape (P,)
        Attenuation at the centre, dB (positive).
    width : array_like, shape (P,)
        Band between the half-depth (in dB) frequencies, rad/s.

    Returns
    -------
    zeta_zero, zeta_pole : ndarray, shape (P,)
        ``zeta_z = ratio zeta_p``, ``zeta_p = W / (2 w0 sqrt(ratio))`` with
        ``ratio = 10^(-depth/20)`` (module docstring).
    """
    w0, depth, band = (np.asarray(v, dtype=float) for v in (frequency, depth_db, width))
    ratio = 10.0 ** (-depth / 20.0)
    zeta_pole = band / (2.0 * w0 * np.sqrt(ratio))
    return ratio * zeta_pole, zeta_pole


def _biquad(w0: np.ndarray, zeta: np.ndarray) -> np.ndarray:
    """``s^2 + 2 zeta w0 s + w0^2``, shape (P, 3)."""
    return np.stack([np.ones_like(w0), 2.0 * zeta * w0, w0 * w0], axis=-1)


def notch_continuous(
    frequency: np.ndarray, depth_db: np.ndarray, width: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The notch ``N(s)`` as numerator and denominator, shape (P, 3) each (see module docstring)."""
    w0 = np.asarray(frequency, dtype=float)
    zeta_zero, zeta_pole = notch_damping(w0, depth_db, width)
    return _biquad(w0, zeta_zero), _biquad(w0, zeta_pole)


def low_pass_continuous(frequency: np.ndarray, damping: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The low-pass ``L(s) = w0^2 / (s^2 + 2 zeta w0 s + w0^2)``, shape (P, 3) each."""
    w0 = np.asarray(frequency, dtype=float)
    zeta = np.broadcast_to(np.asarray(damping, dtype=float), w0.shape)
    num = np.zeros(w0.shape + (3,))
    num[..., 2] = w0 * w0
    return num, _biquad(w0, zeta)


def _tustin_poly(poly: np.ndarray, c: np.ndarray) -> np.ndarray:
    """``b2 s^2 + b1 s + b0`` at ``s = c (z - 1)/(z + 1)``, times ``(z + 1)^2``."""
    b2, b1, b0 = (poly[..., k] for k in range(3))
    c2 = c * c
    return np.stack([b2 * c2 + b1 * c + b0, 2.0 * (b0 - b2 * c2), b2 * c2 - b1 * c + b0], axis=-1)


def tustin_prewarped(
    num: np.ndarray, den: np.ndarray, frequency: np.ndarray, ts: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Tustin discretisation of second-order sections, prewarped at ``frequency``.

    Parameters
    ----------
    num, den : array_like, shape (P, 3)
        Continuous sections in descending powers of ``s``.
    frequency : array_like, shape (P,)
        Prewarp frequency (the section's centre), rad/s, below Nyquist.
    ts : array_like, shape (P,)
        Sample period, s.

    Returns
    -------
    num_z, den_z : ndarray, shape (P, 3)
        Descending powers of ``z``, ``den_z[:, 0] = 1``.

    Raises
    ------
    InputError
        A frequency at or above the Nyquist frequency ``pi / ts``.
    """
    w0 = np.asarray(frequency, dtype=float)
    ts = np.broadcast_to(np.asarray(ts, dtype=float), w0.shape)
    half = w0 * ts / 2.0
    if np.any(~(half < np.pi / 2)) or np.any(~(w0 > 0)):
        bad = int(np.flatnonzero(~((half < np.pi / 2) & (w0 > 0)))[0])
        raise InputError(
            f"filter frequency {w0[bad]:g} rad/s must be positive and below the Nyquist frequency "
            f"pi/ts = {np.pi / ts[bad]:g} rad/s (point {bad})"
        )
    c = (w0 / np.tan(half))[..., None]
    num_z = _tustin_poly(np.asarray(num, dtype=float), c[..., 0])
    den_z = _tustin_poly(np.asarray(den, dtype=float), c[..., 0])
    lead = den_z[..., :1]
    return num_z / lead, den_z / lead


def cascade(sections: list[tuple[np.ndarray, np.ndarray]], points: int) -> tuple[np.ndarray, np.ndarray]:
    """Product of discrete sections: one numerator and denominator, shape (P, 2 n + 1).

    An empty list is the unity filter, shape (P, 1).
    """
    num = np.ones((points, 1))
    den = np.ones((points, 1))
    for section_num, section_den in sections:
        num = polymul(num, section_num)
        den = polymul(den, section_den)
    return num, den



def lightly_damped_pair(den: np.ndarray, max_damping: float) -> tuple[np.ndarray, np.ndarray]:
    """The least-damped complex pole pair of continuous denominators.

    Parameters
    ----------
    den : array_like, shape (P, n + 1)
        Continuous denominators, descending powers of ``s``.
    max_damping : float
        Only pairs with damping ratio below this count (a resonance).

    Returns
    -------
    frequency, damping : ndarray, shape (P,)
        Natural frequency ``|s|`` (rad/s) and damping ratio ``-Re s / |s|``
        of the pair; NaN at points without such a pair.
    """
    poles = batched_roots(np.asarray(den, dtype=float))
    with np.errstate(invalid="ignore", divide="ignore"):
        radius = np.abs(poles)
        damping = np.where((poles.imag > 0) & (radius > 0), -poles.real / radius, np.inf)
    damping = np.where(np.isfinite(poles.real), damping, np.inf)
    pick = np.argmin(damping, axis=-1)
    found = np.take_along_axis(damping, pick[:, None], axis=-1)[:, 0]
    frequency = np.take_along_axis(radius, pick[:, None], axis=-1)[:, 0]
    light = found < max_damping
    return np.where(light, frequency, np.nan), np.where(light, found, np.nan)


def with_filter(plant: Loop, num: np.ndarray, den: np.ndarray) -> Loop:
    """The discrete loop ``F P``: ``plant`` followed by the filter ``num/den`` (shape (P, m)).

    The delta-operator form, when the plant has one, gets the filter's exact
    delta form (``z = 1 + ts g``), scaled so its leading coefficient is 1.
    """
    if not plant.is_discrete:
        raise InputError("filters are discrete sections; discretise the plant first")
    delta_num = delta_den = None
    if plant.delta_den is not None and plant.ts is not None:
        fnum, fden = z_to_delta(num, plant.ts), z_to_delta(den, plant.ts)
        lead = fden[..., :1]
        delta_num = polymul(fnum / lead, plant.delta_num)
        delta_den = polymul(fden / lead, plant.delta_den)
    return replace(
        plant,
        num=polymul(num, plant.num),
        den=polymul(den, plant.den),
        delta_num=delta_num,
        delta_den=delta_den,
    )
