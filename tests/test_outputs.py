"""Output folders: atomic writes, all-or-nothing, manifest, refusal to overwrite."""

import hashlib
import json
import os

import numpy as np
import pytest
from cases import make_table

import gainloom.outputs as outputs
from gainloom import CodegenError
from gainloom.codegen.emit import emit_c
from gainloom.design.table import GainTable
from gainloom.outputs import MANIFEST_NAME, OutputConflictError, read_manifest, write_outputs


def test_writes_files_and_a_manifest_of_their_sha256(tmp_path):
    written = write_outputs(tmp_path / "out", {"a.h": "header\n", "a.c": b"source\n"})
    assert [p.name for p in written] == ["a.h", "a.c"]
    assert (tmp_path / "out" / "a.h").read_text() == "header\n"
    manifest = json.loads((tmp_path / "out" / MANIFEST_NAME).read_text())
    # Reference: hashlib.sha256 of the bytes on disk.
    assert manifest["files"] == {
        "a.c": hashlib.sha256(b"source\n").hexdigest(),
        "a.h": hashlib.sha256(b"header\n").hexdigest(),
    }
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.startswith(".gainloom-tmp")]


def test_rewriting_own_files_is_allowed_and_deterministic(tmp_path):
    write_outputs(tmp_path, {"a.c": "one\n"})
    first = (tmp_path / MANIFEST_NAME).read_bytes()
    write_outputs(tmp_path, {"a.c": "one\n"})
    assert (tmp_path / MANIFEST_NAME).read_bytes() == first
    write_outputs(tmp_path, {"a.c": "two\n"})
    assert (tmp_path / "a.c").read_text() == "two\n"


def test_refuses_a_file_gainloom_did_not_write(tmp_path):
    (tmp_path / "a.c").write_text("hand written\n")
    with pytest.raises(OutputConflictError, match=r"not written by gainloom.*--force"):
        write_outputs(tmp_path, {"a.c": "generated\n", "a.h": "generated\n"})
    assert (tmp_path / "a.c").read_text() == "hand written\n"
    assert not (tmp_path / "a.h").exists()  # nothing written at all
    write_outputs(tmp_path, {"a.c": "generated\n"}, force=True)
    assert (tmp_path / "a.c").read_text() == "generated\n"


def test_refuses_a_file_edited_since_gainloom_wrote_it(tmp_path):
    write_outputs(tmp_path, {"a.c": "generated\n"})
    (tmp_path / "a.c").write_text("generated\n/* my fix */\n")
    with pytest.raises(OutputConflictError, match="changed since gainloom wrote it"):
        write_outputs(tmp_path, {"a.c": "regenerated\n"})
    assert "my fix" in (tmp_path / "a.c").read_text()


def test_a_failure_before_the_replace_leaves_the_previous_files(tmp_path, monkeypatch):
    write_outputs(tmp_path, {"a.h": "old h\n", "a.c": "old c\n"})
    before = read_manifest(tmp_path)
    real = outputs._write_temp
    calls = []

    def failing(folder, data):
        calls.append(data)
        if len(calls) == 2:
            raise OSError(28, "No space left on device")
        return real(folder, data)

    monkeypatch.setattr(outputs, "_write_temp", failing)
    with pytest.raises(outputs.OutputWriteError, match="No space"):
        write_outputs(tmp_path, {"a.h": "new h\n", "a.c": "new c\n"})
    monkeypatch.setattr(outputs, "_write_temp", real)
    assert (tmp_path / "a.h").read_text() == "old h\n" and (tmp_path / "a.c").read_text() == "old c\n"
    assert read_manifest(tmp_path) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["a.h", "a.c", MANIFEST_NAME])


def test_a_failure_between_replaces_keeps_the_manifest_true_to_disk(tmp_path, monkeypatch):
    write_outputs(tmp_path, {"a.h": "old h\n", "a.c": "old c\n"})
    real = os.replace
    count = []

    def failing(src, dst):
        count.append(dst)
        if len(count) == 2:
            raise OSError(5, "I/O error")
        return real(src, dst)

    monkeypatch.setattr(outputs.os, "replace", failing)
    with pytest.raises(outputs.OutputWriteError, match="I/O error"):
        write_outputs(tmp_path, {"a.h": "new h\n", "a.c": "new c\n"})
    monkeypatch.setattr(outputs.os, "replace", real)
    manifest = read_manifest(tmp_path)
    for name in ("a.h", "a.c"):  # every file is whole, and the manifest says which version it is
        assert manifest[name] == hashlib.sha256((tmp_path / name).read_bytes()).hexdigest()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".gainloom-tmp")]


def test_a_failed_emit_leaves_the_previous_folder_intact(tmp_path):
    good = make_table("pi")
    emit_c(good, tmp_path, "q15", "motor", None)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    too_big = GainTable("pi", good.axes, {"kp": np.full(7, 1e9), "ki_ts": np.ones(7)}, 1e-4, (-1.0, 1.0))
    with pytest.raises(CodegenError):
        emit_c(too_big, tmp_path, "q15", "motor", None)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


@pytest.mark.parametrize("name", ["../x.c", "sub/x.c", MANIFEST_NAME, ""])
def test_file_names_must_stay_inside_the_folder(tmp_path, name):
    with pytest.raises(outputs.InputError):
        write_outputs(tmp_path, {name: "x"})


def test_a_foreign_manifest_is_refused(tmp_path):
    (tmp_path / MANIFEST_NAME).write_text("[]")
    with pytest.raises(outputs.InputError, match="not a gainloom manifest"):
        write_outputs(tmp_path, {"a.c": "x"})
