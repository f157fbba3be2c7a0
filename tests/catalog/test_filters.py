"""Filter language: parsing, error messages, parameterized SQL, injection, SQL = Python semantics."""

from __future__ import annotations

import fnmatch
import re
import sqlite3
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.catalog import Catalog
from celllab.catalog.filters import (
    FIELDS,
    OXIDES,
    And,
    Compare,
    Everything,
    FieldRef,
    FilterSyntaxError,
    InSet,
    IsTrue,
    Node,
    Not,
    Or,
    compile_filter,
    describe_language,
    fields_used,
    parse_filter,
)
from celllab.errors import CatalogError, FilterError
from celllab.records import METRIC_NAMES
from celllab.topologies import REGISTRY


@pytest.mark.parametrize(
    "text, expected",
    [
        ("", Everything()),
        ("leakage_nA_per_nF <= 5", Compare("leakage_nA_per_nF", "<=", 5.0)),
        ("cap_fF == 1e3", Compare("cap_fF", "=", 1000.0)),
        ("temperature_C > -40", Compare("temperature_C", ">", -40.0)),
        ("esr_ohm <> .5", Compare("esr_ohm", "!=", 0.5)),
        ("cap_fF > cap_ox_fF", Compare("cap_fF", ">", FieldRef("cap_ox_fF"))),
        ("esd_safe", IsTrue("esd_safe")),
        ("esd_safe = false", Compare("esd_safe", "=", 0.0)),
        ("esd_safe = yes", Compare("esd_safe", "=", 1.0)),  # as the tables and the UI show it
        ("esd_safe != no", Compare("esd_safe", "!=", 0.0)),
        ("oxide = core", Compare("oxide", "=", "core")),
        ('name ~ "ndcap*"', Compare("name", "~", "ndcap*")),
        ("name ~ ndcap*", Compare("name", "~", "ndcap*")),
        ("family = 'fam a'", Compare("family", "=", "fam a")),
        ("topology in (cross_coupled, mom)", InSet("topology", ("cross_coupled", "mom"))),
        ("height_rows not in (1, 2)", InSet("height_rows", (1.0, 2.0), negated=True)),
        ("CAP_FF >= 2", Compare("cap_fF", ">=", 2.0)),
        (
            "leakage_nA_per_nF <= 5 and bandwidth_GHz >= 2 and height_rows = 1 and esd_safe",
            And(
                (
                    Compare("leakage_nA_per_nF", "<=", 5.0),
                    Compare("bandwidth_GHz", ">=", 2.0),
                    Compare("height_rows", "=", 1.0),
                    IsTrue("esd_safe"),
                )
            ),
        ),
        (
            "not (esr_ohm > 3 or srf_GHz < 2)",
            Not(Or((Compare("esr_ohm", ">", 3.0), Compare("srf_GHz", "<", 2.0)))),
        ),
        (
            "cap_fF > 1 or cap_fF < 0 and esd_safe",  # 'and' binds tighter than 'or'
            Or(
                (
                    Compare("cap_fF", ">", 1.0),
                    And((Compare("cap_fF", "<", 0.0), IsTrue("esd_safe"))),
                )
            ),
        ),
        (
            "NOT esd_safe AND oxide = io",
            And((Not(IsTrue("esd_safe")), Compare("oxide", "=", "io"))),
        ),
    ],
)
def test_parse(text: str, expected: Node) -> None:
    assert parse_filter(text) == expected


def _error(text: str) -> FilterSyntaxError:
    with pytest.raises(FilterError) as err:
        compile_filter(text)
    assert isinstance(err.value, FilterSyntaxError)
    return err.value


def _caret_column(message: str) -> int:
    lines = message.split("\n")
    return lines[2].index("^") - 2  # "  " indent before the expression and the caret line


