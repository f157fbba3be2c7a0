"""How values read: significant digits, empty values, booleans, aligned tables, NaN -> None."""

from __future__ import annotations

import json
import math

import numpy as np

from celllab.display import (
    PLAIN_RANGE,
    finite_or_none,
    format_number,
    format_value,
    jsonable,
    nan_to_none,
    none_to_nan,
    text_table,
)


def test_numbers_to_significant_digits() -> None:
    assert format_number(12345.678) == "1.235e+04"
    assert format_number(0.000123456) == "0.0001235"
    assert format_number(0.000123456, plain_range=PLAIN_RANGE) == "1.235e-04"
    assert format_number(2.0e7, plain_range=PLAIN_RANGE) == "2.000e+07"
    assert format_number(-0.0) == "0" and format_number(math.inf) == "inf"
    assert format_number(math.nan) == "nan" and format_number(1.23456, digits=3) == "1.23"


def test_values_as_text() -> None:
    assert format_value(None) == "-" and format_value(math.nan, empty="n/a") == "n/a"
    assert format_value(True) == "yes" and format_value(np.bool_(False)) == "no"
    assert format_value(7) == "7" and format_value(np.int64(3)) == "3"
    assert format_value(["a", "b"]) == "a; b" and format_value([]) == "-"
    assert format_value(np.float64(1.0 / 3.0)) == "0.3333"


def test_text_table_aligns_numbers_right() -> None:
    rows = [{"name": "a", "cap_fF": 1.5, "n": None}, {"name": "bbb", "cap_fF": 12.25, "n": 2}]
    lines = text_table(rows, ["name", "cap_fF", "n"]).splitlines()
    assert lines[0].split() == ["name", "cap_fF", "n"] and set(lines[1]) <= {"-", " "}
    assert lines[2].startswith("a  ") and lines[2].endswith("-")
    assert lines[3].index("12.25") + len("12.25") == lines[0].index("cap_fF") + len("cap_fF")
    forced = text_table(rows, ["name", "n"], numeric={"n"}).splitlines()
    assert forced[3].endswith(" 2") and forced[2].endswith(" -")


def test_nan_and_none() -> None:
    assert nan_to_none(math.nan) is None and nan_to_none(math.inf) == math.inf
    assert finite_or_none(math.inf) is None and finite_or_none(np.float64(2.0)) == 2.0
    assert math.isnan(none_to_nan(None)) and none_to_nan(1) == 1.0
    data = jsonable({"a": [1.0, math.nan, (math.inf, "x")], "b": {"c": -math.inf}})
    assert json.loads(json.dumps(data, allow_nan=False)) == {"a": [1.0, None, [None, "x"]], "b": {"c": None}}
