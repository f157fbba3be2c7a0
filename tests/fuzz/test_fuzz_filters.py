"""Fuzzing the filter language: generated expressions (well formed, nested past the limits,
garbled) are parsed - a tree or a FilterError at a column of the filter - and the accepted ones
run on a small catalog, where they return rows or a FilterError, never an SQLite error."""

from __future__ import annotations

import importlib.util
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.catalog import Catalog, open_catalog
from celllab.catalog.filters import FIELDS, MAX_CONDITIONS, MAX_NESTING, parse_filter
from celllab.errors import FilterError

from .conftest import fuzz_settings
from .strategies import EDGE_TEXTS

NUMERIC = [f for f, kind in FIELDS.items() if kind == "number"]
TEXTUAL = [f for f, kind in FIELDS.items() if kind == "text"]
BOOLEAN = [f for f, kind in FIELDS.items() if kind == "bool"]
NAMES = [*FIELDS, "cap", "CAP_FF", "esd", "nope", "and", "or", "not", "in", "true"]
OPS = ["=", "==", "!=", "<>", "<", "<=", ">", ">=", "~", "=>", "", "in", "not in", "like"]
NUMBERS = ["0", "-1", "5", "2.5", ".5", "1e3", "1e999", "-1e-400", "1e", "5GHz", "0x10", "nan", "inf"]
TEXTS = ['"nmos_inversion"', "'core'", "mom", '"x*"', '"unclosed', "'a\\'b'", '"\\x1b[31m"', "''",
         "cross_coupled", "io"]

number = st.one_of(st.sampled_from(NUMBERS[:7]), st.floats(allow_nan=False, allow_infinity=False).map(repr))
valid_atom = st.one_of(
    st.tuples(st.sampled_from(NUMERIC), st.sampled_from(["=", "!=", "<", "<=", ">", ">="]), number)
    .map(" ".join),
    st.tuples(st.sampled_from(NUMERIC), st.sampled_from(["<", ">="]), st.sampled_from(NUMERIC)).map(" ".join),
    st.tuples(st.sampled_from(TEXTUAL), st.sampled_from(["=", "!=", "~"]), st.sampled_from(TEXTS))
    .map(" ".join),
    st.sampled_from(BOOLEAN),
    st.tuples(st.sampled_from(NUMERIC), st.sampled_from(["in", "not in"]),
              st.lists(number, min_size=1, max_size=4).map(lambda v: "(" + ", ".join(v) + ")")).map(" ".join),
)
garbled_atom = st.tuples(
    st.sampled_from(NAMES), st.sampled_from(OPS),
    st.one_of(st.sampled_from(NUMBERS), st.sampled_from(TEXTS), st.sampled_from(NAMES),
              st.lists(st.sampled_from(NUMBERS + TEXTS), max_size=3).map(lambda v: "(" + ", ".join(v) + ")")),
).map(" ".join)
atoms = st.one_of(valid_atom, valid_atom, valid_atom, garbled_atom)
trees = st.recursive(
    atoms,
    lambda inner: st.one_of(
        st.lists(inner, min_size=2, max_size=3).map(" and ".join),
        st.lists(inner, min_size=2, max_size=3).map(" or ".join),
        inner.map(lambda e: f"not {e}"),
        inner.map(lambda e: f"({e})"),
    ),
    max_leaves=8,
)
limits = st.one_of(
    st.tuples(st.sampled_from([MAX_NESTING - 1, MAX_NESTING, MAX_NESTING + 1, 330, 1000]), valid_atom)
    .map(lambda t: "(" * t[0] + t[1] + ")" * t[0]),
    st.tuples(st.sampled_from([MAX_NESTING, MAX_NESTING + 1, 1000]), valid_atom)
    .map(lambda t: "not " * t[0] + t[1]),
    st.sampled_from([MAX_CONDITIONS, MAX_CONDITIONS + 1, 1500])
    .map(lambda n: " and ".join(f"cap_fF > {i}" for i in range(n))),
)
junk = st.one_of(st.text(max_size=30), st.sampled_from(EDGE_TEXTS))
expressions = st.one_of(trees, trees, trees, trees, trees, trees, limits, junk)


@fuzz_settings("filter_text")
@given(text=expressions)
def test_filters_parse_or_point_at_the_problem(text: str, outcomes: Counter[str]) -> None:
    outcomes["filter_text.cases"] += 1
    try:
        parse_filter(text)
    except FilterError as exc:
        (problem,) = exc.problems
        assert problem.file == "filter" and problem.message.startswith("column ")
        outcomes["filter_text.rejected"] += 1
        return
    outcomes["filter_text.accepted"] += 1


def _synthetic_runs():  # type: ignore[no-untyped-def]
    path = Path(__file__).resolve().parents[1] / "catalog" / "conftest.py"
    spec = importlib.util.spec_from_file_location("synthetic_runs", path)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def small_catalog(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Catalog]:
    cat = open_catalog(tmp_path_factory.mktemp("filters") / "c.sqlite")
    cat.store_run(_synthetic_runs().make_run(n_cells=12))
    yield cat
    cat.close()


@fuzz_settings("filter_run")
@given(text=expressions, corner=st.sampled_from(["worst", "best", None, "typ_25C"]))
def test_accepted_filters_run(small_catalog: Catalog, text: str, corner: str | None,
                              outcomes: Counter[str]) -> None:
    outcomes["filter_run.cases"] += 1
    try:
        n = small_catalog.count(where=text, corner=corner)
        rows = small_catalog.query(where=text, corner=corner, limit=3)
    except FilterError as exc:
        assert all(p.file == "filter" for p in exc.problems)
        outcomes["filter_run.rejected"] += 1
        return
    assert 0 <= len(rows) <= min(n, 3)
    outcomes["filter_run.accepted"] += 1