@pytest.mark.parametrize(
    "text, position, expected",
    [
        ("cap_fF <= ", 10, "expected a number for 'cap_fF', found the end of the filter"),
        ("cap_fF 5", 7, "expected an operator after 'cap_fF'"),
        ("(cap_fF > 1", 11, "expected ')'"),
        ("cap_fF > 1)", 10, "closes nothing"),
        ("cap_fF > 1 esd_safe", 11, "expected 'and', 'or' or the end of the filter"),
        ("5 < cap_fF", 0, "put the column first"),
        ("leakage_nA < 5n", 13, "'5n' is not a plain number"),
        ('name = "abc', 7, "unclosed quote"),
        ("cap_fF > 1 && esd_safe", 11, "unexpected character '&'"),
        ("topology < mom", 9, "does not apply to the text column"),
        ("cap_fF ~ 1", 7, "applies to text columns"),
        ("topology = crosscoupled", 11, "did you mean 'cross_coupled'"),
        ("height_rows in 1", 15, "expected '(' to open the list"),
        ("esd_safe = maybe", 11, "expected true, false, yes, no, 1 or 0"),
        ("name = 42", 7, 'quote it: name = "42"'),
    ],
)
def test_error_position_and_expectation(text: str, position: int, expected: str) -> None:
    err = _error(text)
    message = str(err)
    assert expected in message
    assert err.position == position and _caret_column(message) == position
    assert err.expression == text
    assert message.split("\n")[1] == f"  {text}"


def test_unknown_name_suggests_and_lists() -> None:
    message = str(_error("leakage_nA_per_nf <= 5 and bandwith_GHz > 1"))
    assert "unknown name 'bandwith_GHz'; did you mean 'bandwidth_GHz'" in message
    assert "allowed names:" in message
    for name in FIELDS:
        assert name in message


def test_unknown_right_hand_column() -> None:
    message = str(_error("cap_fF > cap_of_fF"))
    assert "unknown numeric column 'cap_of_fF'" in message and "cap_ox_fF" in message


# ---------------------------------------------------------------- injection

INJECTIONS = [
    "1; DROP TABLE cells",
    "cap_fF > 1; DROP TABLE cells",
    "cap_fF) --",
    "cap_fF > 1 -- comment",
    "cap_fF > 1 /* x */",
    "name = x' OR '1'='1",
    "cap_fF > 1 or 1=1",
    "cells.cap_fF > 1",
    '"cap_fF" > 1',
    "cap_fF > (SELECT 1)",
    "name in (SELECT name FROM cells)",
]


