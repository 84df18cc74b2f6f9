"""How well a course fit finds a known course again, predicts another setup, and stands noise.

Three parts, each printed as a table (asserts nothing; docs/calibration.md quotes the figures):

1. Recovery: the tests' known course (tests/calibrate/conftest.py: roots 15 cm at 6 m/s and
   smooth hardpack at 8 m/s, 60/40 of 200 m) logged from PAIRS of seeds the fit never uses,
   fitted from the start course (the terrain types' own values, half and half) at two budgets:
   each fitted number's error, and the fitted distance against the known course's own
   distance ridden as the search rides it (at most 1: the search is not what limits the fit).
2. Prediction: a second setup (more air, other clicks) on the known course against the same
   setup on the fitted and on the start course: travel Wasserstein distances per end.
3. Noise: sensor noise of 0, 0.5, 1 and 2 mm and 2 % of readings lost (through the ride-log
   reader), one seed pair: errors of the numbers that the log pins.
4. The demo: scenarios/demo_ride_log.csv fitted on scenarios/trail_air.toml (15 numbers), the
   errors against the invented course it was made on, and the cost of the fit as a ratio to
   one simulated ride of the logged setup over the search's course (measured in this run).

Run: .venv/bin/python benchmarks/bench_calibration.py [--quick]
"""

from __future__ import annotations

import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from tests.calibrate.conftest import (  # noqa: E402
    FIT_SEEDS,
    KNOWN_COURSE,
    RATE,
    SECOND_SETUP,
    start_data,
)
from tuneopt.calibrate import (  # noqa: E402
    FitProblem,
    LoggerFaults,
    fit_course,
    fit_space,
    simulate_ride,
    with_faults,
)
from tuneopt.calibrate.demo import DEMO_COURSE  # noqa: E402
from tuneopt.calibrate.distance import distance, ride_samples  # noqa: E402
from tuneopt.calibrate.space import gd_of, height_of, speed_of  # noqa: E402
from tuneopt.calibrate.synthetic import ride_log_text  # noqa: E402
from tuneopt.model import Scenario, Setup, load_scenario, scenario_from_data  # noqa: E402
from tuneopt.model.course import CourseSpec  # noqa: E402
from tuneopt.ridelog import parse_ride_log, read_ride_log  # noqa: E402

PAIRS = ((101, 102), (201, 202), (301, 302), (401, 402), (501, 502), (601, 602))


def errors(fitted: CourseSpec, known: CourseSpec) -> list[str]:
    """Per entry: speed and height errors in %, share error, roughness error in classes."""
    cells = []
    for got, want in zip(fitted.mix, known.mix, strict=True):
        cells += [
            f"{100 * (speed_of(got, fitted.surface) / speed_of(want, known.surface) - 1):+.1f}",
            f"{100 * (height_of(got) / height_of(want) - 1):+.0f}",
            f"{got.share - want.share:+.3f}",
            f"{math.log(gd_of(got) / gd_of(want), 4):+.2f}",
        ]
    return cells


def header(known: CourseSpec) -> str:
    names = []
    for e in known.mix:
        t = e.terrain.split("_")[0]
        names += [f"{t} v %", f"{t} h %", f"{t} share", f"{t} Gd cl"]
    return " | ".join(names)


def recovery(scenario: Scenario, known: CourseSpec, budgets: tuple[int, ...], pairs: tuple[
        tuple[int, int], ...]) -> None:  # fmt: skip
    assert scenario.course is not None
    print("\n1. Recovery of the known course (errors: fitted - known)")
    print(f"| budget | seeds | {header(known)} | fitted / known distance |")
    for budget in budgets:
        for pair in pairs:
            log = simulate_ride(scenario, scenario.setup, known, pair, RATE)
            problem = FitProblem(scenario, scenario.setup, log, FIT_SEEDS)
            result = fit_course(problem, fit_space(scenario.course), budget=budget)
            floor, _, _ = problem.evaluate(result.space.as_searched(known))
            cells = " | ".join(errors(result.fitted, known))
            print(f"| {budget} | {pair[0]},{pair[1]} | {cells} | "
                  f"{result.after.total:.3f} / {floor:.3f} |", flush=True)  # fmt: skip


