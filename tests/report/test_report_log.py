"""The verification log: schema, recomputability, determinism, failing designs.

Outside references: python-control (``c2d`` ZOH, ``feedback(...).poles()``,
``stability_margins``) rebuilds the sampled loop from the schedule's
formulas and the gains file alone; the PNG file layout (chunk structure) is
from the PNG specification (ISO/IEC 15948), from memory.
"""

from __future__ import annotations

import json
import re
import struct
import textwrap
import warnings
from pathlib import Path

import control
import numpy as np
import pytest

import gainloom
from gainloom.codegen.quantisation import check_quantisation
from gainloom.design.gainsfile import read_gains
from gainloom.outputs import OutputConflictError
from gainloom.report import write_verification
from gainloom.report.document import VERIFICATION_FORMAT
from gainloom.report.schema import key_paths, validate
from gainloom.safety import CAUTION_POINTS
from gainloom.simulation import Scenario, run_scenario

DOCS = Path(__file__).resolve().parents[2] / "docs" / "verification-log.md"

# Invented speed loop (a test variant of the spindle demo), relaxed specs.
SCHEDULE = textwrap.dedent(
    """\
    name: log-test
    variables:
      - name: speed
        unit: rpm
        values: {start: 0, stop: 6000, count: 4}
    parameters:
      Kt: 0.35
      J: "2.5e-3 * (1 + 0.15 * speed / 6000)"
      B: "2.0e-4 + 1.5e-4 * speed / 1000"
      tau_i: 5.0e-4
    plant:
      transfer_function:
        numerator: ["Kt"]
        denominator: ["J * tau_i", "J + B * tau_i", "B"]
    sampling:
      period: "1/10000 + (1/8000 - 1/10000) * min(max(speed - 3000, 0), 1)"
      method: zoh
      delay: 1
    controller:
      structure: pi
      strategy: dominant-pair
      target: {damping: 0.7, natural_frequency: 300}
      output_limits: [-20, 20]
    specs:
      min_damping: {damping}
      natural_frequency: [50, 2000]
      min_gain_margin: 6
      min_phase_margin: 45
      system_type: 1
    table:
      between_points: 1
    tolerances:
      parameters: {J: 0.1}
    """
)


def _schedule(folder: Path, damping: float = 0.6, band: str = "[50, 2000]") -> Path:
    path = folder / "speed.yaml"
    text = SCHEDULE.replace("{damping}", repr(damping)).replace("natural_frequency: [50, 2000]", f"natural_frequency: {band}")
    path.write_text(text, encoding="utf-8")
    return path


def _run(folder: Path, out: str, *, full: bool = True, damping: float = 0.6, band: str = "[50, 2000]",
         **extra) -> tuple[list[Path], object]:
    """Design, write the gains file, re-check rounding and write the log."""
    path = _schedule(folder, damping, band)
    schedule = gainloom.load_schedule(path)
    result = gainloom.design_table(schedule)
    gains = folder / "gains.yaml"
    gainloom.write_gains(result, gains)
    quant = check_quantisation(schedule, result.table, "q15") if full else None
    simulation = harness = None
    if full:
        simulation = run_scenario(schedule, result.table, Scenario(0.02, {"speed": 1500.0}), "float32")
        files = gainloom.emit_c(result.table, folder / "c", "q15", "spd", result.schedule_sha256, force=True)
        harness = gainloom.check_generated_c(files, result.table, number_format="q15", prefix="spd")
    paths = write_verification(folder / out, schedule=schedule, result=result, table=result.table,
                               gains_path=gains, quantisation=quant, simulation=simulation, harness=harness,
                               options={"number_format": "q15"}, **extra)
    return paths, result


@pytest.fixture(scope="module")
def logged(tmp_path_factory):
    folder = tmp_path_factory.mktemp("log")
    paths, result = _run(folder, "log")
    document = json.loads((folder / "log" / "verification.json").read_text(encoding="utf-8"))
    return folder, paths, result, document


