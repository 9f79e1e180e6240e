"""Hostile or careless inputs that are not schedule text (the corpus in
tests/bad_schedules/ holds those): special files, closed pipes, logs, and
the record of the delay in the verification log.

References: POSIX file types from stat(2) (a FIFO blocks its reader until a
writer opens it; /dev/zero never ends) and the shell's 128 + SIGPIPE exit
status for a process a closed pipe ended (from memory; common practice).
"""

from __future__ import annotations

import io
import json
import os
import signal
import textwrap

import pytest
from cases import PASSING

from gainloom import load_schedule
from gainloom.cli import CLOSED_PIPE_EXIT, main
from gainloom.cli.design import Counter
from gainloom.design.gainsfile import read_gains
from gainloom.errors import ScheduleError
from gainloom.limits import MAX_SCHEDULE_BYTES


@pytest.fixture()
def no_hang():
    """Fail instead of hanging if a read blocks (a FIFO without a writer)."""
    def alarm(signum, frame):
        raise TimeoutError("the read blocked")

    previous = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(10)
    yield
    signal.alarm(0)
    signal.signal(signal.SIGALRM, previous)


@pytest.mark.parametrize("reader", [load_schedule, read_gains], ids=["schedule", "gains"])
def test_a_fifo_is_refused_without_blocking(tmp_path, no_hang, reader):
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    with pytest.raises(ScheduleError, match="must be a regular file; this is a named pipe"):
        reader(fifo)


@pytest.mark.parametrize("path, kind", [("/dev/zero", "a device"), ("/dev/null", "a device")])
def test_devices_are_refused(path, kind, no_hang):
    if not os.path.exists(path):
        pytest.skip(f"{path} missing")
    with pytest.raises(ScheduleError, match=f"must be a regular file; this is {kind}"):
        load_schedule(path)


def test_a_folder_given_as_schedule_is_refused(tmp_path):
    with pytest.raises(ScheduleError, match="this is a folder"):
        load_schedule(tmp_path)


def test_an_oversized_schedule_is_refused_before_parsing(tmp_path):
    big = tmp_path / "big.yaml"
    big.write_bytes(b"# " + b"x" * MAX_SCHEDULE_BYTES + b"\n")
    with pytest.raises(ScheduleError, match="larger than 1,000,000 bytes"):
        load_schedule(big)


def test_cli_says_one_line_for_a_fifo(tmp_path, capsys, no_hang):
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    assert main(["inspect", str(fifo)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "named pipe" in err and "Traceback" not in err


class _ClosedPipe(io.StringIO):
    def write(self, text):
        raise BrokenPipeError(32, "Broken pipe")


def test_a_closed_pipe_ends_quietly(monkeypatch, capsys):
    # gainloom locus ... --json | head: the reader went away
    monkeypatch.setattr("sys.stdout", _ClosedPipe())
    code = main(["locus", "--num", "1", "--den", "1 3 2", "--json"])
    assert code == CLOSED_PIPE_EXIT == 128 + signal.SIGPIPE
    assert capsys.readouterr().err == ""


def test_progress_off_a_terminal_is_one_line_per_finished_stage():
    stream = io.StringIO()  # not a terminal
    progress = Counter(stream)
    for done in range(5):
        progress("design", done, 4)
    progress("emit C", 0, 1)
    progress("emit C", 1, 1)
    lines = stream.getvalue().splitlines()
    assert "\r" not in stream.getvalue()
    assert [line.split()[0] for line in lines] == ["design", "emit"]
    assert lines[0].split()[1:] == ["4/4", "done"]


def test_progress_on_a_terminal_keeps_the_live_line():
    stream = io.StringIO()
    progress = Counter(stream, live=True)
    for done in range(3):
        progress("design", done, 2)
    assert stream.getvalue().count("\r") == 3 and stream.getvalue().endswith("\n")


def test_verification_log_records_the_fractional_dead_time(tmp_path, capsys):
    schedule = tmp_path / "s.yaml"
    # dead time 0.35 ms at ts = 1 ms with one sample of computation delay
    schedule.write_text(PASSING.replace('    denominator: ["tau", "1"]\n', '    denominator: ["tau", "1"]\n  dead_time: 3.5e-4\n'))
    assert "dead_time: 3.5e-4" in schedule.read_text()
    out = tmp_path / "out"
    code = main(["design", str(schedule), "--out", str(out), "--no-compile", "--no-simulate", "--quiet"])
    assert code in (0, 1), capsys.readouterr().err
    log = json.loads((out / "verification.json").read_text())
    for point in log["points"]:
        # by hand: 1 + 0.35e-3 / 1e-3 = 1.35 samples
        assert point["dead_time_s"] == pytest.approx(3.5e-4, rel=1e-12)
        assert point["delay_samples"] == 1.0
        assert point["total_delay_samples"] == pytest.approx(1.35, rel=1e-12)


def test_emit_refuses_an_output_full_scale_below_the_limits(tmp_path, capsys):
    from cases import make_table

    from gainloom.design.gainsfile import write_gains

    gains = write_gains(make_table("pi"), tmp_path / "g.yaml")  # limits (-10, 12)
    code = main(["emit", str(gains), "--out", str(tmp_path / "c"), "--format", "q15", "--output-full-scale", "5"])
    assert code == 2
    err = capsys.readouterr().err
    assert "does not cover the output limits" in err and err.count("\n") == 1
    assert not (tmp_path / "c").exists()


def test_a_gains_file_with_a_bad_tag_is_one_error(tmp_path):
    path = tmp_path / "g.yaml"
    path.write_text(textwrap.dedent("""\
        format: gainloom-gains/1
        structure: !!float abc
        """))
    with pytest.raises(ScheduleError):
        read_gains(path)


LONG = ",".join(["1"] * 201)


@pytest.mark.parametrize(
    "args, message",
    [
        (["locus", "--num", "1", "--den", "1,3,2", "--ts", "1e-300"], "sample period 1e-300 s"),
        (["locus", "--num", "1", "--den", "1,3,2", "--ts", "5e-324"], "is outside 1e-09 .. 1000 s"),
        (["locus", "--num", "1", "--den", "1,3,2", "--ts", "1e300"], "sample period 1e+300 s"),
        (["locus", "--num", "1", "--den", LONG], "--den has degree 200; at most 30"),
        (["locus", "--num", "1", "--den", "1,3,2", "--ts", "1e-3", "--delay", "100000"], "delay of 1e+05 samples"),
        (["discretize", "--num", "1", "--den", LONG, "--ts", "1e-3"], "plant of order 200; at most 30"),
        (["discretize", "--num", "1", "--den", "1,3,2", "--ts", "1e-3", "--delay", "1e300"], "1e+300 samples"),
        (["discretize", "--num", "1", "--den", "1,3,2", "--ts", "1e-6", "--dead-time", "1"], "1e+06 samples"),
        (["locus", "--num", "9" * 400, "--den", "1,3,2"], "finite numbers"),
    ],
    ids=["ts-tiny", "ts-subnormal", "ts-huge", "order-200", "delay-1e5", "discretize-order", "delay-1e300",
         "dead-time-1s", "huge-integer"],
)
def test_absurd_loops_on_the_command_line_are_one_line(args, message, capsys):
    # same limits as the schedule (gainloom.limits); before this they were
    # a LinAlgError, an overflow or a wrong message
    assert main(args) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1 and "Traceback" not in err, err
