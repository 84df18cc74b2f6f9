"""Hooks for the schema-driven API fuzzing run (``tests/service/test_schema_fuzz.py``).

A scenario drawn from the JSON schema alone is almost never a bike that can carry its rider (the
schema cannot say that sag must fall in its window, or that a spring must hold the rider up), so
alongside the drawn bodies the run also sends valid jobs: the tests' short demo scenario with
drawn budgets and seeds. Those are accepted, and their job ids feed the stateful phase's calls
to the job routes; one of them is the example that the examples phase sends.
"""

from __future__ import annotations

import copy
from typing import Any

import schemathesis
from hypothesis import strategies as st

from tests.service.conftest import small_scenario

_SCENARIO = small_scenario()


def _job(trials: int, seed: int, sampler: str) -> dict[str, Any]:
    return {
        "scenario": copy.deepcopy(_SCENARIO),
        "trials": trials,
        "seed": seed,
        "sampler": sampler,
        "realisations": 1,
        "batch_size": 4,
    }


VALID_JOBS = st.builds(
    _job,
    trials=st.integers(1, 8),
    seed=st.integers(0, 2**31 - 1),
    sampler=st.sampled_from(["tpe", "cmaes", "nsga2", "random"]),
)


@schemathesis.hook
def before_load_schema(context: Any, raw_schema: dict[str, Any]) -> None:
    """One valid job as the JSON body's example, for the examples phase."""
    body = raw_schema["paths"]["/jobs"]["post"]["requestBody"]["content"]["application/json"]
    body["example"] = _job(trials=4, seed=7, sampler="tpe")


@schemathesis.hook
def flatmap_case(context: Any, case: Any) -> Any:
    operation = context.operation
    if operation is None or (operation.method.upper(), operation.path) != ("POST", "/jobs"):
        return st.just(case)
    if case.media_type != "application/json":
        return st.just(case)

    def with_body(body: dict[str, Any]) -> Any:
        case.body = body
        return case

    return st.one_of(st.just(case), VALID_JOBS.map(with_body))