@pytest.mark.parametrize("text", INJECTIONS)
def test_injection_is_rejected(text: str, filled: Catalog) -> None:
    with pytest.raises(FilterError):
        filled.query(where=text)
    tables = {r[0] for r in filled._db.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    assert {"cells", "decks", "corner_metrics"} <= tables


@pytest.mark.parametrize(
    "text",
    [
        "name = \"x' OR '1'='1\"",
        'name = "x\\"; DROP TABLE cells; --"',
        'family = \'fam_a" OR "1"="1\'',
        'name ~ "*\'; DELETE FROM cells; --"',
    ],
)
def test_injection_in_quoted_text_is_data(text: str, filled: Catalog) -> None:
    before = filled.count(corner=None)
    assert filled.query(where=text) == []
    assert filled.count(corner=None) == before


def test_order_by_and_deck_are_not_injectable(filled: Catalog) -> None:
    with pytest.raises(FilterError):
        filled.query(order_by="cap_fF; DROP TABLE cells")
    with pytest.raises(CatalogError):  # unknown deck / corner, never SQL
        filled.query(deck="x' OR '1'='1")
    with pytest.raises(CatalogError):
        filled.query(corner="typ' OR '1'='1")
    assert filled.count() > 0


# ---------------------------------------------------------------- SQL = Python on random filters

NUMERIC = [f for f, k in FIELDS.items() if k == "number"]
TEXT_POOL = {"topology": list(REGISTRY), "oxide": list(OXIDES)}
OTHER_TEXT = ["a", "b", "ab", "ba", "x_1", "mom", "fam_a"]
NUMBERS = [0.0, 1.0, 2.5, -3.0, 1000.0, 0.1, 7.0, 1e-05]


def _text_pool(field: str) -> list[str]:
    return TEXT_POOL.get(field, OTHER_TEXT)


number_values = st.sampled_from(NUMBERS)
text_fields = st.sampled_from(["name", "deck", "family", "topology", "oxide", "corner"])


@st.composite
def text_compare(draw: Any) -> Node:
    field = draw(text_fields)
    op = draw(st.sampled_from(["=", "!="]))
    return Compare(field, op, draw(st.sampled_from(_text_pool(field))))


@st.composite
def text_glob(draw: Any) -> Node:
    field = draw(st.sampled_from(["name", "family", "deck"]))
    return Compare(field, "~", draw(st.text(alphabet="abx_*?", min_size=1, max_size=4)))


@st.composite
def text_in(draw: Any) -> Node:
    field = draw(text_fields)
    values = draw(st.lists(st.sampled_from(_text_pool(field)), min_size=1, max_size=3))
    return InSet(field, tuple(values), draw(st.booleans()))


leaves = st.one_of(
    st.builds(
        Compare,
        st.sampled_from(NUMERIC),
        st.sampled_from(["=", "!=", "<", "<=", ">", ">="]),
        number_values,
    ),
    st.builds(
        Compare,
        st.sampled_from(NUMERIC),
        st.sampled_from(["<", ">=", "="]),
        st.builds(FieldRef, st.sampled_from(NUMERIC)),
    ),
    st.builds(
        InSet,
        st.sampled_from(NUMERIC),
        st.lists(number_values, min_size=1, max_size=3).map(tuple),
        st.booleans(),
    ),
    st.builds(IsTrue, st.just("esd_safe")),
    st.builds(
        Compare, st.just("esd_safe"), st.sampled_from(["=", "!="]), st.sampled_from([0.0, 1.0])
    ),
    text_compare(),
    text_glob(),
    text_in(),
)
filters = st.recursive(
    leaves,
    lambda kids: st.one_of(
        st.builds(Not, kids),
        st.lists(kids, min_size=2, max_size=3).map(lambda xs: And(tuple(xs))),
        st.lists(kids, min_size=2, max_size=3).map(lambda xs: Or(tuple(xs))),
    ),
    max_leaves=8,
)


def _render_value(value: object) -> str:
    if isinstance(value, FieldRef):
        return value.name
    if isinstance(value, float):
        return repr(value)
    text = str(value).replace("\\", "\\\\").replace('"', '\\"')
    return f'"{text}"'


def render(node: Node) -> str:
    """Filter text for an AST, written here independently of the parser."""
    if isinstance(node, Compare):
        return f"{node.field} {node.op} {_render_value(node.value)}"
    if isinstance(node, InSet):
        values = ", ".join(_render_value(v) for v in node.values)
        return f"{node.field} {'not in' if node.negated else 'in'} ({values})"
    if isinstance(node, IsTrue):
        return node.field
    if isinstance(node, Not):
        return f"not ({render(node.operand)})"
    if isinstance(node, (And, Or)):
        word = " and " if isinstance(node, And) else " or "
        return word.join(f"({render(n)})" for n in node.operands)
    return ""


def evaluate(node: Node, row: dict[str, Any]) -> bool | None:
    """Three-valued (SQL) logic over a plain dict row, written here from the SQL semantics.

    Source: SQLite documentation "Expressions" (NULL in comparisons, IN, NOT, AND, OR; GLOB).
    """
    if isinstance(node, Everything):
        return True
    if isinstance(node, Compare):
        left = row[node.field]
        right = row[node.value.name] if isinstance(node.value, FieldRef) else node.value
        if left is None or right is None:
            return None
        if node.op == "~":
            return fnmatch.fnmatchcase(left, str(right))
        return {
            "=": left == right,
            "!=": left != right,
            "<": left < right,
            "<=": left <= right,
            ">": left > right,
            ">=": left >= right,
        }[node.op]
    if isinstance(node, InSet):
        value = row[node.field]
        if value is None:
            return None
        return (value in node.values) != node.negated
    if isinstance(node, IsTrue):
        return None if row[node.field] is None else row[node.field] == 1
    if isinstance(node, Not):
        inner = evaluate(node.operand, row)
        return None if inner is None else not inner
    results = [evaluate(n, row) for n in node.operands]  # type: ignore[union-attr]
    if isinstance(node, And):
        return False if False in results else None if None in results else True
    return True if True in results else None if None in results else False


def _sql_type(field: str) -> str:
    return (
        {"text": "TEXT", "bool": "INTEGER"}[FIELDS[field]]
        if FIELDS[field] != "number"
        else ("INTEGER" if field in ("width_sites", "height_rows") else "REAL")
    )


def column_values(field: str) -> st.SearchStrategy[Any]:
    """Random values of one column (None = empty), drawn from small pools so equalities happen."""
    kind = FIELDS[field]
    if kind == "text":
        return st.sampled_from([*_text_pool(field), "a*", None])
    if kind == "bool":
        return st.sampled_from([0, 1, None])
    if field in ("width_sites", "height_rows"):
        return st.sampled_from([0, 1, 2, 3, 7, None])
    return st.one_of(st.sampled_from([*NUMBERS, None]), st.floats(-1e4, 1e4, allow_nan=False))


_IDENT = re.compile(r'"([A-Za-z_][A-Za-z0-9_]*)"')
_SQL_WORDS = {"AND", "OR", "NOT", "IN", "GLOB"}


@settings(max_examples=250, deadline=None)
@given(node=filters, n_rows=st.integers(1, 10), data=st.data())
def test_sql_matches_python_evaluation(node: Node, n_rows: int, data: st.DataObject) -> None:
    # only the columns the filter reads get random values; the rest stay empty
    used = sorted(fields_used(node))
    rows = [dict.fromkeys(FIELDS) for _ in range(n_rows)]
    for field in used:
        for row, value in zip(
            rows,
            data.draw(
                st.lists(column_values(field), min_size=n_rows, max_size=n_rows), label=field
            ),
        ):
            row[field] = value
    text = render(node)
    assert parse_filter(text) == node
    sql, params = compile_filter(text)
    # values only travel as parameters: the SQL holds whitelisted identifiers, ?, operators
    assert set(_IDENT.findall(sql)) <= set(FIELDS)
    rest = re.sub(
        r"[A-Za-z]+", lambda m: "" if m.group() in _SQL_WORDS else m.group(), _IDENT.sub("", sql)
    )
    assert re.fullmatch(r"[\s()?,=!<>]*", rest), rest
    conn = sqlite3.connect(":memory:")
    cols = ", ".join(f'"{f}" {_sql_type(f)}' for f in FIELDS)
    conn.execute(f"CREATE TABLE r (row_id INTEGER PRIMARY KEY, {cols})")
    names = list(FIELDS)
    conn.executemany(
        f"INSERT INTO r (row_id, {', '.join(chr(34) + n + chr(34) for n in names)}) "
        f"VALUES (?, {', '.join('?' for _ in names)})",
        [[i, *(row[n] for n in names)] for i, row in enumerate(rows)],
    )
    got = [r[0] for r in conn.execute(f"SELECT row_id FROM r WHERE {sql} ORDER BY row_id", params)]
    conn.close()
    assert got == [i for i, row in enumerate(rows) if evaluate(node, row) is True]


def test_language_help_lists_every_metric_with_unit() -> None:
    text = describe_language()
    from celllab.records import METRIC_BY_NAME

    for name in METRIC_NAMES:
        assert f"{name}" in text and f"[{METRIC_BY_NAME[name].unit}]" in text
