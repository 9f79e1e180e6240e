"""The "Target cores" section of ``verification.md``: builds, helpers, sizes,
emulated runs and instruction counts per core, and the coding-rule check."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from .markdown import (
    number,
    table_lines,  # the one Markdown table writer of the log
)

__all__ = ["function_rows", "helpers_text", "rules_lines", "spread_text", "target_lines", "target_section"]


def spread_text(spread: dict[str, Any] | None) -> str:
    if not spread or not spread["calls"]:
        return "-"
    return f"{spread['min']} / {number(spread['median'])} / {spread['max']}"


def helpers_text(function: dict[str, Any]) -> str:
    if not function["helpers"]:
        return "none"
    kinds: dict[tuple[str, bool], list[str]] = {}
    for h in function["helpers"]:
        kinds.setdefault((h["kind"], h["allowed"]), []).append(h["symbol"])
    return "; ".join(f"{kind}{'' if allowed else ' (NOT acceptable)'}: {', '.join(symbols)}"
                     for (kind, allowed), symbols in kinds.items())


def function_rows(core: dict[str, Any]) -> list[list[Any]]:
    """One table row per public function of a core's build: code and stack bytes, helpers called."""
    return [[core["core"], f["name"], f["code_bytes"], "-" if f["stack_bytes"] is None else f["stack_bytes"],
             helpers_text(f)] for f in core["build"]["functions"]]


def _cores(target: dict[str, Any]) -> list[str]:
    rows, functions = [], []
    for core in target["cores"]:
        build, run, counts = core["build"], core["emulated_run"], core["instructions"]
        compiled = ", ".join(f"{std} {'clean' if ok else 'FAILS'}" for std, ok in build["compiled"].items())
        rows.append([
            core["label"], core["machine"], compiled, build["flash_bytes"], build["ram_bytes"], build["table_bytes"],
            spread_text(counts["lookup"]) if counts else "-", spread_text(counts["step"]) if counts else "-",
            "-" if run is None else f"{run['status']}: {run['message']}",
        ])
        functions += function_rows(core)
    lines = table_lines(["core", "emulated on", "build", "flash B", "RAM B", "tables B",
                         "instructions per lookup (min / median / max)", "per step (min / median / max)",
                         "emulated run"], rows)
    lines += table_lines(["core", "function", "code B", "stack B", "runtime helpers called"], functions)
    tools = target["toolchain"]
    lines += [f"Instruction counts: {target['instruction_method']}.  Built with {tools['gcc']}; "
              f"emulated with {tools['qemu']}.", ""]
    return lines


def rules_lines(rules: dict[str, Any] | None) -> list[str]:
    lines = ["### Coding rules: cppcheck and MISRA C:2012", ""]
    if rules is None:
        return lines + ["Not checked in this run.", ""]
    lines += [f"Status **{rules['status']}**: {rules['message']}", ""]
    if rules["undocumented"]:
        lines += table_lines(["file", "line", "finding"],
                             [[f["file"], f["line"], f["rule"]] for f in rules["undocumented"]])
    if rules["deviations"]:
        lines += ["Deviation records (docs/codegen.md):", ""]
        lines += table_lines(["rule", "findings", "reason"],
                             [[d["rule"], d["findings"], d["reason"]] for d in rules["deviations"]])
    return lines


def target_lines(target: dict[str, Any] | None, subject: str,
                 body: Callable[[dict[str, Any]], list[str]]) -> list[str]:
    """Markdown lines of a "Target cores" section: not run, not checked (tools missing) or
    checked (status line, then ``body(target)``), and the coding rules last.

    ``subject`` names what the firmware team must build themselves when the
    tools were missing ("the generated C", "the module").
    """
    lines = ["## Target cores", ""]
    if target is None:
        return lines + ["Not checked in this run.", ""]
    if target["status"] == "not-checked":
        lines += [f"Not checked: {target['message'].removeprefix('not checked: ')}. This is neither a pass nor "
                  f"a failure: build and run {subject} with your firmware toolchain before use.", ""]
    else:
        lines += [f"Status **{target['status']}** ({target['number_format']}): {target['message']}", ""]
        lines += body(target)
    return lines + rules_lines(target["rules"])


def target_section(doc: dict[str, Any]) -> list[str]:
    """Markdown lines of the target section (``doc["target"]`` may be null)."""
    return target_lines(doc.get("target"), "the generated C", _cores)
