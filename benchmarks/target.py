"""Benchmark: the generated C on the target cores, and what the target stage costs.

Emits a fixed gain table (``benchmarks/target_gains.yaml``: the spindle demo's
table as designed once, kept so that the figures change only when the
generated C or the toolchain does) in every number format, builds each for
every target core and counts the instructions per lookup and per controller
step on the emulated core (:mod:`gainloom.codegen.target_run`: exact
instruction counts from qemu's single-step trace, not cycles; soft-float
helpers take data-dependent paths, so the counts depend on the table).
Then runs the whole design job on a schedule (default: the spindle demo)
twice, with and without the target stage, and prints their wall times and
the ratio.

``--readme`` rewrites the figures block of README.md (between the
``target-figures`` markers) from this run; ``tests/test_readme.py`` runs
:func:`readme_block` again and fails when the README's figures are stale.

Run:  PYTHONPATH=src python benchmarks/target.py [--gains FILE] [--schedule FILE] [--readme] [--no-timing]
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from gainloom.codegen.emit import emit_c
from gainloom.codegen.harness import generated_files, harness_program
from gainloom.codegen.target_build import build_for_core
from gainloom.codegen.target_run import count_instructions
from gainloom.codegen.target_tools import CORES, find_target_tools
from gainloom.design.gainsfile import read_gains
from gainloom.job.design_job import run_design_job
from gainloom.names import NUMBER_FORMATS

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_SCHEDULE = ROOT / "schedules" / "spindle_speed.yaml"
DEFAULT_GAINS = ROOT / "benchmarks" / "target_gains.yaml"
PREFIX = "spd"
BEGIN, END = "<!-- target-figures:begin -->", "<!-- target-figures:end -->"


def figures(gains_path: Path) -> tuple[str, list[list[str]]]:
    """(toolchain version, one row per format and core: lookup and step instruction counts).

    Fixed point with the default full scales (error 1, output the larger limit).
    """
    tools = find_target_tools()
    table, _ = read_gains(gains_path)
    version = subprocess.run([tools.gcc, "--version"], capture_output=True, text=True, check=True).stdout
    rows = []
    with tempfile.TemporaryDirectory(prefix="gainloom-bench-") as tmp:
        for number_format in NUMBER_FORMATS:
            work = Path(tmp) / number_format
            files = emit_c(table, work, number_format, PREFIX, None)
            generated = generated_files(files)
            program = harness_program(table, generated)
            for core in CORES:
                build = build_for_core(tools, core, [work / s.name for s in generated.sources], work,
                                       program.layout.fmt.is_fixed, generated.defines)
                counts = count_instructions(tools, build, program, generated.prefix, work).to_dict()
                lookup, step = counts["lookup"], counts["step"]
                rows.append([number_format, core.name, f"{lookup['median']:g}", str(lookup["max"]),
                             f"{step['median']:g}", str(step["max"])])
    return version.splitlines()[0].strip(), rows


def readme_block(gains_path: Path = DEFAULT_GAINS) -> str:
    """The README's figures block (markers included), as this machine measures it."""
    version, rows = figures(gains_path)
    name = gains_path.relative_to(ROOT) if gains_path.is_relative_to(ROOT) else gains_path
    lines = [
        BEGIN,
        f"Instructions executed per call, table `{name}` (spindle demo, PI, 13 points), `-O2`, {version}",
        "(regenerate: `PYTHONPATH=src python benchmarks/target.py --readme`):",
        "",
        "| format | core | lookup median | lookup max | step median | step max |",
        "|---|---|---|---|---|---|",
    ]
    lines += [f"| {' | '.join(row)} |" for row in rows]
    return "\n".join(lines + [END])


def _timing(schedule_path: Path) -> None:
    with tempfile.TemporaryDirectory(prefix="gainloom-bench-") as tmp:
        walls = {}
        for label, target in (("without target stage", False), ("with target stage", True)):
            start = time.perf_counter()
            run_design_job(schedule_path, Path(tmp) / label.replace(" ", "-"), target=target)
            walls[label] = time.perf_counter() - start
    base, full = walls["without target stage"], walls["with target stage"]
    print(f"design job: {base:.2f} s without the target stage, {full:.2f} s with it "
          f"(+{full - base:.2f} s, ratio {full / base:.2f})")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--gains", type=Path, default=DEFAULT_GAINS, help="table of the instruction figures")
    parser.add_argument("--schedule", type=Path, default=DEFAULT_SCHEDULE, help="schedule of the timed design jobs")
    parser.add_argument("--readme", action="store_true", help="rewrite the README's figures block")
    parser.add_argument("--no-timing", action="store_true", help="skip the two timed design jobs")
    args = parser.parse_args(argv)
    tools = find_target_tools()
    if not tools.can_run:
        print(f"not measured: {', '.join(tools.missing('gcc', 'nm', 'size', 'readelf', 'qemu'))} not found")
        return 1
    block = readme_block(args.gains.resolve())
    print(block)
    if args.readme:
        readme = ROOT / "README.md"
        text = readme.read_text(encoding="utf-8")
        pattern = re.compile(re.escape(BEGIN) + ".*?" + re.escape(END), re.S)
        if not pattern.search(text):
            print("README.md has no target-figures block", file=sys.stderr)
            return 1
        readme.write_text(pattern.sub(lambda _: block, text), encoding="utf-8")
    if not args.no_timing:
        _timing(args.schedule)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
