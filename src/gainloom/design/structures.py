"""Controller structures in the discrete forms of DEVELOPERS.md.

Every structure is written two ways:

* as its **table coefficients** (``names.CONTROLLER_COEFFICIENTS``), the
  numbers firmware stores and interpolates, and
* in **locus form** ``C = K * Z / Q``: a loop gain ``K``, a monic numerator
  ``Z`` (the controller zeros, which the design strategies place) and a monic
  denominator ``Q`` (the controller poles: the integrator at ``z = 1``, the
  derivative filter pole ``kd_a``, the lead/lag pole).

The design strategies work in locus form (root locus in ``K`` of
``K * Z * Pnum / (Q * Pden)``) and convert to coefficients at the end.
Everything is batched over leading axes (points, candidates).

The same structures exist in ``s`` (``kp + ki/s + kd s/(tf s + 1)``,
``kc (s + wz)/(s + wp)``) for the ``compare_continuous`` check; their
discretisation to the table coefficients is :func:`discretize_continuous`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..lti.convert import poly_from_roots
from ..lti.loop import Loop
from ..lti.polynomials import pad_left, polymul, z_to_delta
from ..names import CONTROLLER_COEFFICIENTS, CONTROLLER_STRUCTURES, unknown_name_message

__all__ = [
    "LocusForm",
    "check_structure",
    "coefficients_from_locus",
    "coefficients_from_physical",
    "continuous_fixed_poles",
    "continuous_physical_from_locus",
    "controller_delta_polynomials",
    "controller_polynomials",
    "discretize_continuous",
    "filter_pole",
    "fixed_poles",
    "locus_from_coefficients",
    "open_loop",
    "physical_from_coefficients",
    "polymul",
    "z_to_delta",
    "zero_count",
    "SHAPE_COEFFICIENTS",
]

#: Table coefficients that place a controller pole or zero (the shape), as
#: opposed to those proportional to the loop gain ``K`` for a fixed shape.
SHAPE_COEFFICIENTS: frozenset[str] = frozenset({"kd_a", "zc", "pc", "zc1", "pc1", "zc2", "pc2"})

#: Names of the physical gains reported per structure (units in the docs:
#: kp [-], ki [1/s], kd [s], tf [s]; lead/lag: kc [-], zc/pc [-] in z and the
#: continuous-equivalent corner frequencies wz/wp [rad/s] = -ln(zc)/ts).
PHYSICAL_GAINS: dict[str, tuple[str, ...]] = {
    "p": ("kp",),
    "pi": ("kp", "ki"),
    "pd": ("kp", "kd", "tf"),
    "pid": ("kp", "ki", "kd", "tf"),
    "lead": ("kc", "wz", "wp"),
    "lag": ("kc", "wz", "wp"),
    "leadlag": ("kc", "wz1", "wp1", "wz2", "wp2"),
}


def check_structure(structure: str) -> str:
    """Return ``structure`` or raise :class:`InputError` naming the known ones."""
    if structure not in CONTROLLER_STRUCTURES:
        raise InputError(unknown_name_message("controller structure", structure, CONTROLLER_STRUCTURES))
    return structure


def zero_count(structure: str) -> int:
    """Number of controller zeros a strategy places (0, 1 or 2)."""
    return {"p": 0, "pi": 1, "pd": 1, "pid": 2, "lead": 1, "lag": 1, "leadlag": 2}[check_structure(structure)]


def _coef(coefficients: dict[str, np.ndarray], name: str) -> np.ndarray:
    try:
        return np.asarray(coefficients[name], dtype=float)
    except KeyError:
        raise InputError(f"missing controller coefficient {name!r}") from None


def _check_coefficients(structure: str, coefficients: dict[str, np.ndarray]) -> None:
    expected = CONTROLLER_COEFFICIENTS[check_structure(structure)]
    extra = sorted(set(coefficients) - set(expected))
    if extra:
        raise InputError(f"{structure} coefficients are {', '.join(expected)}; got extra {', '.join(extra)}")
    for name in expected:
        _coef(coefficients, name)


def filter_pole(tf: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """Backward-Euler derivative filter pole ``kd_a = tf / (tf + ts)``.

    Parameters
    ----------
    tf : array_like
        Derivative filter time constant in seconds (``>= 0``).
    ts : array_like
        Sample period in seconds.
    """
    tf = np.asarray(tf, dtype=float)
    ts = np.asarray(ts, dtype=float)
    return tf / (tf + ts)


def controller_polynomials(structure: str, coefficients: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of ``C(z)`` from table coefficients.

    Parameters
    ----------
    structure : str
        One of ``names.CONTROLLER_STRUCTURES``.
    coefficients : dict of str to array_like
        The structure's coefficients, all of one (broadcastable) shape ``B``.

    Returns
    -------
    num, den : ndarray, shape B + (k + 1,)
        Descending powers of ``z``, the numerator left-padded to the
        denominator's length.
    """
    _check_coefficients(structure, coefficients)
    c = {name: _coef(coefficients, name) for name in CONTROLLER_COEFFICIENTS[structure]}
    shape = np.broadcast_shapes(*(v.shape for v in c.values()))
    c = {k: np.broadcast_to(v, shape) for k, v in c.items()}
    one = np.ones(shape)
    zero = np.zeros(shape)
    if structure == "p":
        num = c["kp"][..., None]
        den = one[..., None]
    elif structure == "pi":
        num = np.stack([c["kp"] + c["ki_ts"], -c["kp"]], axis=-1)
        den = np.stack([one, -one], axis=-1)
    elif structure == "pd":
        a = c["kd_a"]
        num = np.stack([c["kp"] + c["kd_b"], -(c["kp"] * a + c["kd_b"])], axis=-1)
        den = np.stack([one, -a], axis=-1)
    elif structure == "pid":
        a = c["kd_a"]
        kp, ki, kd = c["kp"], c["ki_ts"], c["kd_b"]
        # kp (z-1)(z-a) + ki z (z-a) + kd (z-1)^2 over (z-1)(z-a)
        num = np.stack([kp + ki + kd, -kp * (1 + a) - ki * a - 2 * kd, kp * a + kd], axis=-1)
        den = np.stack([one, -(1 + a), a], axis=-1)
    elif structure in ("lead", "lag"):
        num = c["kc"][..., None] * np.stack([one, -c["zc"]], axis=-1)
        den = np.stack([one, -c["pc"]], axis=-1)
    else:  # leadlag
        zeros = poly_from_roots(np.stack([c["zc1"], c["zc2"]], axis=-1))
        num = c["kc"][..., None] * zeros
        den = poly_from_roots(np.stack([c["pc1"], c["pc2"]], axis=-1))
    del zero
    return pad_left(num, den.shape[-1]), den


