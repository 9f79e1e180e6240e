"""Independent reference for ``benchmarks/design_quality.py``: brute-force controller search.

Nothing here imports gainloom.  From the continuous plant of each operating
point (a transfer function, a pure delay and the sample period) it

1. samples the plant itself (zero-order hold, fractional delay by splitting
   the hold interval; scipy ``expm`` and ``ss2tf``),
2. evaluates margins of the sampled loop on a dense frequency grid,
3. searches the controller parameters for the largest crossover meeting a
   phase-margin and a gain-margin bound: a dense grid over the controller
   shape (PI: the ratio ``ki_ts / kp``; lead: zero and pole), then two
   refinements around the best shape.  For a fixed shape the gain is not
   sampled: the gains meeting each margin are computed as sets from the
   frequency response, and the crossover grows with the gain, so the best
   gain is the top of the feasible set.

Conventions (stated in DEVELOPERS.md, "Benchmarks"):

- crossover: the highest frequency below Nyquist where ``|L| = 1``;
- phase margin: the angle between ``L`` and -1 at a gain crossover
  (``|(arg L mod 360) - 180|``), the smallest over every gain crossover
  (python-control's and gainloom's "smallest ``|PM|``"; the sign is left to
  the stability test);
- gain margin: ``min |20 log10 |L||`` over the phase crossovers (``L`` real
  and negative, Nyquist included), i.e. python-control's "closest to 0 dB";
  together with closed-loop stability (polynomial roots) this is the
  smallest gain change, up or down, to instability.

Controller forms are read from DEVELOPERS.md ("Discrete controller forms"):
PI ``kp + ki_ts z/(z - 1)``, lead ``kc (z - zc)/(z - pc)`` with ``zc > pc``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.signal

__all__ = [
    "SampledPlant",
    "sample_plant",
    "frequency_grid",
    "controller_polynomials",
    "evaluate",
    "best_design",
    "Design",
]

#: Frequency-grid points (geometric, up to Nyquist) of the search and the checks.
GRID_POINTS = 20000
#: Lowest grid frequency as a fraction of Nyquist.
GRID_LOW = 1e-6


@dataclass(frozen=True)
class SampledPlant:
    """Sampled plant: state space (fractional delay inside), then ``shift`` whole samples.

    ``num``, ``den`` are the same system as a transfer function in ``z``
    (descending powers, delay included).
    """

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: float
    shift: int
    ts: float
    num: np.ndarray
    den: np.ndarray

    def response(self, w: np.ndarray) -> np.ndarray:
        """``P(exp(j w ts))`` at frequencies ``w`` (rad/s)."""
        z = np.exp(1j * np.asarray(w, float) * self.ts)
        n = self.a.shape[0]
        eye = np.eye(n)
        m = z[:, None, None] * eye[None] - self.a[None]
        x = np.linalg.solve(m, np.broadcast_to(self.b, (z.size, n, 1)))[..., 0]
        return (x @ self.c.ravel() + self.d) * z ** (-self.shift)


def _hold_integrals(a: np.ndarray, b: np.ndarray, t: float) -> tuple[np.ndarray, np.ndarray]:
    """``exp(A t)`` and ``int_0^t exp(A s) ds B`` from one matrix exponential."""
    n = a.shape[0]
    block = np.zeros((n + 1, n + 1))
    block[:n, :n] = a
    block[:n, n:] = b
    e = scipy.linalg.expm(block * t)
    return e[:n, :n], e[:n, n:]


def sample_plant(num: np.ndarray, den: np.ndarray, ts: float, delay_samples: float) -> SampledPlant:
    """Zero-order-hold sampling of ``num/den`` with a delay of ``delay_samples`` samples.

    The delay ``(n + f) ts`` (``0 <= f < 1``) is split: ``n`` whole samples
    and, within one hold interval, the input switches at ``f ts`` from the
    previous sample's value to the current one, so
    ``x[k+1] = Phi x[k] + G0 u[k] + G1 u[k-1]`` with
    ``G0 = int_0^{(1-f) ts} exp(A s) ds B`` and
    ``G1 = exp(A (1-f) ts) int_0^{f ts} exp(A s) ds B``.
    """
    num = np.trim_zeros(np.atleast_1d(np.asarray(num, float)), "f")
    den = np.trim_zeros(np.atleast_1d(np.asarray(den, float)), "f")
    a, b, c, d = scipy.signal.tf2ss(num, den)
    d = float(np.ravel(d)[0]) if np.size(d) else 0.0
    whole = int(math.floor(delay_samples + 1e-9))
    frac = delay_samples - whole
    if frac < 1e-9:
        frac = 0.0
    if frac == 0.0:
        phi, gam = _hold_integrals(a, b, ts)
        ad, bd, cd, dd = phi, gam, c, d
    else:
        phi_0, g0 = _hold_integrals(a, b, (1 - frac) * ts)
        _, g_f = _hold_integrals(a, b, frac * ts)
        phi, _ = _hold_integrals(a, b, ts)
        g1 = phi_0 @ g_f
        n = a.shape[0]
        ad = np.zeros((n + 1, n + 1))
        ad[:n, :n] = phi
        ad[:n, n:] = g1
        bd = np.vstack([g0, [[1.0]]])
        cd = np.hstack([c, [[d]]])
        dd = 0.0
    tf_num, tf_den = scipy.signal.ss2tf(ad, bd, cd, np.array([[dd]]))
    tf_num = np.ravel(tf_num)
    tf_den = np.concatenate([np.ravel(tf_den), np.zeros(whole)])
    tf_num = np.concatenate([np.zeros(tf_den.size - tf_num.size), tf_num])
    return SampledPlant(a=ad, b=bd, c=cd, d=float(dd), shift=whole, ts=float(ts), num=tf_num, den=tf_den)


def frequency_grid(ts: float, points: int = GRID_POINTS) -> np.ndarray:
    """Geometric grid from ``GRID_LOW`` x Nyquist to Nyquist (rad/s)."""
    nyquist = math.pi / ts
    return np.geomspace(GRID_LOW * nyquist, nyquist, points)


def controller_polynomials(structure: str, coefficients: dict[str, float]) -> tuple[np.ndarray, np.ndarray]:
    """``C(z)`` numerator and denominator of the documented discrete forms."""
    if structure == "pi":
        kp, ki = coefficients["kp"], coefficients["ki_ts"]
        return np.array([kp + ki, -kp]), np.array([1.0, -1.0])
    if structure == "lead":
        kc, zc, pc = coefficients["kc"], coefficients["zc"], coefficients["pc"]
        return kc * np.array([1.0, -zc]), np.array([1.0, -pc])
    raise ValueError(f"reference knows pi and lead, not {structure!r}")


def _stable(plant: SampledPlant, cnum: np.ndarray, cden: np.ndarray, gains: np.ndarray) -> np.ndarray:
    """Closed-loop stability of ``gains * C`` (rows of ``cnum``, ``cden``) by polynomial roots."""
    cnum = np.atleast_2d(cnum)
    cden = np.atleast_2d(cden)
    gains = np.asarray(gains, float)
    rows = []
    for k, n, d in zip(gains, np.broadcast_to(cnum, (gains.size, cnum.shape[1])),
                       np.broadcast_to(cden, (gains.size, cden.shape[1]))):
        char = np.polyadd(np.polymul(d, plant.den), k * np.polymul(n, plant.num))
        rows.append(char / char[0])
    char = np.array(rows)
    deg = char.shape[1] - 1
    companion = np.zeros((char.shape[0], deg, deg))
    companion[:, 0, :] = -char[:, 1:]
    companion[:, np.arange(1, deg), np.arange(deg - 1)] = 1.0
    radius = np.max(np.abs(np.linalg.eigvals(companion)), axis=-1)
    return radius < 1 - 1e-12


def _crossings(values: np.ndarray, level: float) -> np.ndarray:
    """Indices ``i`` where ``values`` passes ``level`` between ``i`` and ``i + 1``."""
    above = values >= level
    return np.flatnonzero(above[:-1] != above[1:])


def _phase_crossings(loop: np.ndarray) -> np.ndarray:
    """``|L|`` at the phase crossovers (``L`` real and negative) on the grid, Nyquist included."""
    im = loop.imag
    idx = np.flatnonzero(np.sign(im[:-1]) != np.sign(im[1:]))
    t = im[idx] / (im[idx] - im[idx + 1])
    value = loop[idx] + t * (loop[idx + 1] - loop[idx])
    out = list(np.abs(value[value.real < 0]))
    end = loop[-1]
    if end.real < 0 and abs(end.imag) <= 1e-9 * abs(end):
        out.append(abs(end))
    return np.array(out)


def _distance(phase_deg: np.ndarray) -> np.ndarray:
    """Angle between ``L`` and the critical point -1 for ``arg L`` in degrees, in [0, 180]."""
    return np.abs(np.mod(phase_deg, 360.0) - 180.0)


@dataclass(frozen=True)
class Margins:
    """Margins of one sampled loop (``crossover`` 0 when ``|L| < 1`` on the whole grid)."""

    crossover: float
    phase_margin: float
    gain_margin_db: float
    stable: bool


def evaluate(plant: SampledPlant, cnum: np.ndarray, cden: np.ndarray, w: np.ndarray | None = None) -> Margins:
    """Margins of ``C P`` with ``C = cnum/cden`` (gain included) on the grid ``w``."""
    w = frequency_grid(plant.ts) if w is None else w
    z = np.exp(1j * w * plant.ts)
    loop = np.polyval(cnum, z) / np.polyval(cden, z) * plant.response(w)
    mag = np.log(np.abs(loop))
    idx = _crossings(mag, 0.0)
    if idx.size:
        t = mag[idx] / (mag[idx] - mag[idx + 1])
        crossover = float(np.exp(np.log(w[idx[-1]]) + t[-1] * (np.log(w[idx[-1] + 1]) - np.log(w[idx[-1]]))))
        value = loop[idx] + t * (loop[idx + 1] - loop[idx])
        phase_margin = float(np.min(_distance(np.degrees(np.angle(value)))))
    else:
        crossover = math.inf if mag[-1] > 0 else 0.0
        phase_margin = math.inf
    pc = _phase_crossings(loop)
    gain_margin = float(np.min(np.abs(20 * np.log10(pc)))) if pc.size else math.inf
    stable = bool(_stable(plant, cnum, cden, np.array([1.0]))[0])
    return Margins(crossover, phase_margin, gain_margin, stable)


# ----------------------------------------------------------------------------
# search


@dataclass(frozen=True)
class Design:
    """Best controller found: coefficients, crossover (rad/s), and how many shapes were tried."""

    feasible: bool
    coefficients: dict[str, float]
    crossover: float
    shapes_tried: int


def _pi_shapes(ratios: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """K-free PI shapes: ``C/kp = ((1 + r) z - 1)/(z - 1)``, ``r = ki_ts/kp``."""
    num = np.stack([1.0 + ratios, -np.ones_like(ratios)], axis=-1)
    den = np.broadcast_to([1.0, -1.0], num.shape).copy()
    return num, den, ratios[:, None]


def _lead_shapes(zeros: np.ndarray, poles: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """K-free lead shapes ``(z - zc)/(z - pc)`` for every pair with ``zc > pc``."""
    zc, pc = np.meshgrid(zeros, poles, indexing="ij")
    keep = zc > pc
    zc, pc = zc[keep], pc[keep]
    num = np.stack([np.ones_like(zc), -zc], axis=-1)
    den = np.stack([np.ones_like(pc), -pc], axis=-1)
    return num, den, np.stack([zc, pc], axis=-1)


def _merged(lows: np.ndarray, highs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Union of closed intervals ``[lows, highs]`` as sorted disjoint (starts, ends)."""
    if not lows.size:
        return lows, highs
    order = np.argsort(lows)
    lo, hi = lows[order], highs[order]
    reach = np.maximum.accumulate(hi)
    first = np.concatenate([[True], lo[1:] > reach[:-1]])
    index = np.flatnonzero(first)
    return lo[index], np.maximum.reduceat(hi, index)


