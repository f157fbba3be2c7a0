"""A terminal plot drawn with braille dots and box characters, on linear or log axes.

Each character cell holds a 2 x 4 braille dot grid, so a W x H cell plot area resolves
2W x 4H points. Series are lines or dot clouds; markers are single glyphs drawn on top
(an operating point, a Pareto front). The rendering (``render_plot``) is pure and testable;
``PlotView`` is the widget that redraws it at its current size.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from rich.style import Style
from rich.text import Text
from textual.reactive import reactive
from textual.widget import Widget

__all__ = ["Marker", "PlotSpec", "PlotView", "Series", "format_tick", "render_plot", "ticks_for"]

#: Braille dot bit for (row 0..3, column 0..1) inside one character cell (Unicode 2800 block).
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)
_BRAILLE_BASE = 0x2800

#: Fallback colours when a style map is not given (the widget passes theme-derived ones).
DEFAULT_STYLES: dict[str, Style] = {
    "axis": Style(color="grey62"),
    "label": Style(color="grey82"),
    "title": Style(bold=True),
    "marker": Style(color="bright_magenta", bold=True),
    "series-0": Style(color="cyan"),
    "series-1": Style(color="yellow"),
    "series-2": Style(color="green"),
    "series-3": Style(color="magenta"),
}


@dataclass(frozen=True, eq=False)
class Series:
    """One data series: x and y in display units (what the axis labels say)."""

    x: Sequence[float] | np.ndarray
    y: Sequence[float] | np.ndarray
    label: str
    kind: Literal["line", "dots"] = "line"


@dataclass(frozen=True)
class Marker:
    """A glyph at one point (drawn over the series), listed in the legend."""

    x: float
    y: float
    label: str
    glyph: str = "◆"


@dataclass(frozen=True, eq=False)
class PlotSpec:
    """What to draw; axis labels carry the unit, e.g. ``"f [Hz]"``."""

    title: str = ""
    x_label: str = ""
    y_label: str = ""
    x_log: bool = False
    y_log: bool = False
    series: tuple[Series, ...] = ()
    markers: tuple[Marker, ...] = ()
    #: shown instead of axes when there is nothing to draw
    empty_text: str = "no data to plot"


_PREFIXES = {-15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}


def format_tick(value: float, log: bool = False) -> str:
    """Short tick label: SI prefix for log axes and very large/small values, else plain."""
    if value == 0 or not math.isfinite(value):
        return "0" if value == 0 else str(value)
    mag = abs(value)
    if log or mag >= 1e4 or mag < 1e-2:
        exp3 = int(math.floor(math.log10(mag) / 3) * 3)
        exp3 = max(-15, min(12, exp3))
        scaled = value / 10.0**exp3
        text = f"{scaled:.3g}"
        return text + _PREFIXES[exp3]
    return f"{value:.4g}"


def _nice_step(span: float, target: int) -> float:
    raw = span / max(target, 1)
    if raw <= 0 or not math.isfinite(raw):
        return 1.0
    power = 10.0 ** math.floor(math.log10(raw))
    for mult in (1, 2, 2.5, 5, 10):
        if raw <= mult * power:
            return mult * power
    return 10 * power


def ticks_for(lo: float, hi: float, log: bool, target: int) -> list[float]:
    """Tick values inside [lo, hi]: decades on log axes, 1-2-5 steps on linear ones."""
    if hi <= lo:
        return [lo]
    if log:
        first, last = math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9)
        decades = list(range(first, last + 1))
        if not decades:
            return [lo, hi]
        stride = max(1, math.ceil(len(decades) / max(target, 1)))
        return [10.0**d for d in decades[::stride]]
    step = _nice_step(hi - lo, target)
    start = math.ceil(lo / step - 1e-9) * step
    out: list[float] = []
    v = start
    while v <= hi + step * 1e-9:
        out.append(0.0 if abs(v) < step * 1e-9 else v)
        v += step
    return out


def _finite(values: np.ndarray, log: bool) -> np.ndarray:
    ok = np.isfinite(values)
    if log:
        ok &= values > 0
    return ok


def _range(values: list[np.ndarray], log: bool) -> tuple[float, float]:
    parts = [v for v in values if v.size]
    data = np.concatenate(parts) if parts else np.array([])
    if data.size == 0:
        return (1.0, 10.0) if log else (0.0, 1.0)
    lo, hi = float(np.min(data)), float(np.max(data))
    if log:
        if hi / lo < 10:  # less than a decade: widen to the decades around it
            lo, hi = 10.0 ** math.floor(math.log10(lo)), 10.0 ** math.ceil(math.log10(hi))
            if lo == hi:
                lo, hi = lo / 10, hi * 10
        return lo, hi
    if lo == hi:
        pad = abs(lo) * 0.1 or 1.0
        return lo - pad, hi + pad
    pad = (hi - lo) * 0.05
    return lo - pad, hi + pad


class _Axis:
    """Maps data values to dot positions 0..n-1 along one axis."""

    def __init__(self, lo: float, hi: float, log: bool, n: int) -> None:
        self.log = log
        self.lo, self.hi = lo, hi
        self.n = n
        self._a = math.log10(lo) if log else lo
        self._b = math.log10(hi) if log else hi

    def to_dots(self, values: np.ndarray) -> np.ndarray:
        v = np.log10(values) if self.log else values
        frac = (v - self._a) / (self._b - self._a)
        return np.rint(frac * (self.n - 1)).astype(np.int64)


def _densify(px: np.ndarray, py: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Dot positions along straight segments joining consecutive points."""
    if px.size < 2:
        return px, py
    dx, dy = np.diff(px), np.diff(py)
    steps = np.maximum(np.abs(dx), np.abs(dy)).clip(min=1)
    seg = np.repeat(np.arange(dx.size), steps)
    starts = np.concatenate(([0], np.cumsum(steps)[:-1]))
    t = (np.arange(seg.size) - np.repeat(starts, steps)) / np.repeat(steps, steps)
    xs = np.rint(px[seg] + t * dx[seg]).astype(np.int64)
    ys = np.rint(py[seg] + t * dy[seg]).astype(np.int64)
    return np.concatenate((xs, px[-1:])), np.concatenate((ys, py[-1:]))


