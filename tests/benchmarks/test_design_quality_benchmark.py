"""The design-quality benchmark: its independent reference, checked from outside, and the tool on its loops.

The reference (benchmarks/design_reference.py) must itself be right before
its ratios mean anything, so it is checked against python-control's
``stability_margins``, against closed forms, and against a coarse
python-control brute force.  The tool's designs on the benchmark loops are
re-checked with the reference's own margin code.  The benchmark's goals
(issue 9) are asserted too; where the tool does not reach one yet the case is
marked xfail (not strict) with the measured shortfall, so it flips to pass.
"""

import importlib.util
import math
import sys
import warnings
from pathlib import Path

import control
import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]


def _module(name: str):
    spec = importlib.util.spec_from_file_location(name, ROOT / "benchmarks" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


ref = _module("design_reference")
bench = _module("design_quality")


def _control_margins(plant, cnum, cden):
    """python-control's gain margin (dB), phase margin and gain crossover of the sampled loop."""
    loop = control.TransferFunction(np.polymul(cnum, plant.num), np.polymul(cden, plant.den), dt=plant.ts)
    with warnings.catch_warnings():
        # python-control evaluates the loop at z = 1, the PI's integrator pole
        warnings.simplefilter("ignore", RuntimeWarning)
        gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(loop)
    return 20 * math.log10(gm), pm, wgc


def test_first_order_fractional_delay_matches_modified_z_transform():
    # ZOH of 1/(s + a) with a delay of (1 + f) samples; closed form of the
    # modified z-transform (e.g. Franklin, Powell & Workman, Digital Control
    # of Dynamic Systems, delay chapter; from memory):
    # G(z) = [(1 - e^{-a(1-f)T}) z + (e^{-a(1-f)T} - e^{-aT})] / (a z (z - e^{-aT})) z^{-1}
    a, ts, f = 175.0, 6.25e-5, 0.5
    plant = ref.sample_plant([1.0], [1.0, a], ts, 1 + f)
    w = ref.frequency_grid(ts, 50)
    z = np.exp(1j * w * ts)
    e1, e = math.exp(-a * (1 - f) * ts), math.exp(-a * ts)
    closed = ((1 - e1) * z + (e1 - e)) / (a * z * (z - e)) / z
    np.testing.assert_allclose(plant.response(w), closed, rtol=1e-10)
    np.testing.assert_allclose(np.polyval(plant.num, z) / np.polyval(plant.den, z), closed, rtol=1e-9)


def test_whole_sample_delay_matches_scipy_cont2discrete():
    import scipy.signal

    num, den, ts = [0.12], [1.6e-7, 4.0e-4, 2.0e-5], 1.25e-4
    plant = ref.sample_plant(num, den, ts, 1.0)
    dnum, dden, _ = scipy.signal.cont2discrete((num, den), ts, method="zoh")  # scipy reference
    w = ref.frequency_grid(ts, 50)
    z = np.exp(1j * w * ts)
    expected = np.polyval(np.ravel(dnum), z) / np.polyval(dden, z) / z
    np.testing.assert_allclose(plant.response(w), expected, rtol=1e-8)


def test_margins_of_integrator_with_one_sample_delay_match_closed_forms():
    # L(z) = K / (z (z - 1)): ZOH of 1/s at T = 1 with one sample of delay.
    # Closed forms (derived here): |e^{jθ} - 1| = 2 sin(θ/2), so the crossover
    # is θ_c = 2 asin(K/2) and arg L = -θ - (π + θ)/2, PM = 90° - 1.5 θ_c;
    # z² - z + K is stable for K < 1 (Jury), so GM = 1/K.
    K = 0.5
    plant = ref.sample_plant([1.0], [1.0, 0.0], 1.0, 1.0)
    m = ref.evaluate(plant, np.array([K]), np.array([1.0]))
    theta = 2 * math.asin(K / 2)
    assert m.stable
    assert m.crossover == pytest.approx(theta, rel=1e-6)
    assert m.phase_margin == pytest.approx(90 - 1.5 * math.degrees(theta), abs=1e-3)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(1 / K), abs=1e-6)


@pytest.fixture(scope="module")
def slice_designs():
    """Reference designs (PI and lead) at the current loop's two inductance ends, 40 degC."""
    out = []
    for L in (2.0e-3, 0.8e-3):
        plant = ref.sample_plant([1.0], [L, 0.35 * (1 + 0.00393 * 20)], 6.25e-5, 1.5)
        for structure in ("pi", "lead"):
            out.append((plant, structure, ref.best_design(plant, structure, 55.0, 8.0)))
    return out


