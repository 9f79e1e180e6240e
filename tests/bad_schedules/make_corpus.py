"""Generator of the corpus files in this folder (run: python make_corpus.py).

Each case edits a valid base schedule; the expected line and column written
into the file's header are where the marker text sits in the written file,
found by string search, not by running the loader.  empty_document.yaml is
written by hand.
"""
import os
import textwrap

BASE = textwrap.dedent('''\
name: corpus-base
variables:
  - name: speed
    unit: rpm
    values: [0, 1000, 2000, 3000]
parameters:
  Kt: 0.05
  J: "2.0e-4 * (1 + speed / 6000)"
  B: 1.0e-4
plant:
  transfer_function:
    numerator: ["Kt"]
    denominator: ["J", "B"]
sampling:
  period: 1.0e-4
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [-10, 10]
codegen:
  prefix: spd
  format: q15
''')
# (file, [(old, new)], expected fragment, key path or None, marker, marker occurrence offset, check column)
CASES = [
 ("yaml_tab_indent", [("  method: zoh", "\tmethod: zoh")], "YAML syntax error", None, "\tmethod", True),
 ("unknown_top_key", [("sampling:", "sampeling:")], "did you mean 'sampling'", "sampeling", "sampeling:", True),
 ("unknown_nested_key", [("numerator:", "numerater:")], "did you mean 'numerator'", "plant.transfer_function.numerater", "numerater:", True),
 ("missing_sampling", [("sampling:\n  period: 1.0e-4\n  method: zoh\n  delay: 1\n", "")], "missing required key 'sampling'", "sampling", "name: corpus", True),
 ("missing_period", [("  period: 1.0e-4\n", "")], "missing required key 'period'", "sampling.period", "method: zoh", True),
 ("values_wrong_type", [("values: [0, 1000, 2000, 3000]", "values: fast")], "expected a list", "variables[0].values", "fast", True),
 ("expression_syntax", [('"2.0e-4 * (1 + speed / 6000)"', '"2.0e-4 * (1 + speed / "')], "cannot parse expression", "parameters.J", '"2.0e-4 * (1', False),
 ("unknown_name", [('["J", "B"]', '["Jx", "B"]')], "did you mean 'J'", "plant.transfer_function.denominator[0]", 'Jx"', True),
 ("circular_parameters", [("  B: 1.0e-4", '  B: "1.0e-4 * C"\n  C: "2 * B"')], "circular parameter definitions: B -> C -> B", "parameters.B", '"1.0e-4 * C"', True),
 ("division_by_zero", [("  B: 1.0e-4", '  B: "1.0e-4 / (speed - 2000)"')], "speed=2000 rpm", "parameters.B", '"1.0e-4 / (speed', True),
 ("sqrt_negative", [("  B: 1.0e-4", '  B: "sqrt(1000 - speed) * 1e-5"')], "not a number", "parameters.B", '"sqrt(1000', True),
 ("improper_tf", [('["Kt"]', '["Kt", "1", "2"]')], "improper transfer function", "plant.transfer_function.numerator", '["Kt", "1"', True),
 ("zero_leading_denominator", [('["J", "B"]', '["speed / 1000 - 1", "B"]')], "leading denominator coefficient", "plant.transfer_function.denominator[0]", '"speed / 1000 - 1"', True),
 ("zero_period", [("period: 1.0e-4", "period: 0")], "sample period must be positive", "sampling.period", "0\n  method", True),
 ("negative_period_at_point", [("period: 1.0e-4", 'period: "1.0e-4 - speed * 6e-8"')], "speed=2000 rpm", "sampling.period", '"1.0e-4 - speed', True),
 ("empty_grid", [("values: [0, 1000, 2000, 3000]", "values: []")], "at least 2 values", "variables[0].values", "[]", True),
 ("non_monotonic_grid", [("values: [0, 1000, 2000, 3000]", "values: [0, 1000, 900, 3000]")], "strictly increasing", "variables[0].values[2]", "900", True),
 ("table_not_covering", [("  B: 1.0e-4", "  B: {table: {over: speed, x: [0, 1000, 2500], y: [1.0e-4, 1.2e-4, 1.5e-4]}}")], "no extrapolation", "parameters.B.table.x", "[0, 1000, 2500]", True),
 ("unknown_structure", [("structure: pi", "structure: pii")], "did you mean 'pi'", "controller.structure", "pii", True),
 ("unknown_strategy", [("strategy: pole-cancel", "strategy: pole-cancellation")], "unknown design strategy", "controller.strategy", "pole-cancellation", True),
 ("bad_prefix_underscore", [("prefix: spd", "prefix: _spd")], "is not a C identifier", "codegen.prefix", "_spd", True),
 ("bad_prefix_double_underscore", [("prefix: spd", "prefix: spd__gain")], "double underscore", "codegen.prefix", "spd__gain", True),
 ("unknown_format", [("format: q15", "format: q16")], "unknown number format 'q16'", "codegen.format", "q16", True),
 ("tolerance_unknown_parameter", [("codegen:", "tolerances:\n  parameters: {Jm: 0.3}\ncodegen:")], "unknown parameter 'Jm'", "tolerances.parameters.Jm", "0.3}", True),
 ("tolerance_dependent_parameter", [("  B: 1.0e-4", '  B: "0.5 * J"'), ("codegen:", "tolerances:\n  parameters: {B: 0.2}\ncodegen:")], "computed from other parameters", "tolerances.parameters.B", "0.2}", True),
 ("prewarp_without_tustin", [("  delay: 1\n", "  delay: 1\n  prewarp: 300\n")], "prewarp applies only to method 'tustin'", "sampling.prewarp", "300\n", True),
 ("fractional_delay_tustin", [("method: zoh", "method: tustin"), ("delay: 1", "delay: 0.5")], "only method 'zoh' supports fractional delay", "sampling.delay", "0.5", True),
 ("bad_output_limits", [("output_limits: [-10, 10]", "output_limits: [10, -10]")], "low < high", "controller.output_limits", "[10, -10]", True),
 ("missing_target", [("strategy: pole-cancel", "strategy: dominant-pair")], "missing required key 'target'", "controller.target", "structure: pi", True),
 ("override_unknown_variable", [("codegen:", "specs:\n  min_damping: 0.6\n  overrides:\n    - where: {sped: [0, 1000]}\n      set: {min_damping: 0.5}\ncodegen:")], "did you mean 'speed'", "specs.overrides[0].where.sped", "[0, 1000]}\n      set", True),
 ("spec_out_of_range", [("codegen:", "specs:\n  min_damping: 1.5\ncodegen:")], "min_damping must be in (0, 1]", "specs.min_damping", "1.5", True),
 ("zpk_improper", [('  transfer_function:\n    numerator: ["Kt"]\n    denominator: ["J", "B"]', '  zpk:\n    zeros: [-1, -2]\n    poles: ["-B / J"]\n    gain: "Kt / J"')], "2 zeros but only 1 pole;", "plant.zpk.zeros", "[-1, -2]", True),
 ("state_space_shape", [('  transfer_function:\n    numerator: ["Kt"]\n    denominator: ["J", "B"]', '  state_space:\n    A: [["-B / J"]]\n    B: [["1 / J"], [0]]\n    C: [[1]]')], "B must be 1x1 for 1 state ", "plant.state_space.B", '[["1 / J"], [0]]', True),
 ("duplicate_key", [("  B: 1.0e-4", "  B: 1.0e-4\n  Kt: 0.06")], "duplicate key 'Kt'", "parameters.Kt", "Kt: 0.06", True),
 ("forbidden_call", [("  B: 1.0e-4", "  B: \"__import__('os').getpid()\"")], "only calls of the functions", "parameters.B", "\"__import__", False),
 ("caret_power", [('"2.0e-4 * (1 + speed / 6000)"', '"2.0e-4 * (1 + speed^2)"')], "use ** for powers", "parameters.J", '"2.0e-4 * (1 + speed^2)"', False),
 ("ts_in_parameter", [("  B: 1.0e-4", '  B: "1.0e-4 * ts / 1e-4"')], "available only in sampling.delay and plant.dead_time", "parameters.B", 'ts / 1e-4', True),
 ("too_many_variables", [("parameters:", "  - name: load\n    values: [0, 1]\n  - name: temp\n    values: [0, 1]\nparameters:")], "at most 2 scheduling variables", "variables", "- name: speed", True),
 ("monotone_unknown_coefficient", [("codegen:", "table:\n  monotone: {kd_b: increasing}\ncodegen:")], "unknown pi coefficient 'kd_b'", "table.monotone.kd_b", "increasing}", True),
 ("reserved_variable_name", [("  - name: speed", "  - name: pi"), ("speed / 6000", "pi / 6000")], "reserved", "variables[0].name", "pi\n", True),
 ("prewarp_above_nyquist", [("method: zoh", "method: tustin"), ("  delay: 1\n", "  delay: 1\n  prewarp: 40000\n")], "Nyquist", "sampling.prewarp", "40000", True),
 ("numerator_zero_at_point", [('["Kt"]', '["Kt * (speed - 1000)"]')], "numerator is identically zero at speed=1000 rpm", "plant.transfer_function.numerator", '["Kt * (speed', True),
 ("fractional_dead_time_foh", [("method: zoh", "method: foh"), ("    denominator: [\"J\", \"B\"]\n", "    denominator: [\"J\", \"B\"]\n  dead_time: 3.0e-5\n")], "fractional delay", "plant.dead_time", "3.0e-5", True),
 ("output_limits_wrong_type", [("output_limits: [-10, 10]", "output_limits: 10")], "expected a list", "controller.output_limits", "10\ncodegen", True),
 ("pid_without_filter", [("structure: pi", "structure: pid")], "missing required key 'derivative_filter'", "controller.derivative_filter", "structure: pid", True),
 ("two_plant_forms", [('    denominator: ["J", "B"]\n', '    denominator: ["J", "B"]\n  zpk: {poles: [-1], gain: 1}\n')], "exactly one of transfer_function, zpk, state_space; found transfer_function and zpk", "plant", "transfer_function:", True),
 ("nonfinite_number", [("  Kt: 0.05", "  Kt: .inf")], "finite number", "parameters.Kt", ".inf", True),
 ("bad_schedule_name", [("name: corpus-base", "name: 2-corpus")], "must start with a letter", "name", "2-corpus", True),
 ("p_without_zero", [("structure: pi", "structure: p")], "structure 'p' has none", "controller.strategy", "pole-cancel", True),
 ("unsupported_tag", [("  Kt: 0.05", "  Kt: !!python/object:os.system 0.05")], "unsupported YAML tag", "parameters.Kt", "!!python", True),
 # text that reaches the generated C (issue 14: security)
 ("unit_end_of_comment", [("unit: rpm", 'unit: "rpm */ int injected; /*"')], "'*/', which would end the comment", "variables[0].unit", '"rpm */', True),
 ("unit_newline", [("unit: rpm", 'unit: "rpm\\n#define injected 1"')], "control or invisible character U+000A", "variables[0].unit", '"rpm\\n', True),
 ("unit_line_comment", [("unit: rpm", 'unit: "rpm // x"')], "'//', which starts a line comment", "variables[0].unit", '"rpm //', True),
 ("unit_backslash_newline", [("unit: rpm", 'unit: "rpm\\\\"')], "can splice lines", "variables[0].unit", '"rpm\\\\', True),
 ("unit_trigraph", [("unit: rpm", 'unit: "rpm ??/"')], "can start a trigraph", "variables[0].unit", '"rpm ??/', True),
 ("unit_bidi_override", [("unit: rpm", 'unit: "rpm\\u202e"')], "invisible character U+202E", "variables[0].unit", '"rpm\\u202e', True),
 ("unit_control_character", [("unit: rpm", 'unit: "rpm\\x1b[31m"')], "U+001B", "variables[0].unit", '"rpm\\x1b', True),
 ("prefix_empty", [("prefix: spd", 'prefix: ""')], "prefix is empty", "codegen.prefix", '""', True),
 ("prefix_errno_space", [("prefix: spd", "prefix: Efoo")], "<errno.h>", "codegen.prefix", "Efoo", True),
 ("prefix_errno_macros", [("prefix: spd", "prefix: encoder")], "ENCODER_", "codegen.prefix", "encoder", True),
 ("prefix_signal_space", [("prefix: spd", "prefix: sigma")], "<signal.h>", "codegen.prefix", "sigma", True),
 ("prefix_stdint_space", [("prefix: spd", "prefix: int_loop")], "<stdint.h>", "codegen.prefix", "int_loop", True),
 ("prefix_standard_header", [("prefix: spd", "prefix: math")], "standard C header", "codegen.prefix", "math", True),
 # tracebacks that became located errors (issue 14): limits checked before evaluating or allocating
 ("expression_too_long", [("  B: 1.0e-4", '  B: "' + "-" * 1200 + '1e-4"')], "at most 1,000 are accepted", "parameters.B", '"----', True),
 ("expression_deep_parentheses", [("  B: 1.0e-4", '  B: "' + "(" * 300 + "1e-4" + ")" * 300 + '"')], "nests deeper than 100 levels", "parameters.B", '"(((', True),
 ("expression_deep_unary", [("  B: 1.0e-4", '  B: "' + "-" * 500 + '1e-4"')], "nests deeper than 100 levels", "parameters.B", '"----', True),
 ("expression_long_sum", [("  B: 1.0e-4", '  B: "' + "Kt+" * 200 + 'Kt"')], "nests deeper than 100 levels", "parameters.B", '"Kt+', True),
 ("expression_power_chain", [("  B: 1.0e-4", '  B: "' + "2**" * 200 + '1"')], "nests deeper than 100 levels", "parameters.B", '"2**', True),
 ("expression_huge_integer", [("  B: 1.0e-4", '  B: "' + "9" * 400 + ' * 1e-300"')], "beyond the floating-point range", "parameters.B", '"999', False),
 ("value_huge_integer", [("  B: 1.0e-4", "  B: " + "9" * 400)], "a number of 400 characters", "parameters.B", "999", True),
 ("tag_float_not_a_number", [("  B: 1.0e-4", "  B: !!float abc")], "'abc' cannot be read as a number", "parameters.B", "!!float", True),
 ("tag_int_fraction", [("  Kt: 0.05", "  Kt: !!int 1.5")], "'1.5' cannot be read as an integer", "parameters.Kt", "!!int", True),
 ("grid_count_huge", [("values: [0, 1000, 2000, 3000]", "values: {start: 0, stop: 3000, count: 1000000000000}")], "is 1,000,000,000,000; at most 20,000", "variables[0].values.count", "1000000000000", True),
 ("grid_count_digits", [("values: [0, 1000, 2000, 3000]", "values: {start: 0, stop: 3000, count: " + "9" * 300 + "}")], "about 10^299", "variables[0].values.count", "999", True),
 ("grid_too_many_points", [("values: [0, 1000, 2000, 3000]", "values: {start: 0, stop: 3000, count: 200}\n  - name: load\n    values: {start: 0, stop: 1, count: 200}")], "200 x 200 = 40,000 operating points", "variables", "- name: speed", True),
 ("sweep_count_huge", [("strategy: pole-cancel", "strategy: shape-sweep\n  sweep: {count: 1000000000}")], "sweep count is 1,000,000,000", "controller.sweep.count", "1000000000}", True),
 ("between_points_huge", [("codegen:", "table:\n  between_points: 100000000\ncodegen:")], "between_points is 100,000,000; at most 100", "table.between_points", "100000000", True),
 ("between_points_total", [("values: [0, 1000, 2000, 3000]", "values: {start: 0, stop: 3000, count: 3000}"), ("codegen:", "table:\n  between_points: 100\ncodegen:")], "299,900 intermediate points", "table.between_points", "100\ncodegen", True),
 ("refine_inserted_huge", [("codegen:", "table:\n  refine: {max_inserted: 100000000}\ncodegen:")], "max_inserted is 100,000,000; at most 1,000", "table.refine.max_inserted", "100000000}", True),
 ("tolerance_samples_huge", [("codegen:", "tolerances:\n  parameters: {Kt: 0.1}\n  samples: {space_filling: 1000000000}\ncodegen:")], "sample count is 1,000,000,000", "tolerances.samples.space_filling", "1000000000}", True),
 ("tolerance_evaluations", [("values: [0, 1000, 2000, 3000]", "values: {start: 0, stop: 3000, count: 3000}"), ("codegen:", "tolerances:\n  parameters: {Kt: 0.1}\n  samples: {space_filling: 10000}\ncodegen:")], "30,000,000 loops to check", "tolerances.samples.space_filling", "10000}", True),
 ("delay_thousand_samples", [("delay: 1", "delay: 1000")], "computation delay is 1000 samples", "sampling.delay", "1000\n", True),
 ("delay_astronomical", [("delay: 1", "delay: 1.0e300")], "1e+300 samples", "sampling.delay", "1.0e300", True),
 ("dead_time_one_second", [('    denominator: ["J", "B"]\n', '    denominator: ["J", "B"]\n  dead_time: 1.0\n')], "dead time 1 s / ts 0.0001 s + computation delay 1 is 1e+04 samples", "plant.dead_time", "1.0\n", True),
 ("dead_time_megasecond", [('    denominator: ["J", "B"]\n', '    denominator: ["J", "B"]\n  dead_time: 1.0e6\n')], "1e+10 samples", "plant.dead_time", "1.0e6", True),
 ("period_tiny", [("period: 1.0e-4", "period: 1.0e-300")], "sample period 1e-300 s", "sampling.period", "1.0e-300", True),
 ("period_subnormal", [("period: 1.0e-4", "period: 5.0e-324")], "is outside 1e-09 .. 1000 s", "sampling.period", "5.0e-324", True),
 ("period_huge", [("period: 1.0e-4", "period: 1.0e300")], "sample period 1e+300 s", "sampling.period", "1.0e300", True),
 ("plant_order_200", [('["J", "B"]', "[" + ", ".join(["1"] * 201) + "]")], "plant of order 200; at most 30", "plant.transfer_function.denominator", "[1, 1", True),
 ("scalar_denominator", [('["J", "B"]', '["J"]')], "the plant is a static gain", "plant.transfer_function.denominator", '["J"]', True),
 ("zpk_without_poles", [('  transfer_function:\n    numerator: ["Kt"]\n    denominator: ["J", "B"]', '  zpk:\n    poles: []\n    gain: "Kt / J"')], "zpk without poles is a static gain", "plant.zpk.poles", "[]", True),
 ("output_full_scale_too_small", [("  format: q15", "  format: q15\n  output_full_scale: 1")], "output_full_scale 1 does not cover the output limits [-10, 10]", "codegen.output_full_scale", "output_full_scale: 1", False),
 ("prefix_derived_reserved", [("name: corpus-base", "name: edge-drive"), ("codegen:\n  prefix: spd\n", "codegen:\n")], "derived from the schedule name; set codegen.prefix", "name", "edge-drive", True),
]
out = os.path.dirname(os.path.abspath(__file__))
os.makedirs(out, exist_ok=True)
for name, edits, fragment, key, marker, check_col in CASES:
    body = BASE
    for old, new in edits:
        assert body.count(old) >= 1, (name, old)
        body = body.replace(old, new, 1)
    # header: 5 comment lines, fixed count so positions are known before writing
    def header(line, col, fragment=fragment, key=key, check_col=check_col):
        return (f"# expect: {fragment}\n# line: {line}\n# column: {col if check_col else '-'}\n"
                f"# key: {key if key else '-'}\n# Malformed on purpose (gainloom test corpus).\n")
    text = header(0, 0) + body
    head_len = len(header(0, 0))
    idx = body.index(marker)
    line = body[:idx].count("\n") + 1 + 5
    col = idx - (body.rfind("\n", 0, idx) + 1) + 1
    text = header(line, col) + body
    open(f"{out}/{name}.yaml", "w").write(text)
print(len(CASES))
