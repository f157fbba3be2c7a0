"""Terminal plots: what to draw (``PlotSpec``) and the widget that draws it with plotext.

The drawing itself is plotext's (through textual-plotext's per-widget figure): braille lines,
log axes, markers and horizontal reference lines. What stays ours is the plot's content and
look: tick values and their SI-prefix labels, a legend line above the plot (plotext's own
legend would sit on the data), the colours (from the app theme) and which points are markers.
``render_plot`` is pure and testable; ``PlotView`` redraws it at its current size.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from rich.style import Style
from rich.text import Text
from textual import events
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget

__all__ = ["Level", "Marker", "PlotPointed", "PlotSpec", "PlotView", "Series", "axis_limits",
           "format_tick", "point_at", "render_plot", "ticks_for"]

#: Fallback colours when a style map is not given (the widget passes theme-derived ones).
DEFAULT_STYLES: dict[str, Style] = {
    "axis": Style(color="grey62"),
    "label": Style(color="grey82"),
    "title": Style(bold=True),
    "marker": Style(color="bright_magenta", bold=True),
    "level": Style(color="red"),
    "series-0": Style(color="cyan"),
    "series-1": Style(color="yellow"),
    "series-2": Style(color="green"),
    "series-3": Style(color="magenta"),
    "series-4": Style(color="bright_blue"),
}
N_SERIES_STYLES = 5


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


@dataclass(frozen=True)
class Level:
    """A horizontal reference line across the plot (a target), listed in the legend."""

    y: float
    label: str


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
    levels: tuple[Level, ...] = ()
    #: shown instead of axes when there is nothing to draw
    empty_text: str = "no data to plot"


_PREFIXES = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}


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


def _runs(mask: np.ndarray) -> list[slice]:
    """Contiguous stretches of True: a gap in the data is not drawn as a line across it."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    return [slice(int(a), int(b)) for a, b in zip(edges[::2], edges[1::2])]


def _rgb(style: Style) -> tuple[int, int, int] | None:
    if style.color is None:
        return None
    triplet = style.color.get_truecolor()
    return (triplet.red, triplet.green, triplet.blue)


def _legend(spec: PlotSpec, st: dict[str, Style], width: int) -> Text:
    out = Text(no_wrap=True, overflow="ellipsis")
    if spec.title:
        out.append(spec.title, st["title"])
    for index, series in enumerate(spec.series):
        glyph = "━" if series.kind == "line" else "⠿"
        out.append("  " + glyph + " ", st[f"series-{index % N_SERIES_STYLES}"])
        out.append(series.label, st["label"])
    seen: dict[str, str] = {}
    for marker in spec.markers:
        seen.setdefault(marker.label, marker.glyph)
    for label, glyph in seen.items():
        out.append("  " + glyph + " ", st["marker"])
        out.append(label, st["label"])
    for level in spec.levels:
        out.append("  ╌ ", st["level"])
        out.append(level.label, st["label"])
    out.truncate(width, overflow="ellipsis")
    return out


def _data(spec: PlotSpec) -> tuple[Any, ...]:
    xs = [np.asarray(s.x, dtype=float) for s in spec.series]
    ys = [np.asarray(s.y, dtype=float) for s in spec.series]
    masks = [_finite(x, spec.x_log) & _finite(y, spec.y_log) for x, y in zip(xs, ys)]
    mx = np.array([m.x for m in spec.markers], dtype=float)
    my = np.array([m.y for m in spec.markers], dtype=float)
    mmask = _finite(mx, spec.x_log) & _finite(my, spec.y_log) if mx.size else np.array([], bool)
    ly = np.array([lv.y for lv in spec.levels], dtype=float)
    lmask = _finite(ly, spec.y_log) if ly.size else np.array([], bool)
    return xs, ys, masks, (mx, my, mmask), (ly, lmask)


def axis_limits(spec: PlotSpec) -> tuple[tuple[float, float], tuple[float, float]]:
    """((x_lo, x_hi), (y_lo, y_hi)): the data ranges the axes span (padded on linear axes)."""
    xs, ys, masks, (mx, my, mmask), (ly, lmask) = _data(spec)
    return (_range([x[m] for x, m in zip(xs, masks)] + [mx[mmask]], spec.x_log),
            _range([y[m] for y, m in zip(ys, masks)] + [my[mmask], ly[lmask]], spec.y_log))


def point_at(spec: PlotSpec, rendered: str, column: int, row: int) -> tuple[float, float] | None:
    """The data point under a character cell of a rendered plot (None outside the frame).

    The frame's inner cells span the axis limits from edge to edge (plotext's layout).
    """
    lines = rendered.split("\n")
    try:
        top = next(i for i, ln in enumerate(lines) if "┌" in ln)
        bottom = next(i for i, ln in enumerate(lines) if "└" in ln)
    except StopIteration:
        return None
    left, right = lines[top].index("┌"), lines[top].index("┐")
    if not (left < column < right and top < row < bottom) or right - left < 3 or bottom - top < 3:
        return None
    fx = (column - left - 1) / (right - left - 2)
    fy = (bottom - 1 - row) / (bottom - top - 2)
    (x_lo, x_hi), (y_lo, y_hi) = axis_limits(spec)

    def along(lo: float, hi: float, frac: float, log: bool) -> float:
        if log:
            return float(10 ** (math.log10(lo) + frac * (math.log10(hi) - math.log10(lo))))
        return lo + frac * (hi - lo)

    return along(x_lo, x_hi, fx, spec.x_log), along(y_lo, y_hi, fy, spec.y_log)


