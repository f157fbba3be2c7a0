"""Table cells of the UI: lower bounds read "≥value"; a what-if shows no change across a bound."""

from __future__ import annotations

from rich.console import Console

from celllab.columns import METRIC_BY_NAME, is_lower_bound
from celllab.tui.screens.whatif import compare_table
from celllab.tui.widgets.values import value_text


def test_a_lower_bound_reads_with_its_mark() -> None:
    row = {"srf_GHz": 2000.0, "srf_is_bound": 1.0, "bandwidth_GHz": 35.0, "bandwidth_is_bound": 0.0}
    assert value_text(row["srf_GHz"], "srf_GHz", is_lower_bound(row, "srf_GHz")).plain == "≥2000"
    assert value_text(row["bandwidth_GHz"], "bandwidth_GHz",
                      is_lower_bound(row, "bandwidth_GHz")).plain == "35"
    assert value_text(2000.0, "srf_GHz").plain == "2000"          # not said to be a bound
    assert not is_lower_bound({"srf_is_bound": float("nan")}, "srf_GHz")


def _rendered(table: object) -> str:
    console = Console(width=100, record=True)
    console.print(table)
    return console.export_text()


def test_what_if_shows_no_relative_change_across_a_bound() -> None:
    before = {"srf_GHz": 2000.0, "srf_is_bound": 1.0, "cap_fF": 10.0}
    after = {"srf_GHz": 1500.0, "srf_is_bound": 0.0, "cap_fF": 12.0}
    text = _rendered(compare_table(before, after, frozenset({"srf_GHz"}), frozenset()))
    srf_line = next(line for line in text.splitlines() if line.startswith("srf_GHz"))
    # from a bound to a result the change is itself a bound: at most this
    assert "≥2000" in srf_line and "≤-25.0 %" in srf_line
    cap_line = next(line for line in text.splitlines() if line.startswith("cap_fF"))
    assert "+20.0 %" in cap_line
    assert METRIC_BY_NAME["srf_is_bound"].bounds == "srf_GHz"
