"""The fuzz suite is configured for at least 10 000 generated cases per run."""

from __future__ import annotations

from .conftest import EXAMPLES


def test_the_suite_generates_at_least_ten_thousand_cases() -> None:
    assert sum(EXAMPLES.values()) >= 10_000
