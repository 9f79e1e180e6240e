"""The verification log as plain data (``format: gainloom-verification/1``).

:func:`verification_document` gathers everything a reviewer or a script
needs into one JSON-ready dict: inputs and their SHA-256, tool versions,
how every number was made, the per-point table, worst cases per spec,
whole-table checks, quantisation, the C check, simulation, warnings and the
safety cautions.  Layout key by key: ``docs/verification-log.md``; the same
layout as a checkable dict: :data:`gainloom.report.schema.SCHEMA`.

Numbers are plain floats (shortest round-trip decimals when serialised);
JSON has no infinity or NaN, so those are written as the strings ``"inf"``,
``"-inf"`` and ``"nan"`` (as the gains file does).
"""

from __future__ import annotations

import hashlib
import math
import platform
from pathlib import Path
from typing import Any

import numpy as np

from ..design.results import point_document
from ..plain import to_plain
from ..safety import CAUTION_POINTS
from ..spec_registry import SPEC_ORDER

__all__ = [
    "VERIFICATION_FORMAT",
    "METHODS",
    "spec_sense",
    "verification_document",
    "file_sha256",
]

#: Format tag of ``verification.json``.
VERIFICATION_FORMAT = "gainloom-verification/1"

#: Safety cautions carried by every log (the project's safety rule: the trade's usual cautions, deferring to codes and licensed engineers).
CAUTIONS: tuple[str, ...] = (
    "These gains drive motors and power stages that can injure people and destroy hardware.",
    "Validate the gains on the real hardware before use, with current and speed limits active "
    "and a safe test set-up (guarding, emergency stop, reduced energy where possible).",
    "This verification covers the models in the schedule file, nothing else: unmodelled dynamics, "
    "sensor noise, saturation beyond the stated limits and faults are not covered.",
    "gainloom does not replace functional-safety processes, local codes and standards, "
    "or the judgement of a licensed engineer.",
)

#: How each logged number was made (the ``method`` section).
METHODS: dict[str, str] = {
    "plant": (
        "the schedule's continuous plant evaluated at each operating point (parameters from the schedule "
        "file) and discretised per point with the hold, sample period and computation delay listed in "
        "'sampling' and per point (gainloom.lti.discretize.discretize_loop; dead time absorbed exactly)"
    ),
    "controller": (
        "difference-equation coefficients of the table, as in DEVELOPERS.md 'Discrete controller forms'; "
        "open loop L(z) = C(z) P(z), unity negative feedback on e = r - y"
    ),
    "closed_loop_poles": (
        "roots of D(z) + N(z) of L = N/D (gainloom.lti.closed_loop.closed_loop_poles; delta-operator "
        "roots z = 1 + ts g at fast sampling); listed by decreasing |z|"
    ),
    "poles_s": "s = ln(z)/ts, principal branch (|Im s| <= pi/ts), rad/s",
    "cancellation": (
        "a closed-loop pole left on a controller zero that cancels a plant pole (points[].cancelled_zeros_z; "
        "gainloom.design.cancel) stays in poles_z and must be stable, but is left out of damping, decay, "
        "pole_radius and natural_frequency"
    ),
    "damping": "smallest zeta = -Re(s)/|s| over the closed-loop poles (cancelled ones excepted)",
    "natural_frequency": "|s| of the dominant closed-loop pole (largest |z|, cancelled ones excepted), rad/s",
    "decay": "smallest -ln|z|/ts over the closed-loop poles (cancelled ones excepted), 1/s",
    "pole_radius": "largest |z| over the closed-loop poles (cancelled ones excepted)",
    "margins": (
        "gainloom.lti.margins.loop_margins on L(e^{j w ts}): dense log frequency grid up to pi/ts with "
        "clusters at lightly damped roots, crossovers refined by bisection; conventions of python-control "
        "stability_margins: GM = 1/|L| at the phase crossover closest to 0 dB (including w = 0 and pi/ts), "
        "PM at the gain crossover with the smallest |PM|, delay margin = min PM/w_gc over gain crossovers "
        "(PM in [0, 360) deg), Ms = max |1/(1 + L)|"
    ),
    "step": (
        "unity-feedback step response of T = N/(D + N) sampled at ts (scipy.signal.lfilter) until the "
        "slowest pole has decayed to 1e-4; overshoot 100 (max y - y_final)/|y_final| %, settling time "
        "when |y - y_final| stays within 2 % of |y_final|"
    ),
    "between_points": (
        "coefficients interpolated as the firmware does (linear in 1-D, bilinear in 2-D, clamped at the "
        "ends) and judged on the plant evaluated at intermediate points"
    ),
    "tolerances": "every corner (or a seeded Latin hypercube) of the schedule's parameter tolerances at each grid point",
    "quantisation": (
        "coefficients rounded exactly as the emitted C stores them (gainloom.codegen.layout.layout_table), "
        "taken back to physical units and verified again; poles paired one to one (minimum total distance)"
    ),
}