def prediction(scenario: Scenario, known: CourseSpec, second: Setup, pairs: tuple[
        tuple[int, int], ...], budget: int) -> None:  # fmt: skip
    assert scenario.course is not None
    print("\n2. A second setup on the known course: travel W1 [mm], fitted / start course")
    print("| log seeds | fork fitted | fork start | rear fitted | rear start |")
    for pair in pairs:
        log = simulate_ride(scenario, scenario.setup, known, pair, RATE)
        problem = FitProblem(scenario, scenario.setup, log, FIT_SEEDS)
        result = fit_course(problem, fit_space(scenario.course), budget=budget)
        truth = ride_samples(simulate_ride(scenario, second, known, (pair[0] + 50,
                                                                     pair[1] + 50), RATE))
        fitted = ride_samples(simulate_ride(scenario, second, result.fitted, FIT_SEEDS, RATE))
        start = ride_samples(simulate_ride(scenario, second, result.start, FIT_SEEDS, RATE))
        cells = []
        for end in ("front", "rear"):
            cells += [f"{1e3 * distance(truth.end(end).travel, s.end(end).travel):.2f}"
                      for s in (fitted, start)]  # fmt: skip
        print(f"| {pair[0]},{pair[1]} | " + " | ".join(cells) + " |", flush=True)


def noise(scenario: Scenario, known: CourseSpec, levels: tuple[float, ...], budget: int) -> None:
    assert scenario.course is not None
    print("\n3. Sensor noise and 2 % lost readings, seeds 101,102 (errors: fitted - known)")
    print(f"| noise mm | {header(known)} | fitted distance |")
    clean = simulate_ride(scenario, scenario.setup, known, (101, 102), RATE)
    for level in levels:
        faulty = with_faults(clean, LoggerFaults(noise_m=level, dropout_share=0.02, seed=3))
        log = parse_ride_log(ride_log_text(faulty, scenario), scenario=scenario)
        problem = FitProblem(scenario, scenario.setup, log, FIT_SEEDS)
        result = fit_course(problem, fit_space(scenario.course), budget=budget)
        cells = " | ".join(errors(result.fitted, known))
        print(f"| {1e3 * level:.1f} | {cells} | {result.after.total:.3f} |", flush=True)


def demo(budget: int) -> None:
    scenario = load_scenario(ROOT / "scenarios" / "trail_air.toml")
    assert scenario.course is not None
    log = read_ride_log(ROOT / "scenarios" / "demo_ride_log.csv", scenario=scenario)
    seeds = (scenario.course.seed, scenario.course.seed + 1)
    problem = FitProblem(scenario, scenario.setup, log, seeds)
    space = fit_space(scenario.course)
    start = time.perf_counter()
    problem.evaluate(space.simulated(space.x0), with_ks=False)
    one = time.perf_counter() - start
    start = time.perf_counter()
    result = fit_course(problem, space, budget=budget)
    whole = time.perf_counter() - start
    known = CourseSpec.model_validate(DEMO_COURSE)
    print(f"\n4. The demo log on trail_air ({len(space.knobs)} numbers, budget {budget})")
    print(f"| {header(known)} | start distance | fitted distance |")
    print("| " + " | ".join(errors(result.fitted, known)) +
          f" | {result.before.total:.3f} | {result.after.total:.3f} |")  # fmt: skip
    print(f"fit time / one simulated ride of the search's course: {whole / one:.0f} "
          f"({result.evaluations} rides)")


def main() -> None:
    quick = "--quick" in sys.argv
    scenario = scenario_from_data(start_data())
    known = CourseSpec.model_validate(KNOWN_COURSE)
    second = Setup.model_validate(SECOND_SETUP)
    pairs = PAIRS[:1] if quick else PAIRS
    recovery(scenario, known, (20,) if quick else (150, 300), pairs)
    prediction(scenario, known, second, pairs[:1] if quick else pairs[:3], 20 if quick else 150)
    noise(scenario, known, (0.0005,) if quick else (0.0, 0.0005, 0.001, 0.002),
          20 if quick else 150)
    demo(20 if quick else 400)


if __name__ == "__main__":
    main()