def test_reference_designs_meet_the_margins_by_python_control(slice_designs):
    for plant, structure, design in slice_designs:
        assert design.feasible
        cnum, cden = ref.controller_polynomials(structure, design.coefficients)
        gm_db, pm, wgc = _control_margins(plant, cnum, cden)  # python-control reference
        ours = ref.evaluate(plant, cnum, cden)
        assert pm >= 55.0 - 0.01 and gm_db >= 8.0 - 0.01
        assert ours.phase_margin == pytest.approx(pm, abs=0.01)
        assert ours.gain_margin_db == pytest.approx(gm_db, abs=0.01)
        assert ours.crossover == pytest.approx(wgc, rel=1e-4)
        assert design.crossover == pytest.approx(wgc, rel=1e-4)
        # one of the two margins binds at the best design (else more gain would do)
        assert min(pm - 55.0, gm_db - 8.0) < 0.1


def test_reference_beats_a_python_control_brute_force(slice_designs):
    # an outside search: kp x ki_ts grid, margins by python-control, best crossover meeting both
    plant, structure, design = slice_designs[0]
    assert structure == "pi"
    best = 0.0
    for kp in np.geomspace(2.0, 20.0, 18):
        for ki in np.geomspace(1e-4, 1.0, 8) * kp:
            gm_db, pm, wgc = _control_margins(plant, *ref.controller_polynomials("pi", {"kp": kp, "ki_ts": ki}))
            if pm >= 55 and gm_db >= 8 and math.isfinite(wgc):
                best = max(best, wgc)
    assert best > 0
    assert design.crossover >= best * (1 - 1e-6)
    assert design.crossover <= best * 1.1  # the grid is coarse, not far off


@pytest.fixture(scope="module")
def quick_results(tmp_path_factory):
    folder = tmp_path_factory.mktemp("loops")
    return [bench.run_loop(name, "pi", folder, quick=True) for name in bench.LOOPS]


def test_benchmark_rebuilds_the_tools_sampled_plants(quick_results):
    for r in quick_results:
        assert r.plant_difference < 1e-8, r.name


def test_tool_designs_meet_their_specs_when_rechecked(quick_results):
    for r in quick_results:
        assert r.recheck_failed == 0, r.name
        assert r.reference_infeasible == 0, r.name


#: Where the tool does not reach an issue-9 goal (DEVELOPERS.md "Benchmarks",
#: docs/design.md "Published tuning rules"): at the modulus optimum's own
#: margins the best PI of all (the reference) reaches only 1.007 of the rule's
#: crossover, so any price paid for something else ends below the rule.
#: Measured on the quick slice, tool / rule: 0.964 as designed (3 % integral
#: budget and 0.1 dB / 0.1 deg back-off), 0.994 without the integral budget,
#: 1.005 without both.  Both prices are by design; the rule's own gains come
#: from ``strategy: modulus-optimum``.
SHORT_OF_RULE = pytest.mark.xfail(
    strict=True,
    reason="issue 9 item 8, by design on current_rl: max-crossover reaches 0.964 of the modulus "
    "optimum's crossover at its margins; the best PI reaches 1.007, the integral budget costs 3 % "
    "and the margin back-off 0.6 %",
)


def _rule_cases(names):
    return [pytest.param(n, marks=SHORT_OF_RULE) if n == "current_rl" else n for n in names]


@pytest.mark.parametrize("name", list(bench.LOOPS))
def test_goal_crossover_ratio_and_no_wrong_infeasible(quick_results, name):
    # issue 9 item 3: at least 0.95 of the reference's crossover at every point,
    # no point called infeasible where the reference found a controller
    r = next(r for r in quick_results if r.name == name)
    assert r.wrong_infeasible == 0
    assert np.min(r.ratio) >= 0.95


def test_goal_coefficient_steps_within_the_references(tmp_path):
    # issue 9 item 6: each coefficient's largest relative step between neighbours
    # at most 1.5 x the reference table's own plus 0.05, on a whole grid (the
    # quick slice's neighbours are the ends of the range)
    r = bench.run_loop("fan_speed", "pi", tmp_path, quick=False, grid=bench.QUICK_GRID)
    for name, (tool, reference) in r.steps.items():
        assert tool <= 1.5 * reference + 0.05, name


@pytest.fixture(scope="module")
def boost_lead(tmp_path_factory):
    return bench.run_loop("boost_voltage", "lead", tmp_path_factory.mktemp("boost"), quick=False, grid=bench.QUICK_GRID)


@pytest.mark.parametrize("coefficient", ["kc", "zc"])
def test_goal_lead_steps_on_the_boost_loop(boost_lead, coefficient):
    # issue 9 item 6 on the lead structure, the loop where the steps were furthest off:
    # at most 1.5 x the independent reference table's own step plus 0.05.  The pole
    # (pc) is left out: the reference's pole sits at z = 0 on the full grid (step 0,
    # the tool's is 0.17, DEVELOPERS.md "Benchmarks") but not on this test's coarse
    # grid, so a check here would measure the grid, not the tool
    tool, reference = boost_lead.steps[coefficient]
    assert tool <= 1.5 * reference + 0.05
    assert boost_lead.recheck_failed == 0


