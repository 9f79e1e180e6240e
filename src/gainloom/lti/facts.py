"""Root-locus facts of one loop ``L = K N/D`` in the s- or z-plane.

The closed-loop poles are the roots of ``D + K N``.  The rules used here are
algebraic (they follow from the angle and magnitude conditions of
``K N/D = -1``), so they hold for polynomials in ``z`` exactly as in ``s``;
only the stability boundary differs (imaginary axis versus unit circle).

Sign convention: ``negative=False`` describes the locus for ``K > 0``,
``negative=True`` the locus for ``K < 0``.  Gains are reported with their
sign.  Every rule uses the sign of the leading-coefficient ratio
``b_m / a_n`` too, so a numerator with a negative leading coefficient is
handled without the user flipping it.

Repeated roots: numerically, a root of multiplicity ``m`` comes back from the
eigenvalue solver as ``m`` roots spread over about ``eps**(1/m)`` relative.
Roots are merged into one repeated root when the diameter of the group is at
most ``(CLUSTER_KAPPA * eps) ** (1/m)`` times the group's magnitude (with a
floor of ``1e-12`` times the largest root magnitude), where ``m`` is the
group's size; the reported value is the group mean, which is far more
accurate than its members.  With ``CLUSTER_KAPPA = 1e4`` this is about
``1.5e-6`` relative for a double root, ``1.3e-4`` for a triple and ``1.2e-3``
for a quadruple one.  Distinct roots closer than that are reported as one
repeated root: double-precision coefficients cannot tell the two apart.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError
from .boundary import imaginary_axis_crossings, unit_circle_crossings
from .discretize import discrete_roots
from .intervals import stable_gain_intervals
from .polynomials import pad_left

__all__ = [
    "CLUSTER_KAPPA",
    "LocusFacts",
    "RepeatedRoot",
    "SpecialPoint",
    "Crossing",
    "DirectionAngles",
    "locus_facts",
    "cluster_roots",
    "normalize_angle",
]

#: Safety factor on ``eps`` in the repeated-root test (module docstring).
CLUSTER_KAPPA = 1.0e4

_EPS = float(np.finfo(float).eps)
#: A gain is taken as real when ``|Im K| <= _REAL_GAIN_TOL * |K|``.
_REAL_GAIN_TOL = 1.0e-6


@dataclass(frozen=True)
class RepeatedRoot:
    """A root of a polynomial with its multiplicity (``value`` may be real)."""

    value: complex
    multiplicity: int


@dataclass(frozen=True)
class SpecialPoint:
    """A breakaway or break-in point.

    ``kind`` is ``"breakaway"`` (branches leave the real axis as ``|K|``
    grows past ``gain``), ``"break-in"`` (they arrive on it), ``"meeting"``
    (a real point where more than two branches meet, neither of the above)
    or ``"off-axis"`` (a complex point where branches meet and part).
    """

    point: complex
    gain: float
    kind: str


@dataclass(frozen=True)
class Crossing:
    """A gain at which a closed-loop root sits on the stability boundary.

    ``point`` is the root (``j omega`` in s, ``exp(j theta)`` in z),
    ``omega`` its frequency in rad/s (``theta / ts`` in z) and ``theta`` its
    angle in rad on the unit circle (None in s).
    """

    point: complex
    gain: float
    omega: float
    theta: float | None


@dataclass(frozen=True)
class DirectionAngles:
    """Departure (at a pole) or arrival (at a zero) angles in degrees.

    ``angles`` holds ``multiplicity`` angles, ``360/multiplicity`` apart,
    each normalised to ``(-180, 180]`` and sorted.  An angle is the
    direction of the ray from the pole (or zero) to the nearby branch.
    """

    at: complex
    multiplicity: int
    angles: tuple[float, ...]


@dataclass(frozen=True)
class LocusFacts:
    """Root-locus facts of ``K N/D`` for one sign of ``K``.

    Build with :func:`locus_facts`; :meth:`to_dict` gives the JSON form.

    Attributes
    ----------
    num, den : tuple of float
        The loop numerator and denominator, descending powers, leading zeros
        of the numerator removed.
    ts : float or None
        Sample period in seconds; None for an s-plane loop.
    negative : bool
        False: facts for ``K > 0``; True: for ``K < 0``.
    poles, zeros : tuple of RepeatedRoot
        Open-loop poles and finite zeros, repeated roots merged, sorted by
        real then imaginary part.
    segments : tuple of (float, float)
        Real-axis intervals on the locus for the chosen sign, ``-inf`` /
        ``inf`` for unbounded ends, sorted.
    asymptote_angles : tuple of float
        Angles in degrees, in ``(-180, 180]``, sorted; empty when
        ``deg D == deg N``.
    centroid : float or None
        Real point where the asymptotes meet; None without asymptotes.
    breakaways : tuple of SpecialPoint
    crossings : tuple of Crossing
        Points where closed-loop roots sit on the imaginary axis (s) or the
        unit circle (z) for a gain of the chosen sign.
    departures, arrivals : tuple of DirectionAngles
        At every pole and every finite zero (one entry per distinct root).
    stable_gain_intervals : tuple of (float, float)
        Gain intervals (of the chosen sign) with a stable closed loop,
        ``inf`` / ``-inf`` for unbounded ends.
    warnings : tuple of str
        Findings a user should read (near cancellations, ...).
    """

    num: tuple[float, ...]
    den: tuple[float, ...]
    ts: float | None
    negative: bool
    poles: tuple[RepeatedRoot, ...]
    zeros: tuple[RepeatedRoot, ...]
    segments: tuple[tuple[float, float], ...]
    asymptote_angles: tuple[float, ...]
    centroid: float | None
    breakaways: tuple[SpecialPoint, ...]
    crossings: tuple[Crossing, ...]
    departures: tuple[DirectionAngles, ...]
    arrivals: tuple[DirectionAngles, ...]
    stable_gain_intervals: tuple[tuple[float, float], ...]
    warnings: tuple[str, ...] = field(default=())

    @property
    def plane(self) -> str:
        """``"s"`` or ``"z"``."""
        return "s" if self.ts is None else "z"

    def to_dict(self) -> dict[str, Any]:
        """Return the facts as plain JSON-ready values.

        Complex numbers are objects ``{"re": float, "im": float}``; an
        unbounded interval end is ``null`` (below the lowest or above the
        highest value); angles are in degrees, frequencies in rad/s, gains
        carry their sign.

        Keys
        ----
        plane : str
            ``"s"`` or ``"z"``.
        ts : float or null
            Sample period in seconds.
        gain_sign : str
            ``"positive"`` (facts for K > 0) or ``"negative"`` (K < 0).
        num, den : list of float
            Loop coefficients, descending powers.
        poles, zeros : list of {"re", "im", "multiplicity"}
            Open-loop poles and finite zeros.
        real_axis_segments : list of [lo, hi]
            Real-axis intervals on the locus; ``null`` = unbounded.
        asymptotes : {"angles_deg": list of float, "centroid": float or null}
        breakaways : list of {"re", "im", "gain", "kind"}
            ``kind``: breakaway, break-in, meeting, off-axis.
        crossings : list of {"re", "im", "gain", "omega", "theta"}
            Roots on the imaginary axis / unit circle; ``omega`` rad/s,
            ``theta`` rad on the unit circle (null in s).
        departure_angles, arrival_angles : list of {"re", "im", "multiplicity", "angles_deg"}
        stable_gain_intervals : list of [lo, hi]
            ``null`` = unbounded.
        warnings : list of str
        """

        def cx(value: complex) -> dict[str, float]:
            return {"re": _plain(value.real), "im": _plain(value.imag)}

        def interval(pair: tuple[float, float]) -> list[float | None]:
            return [_plain_or_none(pair[0]), _plain_or_none(pair[1])]

        return {
            "plane": self.plane,
            "ts": self.ts,
            "gain_sign": "negative" if self.negative else "positive",
            "num": [float(c) for c in self.num],
            "den": [float(c) for c in self.den],
            "poles": [{**cx(r.value), "multiplicity": r.multiplicity} for r in self.poles],
            "zeros": [{**cx(r.value), "multiplicity": r.multiplicity} for r in self.zeros],
            "real_axis_segments": [interval(s) for s in self.segments],
            "asymptotes": {
                "angles_deg": [float(a) for a in self.asymptote_angles],
                "centroid": None if self.centroid is None else _plain(self.centroid),
            },
            "breakaways": [{**cx(b.point), "gain": float(b.gain), "kind": b.kind} for b in self.breakaways],
            "crossings": [
                {
                    **cx(c.point),
                    "gain": float(c.gain),
                    "omega": float(c.omega),
                    "theta": None if c.theta is None else float(c.theta),
                }
                for c in self.crossings
            ],
            "departure_angles": [
                {**cx(d.at), "multiplicity": d.multiplicity, "angles_deg": [float(a) for a in d.angles]}
                for d in self.departures
            ],
            "arrival_angles": [
                {**cx(d.at), "multiplicity": d.multiplicity, "angles_deg": [float(a) for a in d.angles]}
                for d in self.arrivals
            ],
            "stable_gain_intervals": [interval(s) for s in self.stable_gain_intervals],
            "warnings": list(self.warnings),
        }


def _plain(value: float) -> float:
    value = float(value)
    return 0.0 if value == 0 else value  # no "-0.0" in the JSON


def _plain_or_none(value: float) -> float | None:
    return _plain(value) if math.isfinite(value) else None


def normalize_angle(degrees: object) -> np.ndarray:
    """Map angles in degrees into ``(-180, 180]`` (vectorised)."""
    a = np.asarray(degrees, dtype=float)
    return a - 360.0 * np.ceil((a - 180.0) / 360.0)


def _trim(coeffs: object, what: str) -> np.ndarray:
    array = np.atleast_1d(np.asarray(coeffs, dtype=float))
    if array.ndim != 1:
        raise InputError(f"{what} must be one coefficient list (one loop); got shape {array.shape}")
    if not np.all(np.isfinite(array)):
        raise InputError(f"{what} coefficients must be finite; got {array.tolist()}")
    nonzero = np.flatnonzero(array)
    if nonzero.size == 0:
        raise InputError(f"{what} is identically zero; expected at least one non-zero coefficient")
    return array[nonzero[0]:]


def cluster_roots(roots: object) -> tuple[RepeatedRoot, ...]:
    """Merge numerically repeated roots (rule in the module docstring).

    Parameters
    ----------
    roots : array_like of complex
        Roots as returned by an eigenvalue solver.

    Returns
    -------
    tuple of RepeatedRoot
        Distinct roots with multiplicities, sorted by real part then
        imaginary part; imaginary parts below ``100 eps`` relative are set
        to zero.
    """
    values = [complex(r) for r in np.asarray(roots, dtype=complex).ravel()]
    if not values:
        return ()
    floor = 1e-12 * max(abs(v) for v in values)

    # Largest admissible group first: a seed and its m - 1 nearest roots
    # (intermediate sizes may fail the test where the full group passes, so
    # pairwise agglomeration would miss triple and higher roots).  The
    # diameter of each nearest-first prefix grows incrementally: O(n^2) per
    # seed, and orders are small (tens).
    pending = list(values)
    groups: list[list[complex]] = []
    while len(pending) > 1:
        best: tuple[int, float, list[int]] | None = None
        for seed in range(len(pending)):
            order = sorted(range(len(pending)), key=lambda k: (abs(pending[k] - pending[seed]), k))
            diameter, magnitude = 0.0, abs(pending[seed])
            for size in range(2, len(pending) + 1):
                new = pending[order[size - 1]]
                diameter = max([diameter] + [abs(new - pending[k]) for k in order[: size - 1]])
                magnitude = max(magnitude, abs(new))
                limit = (CLUSTER_KAPPA * _EPS) ** (1.0 / size) * max(magnitude, floor)
                ratio = diameter / limit if limit > 0 else (0.0 if diameter == 0 else math.inf)
                if ratio <= 1.0 and (best is None or size > best[0] or (size == best[0] and ratio < best[1])):
                    best = (size, ratio, order[:size])
        if best is None:
            break
        chosen = set(best[2])
        groups.append([pending[k] for k in best[2]])
        pending = [v for k, v in enumerate(pending) if k not in chosen]
    groups += [[v] for v in pending]

    result = []
    for group in groups:
        mean = complex(np.mean(group))
        if abs(mean.imag) <= 100 * _EPS * max(abs(mean), floor) or (
            len(group) > 1 and abs(mean.imag) <= max(abs(v - mean) for v in group)
        ):
            # A real repeated root comes back as a spread that straddles
            # the real axis; its mean is real up to rounding.
            mean = complex(mean.real, 0.0)
        result.append(RepeatedRoot(mean, len(group)))
    result.sort(key=lambda r: (r.value.real, r.value.imag))
    return tuple(result)


def _roots(poly: np.ndarray) -> np.ndarray:
    if poly.size <= 1:
        return np.zeros(0, dtype=complex)
    # np.roots strips trailing zeros exactly, so poles at the origin are exact.
    return np.roots(poly).astype(complex)


def _delta_roots(z_poly: np.ndarray, delta_poly: np.ndarray, ts: float) -> np.ndarray:
    """Finite roots in z from the delta form, delay poles exactly at z = 0."""
    if delta_poly.size <= 1:
        return np.zeros(0, dtype=complex)
    width = max(z_poly.size, delta_poly.size)
    roots = discrete_roots(pad_left(z_poly, width), pad_left(delta_poly, width), ts)[0]
    return roots[np.isfinite(roots)]


def _close(a: complex, b: complex, size: int) -> bool:
    scale = max(abs(a), abs(b), 1e-300)
    return abs(a - b) <= (CLUSTER_KAPPA * _EPS) ** (1.0 / size) * scale


def _segments(
    poles: tuple[RepeatedRoot, ...], zeros: tuple[RepeatedRoot, ...], lead_sign: float, sign: float
) -> tuple[tuple[float, float], ...]:
    """Real-axis intervals where ``sign * N(x)/D(x) < 0``."""
    real_roots = [(r.value.real, r.multiplicity) for r in poles + zeros if r.value.imag == 0]
    marks = sorted({x for x, _ in real_roots})
    if marks:
        probes = [marks[0] - max(1.0, abs(marks[0]))]
        probes += [(a + b) / 2 for a, b in zip(marks[:-1], marks[1:])]
        probes.append(marks[-1] + max(1.0, abs(marks[-1])))
        edges = [-math.inf] + marks + [math.inf]
    else:
        probes, edges = [0.0], [-math.inf, math.inf]
    on: list[bool] = []
    for x in probes:
        # Sign from the factored form (complex pairs contribute +1): exact,
        # unlike evaluating the expanded polynomials near their roots.
        parity = sum(m for value, m in real_roots if value > x)
        ratio_sign = lead_sign * (-1.0) ** parity
        on.append(sign * ratio_sign < 0)
    segments: list[tuple[float, float]] = []
    for k, flag in enumerate(on):
        if not flag:
            continue
        lo, hi = edges[k], edges[k + 1]
        if segments and segments[-1][1] == lo:
            segments[-1] = (segments[-1][0], hi)  # across an even-multiplicity root
        else:
            segments.append((lo, hi))
    return tuple(segments)


def _breakaways(
    num: np.ndarray,
    den: np.ndarray,
    poles: tuple[RepeatedRoot, ...],
    zeros: tuple[RepeatedRoot, ...],
    sign: float,
) -> tuple[SpecialPoint, ...]:
    """Roots of ``N'D - ND'`` with a real gain ``-D/N`` of the chosen sign."""
    b_poly = np.polysub(np.polymul(np.polyder(num), den), np.polymul(num, np.polyder(den)))
    nonzero = np.flatnonzero(b_poly)
    if nonzero.size == 0:
        return ()
    b_poly = b_poly[nonzero[0]:]
    db_poly = np.polyder(b_poly) if b_poly.size > 1 else np.zeros(1)
    found = []
    for candidate in cluster_roots(_roots(b_poly)):
        r = candidate.value
        # Multiple poles (K = 0) and multiple zeros (K infinite) are roots of
        # N'D - ND' too, but branches only start or end there.
        if any(_close(r, p.value, max(p.multiplicity, 2)) for p in poles if p.multiplicity > 1):
            continue
        if any(_close(r, z.value, max(z.multiplicity, 2)) for z in zeros if z.multiplicity > 1):
            continue
        n_r = np.polyval(num, r)
        d_r = np.polyval(den, r)
        if n_r == 0:
            continue
        gain = -d_r / n_r
        if not np.isfinite(gain) or gain == 0 or abs(gain.imag) > _REAL_GAIN_TOL * abs(gain):
            continue
        if sign * gain.real <= 0:
            continue
        if r.imag == 0:
            # |K(x)| has a maximum at a breakaway and a minimum at a break-in:
            # K'(x) = B/N^2, so at a root of B, K'' = B'/N^2.
            curvature = sign * np.polyval(db_poly, r.real)
            scale = np.polyval(np.abs(db_poly), abs(r.real)) if db_poly.size else 0.0
            if abs(curvature) <= 1e-8 * scale:
                kind = "meeting"
            else:
                kind = "breakaway" if curvature < 0 else "break-in"
        else:
            kind = "off-axis"
        found.append(SpecialPoint(point=r, gain=float(gain.real), kind=kind))
    return tuple(found)


def _direction_angles(
    roots: tuple[RepeatedRoot, ...],
    same: tuple[RepeatedRoot, ...],
    other: tuple[RepeatedRoot, ...],
    phase: float,
    departing: bool,
    skip: set[complex],
) -> tuple[DirectionAngles, ...]:
    """Departure (``departing``) or arrival angles from the angle condition.

    Angle condition: ``sum arg(s - z_i) - sum arg(s - p_j) = phase`` (mod 360),
    ``phase`` 180 or 0 degrees.  Near a root ``r`` of multiplicity ``m``,
    ``s = r + eps exp(j theta)`` contributes ``m theta`` with the root's sign.
    """
    result = []
    for root in roots:
        if root.value in skip:
            continue
        r = root.value
        others_same = sum(q.multiplicity * math.degrees(np.angle(r - q.value)) for q in same if q is not root)
        others_other = sum(q.multiplicity * math.degrees(np.angle(r - q.value)) for q in other)
        m = root.multiplicity
        if departing:
            # sum_z arg(r - z) - sum_{other p} arg(r - p) - m theta = phase
            base = (others_other - others_same - phase) / m
        else:
            # m theta + sum_{other z} arg(r - z) - sum_p arg(r - p) = phase
            base = (phase - others_same + others_other) / m
        angles = normalize_angle(base + 360.0 * np.arange(m) / m)
        result.append(DirectionAngles(at=r, multiplicity=m, angles=tuple(sorted(float(a) for a in angles))))
    return tuple(result)


def locus_facts(
    num: object,
    den: object,
    ts: float | None = None,
    negative: bool = False,
    *,
    delta: tuple[object, object] | None = None,
) -> LocusFacts:
    """Root-locus facts of the loop ``K N/D`` for ``K > 0`` (or ``K < 0``).

    Parameters
    ----------
    num : array_like of float
        Loop numerator ``N``, descending powers of s (or z); leading zeros
        are ignored.
    den : array_like of float
        Loop denominator ``D``, descending powers; ``deg D >= 1`` and
        ``deg D >= deg N``.
    ts : float, optional
        Sample period in seconds: the polynomials are in ``z`` and crossings
        are reported on the unit circle.  None: polynomials in ``s``.
    negative : bool
        Describe the locus for ``K < 0`` instead of ``K > 0``.
    delta : (array_like, array_like), optional
        The same discrete loop in ``g = (z - 1)/ts`` (``Loop.delta_num``,
        ``Loop.delta_den``).  At fast sampling the z-coefficients have lost
        digits; poles, zeros, crossings and stable gain intervals are then
        computed from the delta form (``z = 1 + ts g``).

    Returns
    -------
    LocusFacts

    Raises
    ------
    InputError
        For an improper loop, a zero numerator, a constant denominator,
        non-finite coefficients or a bad sample period.

    Notes
    -----
    Breakaway and break-in points are the roots of ``N'D - ND' = 0`` at
    which ``K = -D/N`` is real and of the requested sign (zero and infinite
    gains at repeated poles and zeros are left out).  Departure and arrival
    angles follow from the angle condition; a root of multiplicity ``m``
    gets ``m`` angles ``360/m`` apart.
    """
    n_poly = _trim(num, "numerator")
    d_poly = _trim(den, "denominator")
    if d_poly.size < 2:
        raise InputError(f"denominator {d_poly.tolist()} has no poles; expected degree >= 1")
    if n_poly.size > d_poly.size:
        raise InputError(
            f"improper loop: numerator degree {n_poly.size - 1} exceeds denominator degree {d_poly.size - 1}"
        )
    if ts is not None:
        ts = float(ts)
        if not (math.isfinite(ts) and ts > 0):
            raise InputError(f"sample period must be finite and positive seconds; got {ts}")
    sign = -1.0 if negative else 1.0
    lead_sign = math.copysign(1.0, n_poly[0] / d_poly[0])

    delta_pair = None
    if delta is not None:
        if ts is None:
            raise InputError("the delta form is for discrete loops; give the sample period ts")
        delta_pair = (_trim(delta[0], "delta numerator"), _trim(delta[1], "delta denominator"))
        # Roots cluster better in g (spread over the loop's own scale) and
        # map exactly enough by z = 1 + ts g.
        poles = cluster_roots(_delta_roots(d_poly, delta_pair[1], ts))
        zeros = cluster_roots(_delta_roots(n_poly, delta_pair[0], ts))
    else:
        poles = cluster_roots(_roots(d_poly))
        zeros = cluster_roots(_roots(n_poly))
    warnings: list[str] = []

    # Near pole-zero cancellations: angles there are undefined.
    skip: set[complex] = set()
    for p in poles:
        for z in zeros:
            if abs(p.value - z.value) <= 1e-8 * max(abs(p.value), abs(z.value), 1.0):
                skip.update({p.value, z.value})
                warnings.append(
                    f"pole and zero nearly cancel at {_fmt(p.value)}: a closed-loop root stays there for "
                    "every gain (check the model for a hidden mode)"
                )

    excess = (d_poly.size - 1) - (n_poly.size - 1)
    if excess > 0:
        # (n - m) theta = 180 (mod 360) when sign * lead_sign > 0, else 0.
        phase = 180.0 if sign * lead_sign > 0 else 0.0
        angles = normalize_angle((phase + 360.0 * np.arange(excess)) / excess)
        asymptote_angles = tuple(sorted(float(a) for a in angles))
        # Sums of roots from the coefficients (Vieta): exact, unlike sums
        # of computed roots.
        pole_sum = -d_poly[1] / d_poly[0]
        zero_sum = -n_poly[1] / n_poly[0] if n_poly.size > 1 else 0.0
        centroid: float | None = float((pole_sum - zero_sum) / excess) + 0.0  # no -0.0
    else:
        asymptote_angles, centroid = (), None

    phase = 180.0 if sign * lead_sign > 0 else 0.0
    departures = _direction_angles(poles, poles, zeros, phase, True, skip)
    arrivals = _direction_angles(zeros, zeros, poles, phase, False, skip)

    crossings, intervals = _boundary_facts(n_poly, d_poly, ts, negative, delta_pair, warnings)

    return LocusFacts(
        num=tuple(float(c) for c in n_poly),
        den=tuple(float(c) for c in d_poly),
        ts=ts,
        negative=negative,
        poles=poles,
        zeros=zeros,
        segments=_segments(poles, zeros, lead_sign, sign),
        asymptote_angles=asymptote_angles,
        centroid=centroid,
        breakaways=_breakaways(n_poly, d_poly, poles, zeros, sign),
        crossings=crossings,
        departures=departures,
        arrivals=arrivals,
        stable_gain_intervals=intervals,
        warnings=tuple(warnings),
    )


def _boundary_facts(
    num: np.ndarray,
    den: np.ndarray,
    ts: float | None,
    negative: bool,
    delta: tuple[np.ndarray, np.ndarray] | None,
    warnings: list[str],
) -> tuple[tuple[Crossing, ...], tuple[tuple[float, float], ...]]:
    """Crossings of the stability boundary and stable gain intervals.

    Both come from the exact boundary solver (:mod:`gainloom.lti.boundary`,
    :func:`gainloom.lti.intervals.stable_gain_intervals`).  Crossings at
    ``K = 0`` (open-loop poles on the boundary) are where branches start,
    not crossings; they become a warning.
    """
    sign = -1.0 if negative else 1.0
    if ts is None:
        found = imaginary_axis_crossings(num, den)
        points = found.points
    elif delta is not None:
        found = unit_circle_crossings(delta[0], delta[1], ts=ts, delta=True)
        points = 1.0 + ts * found.points
    else:
        found = unit_circle_crossings(num, den)
        points = found.points
    gain_scale = float(np.max(np.abs(den)) / np.max(np.abs(num)))
    crossings = []
    for gain, point in zip(found.gains, points):
        if abs(gain) <= 1e-12 * gain_scale:
            warnings.append(
                f"open-loop pole on the stability boundary at {_fmt(complex(point))} (a branch starts there at K = 0)"
            )
            continue
        if sign * gain <= 0:
            continue
        if ts is None:
            point = complex(0.0, abs(point.imag))  # on the axis by construction
            crossings.append(Crossing(point=point, gain=float(gain), omega=point.imag, theta=None))
        else:
            theta = abs(float(np.angle(point)))
            # On the circle by construction; the real-axis ends exactly.
            on_circle = -1.0 + 0j if theta == math.pi else (1.0 + 0j if theta == 0 else complex(np.exp(1j * theta)))
            crossings.append(Crossing(point=on_circle, gain=float(gain), omega=theta / ts, theta=theta))
    for fixed in found.fixed_points:
        fixed = complex(fixed) if delta is None or ts is None else complex(1.0 + ts * fixed)
        warnings.append(
            f"a closed-loop root stays on the stability boundary at {_fmt(fixed)} for every gain "
            "(numerator and denominator share that root)"
        )
    crossings.sort(key=lambda c: (abs(c.gain), c.omega))

    intervals = stable_gain_intervals(num, den, ts=ts, negative=negative, delta=delta)
    chosen = [
        (float(i.low), float(i.high)) for i in intervals if (i.high <= 0 if negative else i.low >= 0)
    ]
    return tuple(crossings), tuple(chosen)


def _fmt(value: complex) -> str:
    if value.imag == 0:
        return f"{value.real:.6g}"
    return f"{value.real:.6g}{value.imag:+.6g}j"
