"""The statistical tolerance study (``gainloom spread``): violation fractions
against closed forms, Clopper-Pearson intervals against scipy, determinism
across chunking and workers, the command's output.

The closed-form case (textbook closed form, from memory): the plant
b/(s + a) under ZOH at period T is b/a (1 - phi)/(z - phi), phi = exp(-a T);
with P control kp the closed-loop pole is z = phi - kp b/a (1 - phi).  It
leaves the disc |z| <= r exactly when b > b_r = a (phi + r) / (kp (1 - phi)),
so with b spread uniformly on [b0 (1 - t), b0 (1 + t)] the violating fraction
is the length ratio (b0 (1 + t) - b_r) / (2 t b0), and with b normal of
sigma = t b0 / 3 it is the normal tail sf((b_r / b0 - 1) / (t / 3)).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.stats

from gainloom.cli import main
from gainloom.design.confidence import clopper_pearson
from gainloom.design.spread import DRAW_BLOCK, draw_factors, run_study
from gainloom.design.table import GainTable, TableAxis
from gainloom.design.table_checks import tolerance_scales
from gainloom.errors import InputError
from gainloom.schedule import load_schedule

A, B0, TS, TOL = 100.0, 1500.0, 1.0e-3, 0.4
KP = (1.0, 0.8)
RADIUS = 0.5

SCHEDULE = f"""\
name: first-order-spread
description: first-order lag with a spread gain (invented, for the tolerance study tests)
variables:
  - name: speed
    unit: rpm
    values: [0, 1000]
parameters:
  a: {A}
  b: {B0}
plant:
  transfer_function:
    numerator: ["b"]
    denominator: [1, "a"]
sampling:
  period: {TS}
  method: zoh
  delay: 0
controller:
  structure: p
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 100}}
  output_limits: [-10, 10]
specs:
  max_pole_radius: {RADIUS}
tolerances:
  parameters: {{b: {TOL}}}
"""

GAINS = f"""\
format: gainloom-gains/1
structure: p
axes:
  - {{name: speed, unit: rpm, values: [0, 1000]}}
coefficients:
  kp: [{KP[0]}, {KP[1]}]
