"""Every malformed schedule in tests/bad_schedules/ is refused with one clear
message at the right place.

Each corpus file states in its header what is expected: a message fragment,
the 1-based line and column of the offending YAML node (where the marker text
sits in the file, written by hand, not produced by the loader) and the key
path.  ``-`` means "not checked" (e.g. a YAML syntax error has no key path).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from gainloom import load_schedule
from gainloom.errors import ScheduleError

CORPUS = Path(__file__).resolve().parents[1] / "bad_schedules"
FILES = sorted(CORPUS.glob("*.yaml"))


def _header(path: Path) -> dict[str, str]:
    expected = {}
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.startswith("#"):
            break
        key, _, value = line[1:].partition(":")
        if key.strip() in ("expect", "line", "column", "key"):
            expected[key.strip()] = value.strip()
    return expected


def test_corpus_is_large_enough():
    assert len(FILES) >= 30


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_bad_schedule_is_refused_at_the_right_place(path):
    expected = _header(path)
    with pytest.raises(ScheduleError) as caught:
        load_schedule(path)
    error = caught.value
    assert expected["expect"] in error.message, error.message
    assert error.file == str(path)
    if expected["line"] != "-":
        assert error.line == int(expected["line"]), str(error)
    if expected["column"] != "-":
        assert error.column == int(expected["column"]), str(error)
    if expected["key"] == "-":
        assert error.key_path is None, str(error)
    else:
        assert error.key_path == expected["key"], str(error)
    # one line, no traceback text
    assert "\n" not in str(error) and "Traceback" not in str(error)
    assert str(error).startswith(f"{path}:")
