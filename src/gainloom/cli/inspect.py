"""``gainloom inspect``: validate a schedule and list every operating point.

For each point: coordinates, parameters, continuous poles and zeros, sample
period, and the discrete poles (magnitude and angle) after the schedule's
hold, computation delay and dead time.  Text is a readable table; ``--json``
prints everything as strict JSON.
"""

from __future__ import annotations

import argparse
import dataclasses

from ..lti.convert import roots_with_origin
from ..lti.discretize import discrete_roots, discretize_loop
from ..lti.poles import root_records
from ..schedule import Schedule, load_schedule
from .output import format_number, format_table, print_json

__all__ = ["HELP", "add_arguments", "inspect_data", "run"]

HELP = "validate a schedule file and list each operating point: parameters, s- and z-plane poles, sampling"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the options of ``gainloom inspect``."""
    parser.add_argument("schedule", metavar="SCHEDULE", help="schedule file (YAML)")
    parser.add_argument("--json", action="store_true", help="print strict JSON instead of text")


def inspect_data(schedule: Schedule) -> dict:
    """Everything ``inspect --json`` prints, as plain data.

    Parameters
    ----------
    schedule : Schedule
        A loaded schedule.

    Returns
    -------
    dict
        ``schedule`` (name, path, sha256, ...), ``axes``, the settings
        sections, ``points`` (one entry per operating point, grid order) and
        ``warnings``.
    """
    plant = schedule.plant
    sampling = schedule.sampling
    discrete = discretize_loop(
        plant, sampling.period, method=sampling.method, delay=sampling.delay, prewarp=sampling.prewarp
    )
    s_poles = roots_with_origin(plant.den)
    s_zeros = roots_with_origin(plant.num)
    z_poles = discrete_roots(discrete.den, discrete.delta_den, discrete.ts)
    z_zeros = discrete_roots(discrete.num, discrete.delta_num, discrete.ts)
    points = []
    for index, point in enumerate(schedule.points):
        points.append(
            {
                "index": index,
                "coordinates": {axis.name: float(point[i]) for i, axis in enumerate(schedule.axes)},
                "parameters": {name: float(values[index]) for name, values in schedule.parameters.items()},
                "sample_period": float(sampling.period[index]),
                "delay_samples": float(sampling.delay[index]),
                "dead_time": float(plant.dead_time[index]),
                "continuous": {
                    "num": plant.num[index],
                    "den": plant.den[index],
                    "poles": root_records(s_poles[index]),
                    "zeros": root_records(s_zeros[index]),
                },
                "discrete": {
                    "total_delay_samples": float(discrete.delay[index]),
                    "num": discrete.num[index],
                    "den": discrete.den[index],
                    "poles": root_records(z_poles[index]),
                    "zeros": root_records(z_zeros[index]),
                },
            }
        )
    return {
        "schedule": {
            "name": schedule.name,
            "description": schedule.description,
            "path": schedule.path,
            "sha256": schedule.sha256,
        },
        "axes": [{"name": a.name, "unit": a.unit, "values": a.values} for a in schedule.axes],
        "grid_shape": list(schedule.grid_shape),
        "sampling": {"method": sampling.method, "prewarp": sampling.prewarp},
        "controller": dataclasses.asdict(dataclasses.replace(schedule.controller, filters=()))
        | {"filters": [section.as_written() for section in schedule.controller.filters]},
        "specs": dataclasses.asdict(schedule.specs),
        "table": dataclasses.asdict(schedule.table_checks),
        "tolerances": dataclasses.asdict(schedule.tolerances),
        "codegen": dataclasses.asdict(schedule.codegen),
        "points": points,
        "measured": None if schedule.family.plant.measured is None else schedule.family.plant.measured.summary(),
        "warnings": list(schedule.warnings),
    }


def _s_text(roots: list[dict]) -> str:
    """Continuous roots, a conjugate pair written once as ``re+-imj``."""
    parts = []
    for r in roots:
        if r["imag"] < 0:
            continue
        if r["imag"] > 0:
            parts.append(f"{format_number(r['real'], 5)}+-{format_number(r['imag'], 5)}j")
        else:
            parts.append(format_number(r["real"], 5))
    return ", ".join(parts) or "none"


def _z_text(roots: list[dict]) -> str:
    """Discrete roots as ``|z| at angle`` (rad), a conjugate pair written once."""
    parts = []
    for r in roots:
        if r["imag"] < 0:
            continue
        if r["magnitude"] == 0:
            parts.append("0")
        elif r["imag"] > 0:
            parts.append(f"{format_number(r['magnitude'], 6)} at +-{format_number(r['angle_rad'], 4)}")
        else:
            parts.append(f"{format_number(r['magnitude'], 6)} at {format_number(r['angle_rad'], 4)}")
    return ", ".join(parts) or "none"


def _text(data: dict) -> str:
    info = data["schedule"]
    axes = data["axes"]
    axis_headers = [a["name"] + (f" [{a['unit']}]" if a["unit"] else "") for a in axes]
    lines = [
        f"schedule {info['name']}: {info['path']}",
        f"sha256 {info['sha256']}",
        "grid: " + " x ".join(
            f"{a['name']} ({len(a['values'])} values, {format_number(float(a['values'][0]))} .. "
            f"{format_number(float(a['values'][-1]))}{' ' + a['unit'] if a['unit'] else ''})"
            for a in axes
        ) + f" = {len(data['points'])} points",
        f"hold {data['sampling']['method']}"
        + ("" if data["sampling"]["prewarp"] is None else f", prewarp {format_number(data['sampling']['prewarp'])} rad/s")
        + f"; controller {data['controller']['structure']} by {data['controller']['strategy']}",
        "",
    ]
    points = data["points"]
    parameter_names = list(points[0]["parameters"])
    rows = []
    for p in points:
        rows.append(
            [p["index"]]
            + [p["coordinates"][a["name"]] for a in axes]
            + [p["parameters"][n] for n in parameter_names]
            + [p["sample_period"], p["delay_samples"], p["dead_time"]]
        )
    lines.append("parameters and sampling")
    lines.append(format_table(["#"] + axis_headers + parameter_names + ["ts [s]", "delay [samples]", "dead time [s]"], rows))
    lines.append("")
    rows = []
    for p in points:
        rows.append(
            [p["index"]]
            + [p["coordinates"][a["name"]] for a in axes]
            + [
                _s_text(p["continuous"]["poles"]),
                _s_text(p["continuous"]["zeros"]),
                format_number(p["discrete"]["total_delay_samples"]),
                _z_text(p["discrete"]["poles"]),
                _z_text(p["discrete"]["zeros"]),
            ]
        )
    lines.append("poles and zeros (continuous in rad/s; discrete as |z| at angle in rad, after hold and delay)")
    lines.append(
        format_table(
            ["#"] + axis_headers + ["s poles", "s zeros", "total delay", "z poles", "z zeros"],
            rows,
        )
    )
    if data["measured"] is not None:
        lines += ["", *_measured_text(data["measured"], points, axes, axis_headers)]
    if data["warnings"]:
        lines.append("")
        lines += [f"warning: {w}" for w in data["warnings"]]
    return "\n".join(lines)


def _measured_text(measured: dict, points: list[dict], axes: list[dict], axis_headers: list[str]) -> list[str]:
    rows = [[p["index"]] + [p["coordinates"][a["name"]] for a in axes]
            + [m["file"], m["samples"], f"{format_number(m['band_rad_s'][0])} .. {format_number(m['band_rad_s'][1])}",
               format_number(100 * m["rms_error"]), format_number(100 * m["max_error"]), m["outliers"]]
            for p, m in zip(points, measured["points"])]
    delay = " and a dead time" if measured["dead_time"] else ", no dead time"
    title = (f"measured plant: fitted {measured['poles']} poles, {measured['zeros']} zeros{delay} "
             f"(order {measured['order']}; tolerance {format_number(100 * measured['tolerance'])} % rms)")
    return [title, format_table(["#"] + axis_headers + ["file", "samples", "band [rad/s]", "rms error [%]",
                                                         "max error [%]", "outliers"], rows)]


def cascade_data(cascade) -> dict:
    """``inspect --json`` of a cascade file: the cascade and each loop's :func:`inspect_data`.

    An outer loop's plant is its plant part as written; the designed inner
    loop enters it only in the design (docs/cascade.md).
    """
    loops = []
    for loop in cascade.loops:
        entry = {"name": loop.name, "rate_factor": loop.rate_factor, "inner_at": loop.inner_at or {},
                 "shared": list(loop.shared)}
        loops.append({**entry, **inspect_data(loop.schedule)})
    return {
        "cascade": {"name": cascade.name, "description": cascade.description, "path": cascade.path,
                    "sha256": cascade.sha256, "specs": dataclasses.asdict(cascade.cascade)},
        "loops": loops,
        "warnings": [w for loop in loops for w in loop["warnings"]],
    }


def _cascade_text(data: dict) -> str:
    parts = [f"cascade {data['cascade']['name']}: {data['cascade']['path']}"]
    for k, loop in enumerate(data["loops"]):
        if k == 0:
            role = "inner loop, at the base rate"
        else:
            inner_at = ", ".join(f"{n}={format_number(v)}" for n, v in loop["inner_at"].items()) or "-"
            role = (f"around loop {data['loops'][k - 1]['name']}, every {loop['rate_factor']}-th inner sample; "
                    f"plant part only (the designed inner loop joins it in the design, at {inner_at})")
        parts += ["", f"== loop {loop['name']} ({role})", _text(loop)]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    """Load, evaluate, discretise and print; return the exit code (0, or 2 via the dispatcher)."""
    from ..schedule.cascade import is_cascade_file, load_cascade

    if is_cascade_file(args.schedule):
        data = cascade_data(load_cascade(args.schedule))
        text = _cascade_text
    else:
        data = inspect_data(load_schedule(args.schedule))
        text = _text
    if args.json:
        print_json(data)
    else:
        print(text(data))
    return 0