@pytest.fixture(scope="module")
def rule_results(tmp_path_factory):
    folder = tmp_path_factory.mktemp("rules")
    return [bench.run_rule(name, rule, folder, quick=True) for name, rule in bench.LOOPS.items() if rule]


def test_reference_reaches_the_published_rules_at_their_own_margins(rule_results):
    # the rule's own PI meets its own margins, so the best PI at those margins
    # (the reference) must reach at least the rule's crossover; the modulus
    # optimum is close to the best PI for its margins (within 5 %)
    for r in rule_results:
        assert np.all(r.reference_ratio >= 1 - 1e-3), r.name
        if r.rule == "modulus-optimum":
            assert np.all(r.reference_ratio <= 1.05), r.name
        if r.name == "fan_speed":
            continue  # its friction pole at speed is no integrator: more margin than the rule's
        # the rules' textbook margins on the near-ideal loops (from memory: MO 65.5°, SO 36.9°),
        # a few degrees lower on the sampled loop where delay is lumped as a lag
        textbook = 65.5 if r.rule == "modulus-optimum" else 36.87
        assert np.all(r.phase_margin <= textbook + 0.5) and np.all(r.phase_margin >= textbook - 10), r.name


@pytest.mark.parametrize("name", _rule_cases([n for n, rule in bench.LOOPS.items() if rule]))
def test_goal_max_crossover_reaches_the_published_rules(rule_results, name):
    # issue 9 item 8: max-crossover at the rule's own margins reaches at least the rule's crossover
    r = next(r for r in rule_results if r.name == name)
    assert np.all(r.tool_ratio >= 1 - 1e-3)


def test_main_prints_every_loop(quick_results, rule_results, capsys, monkeypatch):
    # the printing path, on the results already computed above
    by_name = {r.name: r for r in quick_results}
    rules = {r.name: r for r in rule_results}
    monkeypatch.setattr(bench, "run_loop", lambda name, structure, folder, quick: by_name[name])
    monkeypatch.setattr(bench, "run_rule", lambda name, rule, folder, quick: rules[name])
    code = bench.main(["--quick"])
    out = capsys.readouterr().out
    assert code == 0
    for name in bench.LOOPS:
        assert f"{name} pi: 4 points" in out or f"{name} pi: 2 points" in out
    assert "all: min ratio" in out
    assert "current_rl modulus-optimum" in out and "boost_voltage: no published rule" in out


def test_loop_files_load_as_written():
    # the benchmark loops are plain schedule files a user could run with `gainloom design`
    import gainloom

    files = sorted(bench.LOOPS_DIR.glob("*.yaml"))
    assert [f.stem for f in files] == sorted(bench.LOOPS)
    for path in files:
        sched = gainloom.load_schedule(path)
        assert sched.controller.objective == "max-crossover", path.name


def test_boost_loop_passes_between_its_loads_by_an_independent_recheck(tmp_path):
    # issue 9: max-crossover puts every load on its phase-margin bound, and the
    # firmware's linear interpolation of kp, ki_ts between loads then missed it
    # by up to 1.3 deg; the between-point back-off lowers K just enough.
    # Re-checked with the reference's own sampling and margins at loads the
    # tool's check did not use (eighths of each interval, not its quarters).
    import gainloom
    from gainloom.design.between_backoff import LOWEST_FACTOR

    sched = bench.loop_schedule("boost_voltage", "pi", tmp_path, quick=False)
    result = gainloom.design_table(sched)
    assert result.passed and not result.table_report.between
    loads = np.asarray(result.table.axes[0].values, float)
    kp, ki_ts = (np.asarray(result.table.coefficients[k], float) for k in ("kp", "ki_ts"))
    fractions = np.array([1, 3, 5, 7]) / 8
    between = (loads[:-1, None] + fractions * np.diff(loads)[:, None]).ravel()
    plants = bench.reference_plants(sched, between[:, None])
    pm = []
    for load, plant in zip(between, plants):
        coefficients = {"kp": float(np.interp(load, loads, kp)), "ki_ts": float(np.interp(load, loads, ki_ts))}
        m, ok = bench.recheck(plant, "pi", coefficients, 45.0, 6.0)  # the loop's written specs
        assert ok, (load, m.phase_margin, m.gain_margin_db)
        pm.append(m.phase_margin)
    # lowered just enough: the worst between-point margin stays near its bound
    assert min(pm) < 45.5
    moved = [w for ws in result.point_warnings for w in ws if w.startswith("between-point back-off")]
    assert len(moved) == loads.size
    for text in moved:
        percent = float(text.split("(")[1].split(" %")[0])
        assert -100 * (1 - LOWEST_FACTOR) <= percent < 0
