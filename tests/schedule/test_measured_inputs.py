"""Bad measured-plant input: one located error (file, line, column), exit 2."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import gainloom
from gainloom.errors import ScheduleError

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "schedules" / "measured_speed.yaml"
GOOD = (DEMO.parent / "measured_speed" / "load_2.csv").read_text().splitlines()
HEADER = GOOD.index("frequency [Hz],magnitude [dB],phase [deg]")


@pytest.fixture
def copy(tmp_path: Path) -> Path:
    shutil.copytree(DEMO.parent / "measured_speed", tmp_path / "measured_speed")
    shutil.copy(DEMO, tmp_path / "measured_speed.yaml")
    return tmp_path


def _write(copy: Path, lines: list[str]) -> Path:
    path = copy / "measured_speed" / "load_2.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


def _error(copy: Path) -> ScheduleError:
    with pytest.raises(ScheduleError) as caught:
        gainloom.load_schedule(copy / "measured_speed.yaml")
    return caught.value


def test_non_rising_frequency_is_located(copy):
    lines = list(GOOD)
    lines[HEADER + 10], lines[HEADER + 11] = lines[HEADER + 11], lines[HEADER + 10]
    path = _write(copy, lines)
    error = _error(copy)
    assert (error.file, error.line, error.column) == (str(path), HEADER + 12, 1)
    assert "frequencies must rise strictly" in error.message


def test_nan_is_located(copy):
    lines = list(GOOD)
    f, mag, _ = lines[HEADER + 5].split(",")
    lines[HEADER + 5] = f"{f},{mag}, nan"
    _write(copy, lines)
    error = _error(copy)
    assert (error.line, error.column) == (HEADER + 6, len(f) + len(mag) + 4)
    assert "phase is 'nan'" in error.message and "finite" in error.message


def test_text_is_located(copy):
    lines = list(GOOD)
    lines[HEADER + 3] = "12.5,abc,-90"
    _write(copy, lines)
    error = _error(copy)
    assert (error.line, error.column) == (HEADER + 4, 6)
    assert "magnitude 'abc' is not a number" in error.message


def test_missing_column_is_located(copy):
    _write(copy, ["frequency [Hz],magnitude [dB]"] + [",".join(r.split(",")[:2]) for r in GOOD[HEADER + 1 :]])
    error = _error(copy)
    assert error.line == 1 and "no column 'phase'" in error.message


def test_missing_unit_is_refused_and_the_schedule_may_give_it(copy):
    _write(copy, ["frequency,magnitude [dB],phase [deg]"] + GOOD[HEADER + 1 :])
    error = _error(copy)
    assert error.line == 1 and "unit of column 'frequency' is not stated" in error.message
    schedule = copy / "measured_speed.yaml"
    schedule.write_text(schedule.read_text().replace("    fit:\n", "    units: {frequency: Hz}\n    fit:\n", 1))
    gainloom.load_schedule(schedule)  # now it loads


def test_units_that_disagree_are_refused(copy):
    schedule = copy / "measured_speed.yaml"
    schedule.write_text(schedule.read_text().replace("    fit:\n", "    units: {frequency: rad/s}\n    fit:\n", 1))
    error = _error(copy)
    assert "in Hz but the schedule says rad/s" in error.message


def test_too_few_samples_is_refused(copy):
    path = _write(copy, GOOD[: HEADER + 1 + 12])
    error = _error(copy)
    assert error.file == str(path) and "12 samples" in error.message and "at least 20" in error.message


def test_a_grid_point_without_data_is_located(copy):
    schedule = copy / "measured_speed.yaml"
    text = schedule.read_text()
    schedule.write_text(text.replace("      - {at: 3, file: measured_speed/load_3.csv}\n", ""))
    error = _error(copy)
    assert error.key_path == "plant.measured.files" and "load=3" in error.message


def test_at_must_be_a_grid_point(copy):
    schedule = copy / "measured_speed.yaml"
    schedule.write_text(schedule.read_text().replace("{at: 3,", "{at: 3.5,"))
    error = _error(copy)
    assert error.key_path == "plant.measured.files[2].at" and "not a grid point" in error.message


def test_missing_file_names_the_file(copy):
    (copy / "measured_speed" / "load_4.csv").unlink()
    error = _error(copy)
    assert error.file.endswith("load_4.csv") and "cannot read frequency-response file" in error.message


def test_a_fifo_is_not_read(copy):
    path = copy / "measured_speed" / "load_4.csv"
    path.unlink()
    os.mkfifo(path)
    error = _error(copy)
    assert "must be a regular file" in error.message


def test_tolerances_and_other_holds_are_refused(copy):
    schedule = copy / "measured_speed.yaml"
    text = schedule.read_text()
    schedule.write_text(text.replace("  method: zoh", "  method: tustin"))
    assert "needs method 'zoh'" in _error(copy).message
    schedule.write_text(text + "tolerances:\n  parameters: {}\n")
    assert "a measured plant has none" in _error(copy).message


def test_cli_prints_one_located_line_and_exits_2(copy, tmp_path):
    lines = list(GOOD)
    lines[HEADER + 3] = "12.5,abc,-90"
    path = _write(copy, lines)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    done = subprocess.run([sys.executable, "-m", "gainloom", "inspect", str(copy / "measured_speed.yaml")],
                          check=False, capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    assert f"{path}:{HEADER + 4}:6: magnitude 'abc' is not a number" in done.stderr


def test_inspect_lists_the_fit_per_point():
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    done = subprocess.run([sys.executable, "-m", "gainloom", "inspect", str(DEMO)], check=False,
                          capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "measured plant: fitted 2 poles, 0 zeros and a dead time (order chosen" in done.stdout
    assert done.stdout.count("load_") >= 4 + 3  # four files in the table, three outlier warnings