def render_plot(spec: PlotSpec, width: int, height: int,
                styles: dict[str, Style] | None = None) -> Text:
    """Render ``spec`` into at most ``height`` lines of at most ``width`` cells.

    The first line is the title and legend; plotext draws the axes, the series, the markers and
    the reference lines below it, with our tick values and labels.
    """
    from textual_plotext.plot import Plot

    st = {**DEFAULT_STYLES, **(styles or {})}
    if width < 24 or height < 7:
        return Text("(plot area too small)"[:max(width, 0)], style=st["label"])
    if not any(np.asarray(s.x).size for s in spec.series) and not spec.markers:
        return Text(spec.empty_text[:width], style=st["label"])
    xs, ys, masks, (mx, my, mmask), (ly, lmask) = _data(spec)
    (x_lo, x_hi), (y_lo, y_hi) = axis_limits(spec)

    plt = Plot()
    plt.theme("clear")
    plot_h = height - 2  # our legend line above, our axis-label line below
    plt.plotsize(width, plot_h)
    # plotext caps plotsize at the size of the terminal it runs in; the widget's size is what
    # counts here (textual-plotext sets it the same way)
    plt._set_size(width, plot_h)
    for index, (series, x, y, m) in enumerate(zip(spec.series, xs, ys, masks)):
        color = _rgb(st[f"series-{index % N_SERIES_STYLES}"])
        if series.kind == "dots":
            if m.any():
                plt.scatter(x[m].tolist(), y[m].tolist(), marker="braille", color=color)
            continue
        for run in _runs(m):
            plt.plot(x[run].tolist(), y[run].tolist(), marker="braille", color=color)
    for level, ok in zip(spec.levels, lmask):
        if ok:
            plt.hline(float(level.y), color=_rgb(st["level"]))
    for marker, ok in zip(spec.markers, mmask):
        if ok:
            plt.scatter([marker.x], [marker.y], marker=marker.glyph, color=_rgb(st["marker"]))
    if spec.x_log:
        plt.xscale("log")
    if spec.y_log:
        plt.yscale("log")
    # plotext takes the limits of a log axis as exponents, the ticks as values
    plt.xlim(*((math.log10(x_lo), math.log10(x_hi)) if spec.x_log else (x_lo, x_hi)))
    plt.ylim(*((math.log10(y_lo), math.log10(y_hi)) if spec.y_log else (y_lo, y_hi)))
    x_ticks = ticks_for(x_lo, x_hi, spec.x_log, max(2, width // 12))
    y_ticks = ticks_for(y_lo, y_hi, spec.y_log, max(2, plot_h // 4))
    plt.xticks(x_ticks, [format_tick(v, spec.x_log) for v in x_ticks])
    plt.yticks(y_ticks, [format_tick(v, spec.y_log) for v in y_ticks])
    body = Text.from_ansi(plt.build(), no_wrap=True)
    body.rstrip()
    out = _legend(spec, st, width)
    out.append("\n")
    out.append_text(body)
    # both axis names on one line of our own (plotext drops one when they would touch)
    labels = Text(no_wrap=True, overflow="ellipsis")
    if spec.y_label:
        labels.append("↑ ", st["axis"])
        labels.append(spec.y_label, st["label"])
    if spec.x_label:
        labels.append("   → " if spec.y_label else "→ ", st["axis"])
        labels.append(spec.x_label, st["label"])
    labels.truncate(width, overflow="ellipsis")
    out.append("\n")
    out.append_text(labels)
    return out


class PlotView(Widget):
    """Shows a ``PlotSpec``; redraws on resize or when ``spec`` changes."""

    DEFAULT_CSS = """
    PlotView { height: 1fr; min-height: 8; }
    PlotView > .plot--axis { color: $foreground-muted; }
    PlotView > .plot--label { color: $foreground; }
    PlotView > .plot--title { text-style: bold; color: $foreground; }
    PlotView > .plot--marker { color: $error; text-style: bold; }
    PlotView > .plot--level { color: $warning; }
    PlotView > .plot--series-0 { color: $accent; }
    PlotView > .plot--series-1 { color: $success; }
    PlotView > .plot--series-2 { color: $primary-lighten-2; }
    PlotView > .plot--series-3 { color: $secondary-lighten-3; }
    PlotView > .plot--series-4 { color: $warning-lighten-2; }
    """
    COMPONENT_CLASSES = {
        "plot--axis", "plot--label", "plot--title", "plot--marker", "plot--level",
        "plot--series-0", "plot--series-1", "plot--series-2", "plot--series-3", "plot--series-4",
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
        text = render_plot(self.spec, self.size.width, self.size.height, styles)
        self._rendered = text.plain
        return text

    def on_click(self, event: events.Click) -> None:
        if self.spec is None or not getattr(self, "_rendered", ""):
            return
        point = point_at(self.spec, self._rendered, event.x, event.y)
        if point is not None:
            self.post_message(PlotPointed(self, *point))


class PlotPointed(Message):
    """The user clicked inside a plot's frame, at data coordinates (x, y)."""

    def __init__(self, plot: PlotView, x: float, y: float) -> None:
        super().__init__()
        self.plot = plot
        self.x = x
        self.y = y
