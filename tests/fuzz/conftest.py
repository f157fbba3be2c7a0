"""Shared settings of the fuzzing suite: reproducible generated input for every input surface.

Every fuzz test states its number of examples here (``EXAMPLES``), runs derandomized (the same
examples on every run, no example database) without deadlines, and counts what it saw in the
session tally: ``cases`` run, ``accepted`` and ``rejected`` (with a located message). The
README's hardening table quotes those counts.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterator

import pytest
from hypothesis import HealthCheck, settings

#: Examples per fuzz test (the suite's total is their sum; see test_budget.py).
EXAMPLES: dict[str, int] = {
    "deck_data": 1000,
    "deck_text": 400,
    "cell_data": 2000,
    "cells_built": 60,
    "block_data": 1600,
    "network_data": 800,
    "filter_text": 3400,
    "filter_run": 800,
    "catalog_merge": 200,
    "cli_args": 600,
}


def fuzz_settings(name: str) -> settings:
    return settings(
        max_examples=EXAMPLES[name],
        deadline=None,
        derandomize=True,
        database=None,
        print_blob=True,
        suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much,
                               HealthCheck.data_too_large, HealthCheck.large_base_example],
    )


@pytest.fixture(scope="module")
def outcomes(request: pytest.FixtureRequest, tally: dict[str, object]) -> Iterator[Counter[str]]:
    """Counter of this module's outcomes, added to the session tally when the module ends."""
    counts: Counter[str] = Counter()
    yield counts
    fuzz = tally.setdefault("fuzz", {})
    assert isinstance(fuzz, dict)
    for key, n in counts.items():
        fuzz[key] = fuzz.get(key, 0) + n