def render_plot(spec: PlotSpec, width: int, height: int,
                styles: dict[str, Style] | None = None) -> Text:
    """Render ``spec`` into ``height`` lines of at most ``width`` cells."""
    st = {**DEFAULT_STYLES, **(styles or {})}
    too_small = Text("(plot area too small)"[:max(width, 0)], style=st["label"])
    if width < 16 or height < 6:
        return too_small
    if not any(np.asarray(s.x).size for s in spec.series) and not spec.markers:
        return Text(spec.empty_text[:width], style=st["label"])
    xs = [np.asarray(s.x, dtype=float) for s in spec.series]
    ys = [np.asarray(s.y, dtype=float) for s in spec.series]
    masks = [_finite(x, spec.x_log) & _finite(y, spec.y_log) for x, y in zip(xs, ys)]
    mx = np.array([m.x for m in spec.markers], dtype=float)
    my = np.array([m.y for m in spec.markers], dtype=float)
    mmask = _finite(mx, spec.x_log) & _finite(my, spec.y_log) if mx.size else np.array([], bool)
    x_lo, x_hi = _range([x[m] for x, m in zip(xs, masks)] + [mx[mmask]], spec.x_log)
    y_lo, y_hi = _range([y[m] for y, m in zip(ys, masks)] + [my[mmask]], spec.y_log)

    plot_h = height - 3  # header line, axis line, tick labels line
    y_ticks = ticks_for(y_lo, y_hi, spec.y_log, max(2, plot_h // 3))
    y_labels = [format_tick(v, spec.y_log) for v in y_ticks]
    label_w = max([len(s) for s in y_labels] + [1])
    plot_w = width - label_w - 1
    if plot_w < 8:
        return too_small
    x_axis = _Axis(x_lo, x_hi, spec.x_log, plot_w * 2)
    y_axis = _Axis(y_lo, y_hi, spec.y_log, plot_h * 4)

    bits = np.zeros((plot_h, plot_w), dtype=np.uint8)
    owner = np.full((plot_h, plot_w), -1, dtype=np.int64)
    for index, (series, x, y, m) in enumerate(zip(spec.series, xs, ys, masks)):
        if not m.any():
            continue
        px = x_axis.to_dots(x[m])
        py = (plot_h * 4 - 1) - y_axis.to_dots(y[m])
        if series.kind == "line":
            px, py = _densify(px, py)
        keep = (px >= 0) & (px < plot_w * 2) & (py >= 0) & (py < plot_h * 4)
        px, py = px[keep], py[keep]
        cx, cy = px // 2, py // 4
        np.bitwise_or.at(bits, (cy, cx), _DOT_BITS[py % 4, px % 2])
        owner[cy, cx] = index
    glyphs: dict[tuple[int, int], str] = {}
    if mx.size:
        gx = x_axis.to_dots(mx[mmask]) // 2
        gy = ((plot_h * 4 - 1) - y_axis.to_dots(my[mmask])) // 4
        for marker, cx, cy in zip([m for m, ok in zip(spec.markers, mmask) if ok], gx, gy):
            if 0 <= cx < plot_w and 0 <= cy < plot_h:
                glyphs[(int(cy), int(cx))] = marker.glyph

    tick_rows = {int((plot_h * 4 - 1 - y_axis.to_dots(np.array([v]))[0]) // 4): lab
                 for v, lab in zip(y_ticks, y_labels)}
    # tick labels under the x axis (computed first: the x label goes there when it fits)
    x_ticks = ticks_for(x_lo, x_hi, spec.x_log, max(2, plot_w // 10))
    tick_cols = [int(c) // 2 for c in x_axis.to_dots(np.array(x_ticks))]
    line = [" "] * (plot_w + label_w + 1)
    last_end = -1
    for value, col in zip(x_ticks, tick_cols):
        text = format_tick(value, spec.x_log)
        start = label_w + 1 + col - len(text) // 2
        start = max(0, min(start, len(line) - len(text)))
        if start <= last_end:
            continue
        line[start:start + len(text)] = list(text)
        last_end = start + len(text)
    x_label_below = bool(spec.x_label) and len(line) - last_end > len(spec.x_label) + 2
    if x_label_below:
        line[len(line) - len(spec.x_label):] = list(spec.x_label)

    out = Text(no_wrap=True, overflow="crop")
    # header: axis labels, title and legend
    out.append(spec.y_label, st["label"])
    if spec.x_label and not x_label_below:
        out.append(" vs " + spec.x_label, st["label"])
    if spec.title:
        out.append("  " + spec.title, st["title"])
    for index, series in enumerate(spec.series):
        out.append("  " + ("━" if series.kind == "line" else "⠿") + " ", st[f"series-{index % 4}"])
        out.append(series.label, st["label"])
    legend_markers: dict[str, str] = {}
    for marker in spec.markers:
        legend_markers.setdefault(marker.glyph, marker.label)
    for glyph, label in legend_markers.items():
        out.append("  " + glyph + " ", st["marker"])
        out.append(label, st["label"])
    out.truncate(width)
    out.append("\n")
    for row in range(plot_h):
        label = tick_rows.get(row, "")
        out.append(label.rjust(label_w), st["label"])
        out.append("┤" if row in tick_rows else "│", st["axis"])
        for col in range(plot_w):
            drawn = glyphs.get((row, col))
            if drawn is not None:
                out.append(drawn, st["marker"])
            elif bits[row, col]:
                out.append(chr(_BRAILLE_BASE + int(bits[row, col])),
                           st[f"series-{int(owner[row, col]) % 4}"])
            else:
                out.append(" ")
        out.append("\n")
    # x axis line with tick marks, then tick labels
    axis = ["─"] * plot_w
    for c in tick_cols:
        if 0 <= c < plot_w:
            axis[c] = "┬"
    out.append(" " * label_w + "└" + "".join(axis), st["axis"])
    out.append("\n")
    out.append("".join(line), st["label"])
    return out


class PlotView(Widget):
    """Shows a ``PlotSpec``; redraws on resize or when ``spec`` changes."""

    DEFAULT_CSS = """
    PlotView { height: 1fr; min-height: 8; }
    PlotView > .plot--axis { color: $foreground-muted; }
    PlotView > .plot--label { color: $foreground; }
    PlotView > .plot--title { text-style: bold; color: $foreground; }
    PlotView > .plot--marker { color: $error; text-style: bold; }
    PlotView > .plot--series-0 { color: $accent; }
    PlotView > .plot--series-1 { color: $success; }
    PlotView > .plot--series-2 { color: $primary-lighten-2; }
    PlotView > .plot--series-3 { color: $secondary-lighten-3; }
    """
    COMPONENT_CLASSES = {
        "plot--axis", "plot--label", "plot--title", "plot--marker",
        "plot--series-0", "plot--series-1", "plot--series-2", "plot--series-3",
    }

    spec: reactive[PlotSpec | None] = reactive(None)

    def __init__(self, spec: PlotSpec | None = None, *, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.set_reactive(PlotView.spec, spec)

    def render(self) -> Text:
        if self.spec is None:
            return Text("no data to plot", style="dim")
        styles = {name.removeprefix("plot--"): self.get_component_rich_style(name, partial=True)
                  for name in self.COMPONENT_CLASSES}
        return render_plot(self.spec, self.size.width, self.size.height, styles)
