"""Where gainloom writes: never through a link, never outside the folder,
never over a file it did not write, and a refusing file system is one clear
line with the earlier files intact.

References: POSIX rename(2) and open(2) with O_NOFOLLOW (a link's name is
replaced, never followed) and ENOSPC/EROFS/ENAMETOOLONG as errno(3) names
them (from memory); the exit-code contract of docs/design.md.  Everything
runs the CLI in-process on tiny inputs, to stay fast.
"""

from __future__ import annotations

import errno
import os
from pathlib import Path

import pytest
from cases import PASSING, make_table

from gainloom import outputs
from gainloom.cli import main
from gainloom.design.gainsfile import write_gains
from gainloom.outputs import MANIFEST_NAME, OutputConflictError, write_outputs

# the passing demo schedule on two points, no between-point check: fast full runs
TINY = PASSING.replace("values: [10, 40, 70, 100]", "values: [10, 100]").replace("between_points: 2", "between_points: 0")
assert TINY != PASSING


def _cli(capsys, *args):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _one_error_line(err: str, *fragments: str) -> None:
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for fragment in fragments:
        assert fragment in lines[0], lines[0]


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


@pytest.fixture()
def gains(tmp_path):
    return write_gains(make_table("pi"), tmp_path / "in" / "g.yaml")


# --- symbolic links ----------------------------------------------------------------------------


@pytest.mark.parametrize("force", [False, True])
def test_an_output_name_that_is_a_link_is_refused_even_with_force(tmp_path, gains, capsys, force):
    outside = tmp_path / "elsewhere.h"
    outside.write_text("precious\n")
    out = tmp_path / "c"
    out.mkdir()
    (out / "motor.h").symlink_to(outside)
    code, stdout, err = _cli(capsys, "emit", gains, "--out", out, "--prefix", "motor", *(["--force"] if force else []))
    assert code == 2
    _one_error_line(err, str(out / "motor.h"), "symbolic link")
    assert outside.read_text() == "precious\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c", "elsewhere.h", "in"]  # nothing new outside
    assert sorted(p.name for p in out.iterdir()) == ["motor.h"]  # nothing written inside either


def test_a_manifest_that_is_a_link_is_refused(tmp_path):
    outside = tmp_path / "other.json"
    outside.write_text('{"format": "gainloom-manifest/1", "files": {}}\n')
    out = tmp_path / "out"
    out.mkdir()
    (out / MANIFEST_NAME).symlink_to(outside)
    with pytest.raises(OutputConflictError, match="symbolic link"):
        write_outputs(out, {"a.txt": "x"}, force=True)
    assert outside.read_text() == '{"format": "gainloom-manifest/1", "files": {}}\n'
    assert not (out / "a.txt").exists()


