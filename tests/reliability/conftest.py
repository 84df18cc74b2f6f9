"""Size of the reliability suite: small in ``make test``, large in ``make reliability``.

``TUNEOPT_FUZZ_EXAMPLES`` sets how many examples each property test tries (the full-size run);
unset, each test tries its own reduced count so that the whole suite stays within a minute.
Reduced runs are derandomized so CI sees the same examples every time; full runs are random.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from typing import Any

from hypothesis import HealthCheck, settings

FULL_SIZE = os.environ.get("TUNEOPT_FUZZ_EXAMPLES")


def fuzz(reduced: int, share: float = 1.0) -> Callable[[Any], Any]:
    """Hypothesis settings for a property test: ``reduced`` examples in ``make test``, or
    ``share`` of TUNEOPT_FUZZ_EXAMPLES in a full-size run (for the costlier properties)."""
    if FULL_SIZE:
        count = max(1, int(int(FULL_SIZE) * share))
        derandomize = False
    else:
        count, derandomize = reduced, True
    return settings(
        max_examples=count,
        deadline=None,
        derandomize=derandomize,
        database=None,
        suppress_health_check=[
            HealthCheck.too_slow,
            HealthCheck.data_too_large,
            HealthCheck.function_scoped_fixture,  # a fixture holds state across examples on purpose
        ],
    )
