"""The full run (``gainloom.job.design_job.run_design_job``): every file, one write,
determinism, failure paths, the default simulation.

Outside references: the host C compiler itself (its ``--version`` line and a
strict ``-c`` build of the emitted source); the textbook zero-order-hold
equivalent of ``a/(s - a)``, ``G(z) = (p - 1)/(z - p)`` with ``p = exp(a ts)``
(derived from ``Z{G(s)/s}``, from memory), whose closed loop with ``d``
samples of delay has the characteristic polynomial ``z^d (z - p) + K (p - 1)``,
solved here with ``numpy.roots``; SHA-256 from ``hashlib``.  The schedules
are invented test scenarios.
"""

from __future__ import annotations

import hashlib
import json
import math
import shutil
import subprocess
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from cases import PASSING, STRICT, UNSTABLE

from gainloom.codegen.harness import find_compiler
from gainloom.job.design_job import run_design_job
from gainloom.outputs import MANIFEST_NAME, OutputConflictError
from gainloom.report.schema import validate
from gainloom.simulation.defaults import LOAD_STEP_FRACTION, SIMULATION_MAX_SAMPLES, SIMULATION_SPAN, default_scenario

ROOT = Path(__file__).resolve().parents[2]

def needs_cc(test):
    """Marked ``needs_cc`` and skipped where no host C compiler exists."""
    skip = pytest.mark.skipif(find_compiler() is None, reason="no C compiler on this machine")
    return pytest.mark.needs_cc(skip(test))


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


@pytest.fixture(scope="module")
def passing(tmp_path_factory):
    """One full run of the passing schedule (shared: a run takes seconds)."""
    base = tmp_path_factory.mktemp("job")
    schedule = base / "fan.yaml"
    schedule.write_text(PASSING)
    stages = []
    job = run_design_job(schedule, base / "out", progress=lambda *a: stages.append(a))
    return SimpleNamespace(job=job, schedule=schedule, out=base / "out", base=base, progress=stages,
                           doc=json.loads((base / "out" / "verification.json").read_text()))


def test_full_run_writes_gains_c_log_and_plots(passing):
    job, out = passing.job, passing.out
    names = {p.name for p in out.iterdir()}
    for name in ("gains.yaml", "fan.h", "fan.c", "verification.json", "verification.md", MANIFEST_NAME):
        assert name in names
    pngs = {n for n in names if n.endswith(".png")}
    assert {"gains.png", "margins.png", "step.png", "simulation.png"} <= pngs
    assert set(passing.doc["plots"]) == pngs  # the log lists exactly the plots beside it
    assert validate(passing.doc) == []
    # one write: the manifest holds every file with its SHA-256 (hashlib)
    manifest = json.loads((out / MANIFEST_NAME).read_text())["files"]
    assert set(manifest) == names - {MANIFEST_NAME}
    for name, digest in manifest.items():
        assert hashlib.sha256((out / name).read_bytes()).hexdigest() == digest
    assert {p.name for p in job.files} == set(manifest)
    # progress: design stages first, then every later stage in order
    seen = [s for s, *_ in passing.progress]
    order = [seen.index(s) for s in ("design", "quantisation", "emit C", "check C", "simulate", "log", "write")
             if s in seen]
    assert order == sorted(order) and len(order) == (7 if job.harness is not None else 6)


def test_gains_file_names_the_schedule_without_its_folder(passing):
    import yaml

    gains = yaml.safe_load((passing.out / "gains.yaml").read_text())
    assert gains["schedule"]["path"] == "fan.yaml"
    assert gains["schedule"]["sha256"] == hashlib.sha256(passing.schedule.read_bytes()).hexdigest()
    # the C banner and the log identify the same gains file by its bytes
    digest = hashlib.sha256((passing.out / "gains.yaml").read_bytes()).hexdigest()
    assert digest in (passing.out / "fan.h").read_text()
    assert passing.doc["inputs"]["gains"] == {"path": "gains.yaml", "sha256": digest}


