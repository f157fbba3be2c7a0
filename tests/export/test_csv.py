"""CSV export: read back with the standard library's csv module."""

from __future__ import annotations

import csv
import io
import math
import os

import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.errors import OutputError
from celllab.export import CAUTION, atomic_write_text
from celllab.export.csv import DEFAULT_COLUMNS, format_value, render_csv, rows_from_cells, write_csv
from celllab.records import CELL_COLUMNS, METRIC_NAMES, METRICS


def read_back(text: str) -> list[dict[str, str]]:
    """Parse with the stdlib reader, skipping the '#' comment lines."""
    lines = [line for line in io.StringIO(text, newline="") if not line.startswith("#")]
    return list(csv.DictReader(lines))


def same_number(text: str, value: float | bool | None) -> bool:
    if value is None:
        return text == ""
    if isinstance(value, bool):
        return text == ("1" if value else "0")
    parsed = float(text)
    if math.isnan(value):
        return math.isnan(parsed)
    return parsed == value


def test_numbers_survive_a_round_trip(library, deck_name):
    # Source: RFC 4180 parsing by Python's csv module; exact float equality.
    rows = rows_from_cells(library, deck_name)
    back = read_back(render_csv(rows, precision=None))
    assert len(back) == len(rows) == sum(len(c.corners) for c in library)
    for original, parsed in zip(rows, back, strict=True):
        assert parsed["name"] == original["name"]
        assert parsed["corner"] == original["corner"]
        assert parsed["flags"] == "; ".join(original["flags"])
        for column in ("temperature_C", "supply_V", *CELL_COLUMNS, *METRIC_NAMES):
            if column in CELL_COLUMNS and CELL_COLUMNS[column].kind == "text":
                assert parsed[column] == original[column], column
            else:
                assert same_number(parsed[column], original[column]), column


def test_lower_bounds_are_marked(library, deck_name):
    # Source: the format as documented: a value that is only a lower bound reads "≥value" and its
    # *_is_bound column is 1; the number after the mark is the stored bound, exactly
    rows = rows_from_cells(library, deck_name)
    rows[0] = {**rows[0], "srf_GHz": 1500.0, "srf_is_bound": 1.0}
    back = read_back(render_csv(rows, precision=None))  # exact: the round-trip text
    assert back[0]["srf_GHz"] == "≥1500.0" and back[0]["srf_is_bound"] == "1.0"
    assert read_back(render_csv(rows))[0]["srf_GHz"] == "≥1500"  # default: significant digits
    assert float(back[0]["srf_GHz"].removeprefix("≥")) == 1500.0
    assert not back[1]["srf_GHz"].startswith("≥")


def test_header_is_the_catalog_names_and_units_are_listed(library, deck_name):
    # Common practice, no source: the unit is in each column name; the legend states it.
    rows = rows_from_cells(library, deck_name)
    text = render_csv(rows)
    comment_lines = [line for line in text.splitlines() if line.startswith("#")]
    header = next(csv.reader([text.splitlines()[len(comment_lines)]]))
    assert header == [c for c in DEFAULT_COLUMNS if c in rows[0]]
    assert set(header) >= {*METRIC_NAMES, *CELL_COLUMNS, "temperature_C", "supply_V"}
    legend = next(line for line in comment_lines if line.startswith("# units:"))
    for metric in METRICS:
        assert f"{metric.name} [{metric.unit}]" in legend
    assert "temperature_C [degC]" in legend and "supply_V [V]" in legend
    units_in_names = {"fF", "ohm", "GHz", "pH", "ps", "nA", "MV_per_cm", "fit_per_mm2", "V", "um2", "ns", "mA", "mW",
                      "pct"}
    for metric in METRICS:
        if metric.kind == "number":
            assert any(token in metric.name for token in units_in_names), metric.name
    assert any(CAUTION in line for line in comment_lines)


