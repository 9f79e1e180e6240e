"""``verification.md``: the verification log for a human reviewer.

Rendered from the same plain document as ``verification.json`` (never from
the live objects), so both always say the same thing.  Order: verdict and
failed points first, then the per-point table, worst cases, whole-table
checks, quantisation, C check, simulation, warnings, safety cautions,
inputs with their SHA-256 and tool versions, plots.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["render_markdown", "number", "FAILED_ROWS"]

#: Failed points listed in the summary before the rest is counted by spec.
FAILED_ROWS = 40


def number(value: Any, digits: int = 4) -> str:
    """A logged number for reading: ``digits`` significant digits, ``-`` for missing."""
    if value is None:
        return "-"
    if isinstance(value, str):
        return {"inf": "∞", "-inf": "-∞", "nan": "-"}.get(value, value)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    value = float(value)
    if value == 0:
        return "0"
    if math.isfinite(value) and (abs(value) >= 1e5 or abs(value) < 1e-3):
        return f"{value:.{digits - 1}e}"
    return f"{value:.{digits}g}"


def _cell(text: Any) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def table_lines(headers: list[str], rows: list[list[Any]]) -> list[str]:
    lines = ["| " + " | ".join(headers) + " |", "|" + "|".join("---" for _ in headers) + "|"]
    lines += ["| " + " | ".join(_cell(c) for c in row) + " |" for row in rows]
    return lines + [""]


def _verdict_word(value: Any) -> str:
    return {True: "pass", False: "FAIL", None: "not checked"}[value]


def _summary(doc: dict[str, Any]) -> list[str]:
    verdict = doc["verdict"]
    lines = [f"# Verification log: {doc['inputs']['schedule']['path']}", ""]
    word = "PASS" if verdict["passed"] else "FAIL"
    lines.append(f"**Verdict: {word}.**" + ("" if verdict["passed"] else " " + "; ".join(verdict["reasons"]) + "."))
    lines.append("")
    lines += table_lines(
        ["check", "result"],
        [
            ["design at every grid point and whole-table checks", _verdict_word(verdict["design"])],
            ["rounding to the number format breaks no spec that held", _verdict_word(verdict["quantisation"])],
            ["generated C (compile + host harness)", _verdict_word(verdict["c_check"])],
            ["generated C on the target cores (cross-build, helpers, emulated run)",
             _verdict_word(verdict.get("target"))],
            ["coding rules (cppcheck, MISRA C:2012 with deviation records)", _verdict_word(verdict.get("c_rules"))],
            ["time-domain simulation", _verdict_word(verdict["simulation"])],
        ],
    )
    if verdict["not_checked"]:
        lines += [f"Not checked in this run: {', '.join(verdict['not_checked'])}.", ""]
    if verdict["failed_points"]:
        lines += ["## Failed points", ""]
        rows = []
        failed = verdict["failed_points"]
        for f in failed[:FAILED_ROWS]:
            rows.append([f["index"], f["label"], f["binding"] or "-", number(f["value"]), number(f["limit"]),
                         ", ".join(f["failed"]), " ".join(f["notes"]) or "-"])
        lines += table_lines(["#", "point", "binding spec", "value", "limit", "all failed specs",
                         "best reachable / notes"], rows)
        if len(failed) > FAILED_ROWS:
            counts: dict[str, int] = {}
            for f in failed:
                counts[f["binding"] or "-"] = counts.get(f["binding"] or "-", 0) + 1
            summary = ", ".join(f"{name} at {count}" for name, count in sorted(counts.items()))
            lines += [f"... and {len(failed) - FAILED_ROWS} more failed points (binding spec: {summary} points in "
                      "all); every one in verification.json `verdict.failed_points`.", ""]
    return lines


def _inputs(doc: dict[str, Any]) -> list[str]:
    inputs, tools = doc["inputs"], doc["tools"]
    lines = ["## Inputs and tools", ""]
    rows = [["schedule file", inputs["schedule"]["path"], f"`{inputs['schedule']['sha256']}`"]]
    if inputs["gains"] is not None:
        rows.append(["gains file", inputs["gains"]["path"], f"`{inputs['gains']['sha256']}`"])
    lines += table_lines(["input", "file", "SHA-256"], rows)
    lines.append("Tools: " + ", ".join(f"{k} {v}" for k, v in sorted(tools.items()) if v is not None) + ".")
    if tools.get("c_compiler") is None:
        lines.append("No C compiler result in this log.")
    lines.append("")
    sampling = doc["sampling"]
    lines.append(
        f"Sampled plant: hold `{sampling['hold']}`"
        + (f", prewarp {number(sampling['prewarp_rad_s'])} rad/s" if sampling["prewarp_rad_s"] is not None else "")
        + "; sample period and computation delay per point in the per-point table. "
        "How every number was computed: `method` in verification.json."
    )
    if doc["options"]:
        lines.append("")
        # nested options (e.g. the simulation scenario) are shown where they are used
        lines.append("Options: " + ", ".join(
            f"`{k}` = {'(see verification.json)' if isinstance(v, dict) else v}"
            for k, v in sorted(doc["options"].items())) + ".")
    if "timestamp" in doc:
        lines += ["", f"Written {doc['timestamp']}."]
    return lines + [""]


def _points(doc: dict[str, Any]) -> list[str]:
    names = doc["table"]["coefficient_names"]
    lines = ["## Per-point table", ""]
    headers = ["#", "point", "status", "ts [s]", "delay"] + names + [
        "ζ min", "ωn [rad/s]", "that pole from", "max \\|z\\|", "GM [dB]", "PM [deg]", "DM [s]", "Ms", "ωc [rad/s]", "ωb [rad/s]",
        "OS [%]", "Ts [s]"]
    rows = []
    for e in doc["points"]:
        status = "pass" if e["status"] == "pass" else f"FAIL ({e['binding']})"
        if e.get("compromise"):
            status += ", compromise"
        if e.get("warnings"):
            status += f" ⚠{len(e['warnings'])}"  # the Warnings section lists them
        rows.append([e["index"], e["label"], status, number(e["sample_period_s"]), number(e["delay_samples"])]
                    + [number(e["coefficients"][n], 6) for n in names]
                    + [number(e["damping"]), number(e["damping_pole"]["natural_frequency"]),
                       e["damping_pole"]["origin"]]
                    + [number(e[k]) for k in ("pole_radius", "gain_margin_db",
                                              "phase_margin_deg", "delay_margin_s", "sensitivity_peak",
                                              "crossover_rad_s", "bandwidth_rad_s",
                                              "overshoot_percent", "settling_time_s")])
    lines += table_lines(headers, rows)
    lines.append("Closed-loop poles in z and s of every point, physical gains and each spec's value, limit and "
                 "pass: `points` in verification.json.  ζ and ωn are those of the least-damped judged pole; "
                 "⚠n: n warnings on the point, listed under Warnings.")
    return lines + [""]


def _worst(doc: dict[str, Any]) -> list[str]:
    lines = ["## Worst case per spec", ""]
    rows = []
    for name, w in doc["worst_cases"].items():
        bound = "≥" if w["bound"] == "lower" else "≤"
        if name == "stable":
            bound = "<"
        rows.append([name, f"{bound} {number(w['limit'])}", number(w["value"]), number(w["margin"]),
                     number(w["relative_margin"], 3), f"{w['index']}: {w['label']}",
                     "pass" if w["pass"] else f"FAIL at {w['failing_points']} point(s)"])
    lines += table_lines(["spec", "limit", "worst value", "distance to limit", "relative", "at point", "result"], rows)
    lines.append("Distance to limit is positive on the passing side (for `stable`: 1 - largest |z|).")
    return lines + [""]


def _table_checks(doc: dict[str, Any]) -> list[str]:
    checks = doc["table_checks"]
    lines = ["## Whole-table checks", ""]
    between = checks["between_points"]
    tol = checks["tolerances"]
    rows = [
        ["smoothness (coefficient steps)", "pass" if not checks["smoothness"] else f"FAIL: {len(checks['smoothness'])} step(s)"],
        ["monotone coefficients", "pass" if not checks["monotone"] else f"FAIL: {len(checks['monotone'])} step(s)"],
        [f"between points ({between['checked']} intermediate points)",
         "pass" if not between["failing"] else f"FAIL at {len(between['failing'])} point(s)"],
        [f"tolerances ({tol['samples_per_point']} samples per point)",
         "pass" if not tol["failing"] else f"FAIL at {len(tol['failing'])} point(s)"],
    ]
    lines += table_lines(["check", "result"], rows)
    shown = 10

    def more(items: list) -> None:
        if len(items) > shown:
            lines.append(f"- ... and {len(items) - shown} more (verification.json `table_checks`)")

    for entry in checks["smoothness"][:shown]:
        lines.append(f"- step of {entry['coefficient']} along {entry['axis']} at {entry['index']}: "
                     f"{number(entry['step'])} > {number(entry['limit'])}")
    more(checks["smoothness"])
    for entry in checks["monotone"][:shown]:
        lines.append(f"- {entry['coefficient']} not {entry['direction']} along {entry['axis']} at {entry['index']}")
    more(checks["monotone"])
    for entry in between["failing"][:shown]:
        at = ", ".join(f"{k} = {number(v)}" for k, v in entry["point"].items())
        lines.append(f"- between points at {at}: {', '.join(entry['failed'])}")
    more(between["failing"])
    for entry in tol["failing"][:shown]:
        at = ", ".join(f"{k} = {number(v)}" for k, v in entry["point"].items())
        scale = ", ".join(f"{k} x{number(v)}" for k, v in entry["scale"].items())
        lines.append(f"- tolerance corner ({scale}) at {at}: {', '.join(entry['failed'])}")
    more(tol["failing"])
    for note in checks["smoothing"]:
        lines.append(f"- {note}")
    if checks["inserted"]:
        lines.append("- breakpoints inserted: " + ", ".join(f"{i['axis']} = {number(i['value'])}"
                                                             for i in checks["inserted"]))
    return lines + [""]


def _quantisation(doc: dict[str, Any]) -> list[str]:
    q = doc["quantisation"]
    lines = ["## Quantisation", ""]
    if q is None:
        return lines + ["Not checked in this run.", ""]
    word = "pass: rounding breaks no spec" if q["passed"] else "FAIL: rounding breaks a spec"
    lines += [f"Format `{q['number_format']}`: **{word}**. Largest closed-loop pole shift "
              f"largest |dz| = {number(q['max_pole_shift'])}.", ""]
    lines += table_lines(["coefficient", "fraction bits", "scale", "largest rounding error"],
                    [[c["name"], "-" if c["frac"] is None else c["frac"], number(c["scale"]),
                      number(c["max_abs_error"])] for c in q["coefficients"]])
    rows = []
    for name, w in q["worst"].items():
        if name == "pole_shift":
            continue
        rows.append([name, "-" if w["label"] is None else w["label"], number(w["before"], 8), number(w["after"], 8),
                     number(w["change"])])
    lines += table_lines(["quantity", "worst point", "before", "after", "change (negative: worse)"], rows)
    for b in q["broken"]:
        lines.append(f"- broken by rounding ({b['where']}): {b['spec']} at {b['point']}")
    lines += _filter_rounding(q.get("filters") or [])
    offsets = ", ".join(f"{k} {number(v)}" for k, v in q["axis_offsets"].items())
    lines.append(f"Stored axis breakpoints differ from the designed ones by at most: {offsets} (axis units).")
    return lines + [""]


def _filter_rounding(sections: list[dict[str, Any]]) -> list[str]:
    """Filter sections' poles and zeros designed and stored (largest radius, largest frequency move)."""
    if not sections:
        return []
    lines = ["", "Filter sections after rounding (largest over the grid; a stored pole at |z| >= 1 fails):", ""]
    lines += table_lines(
        ["section", "pole radius designed / stored", "zero radius designed / stored", "pole frequency moved",
         "zero frequency moved", "stability margin"],
        [[f"{s['section']} ({s['kind']})", f"{number(s['pole_radius']['designed'], 9)} / "
          f"{number(s['pole_radius']['stored'], 9)}", f"{number(s['zero_radius']['designed'], 9)} / "
          f"{number(s['zero_radius']['stored'], 9)}", f"{number(100 * s['pole_frequency_change'])} %",
          f"{number(100 * s['zero_frequency_change'])} %", number(s["stability_margin"])] for s in sections])
    for s in sections:
        lines += [f"- FAIL: {text}" for text in s["failures"]] + [f"- warning: {text}" for text in s["warnings"]]
    return lines