def test_log_validates_against_the_documented_schema(logged):
    _folder, paths, _result, document = logged
    assert document["format"] == VERIFICATION_FORMAT
    assert validate(document) == []
    assert [p.name for p in paths[:2]] == ["verification.json", "verification.md"]
    assert set(document["plots"]) == {p.name for p in paths if p.suffix == ".png"}
    # a wrong type and a missing key are caught (the check can fail)
    broken = json.loads(json.dumps(document))
    broken["points"][0]["damping"] = "high"
    del broken["inputs"]["schedule"]["sha256"]
    errors = validate(broken)
    assert any("points[0].damping" in e for e in errors)
    assert any("inputs.schedule.sha256: missing" in e for e in errors)


def test_every_schema_key_is_documented():
    text = DOCS.read_text(encoding="utf-8")
    documented = set(re.findall(r"`([a-z0-9_\[\]\.\*]+)`", text))
    missing = [path for path in key_paths() if path not in documented]
    assert missing == []


def test_inputs_are_hashed_and_versions_recorded(logged):
    folder, _paths, _result, document = logged
    import hashlib

    # reference: hashlib over the files' bytes
    assert document["inputs"]["schedule"]["sha256"] == hashlib.sha256((folder / "speed.yaml").read_bytes()).hexdigest()
    assert document["inputs"]["gains"]["sha256"] == hashlib.sha256((folder / "gains.yaml").read_bytes()).hexdigest()
    assert document["tools"]["control"] == control.__version__
    assert document["tools"]["numpy"] == np.__version__
    assert document["sampling"]["hold"] == "zoh"
    assert document["simulation"]["number_format"] == "float32"
    assert document["c_check"]["status"] in ("passed", "no-compiler")
    assert document["tools"]["c_compiler"] == document["c_check"]["compiler_version"]
    assert document["cautions"] == list(CAUTION_POINTS)


def _reference_loop(speed: float, ts: float, kp: float, ki_ts: float):
    """The sampled open loop rebuilt from the schedule's formulas with python-control only.

    Plant Kt/((J s + B)(tau s + 1)) (schedule file), ZOH (python-control
    c2d), one sample of computation delay z^-1, PI kp + ki_ts z/(z - 1)
    (DEVELOPERS.md 'Discrete controller forms').
    """
    kt, tau = 0.35, 5.0e-4
    j = 2.5e-3 * (1 + 0.15 * speed / 6000)
    b = 2.0e-4 + 1.5e-4 * speed / 1000
    plant = control.c2d(control.tf([kt], np.polymul([j, b], [tau, 1.0])), ts, method="zoh")
    delay = control.tf([1.0], [1.0, 0.0], ts)
    pi = control.tf([kp + ki_ts, -kp], [1.0, -1.0], ts)
    return pi * delay * plant