def test_a_dangling_link_in_the_folder_is_refused_and_nothing_appears_at_its_target(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    target = tmp_path / "created-outside.png"
    (out / "locus.png").symlink_to(target)
    with pytest.raises(OutputConflictError, match="symbolic link"):
        write_outputs(out, {"locus.png": b"png"}, force=True)
    assert not target.exists()


@pytest.mark.parametrize("kind", ["folder", "fifo"])
def test_a_folder_or_pipe_where_a_file_belongs_is_refused(tmp_path, kind):
    out = tmp_path / "out"
    out.mkdir()
    if kind == "folder":
        (out / "gains.yaml").mkdir()
    else:
        os.mkfifo(out / "gains.yaml")
    with pytest.raises(OutputConflictError, match="a folder" if kind == "folder" else "a named pipe"):
        write_outputs(out, {"gains.yaml": "x"}, force=True)


def test_a_folder_where_the_manifest_belongs_is_refused(tmp_path):
    (tmp_path / MANIFEST_NAME).mkdir()
    with pytest.raises(OutputConflictError, match="a folder"):
        write_outputs(tmp_path, {"a.txt": "x"})


def test_an_output_folder_that_is_a_link_to_a_folder_is_used(tmp_path):
    # the user chose the folder: a link to it is fine; links inside it are not
    real = tmp_path / "real"
    real.mkdir()
    (tmp_path / "link").symlink_to(real)
    write_outputs(tmp_path / "link", {"a.txt": "x"})
    assert (real / "a.txt").read_text() == "x"


# --- output paths ----------------------------------------------------------------------------------


@pytest.mark.parametrize("command", ["design", "emit"])
def test_empty_out_is_refused_and_nothing_is_written_here(tmp_path, gains, capsys, monkeypatch, command):
    here = tmp_path / "here"
    here.mkdir()
    schedule = tmp_path / "s.yaml"
    schedule.write_text(PASSING)
    monkeypatch.chdir(here)
    source = schedule if command == "design" else gains
    code, stdout, err = _cli(capsys, command, source, "--out", "")
    assert code == 2
    _one_error_line(err, "output folder '' is empty")
    assert list(here.iterdir()) == []


@pytest.mark.parametrize("case", ["below a file", "name too long", "in /proc", "is a file", "immutable"])
def test_unusable_output_folders_give_one_line(tmp_path, gains, capsys, case):
    blocker = tmp_path / "plain.txt"
    blocker.write_text("x")
    if case == "below a file":
        out, fragment = blocker / "sub" / "out", "lies below"
    elif case == "name too long":
        out, fragment = tmp_path / ("n" * 300), "ENAMETOOLONG"
    elif case == "in /proc":
        out, fragment = Path("/proc/gainloom-test/out"), "output folder"
    elif case == "is a file":
        out, fragment = blocker, "exists and is a file"
    else:
        out, fragment = tmp_path / "locked", "output folder"
        out.mkdir()
        if os.system(f"chattr +i {out} 2>/dev/null") != 0:
            pytest.skip("chattr +i is not available here")
    try:
        code, stdout, err = _cli(capsys, "emit", gains, "--out", out)
    finally:
        if case == "immutable":
            os.system(f"chattr -i {out}")
    assert code == 2
    _one_error_line(err, fragment)
    assert "wrote" not in stdout


def test_a_read_only_folder_is_one_line(tmp_path, gains, capsys, monkeypatch):
    # Running as root ignores the mode bits, so the file system's refusal is
    # simulated where the writer opens its temporary file.
    out = tmp_path / "ro"
    out.mkdir()
    real_open = os.open

    def read_only(path, flags, *rest):
        if flags & os.O_CREAT and str(path).startswith(str(out)):
            raise OSError(errno.EROFS, os.strerror(errno.EROFS), str(path))
        return real_open(path, flags, *rest)

    monkeypatch.setattr(outputs.os, "open", read_only)
    code, stdout, err = _cli(capsys, "emit", gains, "--out", out)
    assert code == 2
    _one_error_line(err, "Read-only file system (EROFS)", "nothing was replaced")
    assert list(out.iterdir()) == []


def test_too_long_output_file_name_is_refused(tmp_path):
    with pytest.raises(outputs.InputError, match="longer than 255 bytes"):
        write_outputs(tmp_path, {"g" * 256 + ".yaml": "x"})


# --- disk full -------------------------------------------------------------------------------------


def _disk_fills_after(monkeypatch, budget: int) -> None:
    """os.write in the writer raises ENOSPC once ``budget`` bytes were written."""
    real_write = os.write
    left = [budget]

    def write(descriptor, data):
        if left[0] <= 0:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        count = real_write(descriptor, bytes(data)[: left[0]])
        left[0] -= count
        return count

    monkeypatch.setattr(outputs.os, "write", write)


@pytest.mark.parametrize("budget", [0, 700, 5000])
def test_disk_full_during_emit_keeps_the_earlier_files(tmp_path, gains, capsys, monkeypatch, budget):
    out = tmp_path / "c"
    assert _cli(capsys, "emit", gains, "--out", out, "--prefix", "motor")[0] == 0
    before = _snapshot(out)
    table = make_table("pi", seed=9)  # different numbers: every file changes
    other = write_gains(table, tmp_path / "in" / "other.yaml")
    _disk_fills_after(monkeypatch, budget)
    code, stdout, err = _cli(capsys, "emit", other, "--out", out, "--prefix", "motor")
    assert code == 2
    _one_error_line(err, "No space left on device (ENOSPC)", "nothing was replaced")
    assert "wrote" not in stdout
    assert _snapshot(out) == before  # earlier files and manifest intact, no temporary file


def test_disk_full_on_a_new_folder_leaves_nothing_and_never_reports_success(tmp_path, capsys, monkeypatch):
    schedule = tmp_path / "s.yaml"
    schedule.write_text(TINY)
    out = tmp_path / "new" / "out"
    _disk_fills_after(monkeypatch, 20000)
    code, stdout, err = _cli(capsys, "design", schedule, "--out", out, "--no-compile", "--no-simulate", "--quiet")
    assert code == 2
    _one_error_line(err, "No space left on device (ENOSPC)")
    assert "PASS" not in stdout and "output folder" not in stdout
    assert not (tmp_path / "new").exists()  # the folders it made are removed again


def test_oserror_outside_the_writer_is_one_line(tmp_path, gains, capsys, monkeypatch):
    # e.g. the staging folder of the harness on a full /tmp
    import gainloom.cli.emit as emit_cli

    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), "/tmp/gainloom-stage")

    monkeypatch.setattr(emit_cli, "emit_c", full)
    code, stdout, err = _cli(capsys, "emit", gains, "--out", tmp_path / "c")
    assert code == 2
    _one_error_line(err, "/tmp/gainloom-stage: No space left on device (ENOSPC)")