def _top_gain(plant, num, den, loop0, pm_min, gm_db) -> float:
    """Largest gain of one K-free shape meeting both margins and stability (NaN if none)."""
    mag = np.abs(loop0)
    # stability changes only at the gains putting a phase crossover on -1
    boundaries = np.sort(1.0 / _phase_crossings(loop0))
    edges = np.concatenate([[0.0], boundaries, [math.inf]])
    tests = np.array([
        (hi / 2 if lo == 0 else (2 * lo if not math.isfinite(hi) else math.sqrt(lo * hi)))
        if (lo > 0 or math.isfinite(hi)) else 1.0
        for lo, hi in zip(edges[:-1], edges[1:])
    ])
    stable = _stable(plant, num, den, tests)
    factor = 10.0 ** (gm_db / 20.0)
    allowed = [(lo * factor, hi / factor) for lo, hi, ok in zip(edges[:-1], edges[1:], stable) if ok and lo * factor < hi / factor]
    if not allowed:
        return math.nan
    # gains whose crossover falls in a grid interval with too little phase margin
    pm = _distance(np.degrees(np.angle(loop0)))
    bad = np.flatnonzero(np.minimum(pm[:-1], pm[1:]) < pm_min)
    low = 1.0 / np.maximum(mag[bad], mag[bad + 1])
    high = 1.0 / np.minimum(mag[bad], mag[bad + 1])
    starts, ends = _merged(low, high)
    for lo, hi in reversed(allowed):
        top = hi
        j = np.searchsorted(starts, top, side="left") - 1
        if j >= 0 and ends[j] >= top:
            top = starts[j] * (1 - 1e-9)
        if top > lo:
            return top
    return math.nan


