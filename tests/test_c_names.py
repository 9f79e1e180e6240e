"""Every string that reaches the generated C goes through gainloom.c_names:
prefixes are checked against the names the C standard reserves, and text in
comments (units, file names, banner options) is escaped or refused."""

from __future__ import annotations

import dataclasses
import shutil
import subprocess

import pytest
from cases import make_table

from gainloom import CodegenError
from gainloom.c_names import comment_text, comment_text_problem, prefix_problem, validate_prefix
from gainloom.codegen.emit import render_files
from gainloom.codegen.harness import WARNING_FLAGS

SHA = "0123456789abcdef" * 4
GCC = shutil.which("gcc")
needs_gcc = pytest.mark.skipif(GCC is None, reason="no gcc on this machine")

# Names the C standard reserves for the library's future use (C99 7.26, C11
# 7.31, "Future library directions"; from memory).  Each prefix below makes
# generated names (<prefix>_..., <PREFIX>_...) inside one of them.
RESERVED = {
    "Efoo": "errno.h",  # E + capital (7.26.3)
    "E2": "errno.h",  # E + digit
    "edge": "errno.h",  # its macros start EDGE_
    "fe_x": "fenv.h",  # FE_ + capital (7.6)
    "PRIxval": "inttypes.h",  # PRI + lower case (7.26.4)
    "prix": "inttypes.h",  # macros PRIX_...
    "SCNd": "inttypes.h",
    "lc_speed": "locale.h",  # LC_ + capital (7.26.5)
    "sigma": "signal.h",  # SIG + capital (7.26.6)
    "sig": "signal.h",  # macros SIG_ + capital
    "atomic": "stdatomic.h",  # atomic_ + lower case (C11 7.31)
    "memory": "stdatomic.h",
    "int16": "stdint.h",  # typedefs int*_t, macros INT*_MAX (7.26.8)
    "uintx": "stdint.h",
    "strength": "string.h",  # str + lower case (7.26.10-11)
    "memo": "string.h",
    "wcsx": "wchar.h",
    "isready": "ctype.h",  # is/to + lower case (7.26.2)
    "torque": "ctype.h",
    "thrd": "threads.h",  # thrd_ + lower case (C11 7.31)
    "tss": "threads.h",
}


@pytest.mark.parametrize("prefix", sorted(RESERVED))
def test_prefixes_in_reserved_name_spaces_are_refused(prefix):
    problem = prefix_problem(prefix)
    assert problem is not None and RESERVED[prefix] in problem, problem
    with pytest.raises(CodegenError, match="reserves"):
        validate_prefix(prefix)


@pytest.mark.parametrize("prefix", ["math", "signal", "Time", "stdint"])
def test_prefixes_naming_a_standard_header_are_refused(prefix):
    # C11 7.1.2 standard headers (from memory): <prefix>.h would shadow one.
    with pytest.raises(CodegenError, match="standard C header"):
        validate_prefix(prefix)


def test_empty_prefix_is_refused_with_its_own_message():
    with pytest.raises(CodegenError, match="prefix is empty"):
        validate_prefix("")


@pytest.mark.parametrize("prefix", ["e", "e_drive", "pri", "sig2", "in_loop", "is_ok", "to_x", "str_x", "spd", "rail"])
def test_neighbours_outside_the_reserved_spaces_are_kept(prefix):
    # E_, PRI_, SIG2 (digit), in_, is_/to_/str_ + underscore: not in any
    # reserved space of C99 7.26 (from memory).
    assert validate_prefix(prefix) == prefix


HOSTILE = {
    "newline": "rpm\n#define injected 1",
    "carriage return": "rpm\r",
    "tab": "r\tpm",
    "end of comment": "rpm */ int injected; /*",
    "nested comment": "rpm /* x",
    "line comment": "rpm // x",
    "backslash-newline": "rpm\\",
    "backslash": "r\\pm",
    "trigraph": "rpm ??/",
    "other trigraph": "??=",
    "nul": "rpm\x00",
    "escape": "\x1b[31m",
    "delete": "rpm\x7f",
    "bidi override": "rpm\u202e",
    "line separator": "rpm\u2028x",
    "zero-width space": "r\u200bpm",
}


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_text_that_could_break_a_comment_is_refused(case):
    text = HOSTILE[case]
    assert comment_text_problem(text) is not None
    with pytest.raises(CodegenError, match="cannot go into the generated C"):
        comment_text("unit", text)


def test_printable_text_is_kept_and_non_ascii_escaped():
    # C99 6.4.3 universal character names: \u + 4 hex digits, \U + 8 (from memory).
    assert comment_text("unit", "m/s^2 (peak)") == "m/s^2 (peak)"
    assert comment_text("unit", "\u00b0C") == "\\u00b0C"
    assert comment_text("unit", "\u00b5s \U0001d538") == "\\u00b5s \\U0001d538"