sample_period: [{TS}, {TS}]
output_limits: [-10, 10]
"""


def _schedule(tmp_path, study: str):
    path = tmp_path / "spread.yaml"
    path.write_text(SCHEDULE + study, encoding="utf-8")
    return path


def _table() -> GainTable:
    return GainTable(structure="p", axes=(TableAxis("speed", "rpm", np.array([0.0, 1000.0])),),
                     coefficients={"kp": np.array(KP)}, sample_period=np.full(2, TS), output_limits=(-10.0, 10.0))


def _threshold(kp: float, radius: float) -> float:
    """b beyond which the closed-loop pole leaves |z| <= radius (module docstring)."""
    phi = math.exp(-A * TS)
    return A * (phi + radius) / (kp * (1 - phi))


def _check_fractions(result, expected: np.ndarray) -> None:
    n = result.draws
    low, high = result.interval()
    for s in range(2):
        for p in range(2):
            q = expected[p, s]
            # within 4.5 standard errors (binomial spread of the estimate)
            assert abs(result.fraction[p, s] - q) <= 4.5 * math.sqrt(max(q * (1 - q), 1 / n) / n) + 1e-12
            assert low[p, s] <= q <= high[p, s]


def test_uniform_fraction_matches_the_length_ratio(tmp_path):
    sched = load_schedule(_schedule(tmp_path, "  samples: 3000\n  distribution: uniform\n  seed: 11\n"))
    result = run_study(sched, _table(), workers=1)
    assert result.specs == ("stable", "max_pole_radius")
    high_b = B0 * (1 + TOL)
    expected = np.array([[max(0.0, (high_b - _threshold(kp, r)) / (2 * TOL * B0)) for r in (1.0, RADIUS)] for kp in KP])
    assert expected[0, 0] > 0.05 and expected[1, 0] == 0  # both regimes present
    _check_fractions(result, expected)
    assert result.totals.violations[1, 0] == 0
    # the worst draw is the largest b drawn: the pole moves left as b grows
    worst = result.worst(0, 1)
    assert worst["parameters"]["b"] == pytest.approx(B0 * worst["factors"]["b"])
    assert B0 * (1 + TOL) * 0.999 < worst["parameters"]["b"] <= B0 * (1 + TOL)
    phi = math.exp(-A * TS)
    assert worst["value"] == pytest.approx(abs(phi - KP[0] * worst["parameters"]["b"] / A * (1 - phi)), rel=1e-9)


def test_normal_fraction_matches_the_normal_tail(tmp_path):
    sched = load_schedule(_schedule(tmp_path, "  samples: 3000\n  distribution: normal\n  seed: 5\n"))
    result = run_study(sched, _table(), workers=1)
    sigma = TOL / 3  # the tolerance is 3 sigma (docs/tolerances.md)
    # normal tail: scipy.stats.norm.sf
    expected = np.array([[scipy.stats.norm.sf((_threshold(kp, r) / B0 - 1) / sigma) for r in (1.0, RADIUS)] for kp in KP])
    _check_fractions(result, expected)


def test_clopper_pearson_matches_scipy_binomtest():
    # reference: scipy.stats.binomtest(k, n).proportion_ci(method="exact") is Clopper-Pearson
    for k, n in ((0, 10), (1, 10), (7, 10), (10, 10), (3, 1000), (520, 1000), (0, 100000)):
        low, high = clopper_pearson(np.array(k), np.array(n))
        ref = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
        assert float(low) == pytest.approx(ref.low, abs=1e-12)
        assert float(high) == pytest.approx(ref.high, abs=1e-12)
    # no event in n trials: upper bound 1 - (alpha/2)**(1/n) (closed form of the beta quantile)
    assert float(clopper_pearson(np.array(0), np.array(50))[1]) == pytest.approx(1 - 0.025 ** (1 / 50), rel=1e-12)


@pytest.mark.parametrize("p_true", [0.001, 0.02, 0.1, 0.37, 0.5, 0.9])
def test_clopper_pearson_covers_at_least_the_level(p_true):
    # exact coverage: sum of binomial probabilities of the k whose interval holds p (scipy.stats.binom)
    n = 60
    k = np.arange(n + 1)
    low, high = clopper_pearson(k, np.full(k.shape, n))
    coverage = scipy.stats.binom.pmf(k, n, p_true)[(low <= p_true) & (p_true <= high)].sum()
    assert coverage >= 0.95 - 1e-12


def test_result_does_not_depend_on_chunks_or_workers(tmp_path):
    draws = 2 * DRAW_BLOCK + 188  # the last block is cut
    sched = load_schedule(_schedule(tmp_path, f"  samples: {draws}\n  distribution: normal\n  seed: 2\n"))
    runs = [
        run_study(sched, _table(), workers=1, chunk_points=1, chunk_blocks=1),
        run_study(sched, _table(), workers=2, chunk_points=2, chunk_blocks=3),
        run_study(sched, _table(), workers=2, chunk_points=1, chunk_blocks=2),
    ]
    documents = [json.dumps(r.to_dict(), sort_keys=True) for r in runs]
    assert documents[0] == documents[1] == documents[2]
    assert runs[0].totals.draws.tolist() == [draws, draws]
    # another seed draws other numbers
    other = load_schedule(_schedule(tmp_path, f"  samples: {draws}\n  distribution: normal\n  seed: 3\n"))
    assert not np.array_equal(draw_factors(other.tolerances, 0, 0), draw_factors(sched.tolerances, 0, 0))
    # a point's stream is its own: point 1 differs from point 0
    assert not np.array_equal(draw_factors(sched.tolerances, 1, 0), draw_factors(sched.tolerances, 0, 0))


def test_uniform_draws_stay_in_the_box_and_table_check_keeps_corners(tmp_path):
    sched = load_schedule(_schedule(tmp_path, "  samples: 500\n"))
    factors = draw_factors(sched.tolerances, 0, 0)
    assert factors.shape == (DRAW_BLOCK, 1)
    assert factors.min() >= 1 - TOL and factors.max() <= 1 + TOL
    assert sched.tolerances.distribution == "uniform" and sched.tolerances.seed == 0
    # the design's own tolerance check keeps the corners of the box
    assert tolerance_scales(sched.tolerances) == [{"b": 1 - TOL}, {"b": 1 + TOL}]


def test_study_needs_a_number_of_draws(tmp_path):
    sched = load_schedule(_schedule(tmp_path, "  samples: corners\n"))
    with pytest.raises(InputError, match="tolerances.samples must be a number of random draws"):
        run_study(sched, _table())


def test_command_prints_json_and_writes_the_plot(tmp_path, capsys):
    schedule = _schedule(tmp_path, "  samples: 400\n  seed: 1\n")
    gains = tmp_path / "gains.yaml"
    gains.write_text(GAINS, encoding="utf-8")
    plots = tmp_path / "plots"
    code = main(["spread", str(schedule), "--gains", str(gains), "--json", "--quiet", "--plot", str(plots)])
    document = json.loads(capsys.readouterr().out)
    assert code == 1  # some draws violate the pole-radius bound
    assert document["interval"] == {"method": "clopper-pearson", "confidence": 0.95}
    assert document["draws_per_point"] == 400 and document["distribution"] == "uniform"
    first = document["points"][0]["specs"]["max_pole_radius"]
    assert first["violations"] == round(first["fraction"] * 400)
    assert first["interval"][0] <= first["fraction"] <= first["interval"][1]
    assert (plots / "spread.png").read_bytes().startswith(b"\x89PNG")
    assert (plots / ".gainloom-manifest.json").exists()
    assert main(["spread", str(schedule), "--gains", str(gains), "--quiet"]) == 1
    text = capsys.readouterr().out
    assert "Clopper-Pearson" in text and "worst draw per spec" in text and "max_pole_radius" in text


def test_command_refuses_a_schedule_without_draws(tmp_path, capsys):
    schedule = _schedule(tmp_path, "  samples: corners\n")
    gains = tmp_path / "gains.yaml"
    gains.write_text(GAINS, encoding="utf-8")
    assert main(["spread", str(schedule), "--gains", str(gains), "--quiet"]) == 2
    error = capsys.readouterr().err.strip()
    assert error.startswith("gainloom spread: error:") and "\n" not in error and "samples: 10000" in error


def test_merge_keeps_the_lowest_draw_among_equals_in_any_order():
    from gainloom.design.spread import UnitResult, merge_results

    def part(first_draw: int, badness: float) -> UnitResult:
        return UnitResult(
            point_index=np.array([0]), draws=np.array([10]), violations=np.array([[1]]),
            any_violations=np.array([1]), worst_badness=np.array([[badness]]), worst_draw=np.array([[first_draw]]),
            worst_value=np.array([[float(first_draw)]]), worst_factors=np.array([[[1.0 + first_draw]]]),
        )

    # -inf: a min-spec whose value is +inf at every draw (e.g. no phase crossover)
    for badness in (-np.inf, 0.5):
        parts = [part(30, badness), part(10, badness), part(20, badness)]
        for order in (parts, parts[::-1]):
            merged = merge_results(1, order, 1, 1)
            assert merged.worst_draw[0, 0] == 10 and merged.worst_factors[0, 0, 0] == 11.0
            assert merged.draws[0] == 30 and merged.violations[0, 0] == 3
