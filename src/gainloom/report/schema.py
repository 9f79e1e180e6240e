"""The layout of ``verification.json`` as a checkable description.

A small hand-written schema language (no new dependency):

* a scalar type name: ``"string"``, ``"number"`` (a JSON number or one of
  the strings ``"inf"``, ``"-inf"``, ``"nan"``), ``"integer"``,
  ``"boolean"``, ``"null"``, ``"any"``;
* a tuple of types: any one of them;
* ``{"object": {key: type}, "optional": {key: type}}``: exactly these keys
  (optional ones may be missing), ``"open": True`` allows further keys;
* ``{"list": type}``: a list whose every item has the type;
* ``{"map": type}``: an object with free keys whose every value has the type.

:func:`validate` returns the list of mismatches (empty when the document
fits).  ``docs/verification-log.md`` documents every key of :data:`SCHEMA`;
a test checks that it does.
"""

from __future__ import annotations

from typing import Any

__all__ = ["SCHEMA", "validate", "key_paths"]

NUMBER = "number"
STRING = "string"
BOOL = "boolean"
INT = "integer"
NULL = "null"


def _obj(keys: dict[str, Any], optional: dict[str, Any] | None = None, open_: bool = False) -> dict[str, Any]:
    out: dict[str, Any] = {"object": keys, "optional": optional or {}}
    if open_:
        out["open"] = True
    return out


_SPEC = _obj({"value": NUMBER, "limit": NUMBER, "pass": BOOL, "margin": NUMBER})

_MEASURED = _obj({
    "passed": BOOL,
    "between_points_model": STRING,
    "points": {"list": _obj({
        "index": INT, "label": STRING, "passed": BOOL, "failed": {"list": STRING}, "coverage": {"list": STRING},
        "gain_margin_db": NUMBER, "phase_margin_deg": NUMBER, "crossover_rad_s": NUMBER,
        "last_crossover_rad_s": NUMBER, "sensitivity_peak": NUMBER, "bandwidth_rad_s": NUMBER,
        "delay_margin_s": NUMBER, "fit_error": NUMBER, "fit_error_near_crossover": NUMBER,
        "fit_rms_near_crossover": NUMBER, "step_deviation_bound": NUMBER,
    })},
})

_POINT = _obj({
    "index": INT,
    "at": {"map": NUMBER},
    "label": STRING,
    "status": STRING,
    "failed": {"list": STRING},
    "binding": (STRING, NULL),
    "notes": {"list": STRING},
    "warnings": {"list": STRING},
    "compromise": BOOL,
    "sample_period_s": NUMBER,
    "delay_samples": NUMBER,
    "dead_time_s": NUMBER,
    "total_delay_samples": NUMBER,
    "parameters": {"map": NUMBER},
    "coefficients": {"map": NUMBER},
    "physical": {"map": NUMBER},
    "gain": NUMBER,
    "poles_z": {"list": {"list": NUMBER}},
    "poles_s": {"list": {"list": NUMBER}},
    "damping": NUMBER,
    "damping_pole": _obj({
        "s": {"list": NUMBER},
        "natural_frequency": NUMBER,
        "origin": STRING,
        "start_z": {"list": NUMBER},
    }),
    "natural_frequency": NUMBER,
    "decay": NUMBER,
    "pole_radius": NUMBER,
    "gain_margin_db": NUMBER,
    "phase_margin_deg": NUMBER,
    "delay_margin_s": NUMBER,
    "sensitivity_peak": NUMBER,
    "crossover_rad_s": NUMBER,
    "last_crossover_rad_s": NUMBER,
    "bandwidth_rad_s": NUMBER,
    "overshoot_percent": NUMBER,
    "settling_time_s": NUMBER,
    "system_type": INT,
    "cancelled_zeros_z": {"list": NUMBER},
    "specs": {"map": _SPEC},
})

_WORST = _obj({
    "index": INT,
    "label": STRING,
    "value": NUMBER,
    "limit": NUMBER,
    "bound": STRING,
    "margin": NUMBER,
    "relative_margin": NUMBER,
    "pass": BOOL,
    "failing_points": INT,
})

_FAILED_POINT = _obj({
    "index": INT,
    "label": STRING,
    "binding": (STRING, NULL),
    "failed": {"list": STRING},
    "value": (NUMBER, NULL),
    "limit": (NUMBER, NULL),
    "notes": {"list": STRING},
})

_QUANT_WORST = _obj(
    {"index": (INT, NULL), "label": (STRING, NULL), "unit": STRING},
    {"before": (NUMBER, NULL), "after": (NUMBER, NULL), "change": NUMBER, "value": NUMBER},
)