def _c_check(doc: dict[str, Any]) -> list[str]:
    c = doc["c_check"]
    lines = ["## Generated C", ""]
    if c is None:
        return lines + ["Not checked in this run.", ""]
    if c["status"] == "no-compiler":
        return lines + ["Not checked: no C compiler found. This is neither a pass nor a failure: compile the "
                        "generated C with your firmware toolchain before use.", ""]
    lines.append(f"Status **{c['status']}**: {c['message']}")
    lines.append("")
    if c["compiler"] is not None:
        lines += table_lines(["item", "value"], [
            ["compiler", f"{c['compiler']} ({c['compiler_version']})"],
            ["flags", " ".join(c["flags"])],
            ["sanitizers", number(c["sanitizers"])],
            ["lookups / steps compared", f"{c['points']} / {c['steps']}"],
            ["worst gain error (tolerance)", f"{number(c['worst_gain_error'])} ({number(c['gain_tolerance'])})"],
            ["worst step error (tolerance)", f"{number(c['worst_step_error'])} ({number(c['step_tolerance'])})"],
        ])
    return lines


def _percent(fraction: Any) -> Any:
    """A logged fraction in percent; missing and non-finite markers as they are."""
    return 100 * fraction if isinstance(fraction, (int, float)) and not isinstance(fraction, bool) else fraction


