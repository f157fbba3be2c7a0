"""Filters at the edge of the language's limits: a located FilterError, never a RecursionError
and never an SQLite error blamed on the catalog.

Limits (``celllab rank --help``): ``MAX_NESTING`` levels of parentheses and ``not``,
``MAX_CONDITIONS`` conditions, ``MAX_VALUES`` listed values, ``MAX_FILTER_CHARS`` characters.
They keep the compiled SQL inside SQLite's own limits on expression depth and bound parameters
(docs/references.md [126]).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from celllab.catalog import Catalog
from celllab.catalog.filters import (
    MAX_CONDITIONS,
    MAX_FILTER_CHARS,
    MAX_NESTING,
    MAX_VALUES,
    compile_filter,
    describe_language,
    parse_filter,
)
from celllab.errors import FilterError


def _refused(text: str) -> str:
    with pytest.raises(FilterError) as info:
        parse_filter(text)
    (problem,) = info.value.problems
    assert problem.file == "filter"
    return problem.message


@pytest.mark.parametrize("depth", [MAX_NESTING + 1, 330, 4900])
def test_deep_parentheses_are_refused(depth: int) -> None:
    message = _refused("(" * depth + "cap_fF > 1" + ")" * depth)
    assert f"at most {MAX_NESTING}" in message and "nest" in message


@pytest.mark.parametrize("count", [MAX_NESTING + 1, 1000, 2400])
def test_long_not_chains_are_refused(count: int) -> None:
    message = _refused("not " * count + "esd_safe")
    assert f"at most {MAX_NESTING}" in message


def test_nesting_at_the_limit_is_accepted() -> None:
    half = MAX_NESTING // 2
    text = "(" * half + "not " * (MAX_NESTING - half) + "esd_safe" + ")" * half
    sql, params = compile_filter(text)
    assert sql.count("NOT") == MAX_NESTING - half and params == [1]


def test_too_many_conditions_are_refused() -> None:
    text = " and ".join(f"cap_fF > {i}" for i in range(MAX_CONDITIONS + 1))
    assert len(text) < MAX_FILTER_CHARS
    message = _refused(text)
    assert f"at most {MAX_CONDITIONS}" in message


def test_too_many_listed_values_are_refused() -> None:
    text = "width_sites in (" + ", ".join(str(i) for i in range(MAX_VALUES + 1)) + ")"
    assert len(text) < MAX_FILTER_CHARS
    message = _refused(text)
    assert f"at most {MAX_VALUES}" in message


def test_overlong_filter_text_is_refused() -> None:
    message = _refused("cap_fF > 1 " + " " * MAX_FILTER_CHARS)
    assert f"at most {MAX_FILTER_CHARS}" in message


def test_conditions_at_the_limit_run_in_sqlite(filled: Catalog) -> None:
    text = " and ".join(f"cap_fF > {-i}" for i in range(MAX_CONDITIONS))
    assert filled.count(where=text) == filled.count()
    values = ", ".join(str(i) for i in range(MAX_VALUES))
    assert filled.count(where=f"width_sites in ({values})") == filled.count()


def test_limits_are_in_the_help() -> None:
    text = describe_language()
    for number in (MAX_NESTING, MAX_CONDITIONS, MAX_VALUES, MAX_FILTER_CHARS):
        assert str(number) in text


def test_block_filter_nesting_is_a_located_block_problem(filled: Catalog, tmp_path: Path) -> None:
    from celllab.errors import PlanError
    from celllab.planner import load_block, plan_block

    deck = filled.decks()[0].name
    where = "(" * 400 + "esd_safe" + ")" * 400
    block_file = tmp_path / "block.toml"
    block_file.write_text(
        "[block]\n"
        f'name = "b1"\ndeck = "{deck}"\nsupply_V = 1.2\n'
        "switching_power_W = 0.1\nclock_GHz = 1.0\nactivity = 0.1\ncurrent_step_A = 0.1\n"
        "ripple_fraction = 0.05\npackage_inductance_nH = 0.5\npackage_resistance_mohm = 10\n\n"
        f'[candidates]\nwhere = "{where}"\n\n'
        '[[region]]\nname = "r1"\nclock_MHz = 100\n\n'
        '[[region.row_gaps]]\nname = "g"\nheight_rows = 1\nwidth_sites = [40]\ncount = [10]\n'
    )
    with pytest.raises(PlanError) as info:
        plan_block(load_block(block_file), filled)
    messages = [str(p) for p in info.value.problems]
    assert any("candidates.where" in m and f"at most {MAX_NESTING}" in m for m in messages)


def test_sqlite_limits_are_reported_as_a_filter_problem(
    filled: Catalog, monkeypatch: pytest.MonkeyPatch
) -> None:
    # with the parser's limits lifted, SQLite's own limit on expression depth is reached; the
    # problem names the filter, not the catalog file
    from celllab.catalog import filters

    monkeypatch.setattr(filters, "MAX_CONDITIONS", 10**6)
    monkeypatch.setattr(filters, "MAX_FILTER_CHARS", 10**7)
    text = " and ".join(f"cap_fF > {-i}" for i in range(3000))
    for call in (lambda: filled.count(where=text), lambda: filled.query(where=text),
                 lambda: filled.pareto(["cap_fF", "esr_ohm"], where=text)):
        with pytest.raises(FilterError) as info:
            call()
        (problem,) = info.value.problems
        assert problem.file == "filter" and str(filled.path) not in str(problem)
