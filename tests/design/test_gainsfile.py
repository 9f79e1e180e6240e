"""Gains file: exact round trip, determinism, and errors with file/line/key."""

import json

import numpy as np
import pytest
import yaml

from gainloom import ScheduleError
from gainloom.design.gainsfile import GAINS_FORMAT, read_gains, write_gains
from gainloom.design.table import GainTable, TableAxis


def make_table():
    axes = (TableAxis("speed", "rpm", np.array([0.0, 1500.0, 3000.0])), TableAxis("load", "", np.array([0.0, 1.0])))
    rng = np.random.default_rng(11)
    coefficients = {"kp": rng.uniform(0.1, 3, (3, 2)), "ki_ts": rng.uniform(1e-6, 1e-3, (3, 2))}
    return GainTable("pi", axes, coefficients, np.full((3, 2), 1 / 16000), (-24.0, 24.0))


@pytest.mark.parametrize("suffix", [".yaml", ".json"])
def test_round_trip_is_exact_and_deterministic(tmp_path, suffix):
    table = make_table()
    first = write_gains(table, tmp_path / f"a{suffix}")
    second = write_gains(table, tmp_path / f"b{suffix}")
    assert first.read_bytes() == second.read_bytes()
    back, meta = read_gains(first)
    assert meta.format == GAINS_FORMAT
    assert meta.to_dict()["schedule"] == {"path": None, "sha256": None} and meta.path == str(first)
    assert back.structure == "pi" and back.shape == (3, 2)
    for name in ("kp", "ki_ts"):
        # bit-exact: shortest round-trip decimals (Python repr)
        assert np.array_equal(back.coefficients[name], table.coefficients[name])
    assert np.array_equal(back.sample_period, table.sample_period)
    assert back.output_limits == (-24.0, 24.0)
    assert [a.name for a in back.axes] == ["speed", "load"]


def test_json_output_is_strict_json(tmp_path):
    path = write_gains(make_table(), tmp_path / "g.json")
    json.loads(path.read_text())  # raises on NaN/Infinity tokens


def write_text(tmp_path, doc):
    path = tmp_path / "bad.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def good_doc(tmp_path):
    path = write_gains(make_table(), tmp_path / "good.yaml")
    return yaml.safe_load(path.read_text())


@pytest.mark.parametrize(
    ("mutate", "key", "fragment"),
    [
        (lambda d: d.update(format="gainloom-gains/9"), "format", "unknown gains format"),
        (lambda d: d.update(structure="pidd"), "structure", "did you mean"),
        (lambda d: d["coefficients"].pop("ki_ts"), "coefficients", "missing key 'ki_ts'"),
        (lambda d: d["coefficients"].update(kd_b=[[1, 2]] * 3), "coefficients.kd_b", "unknown coefficient"),
        (lambda d: d["coefficients"].update(kp=[[1, 2]] * 2), "coefficients.kp", r"shape \(3, 2\)"),
        (lambda d: d["coefficients"].update(kp=[[1, "x"]] * 3), "coefficients.kp", "expected numbers"),
        (lambda d: d["axes"][0].update(values=[0, 0, 1]), "axes[0].values", "strictly increasing"),
        (lambda d: d.update(output_limits=[1, -1]), "output_limits", "u_min < u_max"),
        (lambda d: d.update(sample_period=[[0, 1]] * 3), "sample_period", "positive"),
        (lambda d: d.update(design=5), "design", "expected a mapping of design settings"),
    ],
)
def test_bad_files_name_file_line_and_key(tmp_path, mutate, key, fragment):
    doc = good_doc(tmp_path)
    mutate(doc)
    path = write_text(tmp_path, doc)
    with pytest.raises(ScheduleError, match=fragment) as info:
        read_gains(path)
    error = info.value
    assert error.file == str(path)
    assert error.key_path == key
    assert error.line is not None and error.line >= 1


def test_line_number_points_at_the_bad_key(tmp_path):
    doc = good_doc(tmp_path)
    doc["output_limits"] = [5, 1]
    path = write_text(tmp_path, doc)
    lines = path.read_text().splitlines()
    expected = next(i for i, line in enumerate(lines, 1) if line.startswith("output_limits"))
    with pytest.raises(ScheduleError) as info:
        read_gains(path)
    assert info.value.line in (expected, expected + 1)


def test_unreadable_and_non_mapping_files(tmp_path):
    with pytest.raises(ScheduleError, match="cannot read"):
        read_gains(tmp_path / "missing.yaml")
    path = tmp_path / "list.yaml"
    path.write_text("- 1\n- 2\n")
    with pytest.raises(ScheduleError, match="mapping"):
        read_gains(path)
    path.write_text("format: [unclosed\n")
    with pytest.raises(ScheduleError, match="not valid"):
        read_gains(path)


def test_provenance_notes_say_what_the_record_holds_against_the_file():
    from gainloom.design.gainsfile import GainsMetadata, compromise_points, provenance_notes

    clean = GainsMetadata(schedule_sha256="a" * 64, passed=True, points=[{"index": 0}])
    assert provenance_notes(clean, "a" * 64) == [] and provenance_notes(clean) == []
    other = provenance_notes(clean, "b" * 64)
    assert len(other) == 1 and "different version" in other[0]
    failed = GainsMetadata(passed=False, points=[{"index": 0, "compromise": True}, {"index": 3, "compromise": True}])
    assert compromise_points(failed) == [0, 3]
    notes = provenance_notes(failed, "b" * 64)  # no recorded hash: nothing to compare
    assert len(notes) == 2 and "did not meet every spec" in notes[0] and "indices 0, 3" in notes[1]