def _measured(doc: dict[str, Any]) -> list[str]:
    m = doc.get("measured")
    if m is None:
        return []
    lines = ["## Measured data", "",
             f"**{'pass' if m['passed'] else 'FAIL'}**: the table's frequency specs judged again on the raw "
             "sweep samples (zero-order hold and computation delay applied on the data's grid); the design "
             "ran on the fitted models.", ""]
    if m.get("between_points_model"):
        rule = m["between_points_model"]
        lines += [f"{rule[:1].upper()}{rule[1:]}.", ""]
    rows = [[e["index"], e["label"], number(e["gain_margin_db"]), number(e["phase_margin_deg"]),
             number(e["crossover_rad_s"]), number(e["sensitivity_peak"]),
             f"{number(100 * e['fit_error'])} / {number(100 * e['fit_error_near_crossover'])}",
             number(_percent(e.get("step_deviation_bound"))),
             "pass" if e["passed"] else "FAIL: " + "; ".join(e["failed"])] for e in m["points"]]
    lines += table_lines(["#", "point", "GM [dB]", "PM [deg]", "ωc [rad/s]", "Ms", "fit error % (all / near ωc)",
                          "step ± % (data vs model)", "on the data"], rows)
    notes = [f"- {e['label']}: {note}" for e in m["points"] for note in e["coverage"]]
    return lines + (notes + [""] if notes else [])