@needs_cc
def test_log_records_the_compiler_and_the_harness(passing):
    check = passing.doc["c_check"]
    assert check["status"] == "passed" and check["points"] >= 1000 and check["steps"] >= 5000
    # reference: the compiler's own --version line
    command = check["compiler"].split()
    version = subprocess.run([*command, "--version"], capture_output=True, text=True, check=True).stdout
    assert passing.doc["tools"]["c_compiler"] == version.splitlines()[0] == check["compiler_version"]
    assert passing.doc["verdict"]["c_check"] is True


@needs_cc
def test_emitted_c_compiles_strictly(passing, tmp_path):
    # reference: the compiler itself, with the flags firmware builds use
    command = find_compiler()
    done = subprocess.run([*command, *STRICT, str(passing.out / "fan.c"), "-o", str(tmp_path / "fan.o")],
                          capture_output=True, text=True, cwd=passing.out, check=False)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "fan.o").stat().st_size > 0


def test_every_stage_uses_the_emitted_number_format(passing):
    doc = passing.doc
    assert "q15" in (passing.out / "fan.h").read_text()[:2000]  # the banner records the format
    assert doc["options"]["number_format"] == "q15"
    assert doc["quantisation"]["number_format"] == "q15"
    assert doc["simulation"]["number_format"] == "q15"
    assert [s.stage for s in passing.job.stages] == ["design", "C code", "C check", "target", "C rules",
                                                     "quantisation", "simulation", "log"]


def test_default_scenario_follows_the_documented_rule(passing):
    doc = passing.doc
    scenario = doc["options"]["simulation_scenario"]
    settling = [p["settling_time_s"] for p in doc["points"]]
    settling = [s for s in settling if isinstance(s, float) and math.isfinite(s) and s > 0]
    scale = max(max(settling), 20 * 0.001)  # ts = 1 ms in the schedule above
    assert scenario["time_scale_s"] == pytest.approx(scale, rel=1e-12)
    ramp = scenario["ramp"]
    # the schedule's own breakpoints 10..100 %; 3 T hold, 10 T ramp, 3 T hold
    assert (ramp["variable"], ramp["from"], ramp["to"]) == ("duty", 10.0, 100.0)
    assert ramp["start_s"] == pytest.approx(3 * scale) and ramp["end_s"] == pytest.approx(13 * scale)
    assert scenario["duration_s"] == pytest.approx(16 * scale)
    assert scenario["load_step"]["amplitude"] == pytest.approx(0.1 * 10)  # output limits [-10, 10]
    assert scenario["load_step"]["time_s"] == pytest.approx(8 * scale)
    simulated = doc["simulation"]["scenario"]
    assert simulated["trajectory"]["duty"]["values"] == [10.0, 100.0]
    assert simulated["reference"]["values"] == [0.0, 1.0]
    # samples at 0, ts, 2 ts, ... up to the duration (fixed period here)
    assert abs(doc["simulation"]["samples"] - (16 * scale / 0.001 + 1)) <= 1
    assert doc["simulation"]["passed"] is True and doc["verdict"]["passed"] is True
    assert passing.job.exit_code == 0


def test_same_inputs_give_byte_identical_folders(passing, tmp_path):
    # the same schedule bytes somewhere else, written into another folder
    elsewhere = tmp_path / "deep" / "copy"
    elsewhere.mkdir(parents=True)
    shutil.copyfile(passing.schedule, elsewhere / "fan.yaml")
    run_design_job(elsewhere / "fan.yaml", tmp_path / "second")
    first, second = _snapshot(passing.out), _snapshot(tmp_path / "second")
    assert sorted(first) == sorted(second)
    for name in first:
        assert first[name] == second[name], name