def test_without_comments_the_header_comes_first(library, deck_name):
    text = render_csv(rows_from_cells(library, deck_name), comments=False)
    assert text.startswith("name,deck,corner,")
    assert "#" not in text.splitlines()[0]


def test_selected_columns_and_corner(library, deck_name):
    corner = library[0].corners[-1].corner
    rows = rows_from_cells(library[:1], deck_name, corner=corner)
    back = read_back(render_csv(rows, columns=["name", "corner", "cap_fF"]))
    assert list(back[0]) == ["name", "corner", "cap_fF"]
    assert back[0]["corner"] == corner
    assert float(back[0]["cap_fF"]) == pytest.approx(library[0].corner(corner).metrics["cap_fF"], rel=5e-6)


def test_awkward_text_is_quoted(library, deck_name):
    # Source: RFC 4180 section 2 (fields with commas, quotes, line breaks are quoted).
    rows = rows_from_cells(library[:1], deck_name)
    rows[0]["name"] = 'odd, "name"\nwith break'
    back = read_back(render_csv(rows))
    assert back[0]["name"] == 'odd, "name"\nwith break'


def test_extra_keys_follow_the_known_columns():
    rows = [{"cap_fF": 1.5, "name": "a", "zz_custom": 3}]
    text = render_csv(rows, comments=False)
    assert text.splitlines()[0] == "name,cap_fF,zz_custom"


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (None, ""),
        ([], ""),
        (["a", "b c"], "a; b c"),
        (True, "1"),
        (False, "0"),
        (3, "3"),
        (0.1, "0.1"),
        (1e-15, "1e-15"),
        (float("inf"), "inf"),
        (float("-inf"), "-inf"),
        (float("nan"), "nan"),
        ("x", "x"),
    ],
)
def test_format_value(value, text):
    assert format_value(value) == text


@given(st.floats(allow_nan=True, allow_infinity=True))
def test_any_float_round_trips(value):
    # Source: Python float repr is the shortest string that round-trips (PEP 3101 / repr docs).
    back = read_back(render_csv([{"name": "c", "cap_fF": value}], precision=None))
    assert same_number(back[0]["cap_fF"], value)


@given(st.floats(min_value=-1e300, max_value=1e300, allow_nan=False, allow_infinity=False),
       st.integers(1, 17))
def test_numbers_keep_the_stated_significant_digits(value, digits):
    # Source: rounding to n significant digits moves a value by at most half a unit of its
    # last kept digit, 0.5 * 10**(1 - n) relative (Python format spec 'g'); plus float spacing
    back = float(read_back(render_csv([{"name": "c", "cap_fF": value}], precision=digits))[0]["cap_fF"])
    assert abs(back - value) <= 0.5 * 10 ** (1 - digits) * abs(value) * (1 + 1e-12) + 1e-300


def test_default_csv_has_no_float_noise_and_says_how_many_digits():
    text = render_csv([{"name": "c", "supply_V": 1.0299999999999998, "cap_fF": 123.456789123}])
    assert "1.03," in text and "123.457" in text and "99999" not in text
    assert "# numbers: 6 significant digits" in text
    with pytest.raises(ValueError, match="1 to 17"):
        render_csv([], precision=0)


def test_write_csv_replaces_the_file_whole(tmp_path, library, deck_name):
    target = tmp_path / "cells.csv"
    target.write_text("old contents")
    write_csv(target, rows_from_cells(library, deck_name), force=True)  # replacing is asked for
    assert len(read_back(target.read_text(encoding="utf-8"))) == sum(
        len(c.corners) for c in library
    )
    assert [p.name for p in tmp_path.iterdir()] == ["cells.csv"]


def test_a_failed_write_leaves_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "out.csv"
    target.write_text("previous")

    def broken_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OutputError, match="disk full"):  # located: names the file
        atomic_write_text(target, "new text", force=True)
    assert target.read_text() == "previous"
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]