def test_logged_numbers_recompute_from_schedule_and_gains_file(logged):
    folder, _paths, _result, document = logged
    table, _meta = read_gains(folder / "gains.yaml")
    speeds = table.axes[0].values
    for entry in document["points"]:
        p = entry["index"]
        speed = float(entry["at"]["speed"])
        assert speed == speeds[p]
        # sample period from the schedule's formula (10 kHz up to 3000 rpm, 8 kHz above)
        ts = 1 / 10000 + (1 / 8000 - 1 / 10000) * min(max(speed - 3000, 0), 1)
        assert entry["sample_period_s"] == pytest.approx(ts, rel=1e-15)
        # parameters from the schedule's formulas, evaluated by hand
        assert entry["parameters"]["J"] == pytest.approx(2.5e-3 * (1 + 0.15 * speed / 6000), rel=1e-15)
        assert entry["parameters"]["B"] == pytest.approx(2.0e-4 + 1.5e-4 * speed / 1000, rel=1e-15)
        loop = _reference_loop(speed, ts, float(table.coefficients["kp"][p]), float(table.coefficients["ki_ts"][p]))
        # Closed-loop poles: python-control feedback(L, 1).poles()
        reference = np.sort_complex(control.feedback(loop, 1).poles())
        logged_poles = np.sort_complex(np.array([complex(re, im) for re, im in entry["poles_z"]]))
        np.testing.assert_allclose(logged_poles, reference, rtol=0, atol=1e-8)
        # Margins: python-control stability_margins (polynomial method)
        with warnings.catch_warnings():
            # python-control evaluates L at its integrator pole z = 1 internally
            warnings.simplefilter("ignore", RuntimeWarning)
            gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(loop, method="poly")
        assert entry["gain_margin_db"] == pytest.approx(20 * np.log10(gm), rel=1e-6)
        assert entry["phase_margin_deg"] == pytest.approx(pm, rel=1e-6)
        # delay margin = PM / w_gc (rad / (rad/s)), python-control's crossover
        assert entry["delay_margin_s"] == pytest.approx(np.radians(pm) / wgc, rel=1e-5)
        # s-plane poles are ln(z)/ts of the z poles (the documented mapping)
        s_poles = np.array([complex(re, im) for re, im in entry["poles_s"]])
        z_poles = np.array([complex(re, im) for re, im in entry["poles_z"]])
        np.testing.assert_allclose(np.exp(s_poles * ts), z_poles, rtol=1e-10, atol=1e-12)
        # damping = smallest -Re(s)/|s| over the poles, less the one left on
        # each cancelling controller zero (the documented convention)
        keep = np.ones(s_poles.size, dtype=bool)
        for zero in entry["cancelled_zeros_z"]:
            keep[int(np.argmin(np.where(keep, np.abs(z_poles - zero), np.inf)))] = False
        kept = s_poles[keep]
        assert entry["damping"] == pytest.approx(float(np.min(-kept.real / np.abs(kept))), rel=1e-9)


def test_two_runs_give_byte_identical_files(logged):
    folder, paths, _result, _document = logged
    # Same folder: the gains file records the schedule's path, so another
    # folder would be another input (and another hash).
    second, _ = _run(folder, "log_again")
    assert [p.name for p in second] == [p.name for p in paths]
    for a, b in zip(paths, second):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_png_files_carry_no_software_or_time_metadata(logged):
    _folder, paths, _result, _document = logged
    for path in paths:
        if path.suffix != ".png":
            continue
        data = path.read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        # walk the chunks (length, type, data, CRC): no text or time chunk
        # may name software or a date
        offset, kinds = 8, []
        while offset < len(data):
            (length,) = struct.unpack(">I", data[offset:offset + 4])
            kind = data[offset + 4:offset + 8]
            kinds.append(kind)
            if kind in (b"tEXt", b"iTXt", b"zTXt"):
                assert not data[offset + 8:offset + 8 + length].startswith(b"Software")
            offset += 12 + length
        assert b"tIME" not in kinds


def test_markdown_opens_with_the_verdict_and_carries_the_cautions(logged):
    folder, _paths, _result, document = logged
    text = (folder / "log" / "verification.md").read_text(encoding="utf-8")
    first = text.splitlines()[2]
    assert first.startswith("**Verdict: " + ("PASS" if document["verdict"]["passed"] else "FAIL"))
    for heading in ("## Per-point table", "## Worst case per spec", "## Whole-table checks", "## Quantisation",
                    "## Generated C", "## Simulation", "## Warnings", "## Safety"):
        assert heading in text
    order = [text.index(h) for h in ("## Per-point table", "## Worst case per spec", "## Whole-table checks",
                                     "## Quantisation", "## Generated C", "## Simulation", "## Warnings",
                                     "## Safety")]
    assert order == sorted(order)
    for name in document["plots"]:
        assert f"]({name})" in text