def test_a_foreign_file_is_refused_and_nothing_changes(passing, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "verification.md").write_text("my own notes\n")
    before = _snapshot(out)
    with pytest.raises(OutputConflictError, match="--force") as caught:
        run_design_job(passing.schedule, out, compile=False, simulate=False)
    assert caught.value.exit_code == 2
    assert _snapshot(out) == before  # no manifest, no gains, nothing
    # an earlier gainloom folder whose gains file was edited by hand: refused, intact
    shutil.copytree(passing.out, tmp_path / "earlier")
    edited = tmp_path / "earlier" / "gains.yaml"
    edited.write_text(edited.read_text() + "# tuned by hand\n")
    before = _snapshot(tmp_path / "earlier")
    with pytest.raises(OutputConflictError, match="changed since gainloom wrote it"):
        run_design_job(passing.schedule, tmp_path / "earlier", compile=False, simulate=False)
    assert _snapshot(tmp_path / "earlier") == before
    job = run_design_job(passing.schedule, tmp_path / "earlier", compile=False, simulate=False, force=True)
    assert edited.read_bytes() == (passing.out / "gains.yaml").read_bytes()
    assert job.exit_code == 0


def test_failing_design_writes_everything_and_the_log_explains(tmp_path):
    schedule = tmp_path / "beam.yaml"
    schedule.write_text(UNSTABLE)
    job = run_design_job(schedule, tmp_path / "out")
    assert job.exit_code == 1 and not job.passed
    verdicts = {s.stage: s for s in job.stages}
    assert verdicts["design"].status == "FAIL" and "binding spec: stable" in verdicts["design"].detail
    assert verdicts["simulation"].status == "FAIL" and "unstable" in verdicts["simulation"].detail
    out = tmp_path / "out"
    for name in ("gains.yaml", "beam.h", "beam.c", "verification.json", "verification.md", "simulation.png"):
        assert (out / name).is_file()
    doc = json.loads((out / "verification.json").read_text())
    assert doc["verdict"]["passed"] is False and doc["verdict"]["simulation"] is False
    assert [f["binding"] for f in doc["verdict"]["failed_points"]] == ["stable", "stable"]
    text = (out / "verification.md").read_text()
    assert "**Verdict: FAIL.**" in text and "time-domain simulation fails" in text
    # textbook ZOH equivalent: the logged gain really leaves a pole outside |z| = 1
    for point in doc["points"]:
        a = 200 + 50 * point["at"]["load"]
        p = math.exp(a * 0.005)
        kp = point["coefficients"]["kp"]
        roots = np.roots([1.0, -p, 0.0, 0.0, kp * (p - 1.0)])  # z^3 (z - p) + K (p - 1)
        assert np.max(np.abs(roots)) > 1.0
        assert point["pole_radius"] == pytest.approx(np.max(np.abs(roots)), rel=1e-6)


def test_no_compiler_and_no_simulation_are_not_checked(passing, tmp_path, monkeypatch):
    monkeypatch.setenv("CC", str(tmp_path / "no-such-compiler"))
    job = run_design_job(passing.schedule, tmp_path / "out", simulate=False)
    verdicts = {s.stage: s for s in job.stages}
    assert job.harness.status == "no-compiler"
    assert verdicts["C check"].status == "not checked"
    assert verdicts["C check"].detail == "not checked: no C compiler found"
    assert verdicts["simulation"].status == "not checked" and job.simulation is None
    assert job.exit_code == 0 and job.not_checked == ("C check", "simulation")  # neither pass nor fail
    doc = json.loads((tmp_path / "out" / "verification.json").read_text())
    assert doc["verdict"]["c_check"] is None and doc["c_check"]["status"] == "no-compiler"
    assert {"generated C", "simulation"} <= set(doc["verdict"]["not_checked"])
    assert "Not checked: no C compiler found" in (tmp_path / "out" / "verification.md").read_text()
    assert not (tmp_path / "out" / "simulation.png").exists()


