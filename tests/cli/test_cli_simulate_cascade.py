"""``gainloom simulate`` on the cascade demo, from its design folder: the
speed step settles, the load step is rejected, the current loop tracks its
reference, and the simulated current loop equals an independent
python-control discretisation of it; bad input is one located line, exit 2."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import control
import numpy as np
import pytest

from gainloom.cli import main
from gainloom.design.lookup import interpolate_table
from gainloom.schedule.cascade import load_cascade
from gainloom.simulation.cascade_files import simulate_cascade_files

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "servo_cascade.yaml"


def run_cli(*args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run([sys.executable, "-m", "gainloom", "simulate", str(DEMO), *args], check=False,
                          capture_output=True, text=True, env=env, timeout=300)


@pytest.fixture(scope="module")
def folder(servo_cascade_design) -> Path:
    done, out = servo_cascade_design
    assert done.returncode == 0, done.stdout + done.stderr
    return out


@pytest.fixture(scope="module")
def default_run(folder, tmp_path_factory):
    plots = tmp_path_factory.mktemp("cascade_plots")
    done = run_cli("--gains", str(folder), "--json", "--series", "--plot", str(plots))
    return done, plots


def test_speed_step_settles_and_the_load_is_rejected(default_run):
    done, _plots = default_run
    assert done.returncode == 0, done.stdout + done.stderr
    data = json.loads(done.stdout)  # strict JSON: no NaN or Infinity
    assert data["kind"] == "cascade" and data["passed"] is True and data["rate_factors"] == [1, 8]
    assert data["notes"] == []  # the demo's gains files and log raise nothing
    current, speed = data["loops"]
    reference = data["scenario"]["reference_step"]
    omega = np.array(speed["series"]["output"])
    t = np.array(speed["series"]["time"])
    m = speed["metrics"]
    # settles to the reference (type-1 loop: integral action, final-value theorem)
    assert m["settling_time"] is not None and m["settling_time"] < data["scenario"]["load_step"]["time_s"]
    assert abs(omega[-1] - reference) < 0.01 * reference
    # the load step is rejected: back inside the 2 % band before the end, without steady error
    (load,) = m["load_responses"]
    assert load["recovery_time"] is not None and load["peak_deviation"] < 0.05 * reference
    after = t > load["time"] + 0.5 * (t[-1] - load["time"])
    assert np.max(np.abs(omega[after] - reference)) < 0.02 * reference
    # the speed loop's output is the current reference, within the speed loop's limits
    i_ref = np.array(current["series"]["reference"])
    assert np.max(np.abs(i_ref)) <= max(abs(v) for v in speed["output_limits"]) + 1e-9
    assert m["saturation_fraction"] > 0  # the 70 rad/s step asks more than 20 A


def test_current_loop_tracks_its_reference(default_run):
    done, _plots = default_run
    current = json.loads(done.stdout)["loops"][0]
    m = current["metrics"]
    # its first reference step (the speed loop at its 20 A limit) settles inside the window it is held for
    assert m["step_size"] == pytest.approx(20.0) and m["settling_time"] is not None
    assert m["settling_time"] < current["step_window_s"]
    series = {k: np.array(v) for k, v in current["series"].items()}
    late = series["time"] > 0.75 * series["time"][-1]  # the load step's transient is over
    # late in the run the current follows its (slowly changing) reference within 2 % of the 20 A limit
    # (common practice for a tracking band, no source)
    assert np.max(np.abs(series["reference"][late] - series["output"][late])) < 0.02 * 20.0


def test_plot_is_written_through_the_output_rules(default_run, folder, tmp_path):
    done, plots = default_run
    png = plots / "cascade_simulation.png"
    assert str(png) in json.loads(done.stdout)["plots"]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and (plots / ".gainloom-manifest.json").exists()
    foreign = tmp_path / "cascade_simulation.png"
    foreign.write_bytes(b"mine")
    assert main(["simulate", str(DEMO), "--gains", str(folder), "--plot", str(tmp_path)]) == 2
    assert foreign.read_bytes() == b"mine"  # never over a file gainloom did not write, without --force


def _inner_closed_loop(cascade, table, point: dict[str, float]) -> control.TransferFunction:
    """The current loop r -> i at the PWM rate, built independently of gainloom's simulator.

    Plant i/v = 1/(L s + R) with a 1.5-sample total delay (1 sample of
    computation, half a sample of PWM dead time), sampled by python-control
    (``sample_system``, ZOH) over T - theta and theta and combined in the
    modified z-transform form x[k+1] = Phi(T) x + Gamma(T - theta) u[k-1] +
    Phi(T - theta) Gamma(theta) u[k-2] (Franklin, Powell & Workman, Digital
    Control of Dynamic Systems, sampling with a fractional delay; from
    memory), closed by the PI kp + ki_ts z/(z - 1) of DEVELOPERS.md.
    """
    schedule = cascade.loops[0].schedule
    at = np.array([[point[n] for n in schedule.axis_names]])
    models = schedule.evaluate(at)
    T = float(models.sample_period[0])
    total = float(models.delay[0]) * T + float(np.asarray(models.plant.dead_time)[0])
    whole = int(np.floor(total / T + 1e-9))
    theta = total - whole * T
    assert whole == 1 and theta == pytest.approx(0.5 * T)  # the demo's delay, as the docstring says
    plant = control.ss(control.tf(np.trim_zeros(models.plant.num[0], "f"), models.plant.den[0]))
    late = control.sample_system(plant, T - theta, "zoh")
    early = control.sample_system(plant, theta, "zoh")
    full = control.sample_system(plant, T, "zoh")
    z1 = control.tf([1.0], [1.0, 0.0], T)
    sampled = (control.ss(full.A, late.B, full.C, 0, T) * z1
               + control.ss(full.A, late.A @ early.B, full.C, 0, T) * z1 * z1)
    gains = interpolate_table(table, at)
    kp, ki_ts = float(gains["kp"][0]), float(gains["ki_ts"][0])
    pi = control.tf([kp + ki_ts, -kp], [1.0, -1.0], T)
    return control.feedback(control.ss(pi) * sampled, 1)  # state space throughout: no ill-conditioned tf


def test_simulated_current_loop_matches_python_control(folder):
    # a 1 rad/s step saturates neither loop, so the current loop is linear: its
    # response to the reference the speed loop gave it must be the independent model's
    simulation = simulate_cascade_files(DEMO, folder, number_format="float64", reference_step=1.0)
    current, speed = simulation.run.loops
    assert current.metrics.saturation_fraction == 0 and speed.metrics.saturation_fraction == 0
    cascade = load_cascade(DEMO)
    from gainloom.design.gainsfile import read_gains

    table, _meta = read_gains(folder / "current.gains.yaml")
    closed = _inner_closed_loop(cascade, table, simulation.run.scenario.inner_point)
    expected = control.forced_response(closed, T=current.time, U=current.reference).outputs
    scale = float(np.max(np.abs(current.output)))
    np.testing.assert_allclose(current.output, expected, rtol=0, atol=1e-9 * scale)


@pytest.mark.parametrize("options, expected", [
    (["--max-overshoot", "5"], "--max-overshoot does not apply to a cascade"),
    (["--ramp", "speed=0:6000"], "a cascade run holds the operating point: expected NAME=VALUE"),
    (["--ramp", "sped=100"], "did you mean 'speed'?"),
    (["--ramp", "inertia=20"], "--ramp inertia: expected a value in its grid [1, 10]"),
    (["--load-step", "9:1"], "--load-step: expected a time inside the run"),
])
def test_bad_options_are_one_located_line(folder, options, expected, capsys):
    assert main(["simulate", str(DEMO), "--gains", str(folder), *options]) == 2
    err = capsys.readouterr().err
    assert expected in err and len(err.strip().splitlines()) == 1, err


def test_a_gains_file_of_the_wrong_loop_is_located(folder, tmp_path, capsys):
    assert main(["simulate", str(DEMO), "--gains", str(folder / "speed.gains.yaml")]) == 2
    assert "a cascade needs its design folder" in capsys.readouterr().err
    swapped = tmp_path / "swapped"
    swapped.mkdir()
    shutil.copyfile(folder / "speed.gains.yaml", swapped / "current.gains.yaml")
    assert main(["simulate", str(DEMO), "--gains", str(swapped)]) == 2
    err = capsys.readouterr().err
    assert f"{swapped / 'current.gains.yaml'}:" in err and "axes" in err
    assert "expected the scheduling variables of loop 'current' (current, temperature)" in err
    shutil.copyfile(folder / "current.gains.yaml", swapped / "current.gains.yaml")
    assert main(["simulate", str(DEMO), "--gains", str(swapped)]) == 2
    assert "no speed.gains.yaml" in capsys.readouterr().err


def test_a_failed_cascade_log_is_noted(folder, tmp_path, capsys):
    # the gains files record each loop's own design; the cascade checks are only in the folder's log
    for name in ("current.gains.yaml", "speed.gains.yaml"):
        shutil.copyfile(folder / name, tmp_path / name)
    log = json.loads((folder / "verification.json").read_text(encoding="utf-8"))
    assert log["cascade"]["passed"] is True
    log["cascade"]["passed"] = False
    (tmp_path / "verification.json").write_text(json.dumps(log), encoding="utf-8")
    assert main(["simulate", str(DEMO), "--gains", str(tmp_path), "--duration", "0.01"]) == 0
    assert "note: verification.json: the design folder's log records a cascade that did NOT pass" in (
        capsys.readouterr().out)
