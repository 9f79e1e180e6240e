"""Cascade files: the demo loads as documented, and every new key refuses bad
input with one located message (file, line, key path).  Each bad file is the
demo with one edit; the expected line is where the edited text sits."""

from __future__ import annotations

from pathlib import Path

import pytest

from gainloom import load_cascade, load_schedule
from gainloom.errors import ScheduleError
from gainloom.schedule.cascade import is_cascade_file

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "servo_cascade.yaml"
TEXT = DEMO.read_text(encoding="utf-8")

_THIRD_LOOP = """  - name: position
    variables: [{name: speed, values: [0, 6000]}]
    plant: {transfer_function: {numerator: [1], denominator: [1, 0]}}
    sampling: {period: 1.0e-3}
    controller: {structure: p, strategy: dominant-pair, target: {damping: 0.7, natural_frequency: 10}, output_limits: [-1, 1]}
cascade:"""

# (id, old text, new text, message fragment, key path, text marking the line)
CASES = [
    ("period_not_multiple", "period: 5.0e-4 ", "period: 5.1e-4 ", "whole multiple of loop 'current'",
     "loops[1].sampling.period", "period: 5.1e-4"),
    ("outer_hold_tustin", "      period: 5.0e-4                                  # 2 kHz, 8 current-loop periods\n      method: zoh",
     "      period: 5.0e-4\n      method: tustin", "needs hold method 'zoh'", "loops[1].sampling.method", "method: tustin"),
    ("inner_at_unknown", "inner_at: {current: 10, temperature: 40}", "inner_at: {current: 10, temprature: 40}",
     "did you mean 'temperature'", "loops[1].inner_at.temprature", "temprature"),
    ("inner_at_outside", "inner_at: {current: 10,", "inner_at: {current: 50,", "outside the inner loop's grid",
     "loops[1].inner_at.current", "current: 50"),
    ("loop_name_upper", "  - name: speed\n", "  - name: Speed\n", "lower-case", "loops[1].name", "name: Speed"),
    ("loop_name_twice", "  - name: speed\n", "  - name: current\n", "used twice", "loops[1].name",
     "# V\n  - name: current"),
    ("three_loops", "cascade:", _THIRD_LOOP, "at most 2 loops", "loops[2]", "  - name: position"),
    ("ratio_below_one", "min_crossover_ratio: 4", "min_crossover_ratio: 0.5", "at least 1",
     "cascade.min_crossover_ratio", "min_crossover_ratio: 0.5"),
    ("cascade_unknown_key", "min_crossover_ratio: 4", "min_ratio: 4", "did you mean 'min_crossover_ratio'",
     "cascade.min_ratio", "min_ratio: 4"),
    ("outer_fractional_delay", "delay: 1                                        # one speed-loop",
     "delay: 0.5                                      # one speed-loop", "whole number of its samples",
     "loops[1].sampling.delay", "delay: 0.5"),
    ("outer_tuning_rule", "strategy: shape-sweep\n      objective: max-crossover",
     "strategy: symmetric-optimum", "tunes from a continuous plant", "loops[1].controller.strategy",
     "strategy: symmetric-optimum"),
    ("cascade_full_scale", "  prefix: servo\n", "  prefix: servo\n  output_full_scale: 20\n", "unknown key",
     "codegen.output_full_scale", "  prefix: servo\n  output_full_scale: 20"),
    ("loop_prefix", "      error_full_scale: 40 ", "      prefix: cur\n      error_full_scale: 40 ", "unknown key",
     "loops[0].codegen.prefix", "prefix: cur"),
    ("inner_at_on_inner", "    sampling:\n      period: 6.25e-5",
     "    inner_at: {current: 1}\n    sampling:\n      period: 6.25e-5", "innermost loop", "loops[0].inner_at",
     "inner_at: {current: 1}"),
    ("outer_dead_time", "        denominator: [\"J\", \"B\"]", "        denominator: [\"J\", \"B\"]\n      dead_time: 1.0e-4",
     "takes no dead_time", "loops[1].plant.dead_time", "dead_time: 1.0e-4"),
    ("loop_key_error_located", "        numerator: [\"Kt\"]", "        numerater: [\"Kt\"]", "did you mean 'numerator'",
     "loops[1].plant.transfer_function.numerater", "numerater"),
    ("one_loop", TEXT[TEXT.index("  - name: speed"):TEXT.index("cascade:")], "", "at least 2 loops", "loops", "  - name: current"),
]


def _line_of(text: str, marker: str) -> int:
    """1-based line of the marker's last line (markers may carry lines before it to be unique)."""
    return text[: text.index(marker)].count("\n") + marker.count("\n") + 1


@pytest.mark.parametrize("old,new,fragment,key,marker", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_cascade_is_refused_at_the_right_place(tmp_path, old, new, fragment, key, marker):
    assert old in TEXT, old
    text = TEXT.replace(old, new, 1)
    path = tmp_path / "bad.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ScheduleError) as caught:
        load_cascade(path)
    error = caught.value
    assert fragment in error.message, str(error)
    assert error.key_path == key, str(error)
    assert error.line == _line_of(text, marker), str(error)
    assert "\n" not in str(error) and str(error).startswith(f"{path}:")


def test_demo_loads_with_its_rates_and_operating_point():
    cascade = load_cascade(DEMO)
    inner, outer = cascade.loops
    assert (inner.name, outer.name) == ("current", "speed")
    # 5e-4 s over 6.25e-5 s: the speed loop runs every 8th PWM period (the file's own numbers)
    assert outer.rate_factor == 8 and inner.rate_factor == 1
    assert outer.inner_at == {"current": 10.0, "temperature": 40.0}
    assert outer.shared == ()
    assert inner.schedule.codegen.prefix == "servo_current" and outer.schedule.codegen.prefix == "servo_speed"
    assert inner.schedule.codegen.format == outer.schedule.codegen.format == "q15"
    assert cascade.cascade.min_crossover_ratio == 4


def test_inner_at_defaults_to_the_middle_of_each_range(tmp_path):
    path = tmp_path / "default.yaml"
    path.write_text(TEXT.replace("    inner_at: {current: 10, temperature: 40}", ""), encoding="utf-8")
    # current grid 0..30 A, temperature -20..100 degC (the demo's grids)
    assert load_cascade(path).loops[1].inner_at == {"current": 15.0, "temperature": 40.0}


def test_single_loop_loader_points_to_the_cascade_loader():
    assert is_cascade_file(DEMO)
    with pytest.raises(ScheduleError, match="load_cascade"):
        load_schedule(DEMO)