def _fake(settling, decay, ts=1e-3, limits=(-1.0, 2.0)):
    axis = SimpleNamespace(name="x", values=np.array([0.0, 5.0]))
    other = SimpleNamespace(name="y", values=np.array([1.0, 2.0, 7.0]))
    result = SimpleNamespace(
        analysis=SimpleNamespace(settling_time=np.array(settling), decay=np.array(decay)),
        table=SimpleNamespace(sample_period=np.full(len(settling), ts), output_limits=limits, limit_envelope=limits),
    )
    return SimpleNamespace(axes=(axis, other)), result


def test_default_scenario_without_a_settling_time_uses_the_decay_rate():
    schedule, result = _fake([math.inf, math.inf], [50.0, 80.0])
    scenario, info = default_scenario(schedule, result)
    # 2 % of exp(-sigma t): t = ln(50)/sigma, rounded up to 4/sigma (closed form); slowest sigma = 50
    assert info["time_scale_s"] == pytest.approx(4 / 50)
    assert info["held"] == {"y": 4.0}  # middle of 1..7
    assert info["load_step"]["amplitude"] == pytest.approx(LOAD_STEP_FRACTION * 2.0)
    assert scenario.duration == pytest.approx(sum(SIMULATION_SPAN.values()) * 4 / 50)


def test_default_scenario_is_capped_in_samples():
    schedule, result = _fake([500.0, 1.0], [0.01, 4.0], ts=1e-4)
    scenario, info = default_scenario(schedule, result)
    assert scenario.duration / 1e-4 <= SIMULATION_MAX_SAMPLES * (1 + 1e-12)
    assert info["notes"] and "shortened" in info["notes"][0]


def test_demo_schedule_runs_end_to_end(tmp_path):
    demo = ROOT / "schedules" / "conveyor_2d.yaml"
    if not demo.exists():
        pytest.skip("demo schedule not present")
    # the demos are being retuned: only the structure of the run is asserted
    job = run_design_job(demo, tmp_path / "out")
    assert job.exit_code in (0, 1)
    doc = json.loads((tmp_path / "out" / "verification.json").read_text())
    assert validate(doc) == []
    assert len(doc["table"]["axes"]) == 2
    second = doc["table"]["axes"][1]
    held = doc["options"]["simulation_scenario"]["held"]
    assert held == {second["name"]: pytest.approx(0.5 * (second["values"][0] + second["values"][-1]))}
    assert {p.name for p in job.c_files} == {f"{job.prefix}.h", f"{job.prefix}.c"}
    assert all(p.is_file() for p in job.files)


def test_default_scenario_without_finite_limits_has_no_load_step():
    schedule, result = _fake([0.1, 0.2], [40.0, 40.0], limits=(-math.inf, math.inf))
    scenario, info = default_scenario(schedule, result)
    assert scenario.load_steps == () and "no load step" in info["notes"][0]


def test_codegen_full_scales_reach_every_rounding_stage(tmp_path):
    # The schedule's error/output full scales set the Q15 signal scaling of the
    # emitted C, and the harness, quantisation and simulation use the same.
    schedule = tmp_path / "scaled.yaml"
    schedule.write_text(PASSING.replace("  format: q15\n", "  format: q15\n  error_full_scale: 4.0\n  output_full_scale: 12.0\n"))
    job = run_design_job(schedule, tmp_path / "out", simulate=True)
    header = (tmp_path / "out" / "fan.h").read_text()
    assert "error_full_scale=4.0" in header and "output_full_scale=12.0" in header
    # Q15 definition (value = q * 2^-15 * full scale, from memory): the header
    # states the physical meaning of the integers with these full scales.
    assert "e_physical = e * 2^-15 * 4.0" in header and "u_physical = u * 2^-15 * 12.0" in header
    log = json.loads((tmp_path / "out" / "verification.json").read_text())
    assert log["options"]["error_full_scale"] == 4.0 and log["options"]["output_full_scale"] == 12.0
    if find_compiler() is not None:
        # The compiled C with these scales matches the Python mirror bit for bit.
        assert log["c_check"]["status"] == "passed" and log["c_check"]["worst_step_error"] == 0
    assert job.exit_code == 0, log["verdict"]["reasons"] if "verdict" in log else log