def spec_sense(name: str) -> int:
    """+1 for a lower bound (value >= limit), -1 for an upper bound (value <= limit)."""
    if name == "stable" or name.startswith("max_"):
        return -1
    return +1


def file_sha256(path: str | Path) -> str | None:
    """Hex SHA-256 of a file's bytes, ``None`` when it cannot be read."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


def _versions(harness: Any) -> dict[str, Any]:
    import control
    import matplotlib
    import scipy

    from ..version import __version__

    return {
        "gainloom": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "control": control.__version__,
        "matplotlib": matplotlib.__version__,
        "c_compiler": None if harness is None else harness.compiler_version,
    }


def _point_entries(sched, result, table) -> list[dict[str, Any]]:
    analysis = result.analysis
    points = np.asarray(result.points, dtype=float)
    models = sched.evaluate(points)
    delays = np.broadcast_to(np.asarray(models.delay, dtype=float), (analysis.points,))
    dead = models.plant.dead_time
    dead_times = np.zeros(analysis.points) if dead is None else np.broadcast_to(np.asarray(dead, float), (analysis.points,))
    names = [a.name for a in table.axes]
    binding = getattr(result, "binding", (None,) * analysis.points)
    notes = getattr(result, "notes", ((),) * analysis.points)
    point_warnings = getattr(result, "point_warnings", ()) or ((),) * analysis.points
    entries = []
    for p in range(analysis.points):
        entry = point_document(analysis, p)
        failed = analysis.failed_specs(p)
        entry.update({
            "index": p,
            "at": {name: float(v) for name, v in zip(names, points[p])},
            "label": result.point_labels[p],
            "status": result.status[p],
            "failed": failed,
            "binding": binding[p] if binding[p] is not None else (failed[0] if failed else None),
            "notes": list(notes[p]),
            "warnings": list(point_warnings[p]),
            "compromise": bool(hasattr(result, "point_warnings") and result.status[p] == "fail"),
            "sample_period_s": float(models.sample_period[p]),
            "delay_samples": float(delays[p]),
            "dead_time_s": float(dead_times[p]),
            # what discretisation used: computation delay + dead time / ts, fraction kept
            "total_delay_samples": float(delays[p] + dead_times[p] / models.sample_period[p]),
            "parameters": {name: float(np.asarray(values, float).reshape(-1)[p] if np.ndim(values) else values)
                           for name, values in sorted(models.parameters.items())},
        })
        entries.append(entry)
    return entries


def _margin(value: float, limit: float, sense: int) -> float:
    with np.errstate(invalid="ignore"):
        if value is None or not math.isfinite(limit):
            return float("nan")
        if math.isnan(value):
            return float("-inf")
        return float(sense * (value - limit))


def _worst_cases(entries: list[dict[str, Any]]) -> dict[str, Any]:
    worst: dict[str, Any] = {}
    for name in SPEC_ORDER:
        rows = [(e["index"], e["label"], e["specs"][name]) for e in entries if name in e["specs"]]
        if not rows:
            continue
        margins = np.array([r[2]["margin"] for r in rows], dtype=float)
        margins = np.where(np.isnan(margins), -np.inf, margins)
        k = int(np.argmin(margins))
        index, label, spec = rows[k]
        limit = spec["limit"]
        relative = spec["margin"] / abs(limit) if limit not in (0.0,) and math.isfinite(limit) else float("nan")
        worst[name] = {
            "index": index,
            "label": label,
            "value": spec["value"],
            "limit": limit,
            "bound": "lower" if spec_sense(name) > 0 else "upper",
            "margin": spec["margin"],
            "relative_margin": relative,
            "pass": spec["pass"],
            "failing_points": int(sum(1 for r in rows if not r[2]["pass"])),
        }
    return worst


def _verdict(result, entries, quantisation, harness, simulation, target=None) -> dict[str, Any]:
    design_ok = bool(result.passed)
    quant_ok = None if quantisation is None else bool(quantisation.passed)
    c_ok = None if harness is None else harness.passed
    target_ok = None if target is None else target.passed
    rules_ok = None if target is None or target.rules is None else target.rules.passed
    sim_ok = None if simulation is None else bool(simulation.passed)
    failed_points = []
    for e in entries:
        if e["status"] == "pass":
            continue
        binding = e["binding"]
        spec = e["specs"].get(binding, {}) if binding else {}
        failed_points.append({
            "index": e["index"],
            "label": e["label"],
            "binding": binding,
            "failed": e["failed"],
            "value": spec.get("value"),
            "limit": spec.get("limit"),
            "notes": e["notes"],
        })
    reasons = []
    if failed_points:
        reasons.append(f"{len(failed_points)} of {len(entries)} grid points fail a spec")
    if not result.table_report.passed:
        reasons.append("whole-table checks fail")
    if quant_ok is False:
        reasons.append("rounding to the number format breaks a spec")
    if c_ok is False:
        reasons.append("the generated C failed its compile/harness check")
    if target_ok is False:
        reasons.append("the generated C fails on the target cores (build, runtime helpers or emulated run)")
    if rules_ok is False:
        reasons.append("the generated C has coding-rule findings without a deviation record")
    if sim_ok is False:
        reasons.append("the time-domain simulation fails")
    not_checked = []
    if quantisation is None:
        not_checked.append("quantisation")
    if harness is None or c_ok is None:
        not_checked.append("generated C")
    if target_ok is None:
        not_checked.append("target cores")
    if rules_ok is None:
        not_checked.append("coding rules")
    if simulation is None:
        not_checked.append("simulation")
    return {
        "passed": not reasons,
        "design": design_ok,
        "quantisation": quant_ok,
        "c_check": c_ok,
        "target": target_ok,
        "c_rules": rules_ok,
        "simulation": sim_ok,
        "reasons": reasons,
        "not_checked": not_checked,
        "failed_points": failed_points,
    }


def verification_document(
    *,
    schedule: Any,
    result: Any,
    table: Any,
    gains_path: str | Path | None = None,
    harness: Any = None,
    quantisation: Any = None,
    simulation: Any = None,
    options: dict[str, Any] | None = None,
    plots: list[str] | None = None,
    timestamp: str | None = None,
    target: Any = None,
) -> dict[str, Any]:
    """Everything of the verification log as plain, JSON-ready data.

    Parameters
    ----------
    schedule : Schedule
        The loaded schedule (its file is hashed again here).
    result : DesignResult or VerifyResult
        The design (or verification) of ``table`` on ``schedule``.
    table : GainTable
        The table the log is about (normally ``result.table``).
    gains_path : path, optional
        The gains file the table was written to / read from.
    harness : HarnessResult, optional
    quantisation : QuantisationResult, optional
    simulation : SimulationResult, optional
    options : dict, optional
        Options of the run, recorded as given.
    plots : list of str, optional
        File names of the PNG plots written beside the log.
    timestamp : str, optional
        ISO-8601 UTC time, only when the caller asks for one.
    target : TargetResult, optional
        The generated C on the target cores (:func:`gainloom.codegen.target.check_target`).

    Returns
    -------
    dict
        Keys and types as in :data:`gainloom.report.schema.SCHEMA`.
    """
    entries = _point_entries(schedule, result, table)
    for e in entries:
        for name, spec in e["specs"].items():
            # signed distance to the limit, positive on the passing side
            spec["margin"] = _margin(spec["value"], spec["limit"], spec_sense(name))
    schedule_path = Path(str(schedule.path))
    inputs = {
        "schedule": {
            "path": schedule_path.name,
            "sha256": file_sha256(schedule_path) or str(schedule.sha256),
        },
        "gains": None if gains_path is None else {
            "path": Path(gains_path).name,
            "sha256": file_sha256(gains_path),
        },
    }
    document: dict[str, Any] = {
        "format": VERIFICATION_FORMAT,
        "verdict": _verdict(result, entries, quantisation, harness, simulation, target),
        "inputs": inputs,
        "tools": _versions(harness),
        "options": dict(options or {}),
        "method": dict(METHODS),
        "sampling": {
            "hold": schedule.sampling.method,
            "prewarp_rad_s": schedule.sampling.prewarp,
            "delay_samples": "per point (points[].delay_samples)",
            "sample_period_s": "per point (points[].sample_period_s)",
        },
        "table": {
            "structure": table.structure,
            "axes": [{"name": a.name, "unit": a.unit, "values": a.values.tolist()} for a in table.axes],
            "coefficient_names": list(table.coefficient_names),
            # tabulated limits: their envelope (the per-point values are in the gains file)
            "output_limits": list(table.limit_envelope),
        },
        "points": entries,
        "worst_cases": _worst_cases(entries),
        "table_checks": result.table_report.as_document(),
        "quantisation": None if quantisation is None else quantisation.as_document(),
        "c_check": None if harness is None else harness.summary(),
        "target": None if target is None else target.to_dict(),
        "simulation": None if simulation is None else simulation.to_dict(series=False),
        "warnings": list(result.warnings) + ([] if simulation is None else [
            f"simulation: {w}" for w in simulation.warnings if w not in result.warnings]),
        "cautions": list(CAUTION_POINTS),
        "plots": list(plots or []),
    }
    if timestamp is not None:
        document["timestamp"] = timestamp
    check = getattr(result, "data_check", None)
    if check is not None:  # a measured plant: the table judged on the raw data
        document["measured"] = check.as_document()
    return to_plain(document, "text")
