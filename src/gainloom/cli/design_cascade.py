"""``gainloom design CASCADE --out DIR``: the cascade branch of the design
command (:func:`gainloom.job.cascade_job.run_cascade_job`); the CLI only
parses, shows progress and prints each loop's table and the cascade verdict."""

from __future__ import annotations

import argparse
import sys

from ..errors import InputError
from ..safety import CAUTION
from .design import Counter, point_summaries, print_result, print_stages, verdict_line
from .output import print_json

__all__ = ["run_cascade"]


def _print_loops(job) -> None:
    for loop, result in zip(job.design.cascade.loops, job.design.results):
        print(f"== loop {loop.name}")
        print_result(result)
        print()


def _print_corners(job) -> None:
    """Per outer point, the inner point and tolerance corner where the outer specs are worst."""
    for pair in job.design.checks.pairs:
        if not pair.corners:
            continue
        print(f"== {pair.outer} around {pair.inner}: worst inner point and corner per {pair.outer} point "
              f"({pair.corners} tolerance corners and nominal)")
        for w in pair.worst_per_point:
            failing = f"  FAILS {', '.join(w['failed_specs'])}" if w["failed_specs"] else ""
            print(f"  {w['outer_point']}: inner at {w['inner_point']}, {w['corner_label']}; "
                  f"{w['binding_spec'] or 'no spec'} binds ({100 * w['binding_slack']:+.3g} %), "
                  f"GM {w['gain_margin_db']:.3g} dB, PM {w['phase_margin_deg']:.3g} deg{failing}")
        print()


def _json(job) -> dict:
    loops = []
    for loop, result in zip(job.design.cascade.loops, job.design.results):
        loops.append({
            "name": loop.name,
            "design_passed": result.passed,
            "status": list(result.status),
            "points": point_summaries(result.point_labels, result.analysis, result.status, result.point_warnings),
            "table_checks": result.table_report.as_document(),
            "warnings": list(result.warnings),
        })
    return {
        "passed": job.passed,
        "cascade": job.design.checks.to_dict(),
        "loops": loops,
        "c_files": [str(p) for p in job.c_files],
        "gains_files": [str(p) for p in job.gains_paths],
        "files": [str(p) for p in job.files],
        "number_format": job.number_format,
        "prefix": job.prefix,
        "stages": [s.to_dict() for s in job.stages],
        "not_checked": list(job.not_checked),
    }


def run_cascade(args: argparse.Namespace, out) -> int:
    """Run the cascade job for ``gainloom design`` and print its summary."""
    from ..job.cascade_job import run_cascade_job

    if args.gains_name != "gains.yaml":
        raise InputError("a cascade writes one gains file per loop (<loop>.gains.yaml); --gains-name does not apply")
    job = run_cascade_job(args.schedule, out, number_format=args.number_format, prefix=args.prefix,
                          force=args.force, compile=not args.no_compile, simulate=not args.no_simulate,
                          target=not args.no_target, progress=Counter(enabled=not args.quiet))
    if args.json:
        print_json(_json(job))
    else:
        _print_loops(job)
        _print_corners(job)
        print_stages(job, sys.stdout)
        print()
        print(f"cascade {verdict_line(job)}")
        print(f"output folder: {job.out_dir}")
        print(f"  gains files: {', '.join(str(p) for p in job.gains_paths)}")
        print(f"  C (one module): {', '.join(str(p) for p in job.c_files)}")
    print(CAUTION, file=sys.stderr if args.json else sys.stdout)
    return job.exit_code
