"""The "Target cores" section of a cascade's ``verification.md``: the module's
build per core, the base-period interrupt in the documented calling order,
each loop's emulated harness run and instruction counts, the coding rules."""

from __future__ import annotations

from typing import Any

from .markdown import number, table_lines
from .markdown_target import function_rows, spread_text, target_lines

__all__ = ["cascade_target_section"]


def _core_rows(target: dict[str, Any]) -> list[list[Any]]:
    rows = []
    for core in target["cores"]:
        build, interrupt = core["build"], core["interrupt"] or {}
        compiled = ", ".join(f"{std} {'clean' if ok else 'FAILS'}" for std, ok in build["compiled"].items())
        rows.append([core["label"], core["machine"], compiled, build["flash_bytes"], build["ram_bytes"],
                     build["table_bytes"], spread_text(interrupt.get("inner_only")),
                     spread_text(interrupt.get("with_outer")), number(interrupt.get("mean_per_base_period")),
                     "-" if interrupt.get("stack_bytes") is None else interrupt["stack_bytes"]])
    return rows


def _loop_rows(target: dict[str, Any]) -> list[list[Any]]:
    rows = []
    for core in target["cores"]:
        for loop in core["loops"]:
            counts, run = loop["instructions"], loop["emulated_run"]
            rows.append([core["core"], loop["name"], loop["rate_factor"],
                         spread_text(counts["lookup"]) if counts else "-",
                         spread_text(counts["step"]) if counts else "-",
                         "-" if run is None else f"{run['status']}: {run['message']}"])
    return rows


def cascade_target_section(target: dict[str, Any] | None) -> list[str]:
    """Markdown lines of a cascade's target section (``target`` as in verification.json, may be null)."""
    return target_lines(target, "the module", _checked_lines)


def _checked_lines(target: dict[str, Any]) -> list[str]:
    """The module's builds, interrupt, loops and functions per core, after a check."""
    lines = ["The interrupt at the base period, in the calling order of the header: every period the inner "
              "loop's lookup and step; every N-th period the outer loop's first.  Instructions of the functions "
              "called (the interrupt's own entry and branching not counted); stack: the deepest of those "
              "functions (they are called one after the other), without the interrupt's own frame.", ""]
    lines += table_lines(["core", "emulated on", "build", "flash B", "RAM B", "tables B",
                          "interrupt, inner step only (min / median / max)", "with the outer step",
                          "mean per base period", "stack B"], _core_rows(target))
    lines += table_lines(["core", "loop", "base periods per step", "instructions per lookup (min / median / max)",
                          "per step", "emulated harness run"], _loop_rows(target))
    lines += table_lines(["core", "function", "code B", "stack B", "runtime helpers called"],
                         [row for core in target["cores"] for row in function_rows(core)])
    tools = target["toolchain"]
    lines += [f"Instruction counts: {target['instruction_method']}.  Built with {tools['gcc']}; "
              f"emulated with {tools['qemu']}.", ""]
    return lines