def _simulation(doc: dict[str, Any]) -> list[str]:
    s = doc["simulation"]
    lines = ["## Simulation", ""]
    if s is None:
        return lines + ["Not run.", ""]
    word = "pass" if s["passed"] else "FAIL"
    lines.append(f"**{word}**: {s['structure']} controller in {s['number_format']}, {s['samples']} samples, "
                 f"{'stable' if s['stable'] else 'UNSTABLE'}.")
    lines.append("")
    metrics = s.get("metrics") or {}
    if metrics:
        rows = [["tracking error RMS / max", f"{number(metrics['rms_error'])} / {number(metrics['max_error'])}"]]
        if metrics.get("step_time") is not None:
            settling = metrics["settling_time"]
            rows.append([f"reference step of {number(metrics['step_size'])} at {number(metrics['step_time'])} s",
                         f"overshoot {number(metrics['overshoot_percent'])} %, settling "
                         + ("not settled" if settling is None else f"{number(settling)} s")])
        for load in metrics.get("load_responses", []):
            recovery = load["recovery_time"]
            rows.append([f"load step of {number(load['amplitude'])} at {number(load['time'])} s",
                         f"peak deviation {number(load['peak_deviation'])}, recovery "
                         + ("not recovered" if recovery is None else f"{number(recovery)} s")])
        rows.append(["time in saturation", f"{number(metrics['saturation_time'])} s "
                     f"({number(None if metrics['saturation_fraction'] is None else 100 * metrics['saturation_fraction'])} "
                     "% of the run)"])
        instability = metrics.get("instability") or {}
        if instability:
            rows.append(["stability", ("UNSTABLE (" + str(instability["kind"]) + "): " if instability["detected"]
                                       else "ok: ") + str(instability["detail"])])
        lines += table_lines(["measured", "value"], rows)
    scenario = (doc.get("options") or {}).get("simulation_scenario")
    if isinstance(scenario, dict) and scenario.get("kind") == "default":
        ramp, load = scenario["ramp"], scenario["load_step"]
        held = ", ".join(f"{k} = {number(v)}" for k, v in scenario["held"].items())
        lines += [
            f"Default scenario (time scale T = {number(scenario['time_scale_s'])} s: "
            f"{scenario['time_scale_basis']}): {ramp['variable']} held at {number(ramp['from'])} until "
            f"{number(ramp['start_s'])} s, ramped to {number(ramp['to'])} by {number(ramp['end_s'])} s, then held"
            + (f"; {held} held" if held else "")
            + "; unit reference step at 0 s; "
            + (f"load step of {number(load['amplitude'])} at {number(load['time_s'])} s; " if load["amplitude"]
               else "no load step; ")
            + f"{number(scenario['duration_s'])} s in all. Passes when {scenario['pass_rule']}.",
            "",
        ]
        lines += [f"- note: {n}" for n in scenario.get("notes", [])] + ([""] if scenario.get("notes") else [])
    if s["checks"]:
        lines += table_lines(["scenario spec", "limit", "value", "result"],
                        [[c["name"], number(c["limit"]), number(c["value"]), "pass" if c["passed"] else "FAIL"]
                         for c in s["checks"]])
    return lines


def _warnings(doc: dict[str, Any]) -> list[str]:
    lines = ["## Warnings", ""]
    per_point = [f"- {e['label']}: {w}" for e in doc["points"] for w in e.get("warnings", [])]
    if not doc["warnings"] and not per_point:
        return lines + ["None.", ""]
    return lines + [f"- {w}" for w in doc["warnings"]] + per_point + [""]


def _cautions(doc: dict[str, Any]) -> list[str]:
    return ["## Safety", ""] + [f"- {c}" for c in doc["cautions"]] + [""]


def _plots(doc: dict[str, Any]) -> list[str]:
    if not doc["plots"]:
        return []
    lines = ["## Plots", ""]
    for name in doc["plots"]:
        lines += [f"![{name}]({name})", ""]
    return lines


def render_markdown(doc: dict[str, Any]) -> str:
    """The reviewer's log from the plain verification document."""
    lines: list[str] = []
    from .markdown_target import target_section  # it uses this module's table writer

    for part in (_summary, _points, _worst, _measured, _table_checks, _quantisation, _c_check, target_section, _simulation,
                 _warnings, _cautions, _inputs, _plots):
        lines += part(doc)
    text = "\n".join(line.rstrip() for line in lines).rstrip() + "\n"
    return text
