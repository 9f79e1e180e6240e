"""``verification.md`` of a cascade: the cascade's verdict, stages and checks,
then each loop's own log (inner first), rendered from the same document as
``verification.json``."""

from __future__ import annotations

from typing import Any

from .markdown import number, render_markdown, table_lines
from .markdown_cascade_target import cascade_target_section

__all__ = ["render_cascade_markdown"]


def _pair_lines(pair: dict[str, Any]) -> list[str]:
    outer, separation = pair["outer_specs_with_inner"], pair["bandwidth_separation"]
    worst = separation["worst"]
    corners = pair["corners_checked"]
    where = "every inner breakpoint and midpoint"
    if corners:
        where += f", nominal and at {corners} corners of the tolerances of both loops"
    checked = pair["pairs_checked"] * (corners + 1)
    lines = [f"### {pair['outer']} around {pair['inner']}", ""]
    lines += table_lines(["check", "result", "measured"], [
        [f"outer specs with the inner loop at {where}",
         "pass" if outer["passed"] else "FAIL",
         (f"{outer['failed_pairs']} of {checked} point pairs{' and corners' if corners else ''} fail; min GM "
         f"{number(outer['min_gain_margin_db'])} dB, min PM {number(outer['min_phase_margin_deg'])} deg")],
        ["bandwidth separation (inner / outer crossover)",
         "pass" if separation["passed"] else "FAIL",
         (f"min {number(separation['min_crossover_ratio'])}, required {number(separation['required'])}; at "
         f"{worst['outer_point']} with the inner loop at {worst['inner_point']}, {worst['corner']} "
         f"({number(worst['inner_crossover'])} / {number(worst['outer_crossover'])} rad/s)")],
    ])
    if corners:
        lines += ["Worst inner point and corner per outer grid point (most failing specs, then the least "
                  "relative slack; the binding spec is the one with that slack):", ""]
        lines += table_lines(["outer point", "inner point", "corner", "binding spec", "slack %", "GM dB", "PM deg",
                              "failing specs"],
                             [[w["outer_point"], w["inner_point"], w["corner_label"], w["binding_spec"] or "-",
                               number(100 * w["binding_slack"]), number(w["gain_margin_db"]),
                               number(w["phase_margin_deg"]), ", ".join(w["failed_specs"]) or "-"]
                              for w in outer["worst_per_point"]])
    if outer["failures"]:
        lines += table_lines(["outer point", "inner point", "corner", "failing specs"],
                             [[f["outer_point"], f["inner_point"], f["corner"], ", ".join(f["failed_specs"])]
                              for f in outer["failures"]])
    return lines


def _demoted(text: str) -> list[str]:
    """A loop's log one heading level down, below its own heading."""
    return [("#" + line) if line.startswith("#") else line for line in text.splitlines()]


def render_cascade_markdown(doc: dict[str, Any]) -> str:
    """The reviewer's log of a cascade from its plain verification document."""
    info = doc["cascade"]
    word = "PASS" if info["passed"] else "FAIL"
    lines = [f"# Cascade verification log: {info['path']}", "", f"**Verdict: {word}.**", ""]
    lines += [(f"Loops, inner first: {', '.join(info['loops'])}; one C module: {', '.join(info['c_files'])} "
              "(calling order in the header)."), ""]
    lines += table_lines(["stage", "result", "detail"],
                    [[s["stage"], s["status"], s["detail"]] for s in info["stages"]])
    lines += ["## Cascade checks", ""]
    for pair in info["checks"]["pairs"]:
        lines += _pair_lines(pair)
    simulation = info.get("simulation")
    if simulation is not None:
        lines += ["## Cascade run", "", f"Number format {simulation['number_format']}; "
                  f"{'stable' if simulation['stable'] else 'UNSTABLE'}; plot cascade_simulation.png.", ""]
        lines += table_lines(["loop", "samples", "saturated %", "step overshoot %", "settling s", "load peak deviation"],
                        [[r["name"], r["samples"], number(100 * r["metrics"]["saturation_fraction"]),
                          number(r["metrics"]["overshoot_percent"]), number(r["metrics"]["settling_time"]),
                          number(r["metrics"]["load_responses"][0]["peak_deviation"]
                                 if r["metrics"]["load_responses"] else None)]
                         for r in simulation["loops"]])
    if "target" in info:
        lines += cascade_target_section(info["target"])
    for loop in doc["loops"]:
        lines += [f"## Loop {loop['loop']['name']}", ""]
        lines += _demoted(render_markdown(loop))
        lines.append("")
    lines += ["## Caution", "", doc["caution"], ""]
    return "\n".join(line.rstrip() for line in lines).rstrip() + "\n"