# --- plots follow the same ownership rule ------------------------------------------------------------

LOCUS = ("locus", "--num", "1", "--den", "1 3 2")


def test_locus_plot_does_not_overwrite_a_foreign_file(tmp_path, capsys):
    target = tmp_path / "mine.png"
    target.write_bytes(b"someone else's picture")
    code, stdout, err = _cli(capsys, *LOCUS, "--plot", target)
    assert code == 2
    _one_error_line(err, "was not written by gainloom", "--force")
    assert target.read_bytes() == b"someone else's picture"
    assert _cli(capsys, *LOCUS, "--plot", target, "--force")[0] == 0
    assert target.read_bytes().startswith(b"\x89PNG")
    assert _cli(capsys, *LOCUS, "--plot", target)[0] == 0  # its own file: replaced without --force


def test_locus_plot_with_an_empty_name_is_refused(capsys):
    code, stdout, err = _cli(capsys, *LOCUS, "--plot", "")
    assert code == 2
    _one_error_line(err, "is empty or names no file")


def test_simulate_plot_into_a_design_folder_does_not_block_the_next_design(tmp_path, capsys):
    schedule = tmp_path / "s.yaml"
    schedule.write_text(TINY)
    out = tmp_path / "out"
    fast = ("--no-compile", "--no-simulate", "--quiet")
    assert _cli(capsys, "design", schedule, "--out", out, *fast)[0] == 0
    foreign = out / "simulation.png"
    code, stdout, err = _cli(capsys, "simulate", schedule, "--gains", out / "gains.yaml", "--duration", "0.05", "--ramp", "duty=10:100", "--plot", out)
    assert code in (0, 1), err
    assert foreign.read_bytes().startswith(b"\x89PNG")
    # the next full run writes its own simulation.png over the one simulate wrote
    assert _cli(capsys, "design", schedule, "--out", out, "--no-compile", "--quiet")[0] == 0
    # and a simulation.png gainloom did not write is refused, kept as it was
    foreign.write_bytes(b"hand-made")
    code, stdout, err = _cli(capsys, "simulate", schedule, "--gains", out / "gains.yaml", "--duration", "0.05", "--ramp", "duty=10:100", "--plot", out)
    assert code == 2
    _one_error_line(err, "simulation.png was changed since gainloom wrote it")
    assert foreign.read_bytes() == b"hand-made"