def _with_unit(unit: str):
    table = make_table("pi")
    axis = dataclasses.replace(table.axes[0], unit=unit)
    return dataclasses.replace(table, axes=(axis,))


@pytest.mark.parametrize("case", ["end of comment", "newline", "trigraph", "bidi override"])
def test_hostile_unit_or_file_name_stops_code_generation(case):
    with pytest.raises(CodegenError, match="unit of axis"):
        render_files(_with_unit(HOSTILE[case]), "float32", "motor", SHA)
    with pytest.raises(CodegenError, match="option 'gains_file'"):
        render_files(make_table("pi"), "float32", "motor", SHA, {"gains_file": HOSTILE[case] + ".yaml"})


def _preprocess(source: str, tmp_path, *extra: str) -> subprocess.CompletedProcess:
    path = tmp_path / "probe.c"
    path.write_text(source, encoding="utf-8")
    return subprocess.run(
        [GCC, "-std=c99", "-E", "-P", *extra, str(path)], capture_output=True, text=True, timeout=60
    )


@needs_gcc
@pytest.mark.parametrize("case", ["newline", "end of comment", "nested comment", "backslash-newline", "trigraph"])
def test_gcc_confirms_the_refused_text_would_change_the_code(case, tmp_path):
    # Outside reference: gcc's own lexer.  In a block or a line comment the
    # raw text either changes the tokens the compiler sees or is an error
    # under -Wall -Werror -trigraphs (-dD keeps macro definitions in the
    # output); a plain unit does neither.  The line comment ends with the
    # text, as a banner line does.
    text = HOSTILE[case]
    flags = ("-trigraphs", "-Wall", "-Werror", "-dD")
    plain = _preprocess("/* [x] */\nint kept;\n", tmp_path, *flags).stdout
    outcomes = []
    for source in (f"/* [{text}] */\nint kept;\n", f"// {text}\nint kept;\n"):
        run = _preprocess(source, tmp_path, *flags)
        outcomes.append(run.returncode != 0 or run.stdout != plain)
    assert any(outcomes), case


@needs_gcc
def test_header_with_escaped_text_compiles_and_keeps_the_code_unchanged(tmp_path):
    # Outside reference: gcc -E strips comments exactly as the C standard's
    # translation phase 3 does; the escaped text must only ever be comment.
    texts = {}
    for unit in ("x", "\u00b0C / s", "m/s^2 ?! (peak) \u00b5s"):
        files = render_files(_with_unit(unit), "q15", "motor", SHA, {"gains_file": "g\u00e9ns.yaml"})
        header = files["motor.h"]
        assert header.isascii()
        (tmp_path / "motor.h").write_text(header, encoding="ascii")
        (tmp_path / "motor.c").write_text(files["motor.c"], encoding="ascii")
        compile_run = subprocess.run(
            [GCC, "-std=c99", "-trigraphs", *WARNING_FLAGS, "-DMOTOR_ACCEPT_UNVERIFIED", "-c", "motor.c", "-o", "motor.o"],
            cwd=tmp_path, capture_output=True, text=True, timeout=120,
        )
        assert compile_run.returncode == 0, compile_run.stderr
        texts[unit] = _preprocess(header, tmp_path).stdout
    assert len(set(texts.values())) == 1


def test_a_bad_unit_in_the_schedule_is_refused_at_its_line(tmp_path):
    from gainloom import load_schedule
    from gainloom.errors import ScheduleError

    schedule = (tmp_path / "s.yaml")
    schedule.write_text(
        "name: unit-check\nvariables:\n  - name: speed\n    unit: \"rpm */ int x; /*\"\n    values: [0, 1]\n"
        "plant:\n  transfer_function: {numerator: [1], denominator: [1, 1]}\n"
        "sampling: {period: 1.0e-3, method: zoh}\ncontroller: {structure: p, strategy: pole-cancel}\n",
        encoding="utf-8",
    )
    with pytest.raises(ScheduleError) as caught:
        load_schedule(schedule)
    assert caught.value.line == 4 and caught.value.key_path == "variables[0].unit"
    assert "'*/'" in caught.value.message



@pytest.mark.parametrize("command", ["emit", "design"])
def test_an_empty_prefix_option_is_refused_not_replaced_by_the_default(tmp_path, capsys, command):
    from cases import PASSING

    from gainloom.cli import main
    from gainloom.design.gainsfile import write_gains

    if command == "emit":
        source = write_gains(make_table("pi"), tmp_path / "g.yaml")
    else:
        source = tmp_path / "s.yaml"
        source.write_text(PASSING)
    assert main([command, str(source), "--out", str(tmp_path / "out"), "--prefix", ""]) == 2
    err = capsys.readouterr().err
    assert "prefix is empty" in err and err.count("\n") == 1
    assert not (tmp_path / "out").exists()
