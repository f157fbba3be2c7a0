"""The braille plot renderer: dot encoding, axis mapping, ticks, markers."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.tui.widgets.plot import Marker, PlotSpec, Series, format_tick, render_plot, ticks_for

BRAILLE_BLANK = 0x2800


def _plot_rows(text: str) -> list[str]:
    """Lines between the header and the x axis."""
    lines = text.split("\n")
    return lines[1:-2]


def _braille_bits(ch: str) -> int:
    return ord(ch) - BRAILLE_BLANK if BRAILLE_BLANK <= ord(ch) <= 0x28FF else 0


def test_braille_dot_numbering_matches_the_unicode_block() -> None:
    # Source: Unicode Standard, Braille Patterns block U+2800..U+28FF: dot n sets bit n-1;
    # dots 1,2,3,7 are the left column top to bottom, dots 4,5,6,8 the right column.
    from celllab.tui.widgets.plot import _DOT_BITS

    assert [int(b) for b in _DOT_BITS[:, 0]] == [0x01, 0x02, 0x04, 0x40]
    assert [int(b) for b in _DOT_BITS[:, 1]] == [0x08, 0x10, 0x20, 0x80]
    assert chr(BRAILLE_BLANK + 0xFF) == "⣿"


def test_horizontal_line_lands_on_one_text_row() -> None:
    x = np.linspace(0.0, 10.0, 50)
    spec = PlotSpec(series=(Series(x, np.full_like(x, 5.0), "flat"),))
    rows = _plot_rows(render_plot(spec, 60, 14).plain)
    marked = [i for i, row in enumerate(rows) if any(_braille_bits(c) for c in row)]
    assert len(marked) == 1  # a constant y is one dot row, so one text row
    # the constant is the middle of the padded range: the middle row of the plot area
    assert abs(marked[0] - (len(rows) - 1) / 2) <= 1


def test_rising_line_goes_from_bottom_left_to_top_right() -> None:
    x = np.linspace(0.0, 1.0, 30)
    spec = PlotSpec(series=(Series(x, x, "ramp"),))
    rows = _plot_rows(render_plot(spec, 50, 12).plain)
    cells = [(r, c) for r, row in enumerate(rows) for c, ch in enumerate(row) if _braille_bits(ch)]
    left, right = min(c for _, c in cells), max(c for _, c in cells)
    left_row = max(r for r, c in cells if c == left)
    right_row = min(r for r, c in cells if c == right)
    assert right_row == 0 and left_row == len(rows) - 1  # from the bottom left to the top right


def test_log_axis_puts_decades_evenly_and_labels_them_with_prefixes() -> None:
    f = np.logspace(6, 10, 100)
    spec = PlotSpec(x_log=True, y_log=True, x_label="f [Hz]", y_label="|Z| [ohm]",
                    series=(Series(f, 1e12 / f, "1/f"),))
    text = render_plot(spec, 70, 16).plain
    tick_line = text.split("\n")[-1]
    for label in ("1M", "10M", "100M", "1G", "10G"):
        assert label in tick_line
    axis_line = text.split("\n")[-2]
    ticks = [i for i, ch in enumerate(axis_line) if ch == "┬"]
    gaps = np.diff(ticks)
    assert len(ticks) == 5 and gaps.max() - gaps.min() <= 1  # equal spacing per decade
    # a 1/f line on log-log axes is straight: one dot per column band, monotonic
    rows = _plot_rows(text)
    heights = []
    for col in range(len(rows[0])):
        hit = [r for r, row in enumerate(rows) if col < len(row) and _braille_bits(row[col])]
        if hit:
            heights.append(np.mean(hit))
    assert all(b >= a - 0.5 for a, b in zip(heights, heights[1:]))


def test_non_positive_values_are_skipped_on_log_axes() -> None:
    f = np.array([1e6, 1e7, 1e8, 1e9])
    y = np.array([1.0, -1.0, 0.0, 10.0])
    text = render_plot(PlotSpec(x_log=True, y_log=True, series=(Series(f, y, "s"),)), 40, 10).plain
    assert "nan" not in text and "inf" not in text


def test_marker_is_drawn_at_its_point_and_listed_in_the_legend() -> None:
    x = np.linspace(-1.0, 1.0, 21)
    spec = PlotSpec(series=(Series(x, x**2, "parabola"),),
                    markers=(Marker(1.0, 1.0, "operating point"),))
    text = render_plot(spec, 50, 12).plain
    assert "◆ operating point" in text.split("\n")[0]
    rows = _plot_rows(text)
    where = [(r, row.index("◆")) for r, row in enumerate(rows) if "◆" in row]
    assert len(where) == 1
    row, col = where[0]
    assert row <= 1  # the largest y sits at the top
    assert col >= len(rows[row]) - 3  # the largest x sits at the right edge


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
    (1000.0, False, "1000"), (0.5, False, "0.5"), (0.0, False, "0"),
])
def test_format_tick(value: float, log: bool, text: str) -> None:
    assert format_tick(value, log) == text


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=60),
       st.integers(16, 120), st.integers(6, 40))
def test_render_never_exceeds_its_box(ys: list[float], width: int, height: int) -> None:
    x = np.arange(len(ys), dtype=float)
    text = render_plot(PlotSpec(title="t", series=(Series(x, np.array(ys), "s"),)), width, height)
    lines = text.plain.split("\n")
    assert len(lines) <= height
    assert all(len(line) <= width for line in lines)


def test_too_small_area_says_so() -> None:
    assert "too small" in render_plot(PlotSpec(), 30, 4).plain
    assert len(render_plot(PlotSpec(), 10, 4).plain) <= 10