def _crossover_at(loop0: np.ndarray, w: np.ndarray, gain: float) -> float:
    mag = np.log(np.abs(loop0)) + math.log(gain)
    idx = _crossings(mag, 0.0)
    if not idx.size:
        return 0.0
    i = idx[-1]
    t = mag[i] / (mag[i] - mag[i + 1])
    return float(np.exp(np.log(w[i]) + t * (np.log(w[i + 1]) - np.log(w[i]))))


def _best_of(plant, shapes, w, pm_min, gm_db):
    """(crossover, gain, index) of the best shape; crossover -1 where none is feasible."""
    num, den, _ = shapes
    z = np.exp(1j * w * plant.ts)
    response = plant.response(w)
    best = (-1.0, math.nan, -1)
    for s in range(num.shape[0]):
        loop0 = np.polyval(num[s], z) / np.polyval(den[s], z) * response
        gain = _top_gain(plant, num[s], den[s], loop0, pm_min, gm_db)
        if math.isfinite(gain):
            wc = _crossover_at(loop0, w, gain)
            if wc > best[0]:
                best = (wc, gain, s)
    return best


def _pi_search(plant, w, pm_min, gm_db):
    ratios = np.geomspace(1e-6, 1e3, 91)
    tried = ratios.size
    wc, gain, s = _best_of(plant, _pi_shapes(ratios), w, pm_min, gm_db)
    if s < 0:
        return Design(False, {}, math.nan, tried)
    r = ratios[s]
    step = ratios[1] / ratios[0]
    for _ in range(2):  # refine between the neighbours of the best ratio
        local = np.geomspace(r / step, r * step, 21)
        tried += local.size
        wc2, gain2, s2 = _best_of(plant, _pi_shapes(local), w, pm_min, gm_db)
        if s2 >= 0 and wc2 >= wc:
            wc, gain, r = wc2, gain2, local[s2]
        step = local[1] / local[0]
    return Design(True, {"kp": gain, "ki_ts": gain * r}, wc, tried)


