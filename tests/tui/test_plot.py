"""Terminal plots drawn with plotext: our ticks and labels, legend line, markers, levels, gaps."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.tui.widgets.plot import (
    Level,
    Marker,
    PlotSpec,
    Series,
    format_tick,
    render_plot,
    ticks_for,
)

BRAILLE = range(0x2801, 0x2900)  # Unicode Braille Patterns block, blank (U+2800) excluded


def _area(text: str) -> list[str]:
    """The rows inside plotext's frame (between its borders)."""
    lines = text.split("\n")
    top = next(i for i, ln in enumerate(lines) if "┌" in ln)
    bottom = next(i for i, ln in enumerate(lines) if "└" in ln)
    left, right = lines[top].index("┌"), lines[top].index("┐")
    return [ln[left + 1:right] for ln in lines[top + 1:bottom]]


def _dots(row: str) -> list[int]:
    return [i for i, ch in enumerate(row) if ord(ch) in BRAILLE]


def test_legend_line_names_series_markers_and_levels_above_the_plot() -> None:
    x = np.linspace(-1.0, 1.0, 21)
    spec = PlotSpec(title="C-V", series=(Series(x, x**2, "typ_25C"), Series(x, 2 * x**2, "slow")),
                    markers=(Marker(1.0, 1.0, "operating point"),), levels=(Level(1.5, "target"),))
    first = render_plot(spec, 90, 16).plain.split("\n")[0]
    assert first.startswith("C-V")
    for words in ("━ typ_25C", "━ slow", "◆ operating point", "╌ target"):
        assert words in first


def test_rising_line_goes_from_bottom_left_to_top_right() -> None:
    x = np.linspace(0.0, 1.0, 30)
    rows = _area(render_plot(PlotSpec(series=(Series(x, x, "ramp"),)), 60, 14).plain)
    hits = [(r, c) for r, row in enumerate(rows) for c in _dots(row)]
    left = min(c for _, c in hits)
    right = max(c for _, c in hits)
    assert max(r for r, c in hits if c == left) > min(r for r, c in hits if c == right)


def test_log_axes_are_labelled_by_decade_with_si_prefixes() -> None:
    f = np.logspace(6, 10, 100)
    spec = PlotSpec(x_log=True, y_log=True, x_label="f [Hz]", y_label="|Z| [Ω]",
                    series=(Series(f, 1e12 / f, "1/f"),))
    lines = render_plot(spec, 80, 18).plain.split("\n")
    tick_line = next(ln for ln in lines if "100M" in ln)
    positions = [tick_line.index(label) + len(label) / 2 for label in ("1M", "10M", "100M", "1G")]
    gaps = np.diff(positions)
    assert gaps.max() - gaps.min() <= 2  # one decade is one equal step on a log axis
    assert lines[-1] == "↑ |Z| [Ω]   → f [Hz]"  # both axis names, on our own line
    # 1/f on log-log axes is a straight falling line: the dots fall monotonically
    rows = _area("\n".join(lines))
    heights = [np.mean([r for r, row in enumerate(rows) if c in _dots(row)])
               for c in sorted({c for row in rows for c in _dots(row)})]
    assert all(b >= a - 0.5 for a, b in zip(heights, heights[1:]))


def test_values_a_log_axis_cannot_show_are_left_out_and_gaps_stay_gaps() -> None:
    f = np.array([1e6, 1e7, 1e8, 1e9, 1e10, 1e11])
    y = np.array([1.0, 2.0, -1.0, np.nan, 3.0, 4.0])
    text = render_plot(PlotSpec(x_log=True, y_log=True, series=(Series(f, y, "s"),)), 60, 12).plain
    assert "nan" not in text and "inf" not in text
    rows = _area(text)
    columns = sorted({c for row in rows for c in _dots(row)})
    assert np.diff(columns).max() > 5  # no line drawn across the missing middle decades