_QUANTISATION = _obj({
    "number_format": STRING,
    "passed": BOOL,
    "rounded_table_passed": BOOL,
    "full_scale": _obj({"error_full_scale": (NUMBER, NULL), "output_full_scale": (NUMBER, NULL)}),
    "coefficients": {"list": _obj({"name": STRING, "frac": (INT, NULL), "scale": NUMBER, "max_abs_error": NUMBER})},
    "axis_offsets": {"map": NUMBER},
    "max_pole_shift": NUMBER,
    "points": {"list": _obj({
        "index": INT,
        "label": STRING,
        "max_pole_shift": NUMBER,
        "before": {"map": NUMBER},
        "after": {"map": NUMBER},
        "broken": {"list": STRING},
    })},
    "worst": {"map": _QUANT_WORST},
    "broken": {"list": _obj({"where": STRING, "point": STRING, "spec": STRING})},
}, {"filters": {"list": _obj({
    "section": INT,
    "kind": STRING,
    "pole_radius": _obj({"designed": NUMBER, "stored": NUMBER}),
    "zero_radius": _obj({"designed": NUMBER, "stored": NUMBER}),
    "pole_frequency_change": NUMBER,
    "zero_frequency_change": NUMBER,
    "stability_margin": NUMBER,
    "failures": {"list": STRING},
    "warnings": {"list": STRING},
})}})

_C_CHECK = _obj({
    "status": STRING,
    "message": STRING,
    "compiler": (STRING, NULL),
    "compiler_version": (STRING, NULL),
    "flags": {"list": STRING},
    "sanitizers": BOOL,
    "points": INT,
    "steps": INT,
    "worst_gain_error": NUMBER,
    "worst_step_error": NUMBER,
    "gain_tolerance": NUMBER,
    "step_tolerance": NUMBER,
    "saturated_high": INT,
    "saturated_low": INT,
    "output_sha256": (STRING, NULL),
})

# The target block is TargetResult.to_dict() of gainloom.codegen.target.
_SPREAD = _obj({"calls": INT, "min": (INT, NULL), "median": (NUMBER, NULL), "max": (INT, NULL)})
_TARGET_CORE = _obj({
    "core": STRING,
    "label": STRING,
    "machine": STRING,
    "machine_note": STRING,
    "build": _obj({
        "core": STRING,
        "compiled": {"map": BOOL},
        "flags": {"list": STRING},
        "functions": {"list": _obj({
            "name": STRING,
            "code_bytes": INT,
            "stack_bytes": (INT, NULL),
            "stack_bounded": BOOL,
            "helpers": {"list": _obj({"symbol": STRING, "kind": STRING, "allowed": BOOL})},
        })},
        "tables": {"map": INT},
        "table_bytes": INT,
        "flash_bytes": INT,
        "ram_bytes": INT,
        "diagnostics": STRING,
    }),
    "emulated_run": (_obj({
        "core": STRING,
        "status": STRING,
        "message": STRING,
        "identical_to_host": (BOOL, NULL),
        "worst_gain_error": NUMBER,
        "worst_step_error": NUMBER,
    }), NULL),
    "instructions": (_obj({"core": STRING, "lookup": _SPREAD, "step": _SPREAD}), NULL),
})
_RULES = _obj({
    "status": STRING,
    "message": STRING,
    "tool": (STRING, NULL),
    "flags": {"list": STRING},
    "undocumented": {"list": _obj({"file": STRING, "line": INT, "severity": STRING, "rule": STRING,
                                   "documented": BOOL})},
    "deviations": {"list": _obj({"rule": STRING, "findings": INT, "reason": STRING})},
})
_TARGET = _obj({
    "status": STRING,
    "message": STRING,
    "number_format": STRING,
    "instruction_method": STRING,
    "missing_tools": {"list": STRING},
    "toolchain": _obj({"gcc": (STRING, NULL), "qemu": (STRING, NULL)}),
    "cores": {"list": _TARGET_CORE},
    "rules": (_RULES, NULL),
})

# The simulation block is SimulationResult.to_dict(series=False) of the
# simulation layer; its inner layout is documented there.
_SIMULATION = _obj(
    {"passed": BOOL, "stable": BOOL, "number_format": STRING, "structure": STRING, "samples": INT,
     "checks": {"list": _obj({"name": STRING, "limit": NUMBER, "value": (NUMBER, NULL), "passed": BOOL})},
     "warnings": {"list": STRING}},
    open_=True,
)

_TABLE_CHECKS = _obj({
    "passed": BOOL,
    "smoothness": {"list": _obj({}, open_=True)},
    "monotone": {"list": _obj({}, open_=True)},
    "smoothing": {"list": STRING},
    "between_points": _obj({"checked": INT, "failing": {"list": _obj({}, open_=True)}}),
    "inserted": {"list": _obj({"axis": STRING, "value": NUMBER})},
    "tolerances": _obj({
        "samples_per_point": INT,
        "failing": {"list": _obj({}, open_=True)},
        "worst": {"list": _obj({}, open_=True)},
    }),
})