def controller_delta_polynomials(
    structure: str, coefficients: dict[str, np.ndarray], ts: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """``C`` in the delta operator ``g = (z - 1)/ts``, exactly.

    ``C(z) = N(z)/D(z)`` becomes ``N(1 + ts g) / D(1 + ts g)``; e.g. the PI
    integrator ``z/(z - 1)`` becomes ``(1 + ts g)/(ts g)``.  Both polynomials
    are divided by the denominator's leading coefficient in ``g`` so that it
    is 1 (the same rational function, better scaled).
    """
    num, den = controller_polynomials(structure, coefficients)
    dnum = z_to_delta(num, ts)
    dden = z_to_delta(den, ts)
    lead = dden[..., :1]
    return dnum / lead, dden / lead


@dataclass(frozen=True, eq=False)
class LocusForm:
    """A controller as ``K * Z(z) / Q(z)`` (batched).

    Parameters
    ----------
    gain : ndarray, shape B
        Loop gain ``K`` (leading numerator coefficient of ``C``).
    zeros : ndarray, shape B + (nz + 1,)
        Monic numerator (controller zeros).
    poles : ndarray, shape B + (nq,)
        Controller poles (real), e.g. ``(1,)`` for PI, ``(1, kd_a)`` for PID.
    """

    gain: np.ndarray
    zeros: np.ndarray
    poles: np.ndarray

    @property
    def denominator(self) -> np.ndarray:
        """Monic denominator ``Q`` with roots :attr:`poles`."""
        return poly_from_roots(self.poles)


def fixed_poles(structure: str, kd_a: np.ndarray | float | None = None, pc: np.ndarray | None = None) -> np.ndarray:
    """Controller poles in ``z`` that a strategy does not choose.

    Integrator at ``z = 1``; derivative filter at ``kd_a``; lead/lag poles
    ``pc`` are design choices and passed in.  Returns shape ``B + (nq,)``.
    """
    check_structure(structure)
    if structure == "p":
        return np.zeros((0,))
    if structure == "pi":
        return np.ones((1,))
    if structure in ("pd", "pid"):
        if kd_a is None:
            raise InputError(f"{structure} needs the derivative filter pole kd_a")
        a = np.asarray(kd_a, dtype=float)[..., None]
        if structure == "pd":
            return a
        return np.concatenate([np.ones_like(a), a], axis=-1)
    if pc is None:
        raise InputError(f"{structure} needs its pole(s) pc")
    return np.asarray(pc, dtype=float)


def locus_from_coefficients(structure: str, coefficients: dict[str, np.ndarray]) -> LocusForm:
    """Split table coefficients into ``K``, monic zeros polynomial and poles."""
    num, _den = controller_polynomials(structure, coefficients)
    # Trim the padding: numerator degree equals denominator degree for every
    # structure except P (degree 0 over degree 0).
    gain = num[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        zeros = num / np.where(gain == 0, np.nan, gain)[..., None]
    c = coefficients
    if structure == "p":
        poles = np.zeros(np.shape(gain) + (0,))
    elif structure == "pi":
        poles = np.ones(np.shape(gain) + (1,))
    elif structure == "pd":
        poles = np.broadcast_to(np.asarray(c["kd_a"], float), np.shape(gain))[..., None]
    elif structure == "pid":
        a = np.broadcast_to(np.asarray(c["kd_a"], float), np.shape(gain))
        poles = np.stack([np.ones_like(a), a], axis=-1)
    elif structure in ("lead", "lag"):
        poles = np.broadcast_to(np.asarray(c["pc"], float), np.shape(gain))[..., None]
    else:
        poles = np.stack(np.broadcast_arrays(np.asarray(c["pc1"], float), np.asarray(c["pc2"], float)), axis=-1)
    return LocusForm(gain=gain, zeros=zeros, poles=poles)


def coefficients_from_locus(structure: str, form: LocusForm) -> dict[str, np.ndarray]:
    """Table coefficients from a locus form (inverse of :func:`locus_from_coefficients`).

    For PI ``K (z - c)/(z - 1)``: ``kp = K c``, ``ki_ts = K (1 - c)``.  For
    PD ``K (z - c)/(z - a)``: ``kp = K (1 - c)/(1 - a)``,
    ``kd_b = K (c - a)/(1 - a)``.  PID solves the 3x3 linear system that
    matches the numerator coefficients.  Lead/lag keep ``kc = K``.
    """
    check_structure(structure)
    K = np.asarray(form.gain, dtype=float)
    Z = np.asarray(form.zeros, dtype=float)
    poles = np.asarray(form.poles, dtype=float)
    if structure == "p":
        return {"kp": K}
    if structure == "pi":
        c = -Z[..., -1]
        return {"kp": K * c, "ki_ts": K * (1 - c)}
    if structure == "pd":
        c = -Z[..., -1]
        a = poles[..., 0]
        return {"kp": K * (1 - c) / (1 - a), "kd_b": K * (c - a) / (1 - a), "kd_a": a + 0 * K}
    if structure == "pid":
        a = poles[..., -1]
        shape = np.broadcast_shapes(K.shape, Z.shape[:-1], a.shape)
        a = np.broadcast_to(a, shape)
        ones = np.ones(shape)
        # rows: z^2, z^1, z^0 coefficients of kp(z-1)(z-a) + ki z(z-a) + kd (z-1)^2
        matrix = np.stack(
            [
                np.stack([ones, ones, ones], axis=-1),
                np.stack([-(1 + a), -a, -2 * ones], axis=-1),
                np.stack([a, 0 * a, ones], axis=-1),
            ],
            axis=-2,
        )
        rhs = np.broadcast_to(K, shape)[..., None] * np.broadcast_to(Z[..., -3:], shape + (3,))
        gains = np.linalg.solve(matrix, rhs[..., None])[..., 0]
        return {"kp": gains[..., 0], "ki_ts": gains[..., 1], "kd_b": gains[..., 2], "kd_a": a.copy()}
    if structure in ("lead", "lag"):
        return {"kc": K, "zc": -Z[..., -1] + 0 * K, "pc": poles[..., 0] + 0 * K}
    # leadlag: the zeros polynomial must have real roots
    b, c0 = Z[..., -2], Z[..., -1]
    disc = b * b - 4 * c0
    if np.any(disc < -1e-12):
        raise InputError("lead-lag zeros must be real (two first-order sections)")
    root = np.sqrt(np.maximum(disc, 0.0))
    # Convention: the first (lead) section takes the smaller zero, the second
    # (lag) section the one nearer z = 1.
    z1, z2 = (-b - root) / 2, (-b + root) / 2
    return {"kc": K, "zc1": z1, "pc1": poles[..., 0] + 0 * K, "zc2": z2, "pc2": poles[..., 1] + 0 * K}


def physical_from_coefficients(
    structure: str, coefficients: dict[str, np.ndarray], ts: np.ndarray
) -> dict[str, np.ndarray]:
    """Physical gains from table coefficients at sample period ``ts`` [s].

    ``ki = ki_ts / ts`` [1/s]; ``tf = kd_a ts / (1 - kd_a)`` [s];
    ``kd = kd_b (tf + ts)`` [s]; lead/lag corner frequencies
    ``w = -ln(z) / ts`` [rad/s] (NaN for a corner outside ``(0, 1)``).
    """
    _check_coefficients(structure, coefficients)
    ts = np.asarray(ts, dtype=float)
    c = {k: np.asarray(v, dtype=float) for k, v in coefficients.items()}
    out: dict[str, np.ndarray] = {}
    if "kp" in c:
        out["kp"] = c["kp"] + 0 * ts
    if "ki_ts" in c:
        out["ki"] = c["ki_ts"] / ts
    if "kd_a" in c:
        tf = c["kd_a"] * ts / (1 - c["kd_a"])
        out["kd"] = c["kd_b"] * (tf + ts)
        out["tf"] = tf
    if "kc" in c:
        out["kc"] = c["kc"] + 0 * ts

        def corner(z: np.ndarray) -> np.ndarray:
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.where((z > 0) & (z < 1), -np.log(np.where(z > 0, z, 1.0)) / ts, np.nan)

        for suffix in ("", "1", "2"):
            if f"zc{suffix}" in c:
                out[f"wz{suffix}"] = corner(c[f"zc{suffix}"])
                out[f"wp{suffix}"] = corner(c[f"pc{suffix}"])
    return {name: out[name] for name in PHYSICAL_GAINS[structure]}


def coefficients_from_physical(
    structure: str, gains: dict[str, np.ndarray], ts: np.ndarray
) -> dict[str, np.ndarray]:
    """Table coefficients from physical gains at sample period ``ts`` [s].

    Inverse of :func:`physical_from_coefficients`: ``ki_ts = ki ts``,
    ``kd_a = tf/(tf + ts)``, ``kd_b = kd/(tf + ts)``, ``zc = exp(-wz ts)``.
    """
    check_structure(structure)
    ts = np.asarray(ts, dtype=float)
    missing = [g for g in PHYSICAL_GAINS[structure] if g not in gains]
    if missing:
        raise InputError(f"{structure} needs physical gains {', '.join(PHYSICAL_GAINS[structure])}; missing {missing}")
    g = {k: np.asarray(v, dtype=float) for k, v in gains.items()}
    out: dict[str, np.ndarray] = {}
    if "kp" in g:
        out["kp"] = g["kp"] + 0 * ts
    if "ki" in g:
        out["ki_ts"] = g["ki"] * ts
    if "tf" in g:
        out["kd_a"] = g["tf"] / (g["tf"] + ts)
        out["kd_b"] = g["kd"] / (g["tf"] + ts)
    if "kc" in g:
        out["kc"] = g["kc"] + 0 * ts
        for suffix in ("", "1", "2"):
            if f"wz{suffix}" in g:
                out[f"zc{suffix}"] = np.exp(-g[f"wz{suffix}"] * ts)
                out[f"pc{suffix}"] = np.exp(-g[f"wp{suffix}"] * ts)
    return {name: out[name] for name in CONTROLLER_COEFFICIENTS[structure]}


def open_loop(plant: Loop, structure: str, coefficients: dict[str, np.ndarray]) -> Loop:
    """The open loop ``L = C P`` as a :class:`Loop` (batched over points).

    Parameters
    ----------
    plant : Loop
        Discrete plant (hold and computation delay included), ``P`` points.
    structure : str
        Controller structure.
    coefficients : dict of str to array_like, each shape (P,) or scalar
        Table coefficients per point.

    Returns
    -------
    Loop
        Discrete open loop with the plant's sample period, hold, delay and
        prewarp; with the delta-operator form when the plant has one.
    """
    if not plant.is_discrete:
        raise InputError("the controller forms are discrete; discretise the plant first")
    coefficients = {k: np.broadcast_to(np.asarray(v, float), (plant.points,)) for k, v in coefficients.items()}
    cnum, cden = controller_polynomials(structure, coefficients)
    num = polymul(cnum, plant.num)
    den = polymul(cden, plant.den)
    delta_num = delta_den = None
    if plant.delta_den is not None:
        dcn, dcd = controller_delta_polynomials(structure, coefficients, plant.ts)
        delta_num = polymul(dcn, plant.delta_num)
        delta_den = polymul(dcd, plant.delta_den)
    return Loop(
        num=num,
        den=den,
        ts=plant.ts,
        hold=plant.hold,
        delay=plant.delay,
        prewarp=plant.prewarp,
        delta_num=delta_num,
        delta_den=delta_den,
    )


# --- continuous forms (compare_continuous) ---------------------------------


def continuous_fixed_poles(structure: str, tf: np.ndarray | float | None = None) -> np.ndarray:
    """Controller poles in ``s``: integrator at 0, derivative filter at ``-1/tf``."""
    check_structure(structure)
    if structure == "p":
        return np.zeros((0,))
    if structure == "pi":
        return np.zeros((1,))
    if tf is None:
        raise InputError(f"{structure} needs the derivative filter time constant tf [s]")
    p = -1.0 / np.asarray(tf, dtype=float)[..., None]
    if structure == "pd":
        return p
    return np.concatenate([np.zeros_like(p), p], axis=-1)


def continuous_physical_from_locus(
    structure: str, gain: np.ndarray, zeros: np.ndarray, tf: np.ndarray | float | None = None
) -> dict[str, np.ndarray]:
    """Physical PID gains from a continuous locus form ``K Z(s)/Q(s)``.

    PI ``K (s + c)/s``: ``kp = K``, ``ki = K c``.  PD
    ``K (s + c)/(s + 1/tf)``: ``kp = K c tf``, ``kd = K tf - kp tf``.  PID
    ``K (s^2 + m1 s + m0)/(s (s + 1/tf))``: ``ki = K m0 tf``,
    ``kp = K m1 tf - ki tf``, ``kd = K tf - kp tf``.
    """
    K = np.asarray(gain, dtype=float)
    Z = np.asarray(zeros, dtype=float)
    if structure == "p":
        return {"kp": K}
    if structure == "pi":
        return {"kp": K, "ki": K * Z[..., -1]}
    tf = np.asarray(tf, dtype=float)
    if structure == "pd":
        kp = K * Z[..., -1] * tf
        return {"kp": kp, "kd": K * tf - kp * tf, "tf": tf + 0 * K}
    if structure == "pid":
        ki = K * Z[..., -1] * tf
        kp = K * Z[..., -2] * tf - ki * tf
        return {"kp": kp, "ki": ki, "kd": K * tf - kp * tf, "tf": tf + 0 * K}
    raise InputError(f"no continuous PID form for structure {structure!r}")


def discretize_continuous(structure: str, gains: dict[str, np.ndarray], ts: np.ndarray) -> dict[str, np.ndarray]:
    """Discretise a continuous design into the table coefficients.

    PID family: the table forms are the backward-Euler integrator and
    filtered derivative, so the physical gains map directly
    (:func:`coefficients_from_physical`).  Lead/lag ``kc (s + wz)/(s + wp)``:
    matched pole-zero, ``zc = exp(-wz ts)``, ``pc = exp(-wp ts)``, and ``kc``
    chosen so the DC gain ``kc wz/wp`` is kept.
    """
    if structure in ("lead", "lag"):
        ts = np.asarray(ts, dtype=float)
        zc = np.exp(-np.asarray(gains["wz"]) * ts)
        pc = np.exp(-np.asarray(gains["wp"]) * ts)
        dc = np.asarray(gains["kc"]) * np.asarray(gains["wz"]) / np.asarray(gains["wp"])
        return {"kc": dc * (1 - pc) / (1 - zc), "zc": zc, "pc": pc}
    return coefficients_from_physical(structure, gains, ts)
