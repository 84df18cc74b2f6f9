"""Search spring and damping settings: search space, score, study runner, ranking."""

from tuneopt.optimise.evaluate import Evaluator, Outcome
from tuneopt.optimise.local import LocalRun, load_run, run_local, start_run
from tuneopt.optimise.ranking import RankedSetup, Ranking, pareto_front, rank_study
from tuneopt.optimise.result import CAUTIONS, result_data, write_result
from tuneopt.optimise.robustness import FLAT, LEEWAY_STEPS
from tuneopt.optimise.runner import (
    DEFAULT_TRIALS,
    SAMPLERS,
    Progress,
    StudyPlan,
    create_study,
    make_sampler,
    reap_stale_trials,
    run_shard,
)
from tuneopt.optimise.score import SCALES, score_terms, total_score
from tuneopt.optimise.space import Parameter, SearchSpace, build_space

__all__ = [
    "CAUTIONS",
    "DEFAULT_TRIALS",
    "FLAT",
    "LEEWAY_STEPS",
    "SAMPLERS",
    "SCALES",
    "Evaluator",
    "LocalRun",
    "Outcome",
    "Parameter",
    "Progress",
    "RankedSetup",
    "Ranking",
    "SearchSpace",
    "StudyPlan",
    "build_space",
    "create_study",
    "load_run",
    "make_sampler",
    "pareto_front",
    "rank_study",
    "reap_stale_trials",
    "result_data",
    "run_local",
    "run_shard",
    "score_terms",
    "start_run",
    "total_score",
    "write_result",
]
