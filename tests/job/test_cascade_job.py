"""``gainloom design`` on the cascade demos: one folder with a gains file per
loop, one C module, the per-loop host harness on that module, and a log with
a top-level ``loops`` list and a ``cascade`` section."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from gainloom.codegen.harness import WARNING_FLAGS, find_compiler
from gainloom.codegen.target_tools import find_target_tools

TOOLS = find_target_tools()
needs_target = pytest.mark.skipif(
    not (TOOLS.can_run and TOOLS.cppcheck), reason=f"missing {', '.join(TOOLS.missing('gcc', 'nm', 'size', 'readelf', 'qemu', 'cppcheck'))}")

SCHEDULES = Path(__file__).resolve().parents[2] / "schedules"


def _design(path: Path, out: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run([sys.executable, "-m", "gainloom", "design", str(path), "--out", str(out), "--quiet"],
                          capture_output=True, text=True, env=env, timeout=600, check=False)


@pytest.fixture(scope="module")
def demo(servo_cascade_design):
    return servo_cascade_design


@pytest.fixture(scope="module")
def fast(tmp_path_factory):
    out = tmp_path_factory.mktemp("servo_fast")
    return _design(SCHEDULES / "servo_cascade_fast_speed.yaml", out), out


def test_demo_runs_end_to_end(demo):
    done, out = demo
    assert done.returncode == 0, done.stdout + done.stderr
    assert "== loop current" in done.stdout and "== loop speed" in done.stdout
    assert "cascade PASS" in done.stdout and "functional-safety" in done.stdout
    assert {"current.gains.yaml", "speed.gains.yaml", "servo.h", "servo.c", "verification.json",
            "verification.md", "current_gains.png", "speed_gains.png", "cascade_simulation.png"} <= {
        p.name for p in out.iterdir()}


def test_log_has_loops_inner_first_and_a_cascade_section(demo):
    _done, out = demo
    doc = json.loads((out / "verification.json").read_text(encoding="utf-8"))
    assert [loop["loop"]["name"] for loop in doc["loops"]] == ["current", "speed"]
    assert doc["loops"][1]["loop"]["rate_factor"] == 8
    for loop in doc["loops"]:  # each entry is a whole single-loop document
        assert loop["verdict"]["passed"] is True and len(loop["points"]) == 12
    simulation = doc["cascade"]["simulation"]
    assert simulation["stable"] is True and [loop["name"] for loop in simulation["loops"]] == ["current", "speed"]
    assert simulation["loops"][1]["metrics"]["overshoot_percent"] is not None
    checks = doc["cascade"]["checks"]
    assert checks["passed"] is True
    assert checks["pairs"][0]["bandwidth_separation"]["required"] == 4
    # the demo has no tolerances: the pairs are checked on the nominal plants only,
    # each speed point still reports where its outer specs are tightest
    assert checks["pairs"][0]["corners_checked"] == 0
    worst = checks["pairs"][0]["outer_specs_with_inner"]["worst_per_point"]
    assert len(worst) == 12 and all(w["corner"] == {} and not w["failed_specs"] for w in worst)
    markdown = (out / "verification.md").read_text(encoding="utf-8")
    assert "## Cascade checks" in markdown and "## Loop current" in markdown and "## Loop speed" in markdown
    assert "**Verdict: PASS.**" in markdown


@pytest.mark.skipif(find_compiler() is None, reason="no C compiler")
def test_harness_is_bit_exact_for_every_loop_on_the_one_module(demo):
    _done, out = demo
    stages = json.loads((out / "verification.json").read_text(encoding="utf-8"))["cascade"]["stages"]
    for loop in ("current", "speed"):
        check = next(s for s in stages if s["stage"] == f"{loop}: C check")
        assert check["status"] == "pass" and "bit-exact" in check["detail"], check


def _compile(out: Path, stem: str, tmp_path: Path, *defines: str) -> subprocess.CompletedProcess:
    compiler = find_compiler()
    main = tmp_path / "main.c"
    # the documented calling order: the speed step every SERVO_SPEED_EVERY-th current step
    main.write_text(
        '#include <stddef.h>\n'
        f'#include "{stem}.h"\n'
        "int main(void)\n{\n"
        f"    {stem}_current_gains_t cg; {stem}_current_state_t cs;\n"
        f"    {stem}_speed_gains_t sg; {stem}_speed_state_t ss;\n"
        "    int16_t reference = 0; int16_t voltage = 0; int k;\n"
        f"    {stem}_current_clear(&cs); {stem}_speed_clear(&ss);\n"
        "    for (k = 0; k < 64; ++k) {\n"
        f"        if ((k % {stem.upper()}_SPEED_EVERY) == 0) {{\n"
        f"            {stem}_speed_lookup(0, 1 << 4, &sg);\n"
        f"            reference = {stem}_speed_update(&ss, &sg, (int16_t)100, 0, NULL);\n"
        "        }\n"
        f"        {stem}_current_lookup(0, 0, &cg);\n"
        f"        voltage = {stem}_current_update(&cs, &cg, reference, 0, NULL);\n"
        "    }\n"
        "    return (voltage == 12345) ? 1 : 0;\n}\n",
        encoding="utf-8",
    )
    return subprocess.run([*compiler, "-std=c99", *WARNING_FLAGS, *defines, f"-I{out}", str(out / f"{stem}.c"),
                           str(main), "-o", str(tmp_path / "servo")], capture_output=True, text=True, timeout=120,
                          check=False)


@pytest.mark.skipif(find_compiler() is None, reason="no C compiler")
def test_module_builds_as_firmware_with_strict_warnings(demo, tmp_path):
    _done, out = demo
    built = _compile(out, "servo", tmp_path)
    assert built.returncode == 0, built.stderr


def test_fast_speed_variant_fails_its_separation_and_says_so(fast):
    done, out = fast
    assert done.returncode == 1, done.stdout + done.stderr
    assert "needs 4: FAILS" in done.stdout and "cascade FAIL" in done.stdout
    doc = json.loads((out / "verification.json").read_text(encoding="utf-8"))
    separation = doc["cascade"]["checks"]["pairs"][0]["bandwidth_separation"]
    assert separation["passed"] is False and separation["min_crossover_ratio"] < 4
    assert "bandwidth separation (inner / outer crossover) | FAIL" in (out / "verification.md").read_text(
        encoding="utf-8")


@pytest.mark.skipif(find_compiler() is None, reason="no C compiler")
def test_failed_cascade_does_not_build_without_accepting_it(fast, tmp_path):
    _done, out = fast
    refused = _compile(out, "servo_fast", tmp_path)
    assert refused.returncode != 0 and "NOT VERIFIED" in refused.stderr
    accepted = _compile(out, "servo_fast", tmp_path, "-DSERVO_FAST_CURRENT_ACCEPT_UNVERIFIED",
                        "-DSERVO_FAST_SPEED_ACCEPT_UNVERIFIED")
    assert accepted.returncode == 0, accepted.stderr


@needs_target
def test_target_stage_runs_the_module_on_both_cores(demo):
    done, out = demo
    doc = json.loads((out / "verification.json").read_text(encoding="utf-8"))
    stages = {s["stage"]: s for s in doc["cascade"]["stages"]}
    assert stages["target"]["status"] == "pass" and stages["C rules"]["status"] == "pass", stages
    assert "per base period on average" in stages["target"]["detail"]
    target = doc["cascade"]["target"]
    assert [c["core"] for c in target["cores"]] == ["cortex-m0plus", "cortex-m4f"]
    for core in target["cores"]:
        assert core["build"]["compiled"] == {"c99": True, "c11": True}
        names = {f["name"] for f in core["build"]["functions"]}
        assert {"servo_current_update", "servo_speed_update", "servo_current_lookup", "servo_speed_lookup"} <= names
        for loop in core["loops"]:  # the harness vectors on the emulated core: the host build's bytes, bit-exact
            assert loop["emulated_run"]["identical_to_host"] is True, loop
            assert loop["emulated_run"]["worst_step_error"] == 0 and loop["instructions"]["step"]["calls"] > 0
        interrupt = core["interrupt"]
        # the documented calling order: the speed step in 1 of every 8 interrupts
        assert interrupt["rate_factor"] == 8 and interrupt["with_outer"]["calls"] * 7 == interrupt["inner_only"]["calls"]
        # a period that also steps the outer loop runs more instructions than one that does not
        assert interrupt["with_outer"]["median"] > interrupt["inner_only"]["median"]
        mean = interrupt["mean_per_base_period"]
        assert interrupt["inner_only"]["min"] <= mean <= interrupt["with_outer"]["max"]
    assert target["rules"]["undocumented"] == []
    assert "Target cores" in (out / "verification.md").read_text(encoding="utf-8")
    assert "per base period on average" in done.stdout


@needs_target
def test_failed_cascade_module_is_still_checked_on_the_target(fast):
    _done, out = fast
    stages = {s["stage"]: s for s in json.loads((out / "verification.json").read_text(encoding="utf-8"))["cascade"]["stages"]}
    # the checks build it as an integrator who accepted the unverified tables would
    assert stages["target"]["status"] == "pass" and stages["C rules"]["status"] == "pass", stages
