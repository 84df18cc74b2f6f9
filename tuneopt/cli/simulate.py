"""``tuneopt simulate SCENARIO``: ride one setup over the course, write metrics and traces."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

TRACE_RATE = 200.0  # samples per second kept in the trace files [Hz]


def register(sub: Any) -> None:
    p = sub.add_parser(
        "simulate",
        help="simulate one setup over the scenario's course; writes metrics and traces",
    )
    p.add_argument("scenario", help="scenario file (.toml or .json)")
    p.add_argument("--setup", type=Path, help="file with a [setup] table (default: the scenario's)")
    p.add_argument("--seed", type=int, help="course seed (default: the course's)")
    p.add_argument("--out", type=Path, required=True, help="output folder")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import numpy as np
    import pandas as pd

    from tuneopt.cli.optimise import _baseline
    from tuneopt.model import InputError, load_scenario
    from tuneopt.optimise.result import CAUTIONS, json_safe
    from tuneopt.sim import simulate_halfcar
    from tuneopt.sim.build import halfcar_params
    from tuneopt.sim.ride import prepare_scenario_course

    scenario = load_scenario(args.scenario)
    if scenario.course is None:
        raise InputError.single("course", "missing: nothing to ride")
    setup = _baseline(args.setup, scenario) if args.setup else scenario.setup
    seed = args.seed if args.seed is not None else scenario.course.seed
    prepared = prepare_scenario_course(scenario, seed)
    params = halfcar_params(scenario, [setup])
    args.out.mkdir(parents=True, exist_ok=True)
    rows = []
    for i, (road, terrain) in enumerate(zip(prepared.roads, prepared.terrains, strict=True)):
        every = max(1, int(round(1.0 / (TRACE_RATE * road.dt))))
        result = simulate_halfcar(params, road, trace_every=every)
        row: dict[str, Any] = {
            "segment": i + 1,
            "terrain": terrain,
            "duration_s": road.duration,
            "weight": float(prepared.weights[i]),
        }
        for end in ("front", "rear"):
            metrics = getattr(result, end)
            for name in metrics.__dataclass_fields__:
                row[f"{end}_{name}"] = float(getattr(metrics, name)[0])
        row["pitch_rate_rms"] = float(result.pitch.pitch_rate_rms[0])
        row["peak_dive_travel"] = float(result.pitch.peak_dive_travel[0])
        row["rider_vibration_rms"] = float(result.rider_vibration.rms[0])
        row["rider_vibration_vdv"] = float(result.rider_vibration.vdv[0])
        row["failed"] = bool(result.failed[0])
        row["failure"] = str(result.failure[0])
        rows.append(row)
        tr = result.traces
        assert tr is not None
        frame = {"time_s": tr.time}
        for name in tr.__dataclass_fields__:
            if name != "time":
                frame[name] = np.asarray(getattr(tr, name))[0]
        path = args.out / f"traces_{i + 1:02d}_{terrain}.csv"
        pd.DataFrame(frame).to_csv(path, index=False)
        print(f"wrote {path}")
    table = pd.DataFrame(rows)
    table.to_csv(args.out / "metrics.csv", index=False)
    summary = {
        "scenario": scenario.name,
        "seed": seed,
        "setup": setup.model_dump(mode="json"),
        "segments": [json_safe(r) for r in rows],
        "cautions": list(CAUTIONS),
        "units": "SI: N, m, s, rad; load variation is std/mean; shares are fractions of time",
    }
    (args.out / "metrics.json").write_text(json.dumps(summary, indent=2, allow_nan=False))
    print(f"wrote {args.out / 'metrics.csv'} and {args.out / 'metrics.json'}")
    shown = table[
        [
            "segment",
            "terrain",
            "front_load_variation",
            "rear_load_variation",
            "front_unloaded_share",
            "front_bottom_outs_per_min",
            "rider_vibration_rms",
        ]
    ]
    print(shown.to_string(index=False, float_format=lambda v: f"{v:.3f}"))
    return 1 if table["failed"].any() else 0