#: The layout of ``verification.json`` (format ``gainloom-verification/1``).
SCHEMA: dict[str, Any] = _obj(
    {
        "format": STRING,
        "verdict": _obj({
            "passed": BOOL,
            "design": BOOL,
            "quantisation": (BOOL, NULL),
            "c_check": (BOOL, NULL),
            "target": (BOOL, NULL),
            "c_rules": (BOOL, NULL),
            "simulation": (BOOL, NULL),
            "reasons": {"list": STRING},
            "not_checked": {"list": STRING},
            "failed_points": {"list": _FAILED_POINT},
        }),
        "inputs": _obj({
            "schedule": _obj({"path": STRING, "sha256": STRING}),
            "gains": (_obj({"path": STRING, "sha256": (STRING, NULL)}), NULL),
        }),
        "tools": _obj({
            "gainloom": STRING,
            "python": STRING,
            "numpy": STRING,
            "scipy": STRING,
            "control": STRING,
            "matplotlib": STRING,
            "c_compiler": (STRING, NULL),
        }),
        "options": {"map": "any"},
        "method": {"map": STRING},
        "sampling": _obj({
            "hold": STRING,
            "prewarp_rad_s": (NUMBER, NULL),
            "delay_samples": STRING,
            "sample_period_s": STRING,
        }),
        "table": _obj({
            "structure": STRING,
            "axes": {"list": _obj({"name": STRING, "unit": STRING, "values": {"list": NUMBER}})},
            "coefficient_names": {"list": STRING},
            "output_limits": {"list": NUMBER},
        }),
        "points": {"list": _POINT},
        "worst_cases": {"map": _WORST},
        "table_checks": _TABLE_CHECKS,
        "quantisation": (_QUANTISATION, NULL),
        "c_check": (_C_CHECK, NULL),
        "target": (_TARGET, NULL),
        "simulation": (_SIMULATION, NULL),
        "warnings": {"list": STRING},
        "cautions": {"list": STRING},
        "plots": {"list": STRING},
    },
    {"timestamp": STRING, "measured": _MEASURED},
)

_NONFINITE = ("inf", "-inf", "nan")


def _scalar_ok(kind: str, value: Any) -> bool:
    if kind == "any":
        return True
    if kind == NULL:
        return value is None
    if kind == BOOL:
        return isinstance(value, bool)
    if kind == INT:
        return isinstance(value, int) and not isinstance(value, bool)
    if kind == NUMBER:
        return (isinstance(value, (int, float)) and not isinstance(value, bool)) or value in _NONFINITE
    if kind == STRING:
        return isinstance(value, str)
    raise ValueError(f"unknown schema type {kind!r}")


def _check(spec: Any, value: Any, path: str, errors: list[str]) -> None:
    if isinstance(spec, tuple):
        trial: list[str] = []
        for option in spec:
            attempt: list[str] = []
            _check(option, value, path, attempt)
            if not attempt:
                return
            trial += attempt
        errors.append(f"{path or '<root>'}: {value!r:.60} matches none of the allowed types ({'; '.join(trial[:3])})")
        return
    if isinstance(spec, str):
        if not _scalar_ok(spec, value):
            errors.append(f"{path or '<root>'}: expected {spec}, found {type(value).__name__} {value!r:.40}")
        return
    if "list" in spec:
        if not isinstance(value, list):
            errors.append(f"{path}: expected a list, found {type(value).__name__}")
            return
        for i, item in enumerate(value):
            _check(spec["list"], item, f"{path}[{i}]", errors)
        return
    if "map" in spec:
        if not isinstance(value, dict):
            errors.append(f"{path}: expected an object, found {type(value).__name__}")
            return
        for key, item in value.items():
            _check(spec["map"], item, f"{path}.{key}", errors)
        return
    if not isinstance(value, dict):
        errors.append(f"{path or '<root>'}: expected an object, found {type(value).__name__}")
        return
    required, optional = spec["object"], spec.get("optional", {})
    for key in required:
        if key not in value:
            errors.append(f"{path}.{key}: missing" if path else f"{key}: missing")
    for key, item in value.items():
        where = f"{path}.{key}" if path else key
        if key in required:
            _check(required[key], item, where, errors)
        elif key in optional:
            _check(optional[key], item, where, errors)
        elif not spec.get("open"):
            errors.append(f"{where}: unexpected key")


def validate(document: Any, schema: Any = None) -> list[str]:
    """Mismatches between a document and the schema (empty list: it fits).

    Parameters
    ----------
    document : any
        Parsed ``verification.json``.
    schema : optional
        Defaults to :data:`SCHEMA`.
    """
    errors: list[str] = []
    _check(SCHEMA if schema is None else schema, document, "", errors)
    return errors


def key_paths(schema: Any = None, prefix: str = "") -> list[str]:
    """Every named key of the schema as a dotted path (``points[].specs``...)."""
    schema = SCHEMA if schema is None else schema
    out: list[str] = []
    if isinstance(schema, tuple):
        for option in schema:
            for path in key_paths(option, prefix):
                if path not in out:
                    out.append(path)
        return out
    if isinstance(schema, str):
        return out
    if "list" in schema:
        return key_paths(schema["list"], prefix + "[]")
    if "map" in schema:
        return key_paths(schema["map"], prefix + ".*")
    for group in ("object", "optional"):
        for key, item in schema.get(group, {}).items():
            path = f"{prefix}.{key}" if prefix else key
            out.append(path)
            out += [p for p in key_paths(item, path) if p not in out]
    return out