def test_marker_sits_at_its_point() -> None:
    x = np.linspace(-1.0, 1.0, 21)
    spec = PlotSpec(series=(Series(x, x**2, "parabola"),), markers=(Marker(1.0, 1.0, "op"),))
    rows = _area(render_plot(spec, 60, 14).plain)
    where = [(r, row.index("◆")) for r, row in enumerate(rows) if "◆" in row]
    assert len(where) == 1
    row, col = where[0]
    assert row <= 1 and col >= len(rows[row]) - 4  # top right: the largest x and y


def test_level_is_a_horizontal_line_at_its_value() -> None:
    x = np.linspace(0.0, 10.0, 20)
    spec = PlotSpec(series=(Series(x, x, "ramp"),), levels=(Level(5.0, "target"),))
    rows = _area(render_plot(spec, 60, 16).plain)
    ruled = [r for r, row in enumerate(rows) if row.count("─") > 20]
    assert len(ruled) == 1 and abs(ruled[0] - (len(rows) - 1) / 2) <= 2  # mid-height


@pytest.mark.parametrize(("lo", "hi", "log", "target", "expected"), [
    (1e6, 1e9, True, 5, [1e6, 1e7, 1e8, 1e9]),
    (1e3, 1e12, True, 3, [1e3, 1e7, 1e11]),  # every 4th decade: at most 3 ticks
    (0.0, 1.0, False, 5, [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]),
    (-1.3, 1.3, False, 6, [-1.0, -0.5, 0.0, 0.5, 1.0]),
    (-1.3, 1.3, False, 5, [-1.0, 0.0, 1.0]),  # step 0.52 rounds up to 1 (1-2-2.5-5 steps)
])
def test_ticks(lo: float, hi: float, log: bool, target: int, expected: list[float]) -> None:
    assert ticks_for(lo, hi, log, target) == pytest.approx(expected)


@pytest.mark.parametrize(("value", "log", "text"), [
    (1e9, True, "1G"), (2.5e-15, False, "2.5f"), (100e3, True, "100k"), (950.0, False, "950"),
    (1000.0, False, "1000"), (0.5, False, "0.5"), (0.0, False, "0"), (2e-6, True, "2µ"),
])
def test_format_tick(value: float, log: bool, text: str) -> None:
    assert format_tick(value, log) == text


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=60),
       st.integers(24, 120), st.integers(7, 40))
def test_render_never_exceeds_its_box(ys: list[float], width: int, height: int) -> None:
    x = np.arange(len(ys), dtype=float)
    text = render_plot(PlotSpec(title="t", series=(Series(x, np.array(ys), "s"),)), width, height)
    lines = text.plain.split("\n")
    assert len(lines) <= height
    assert all(len(line) <= width for line in lines)


def test_too_small_area_says_so() -> None:
    assert "too small" in render_plot(PlotSpec(), 30, 4).plain
    assert len(render_plot(PlotSpec(), 10, 4).plain) <= 10


def test_empty_plot_says_why() -> None:
    assert render_plot(PlotSpec(empty_text="no C-V curve"), 60, 12).plain == "no C-V curve"


def test_a_character_cell_maps_back_to_the_data_it_shows() -> None:
    from celllab.tui.widgets.plot import point_at

    f = np.logspace(6, 10, 50)
    spec = PlotSpec(x_log=True, y_log=True, series=(Series(f, 1e12 / f, "1/f"),),
                    markers=(Marker(1e8, 1e4, "mid"),))
    text = render_plot(spec, 80, 20).plain
    lines = text.split("\n")
    row = next(i for i, ln in enumerate(lines) if i > 0 and "◆" in ln)
    col = lines[row].index("◆")
    x, y = point_at(spec, text, col, row)
    # one character is 1/70 of four decades across, 1/16 of four decades up
    assert abs(np.log10(x) - 8) < 0.1 and abs(np.log10(y) - 4) < 0.3
    assert point_at(spec, text, 0, 0) is None  # the legend line is outside the frame