def test_a_failing_design_names_the_binding_spec(tmp_path):
    # Damping 0.95 together with every dominant pole above 5000 rad/s, with
    # one sample of delay at 8-10 kHz: the design finds no PI for it at any
    # point (it falls back to a compromise and diagnoses it).  Damping 0.95
    # alone is reachable (all-real closed-loop poles), so it is not enough.
    # (1500 rad/s was enough while the demo swept a narrow zero range; its
    # max-crossover search over the whole PI space reaches it.)
    paths, result = _run(tmp_path, "log", full=False, damping=0.95, band="[5000, 9000]")
    assert not result.passed
    document = json.loads(paths[0].read_text(encoding="utf-8"))
    verdict = document["verdict"]
    assert verdict["passed"] is False and verdict["failed_points"]
    failing = verdict["failed_points"][0]
    assert failing["binding"] == result.binding[failing["index"]] and failing["binding"] is not None
    assert failing["binding"] in failing["failed"]
    text = paths[1].read_text(encoding="utf-8")
    assert text.splitlines()[2].startswith("**Verdict: FAIL.**")
    summary = text[: text.index("## Per-point table")]
    assert "## Failed points" in summary and failing["binding"] in summary
    assert validate(document) == []


def test_timestamp_only_when_asked_and_no_overwrite_of_foreign_files(tmp_path):
    paths, _ = _run(tmp_path, "log", full=False, plots=False, timestamp=True)
    document = json.loads(paths[0].read_text(encoding="utf-8"))
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\+00:00", document["timestamp"])
    foreign = tmp_path / "other"
    foreign.mkdir()
    (foreign / "verification.md").write_text("someone else's notes\n", encoding="utf-8")
    with pytest.raises(OutputConflictError):
        _run(tmp_path, "other", full=False, plots=False)
    assert (foreign / "verification.md").read_text(encoding="utf-8") == "someone else's notes\n"


def test_a_verify_result_is_logged_with_the_gains_file_hash(logged, tmp_path):
    import hashlib

    folder, _paths, _result, _document = logged
    schedule = gainloom.load_schedule(folder / "speed.yaml")
    checked = gainloom.verify(schedule, folder / "gains.yaml")
    paths = write_verification(tmp_path / "log", schedule=schedule, result=checked, table=checked.table,
                               gains_path=folder / "gains.yaml", plots=False)
    document = json.loads(paths[0].read_text(encoding="utf-8"))
    assert validate(document) == []
    assert document["inputs"]["gains"]["sha256"] == hashlib.sha256((folder / "gains.yaml").read_bytes()).hexdigest()
    assert document["verdict"]["passed"] is checked.passed
    assert document["verdict"]["not_checked"] == ["quantisation", "generated C", "target cores", "coding rules",
                                                  "simulation"]


def test_rounding_that_breaks_a_spec_fails_the_run():
    from types import SimpleNamespace

    from gainloom.report.document import _verdict

    # Stand-ins with only what the verdict reads: a passing design and a
    # quantisation check that reports a broken spec.
    result = SimpleNamespace(passed=True, table_report=SimpleNamespace(passed=True))
    entries = [{"index": 0, "label": "p0", "status": "pass", "binding": None, "failed": [], "specs": {},
                "notes": []}]
    verdict = _verdict(result, entries, SimpleNamespace(passed=False), None, None)
    assert verdict["passed"] is False and verdict["quantisation"] is False
    assert any("rounding" in reason for reason in verdict["reasons"])
    assert _verdict(result, entries, SimpleNamespace(passed=True), None, None)["passed"] is True


def test_long_failure_lists_are_summarised_by_binding_spec(logged):
    from gainloom.report.markdown import FAILED_ROWS, render_markdown

    _folder, _paths, _result, document = logged
    doc = json.loads(json.dumps(document))
    fake = {"index": 0, "label": "p", "binding": "min_damping", "failed": ["min_damping"], "value": 0.5,
            "limit": 0.6, "notes": []}
    doc["verdict"]["failed_points"] = [dict(fake, index=i) for i in range(FAILED_ROWS + 7)]
    text = render_markdown(doc)
    assert f"... and 7 more failed points (binding spec: min_damping at {FAILED_ROWS + 7} points" in text
