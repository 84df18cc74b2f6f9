"""``tuneopt terrain SCENARIO --out DIR [--seed N]``: build the course, write what each wheel sees.

For each segment it writes ``segment_NN_<terrain>.csv`` (columns x, ground, front, rear, speed,
decel, curvature in SI units, one row per sample) and a PNG plot of the same name, plus
``course.csv`` with one line per segment.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any, TextIO

import numpy as np

from tuneopt.model.errors import FieldProblem, InputError

__all__ = ["register", "run", "write_course"]

_CSV_HEADER = "x,ground,front,rear,speed,decel,curvature"
# wheel_inputs names its arguments; a scenario names the fields they came from
_FIELD_OF_ARGUMENT = {
    "wheelbase": "bike.wheelbase",
    "front_radius": "front_tyre.outer_radius",
    "rear_radius": "rear_tyre.outer_radius",
}


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "terrain",
        help="build the scenario's course and write each segment's wheel inputs and a plot",
        description="Build the course of the scenario's [course] section and write, per "
        "segment, the road heights each wheel sees (CSV) and a plot (PNG).",
    )
    parser.add_argument("scenario", metavar="SCENARIO", help="scenario file (.toml or .json)")
    parser.add_argument("--out", required=True, metavar="DIR", help="folder to write into")
    parser.add_argument(
        "--seed", type=int, default=None, metavar="N",
        help="course seed (default: the scenario's course.seed)",
    )
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import load_scenario

    scenario = load_scenario(args.scenario)
    return write_course(scenario, Path(args.out), seed=args.seed)


def _number(obj: Any, path: str) -> float:
    value: Any = obj
    for part in path.split("."):
        value = getattr(value, part, None)
        if value is None:
            raise InputError.single(path, "missing in the scenario")
    return float(value)


def write_course(
    scenario: Any,
    out: Path,
    seed: int | None = None,
    stream: TextIO | None = None,
    plots: bool = True,
) -> int:
    """Write the course of ``scenario`` into ``out`` (plots too unless ``plots`` is False);
    returns the exit code (0).

    ``scenario`` needs ``.course`` (a CourseSpec), ``.bike.wheelbase`` and
    ``.front_tyre.outer_radius`` / ``.rear_tyre.outer_radius`` [m]. Raises InputError on bad
    input.
    """
    from tuneopt.report import draw_segment_plot, segment_plot_data
    from tuneopt.terrain import build_course, wheel_inputs

    stream = stream if stream is not None else sys.stdout
    spec = getattr(scenario, "course", None)
    if spec is None:
        raise InputError.single("course", "missing: the scenario has no [course] section")
    if seed is not None and seed < 0:
        raise InputError.single("--seed", f"must be a whole number >= 0, got {seed}")
    wheelbase = _number(scenario, "bike.wheelbase")
    front_radius = _number(scenario, "front_tyre.outer_radius")
    rear_radius = _number(scenario, "rear_tyre.outer_radius")
    used_seed = spec.seed if seed is None else seed
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError.single("--out", f"cannot create {out}: {exc.strerror or exc}") from None

    course = build_course(spec, used_seed)
    print(
        f"course: {len(course.segments)} segments, {course.length:.0f} m, surface "
        f"{course.surface}, seed {course.seed}, spacing {spec.spacing * 1000:g} mm",
        file=stream,
    )
    summary = ["segment,terrain,weight,friction,length,min_speed,max_speed,csv,plot"]
    for i, segment in enumerate(course.segments):
        try:
            inputs = wheel_inputs(segment, front_radius, rear_radius, wheelbase)
        except InputError as exc:
            raise InputError(
                FieldProblem(_FIELD_OF_ARGUMENT.get(p.location, p.location), p.message)
                for p in exc.problems
            ) from None
        stem = f"segment_{i + 1:02d}_{segment.terrain}"
        table = np.column_stack(
            [inputs.x, segment.z, inputs.front, inputs.rear, inputs.speed, inputs.decel,
             inputs.curvature]
        )
        csv_path = out / f"{stem}.csv"
        png_name = ""
        try:
            np.savetxt(csv_path, table, delimiter=",", header=_CSV_HEADER, comments="",
                       fmt=["%.4f", "%.6f", "%.6f", "%.6f", "%.4f", "%.4f", "%.5f"])
            print(f"wrote {csv_path}", file=stream)
            if plots:
                data = segment_plot_data(i, segment, inputs, wheelbase)
                png_path = draw_segment_plot(data, out / f"{stem}.png")
                png_name = png_path.name
                print(f"wrote {png_path}", file=stream)
        except OSError as exc:
            raise InputError.single("--out", f"cannot write into {out}: {exc}") from None
        summary.append(
            f"{i + 1},{segment.terrain},{segment.weight:.4f},{segment.friction:.3f},"
            f"{segment.length:.3f},{segment.speed.min():.3f},{segment.speed.max():.3f},"
            f"{csv_path.name},{png_name}"
        )
    summary_path = out / "course.csv"
    try:
        summary_path.write_text("\n".join(summary) + "\n", encoding="utf-8")
    except OSError as exc:
        raise InputError.single("--out", f"cannot write into {out}: {exc}") from None
    print(f"wrote {summary_path}", file=stream)
    return 0
