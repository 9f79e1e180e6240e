"""``family.json`` and ``family.md``: the index of a product family.

Rendered from the variants' plain summaries (what the work units sent back),
never from live objects, so a run on a cluster writes the same bytes as a
local one.  Per variant: verdict, stages, points passing, the binding spec
at each failing point and the tightest spec (least slack relative to its
bound) at each passing point, and every file of its folder with SHA-256.
"""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path
from typing import Any

from ..outputs import sha256_bytes
from ..safety import CAUTION_POINTS
from .markdown import table_lines  # the one Markdown table writer of the log

__all__ = ["FAMILY_FORMAT", "render_family_index"]

#: ``format`` of ``family.json``.
FAMILY_FORMAT = "gainloom-family/1"


def _spec_points(points: list[dict[str, Any]], key: str, status: str) -> dict[str, list[str]]:
    """Spec -> the points (labels) where it is ``key`` among points of ``status``."""
    found: dict[str, list[str]] = {}
    for point in points:
        if point["status"] == status and point[key] is not None:
            found.setdefault(point[key], []).append(point["point"])
    return found


def _variant_entry(variant, outcome) -> dict[str, Any]:
    summary = outcome.summary
    points = summary["points"]
    return {
        "name": variant.name,
        "folder": variant.name,
        "overrides": {name: value.source for name, value in variant.overrides.items()},
        "passed": summary["passed"],
        "design_passed": summary["design_passed"],
        "points_passing": sum(p["status"] == "pass" for p in points),
        "points": len(points),
        "binding": _spec_points(points, "binding", "fail"),
        "tightest": _spec_points(points, "tightest", "pass"),
        "stages": summary["stages"],
        "not_checked": summary["not_checked"],
        "number_format": summary["number_format"],
        "prefix": summary["prefix"],
        "per_point": points,
        "files": {name: sha256_bytes(outcome.files[name]) for name in sorted(outcome.files)},
    }


def _markdown(doc: dict[str, Any]) -> str:
    passing = [v["name"] for v in doc["variants"] if v["passed"]]
    lines = [f"# Product family: {doc['schedule']['path']} x {doc['variants_file']['path']}", "",
             f"**{len(passing)} of {len(doc['variants'])} variants pass every stage.**", ""]
    rows = []
    for v in doc["variants"]:
        failing = [s["stage"] for s in v["stages"] if s["status"] == "FAIL"]
        verdict = "pass" if v["passed"] else "FAIL: " + ", ".join(failing)
        binding = "; ".join(f"{spec} at {len(where)}" for spec, where in v["binding"].items()) or "-"
        tight = Counter({spec: len(where) for spec, where in v["tightest"].items()})
        tightest = "; ".join(f"{spec} at {n}" for spec, n in tight.most_common()) or "-"
        overrides = ", ".join(f"{k} = {val}" for k, val in v["overrides"].items()) or "(base schedule)"
        rows.append([f"[{v['name']}]({v['folder']}/verification.md)", verdict,
                     f"{v['points_passing']}/{v['points']}", binding, tightest, overrides])
    lines += table_lines(["variant", "verdict", "points passing", "binding spec at failing points",
                          "tightest spec at passing points", "overrides"], rows)
    lines += ["Binding spec: the one that no gain meets at a failing point (the design's diagnosis).",
              "Tightest spec: at a passing point, the required spec with the least slack relative to its bound.",
              "Counts are operating points; `family.json` lists them by name.", ""]
    for v in doc["variants"]:
        lines += [f"## {v['name']}", ""]
        lines += table_lines(["stage", "status", "detail"], [[s["stage"], s["status"], s["detail"]] for s in v["stages"]])
        lines += table_lines(["file", "SHA-256"], [[f"[{n}]({v['folder']}/{n})", f"`{h}`"] for n, h in v["files"].items()])
    lines += ["## Inputs", ""]
    lines += table_lines(["input", "file", "SHA-256"], [
        ["schedule", doc["schedule"]["path"], f"`{doc['schedule']['sha256']}`"],
        ["variants", doc["variants_file"]["path"], f"`{doc['variants_file']['sha256']}`"]])
    lines += ["## Cautions", ""] + [f"- {c}" for c in doc["cautions"]] + [""]
    return "\n".join(lines)


def render_family_index(base, schedule_path, variants_path, variants, outcomes) -> dict[str, str]:
    """``family.json`` and ``family.md`` of a family run.

    Parameters
    ----------
    base : Schedule
        The base schedule (its SHA-256 is recorded).
    schedule_path, variants_path : path
        Recorded by file name only, so the index does not depend on folders.
    variants : sequence of Variant
    outcomes : sequence of VariantOutcome
        In the variants' order.

    Returns
    -------
    dict of str to str
    """
    doc = {
        "format": FAMILY_FORMAT,
        "schedule": {"path": Path(schedule_path).name, "sha256": base.sha256},
        "variants_file": {"path": Path(variants_path).name, "sha256": sha256_bytes(Path(variants_path).read_bytes())},
        "passed": all(o.summary["passed"] for o in outcomes),
        "variants": [_variant_entry(v, o) for v, o in zip(variants, outcomes)],
        "cautions": list(CAUTION_POINTS),
    }
    return {"family.json": json.dumps(doc, indent=2, sort_keys=False) + "\n", "family.md": _markdown(doc)}