def _lead_search(plant, w, pm_min, gm_db):
    # shapes from continuous-equivalent corners a = w ts, plus a pole at the origin
    corners = np.geomspace(1e-4, math.pi, 32)
    values = np.exp(-corners)
    zeros, poles = values, np.concatenate([values, [0.0]])
    shapes = _lead_shapes(zeros, poles)
    tried = shapes[0].shape[0]
    wc, gain, s = _best_of(plant, shapes, w, pm_min, gm_db)
    if s < 0:
        return Design(False, {}, math.nan, tried)
    zc, pc = shapes[2][s]
    step = corners[1] / corners[0]
    for _ in range(2):
        az = -math.log(zc)
        local_z = np.exp(-np.geomspace(az / step, az * step, 9))
        if pc > 0:
            ap = -math.log(pc)
            local_p = np.concatenate([np.exp(-np.geomspace(ap / step, ap * step, 9)), [0.0]])
        else:
            local_p = np.concatenate([np.exp(-np.geomspace(corners[-2], corners[-1] * 2, 5)), [0.0]])
        local = _lead_shapes(local_z, local_p)
        tried += local[0].shape[0]
        wc2, gain2, s2 = _best_of(plant, local, w, pm_min, gm_db)
        if s2 >= 0 and wc2 >= wc:
            wc, gain = wc2, gain2
            zc, pc = local[2][s2]
        step = math.sqrt(step)
    return Design(True, {"kc": gain, "zc": float(zc), "pc": float(pc)}, wc, tried)


def best_design(plant: SampledPlant, structure: str, min_phase_margin: float, min_gain_margin_db: float,
                points: int = GRID_POINTS) -> Design:
    """The largest crossover of ``structure`` meeting both margins at one operating point.

    Parameters
    ----------
    plant : SampledPlant
    structure : {"pi", "lead"}
    min_phase_margin : float
        Degrees.
    min_gain_margin_db : float
        dB.
    points : int
        Frequency-grid points.

    Returns
    -------
    Design
    """
    w = frequency_grid(plant.ts, points)
    if structure == "pi":
        return _pi_search(plant, w, min_phase_margin, min_gain_margin_db)
    if structure == "lead":
        return _lead_search(plant, w, min_phase_margin, min_gain_margin_db)
    raise ValueError(f"reference knows pi and lead, not {structure!r}")
