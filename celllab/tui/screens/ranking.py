"""Ranking view: constraints, the ranked cells and a Pareto scatter of two metrics."""

from __future__ import annotations

from typing import Any

import numpy as np
from textual import events, on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Container, Horizontal
from textual.widgets import Footer, Label, Select, Static
from textual.worker import get_current_worker

from celllab.columns import METRIC_NAMES, best_first_descending, unit_of
from celllab.display import count_text
from celllab.errors import CelllabError, FilterError
from celllab.tui.messages import (
    CellChosen,
    FilterChanged,
    PageRequested,
    QueryFailed,
    RankingLoaded,
    SortRequested,
)
from celllab.tui.screens.base import TaskScreen
from celllab.tui.screens.catalog import EXAMPLE_FILTER, check_filter
from celllab.tui.widgets.catalog_table import CatalogTable
from celllab.tui.widgets.filter_bar import FilterBar
from celllab.tui.widgets.plot import Marker, PlotPointed, PlotSpec, PlotView, Series, axis_limits
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import format_number
from celllab.units import pretty_unit

RANK_LIMIT = 50
CLOUD_LIMIT = 4000
RANKABLE: tuple[str, ...] = (*METRIC_NAMES, "area_um2", "gate_area_um2")


def _axis_label(metric: str) -> str:
    unit = pretty_unit(unit_of(metric))
    return f"{metric} [{unit}]" if unit else metric


def _wants_log(values: np.ndarray) -> bool:
    values = values[np.isfinite(values)]
    return bool(values.size and values.min() > 0 and values.max() / values.min() > 100)


def _key(value: Any) -> float:
    return float(value) if isinstance(value, (int, float)) else float("inf")


def pareto_plot(cloud: list[dict[str, Any]], front: list[dict[str, Any]], x: str, y: str,
                pointed: dict[str, Any] | None = None) -> PlotSpec:
    """Every candidate as a dot, the non-dominated ones as markers joined by a line; the
    pointed-at front cell ringed."""
    cx = np.array([r.get(x, np.nan) for r in cloud], dtype=float)
    cy = np.array([r.get(y, np.nan) for r in cloud], dtype=float)
    fx = np.array([r.get(x, np.nan) for r in front], dtype=float)
    fy = np.array([r.get(y, np.nan) for r in front], dtype=float)
    order = np.argsort(fx)
    both_x, both_y = np.concatenate((cx, fx)), np.concatenate((cy, fy))
    series = (Series(cx, cy, "cells", kind="dots"), Series(fx[order], fy[order], "Pareto front"))
    markers = tuple(Marker(float(a), float(b), "front cell", glyph="●") for a, b in zip(fx, fy))
    if pointed is not None:
        markers += (Marker(float(pointed.get(x, np.nan)), float(pointed.get(y, np.nan)),
                           str(pointed["name"]), glyph="◎"),)
    return PlotSpec(title="Pareto", x_label=_axis_label(x), y_label=_axis_label(y),
                    x_log=_wants_log(both_x), y_log=_wants_log(both_y), series=series,
                    markers=markers)


class RankingScreen(TaskScreen):
    """Constraints on top; the best cells and the trade-off between two metrics below."""

    TASK = "ranking"
    TASK_TITLE = "Ranking"
    BINDINGS = [
        Binding("slash", "focus_filter", "Constraints"),
        Binding("m", "pick('rank')", "Rank by"),
        Binding("h", "pick('x')", "X metric", show=False),
        Binding("v", "pick('y')", "Y metric", show=False),
        Binding("r", "reverse", "Reverse", show=False),
        Binding("period", "point(1)", "Next front cell", key_display="."),
        Binding("comma", "point(-1)", "Prev front cell", show=False, key_display=","),
        Binding("o", "open_pointed", "Open front cell"),
        Binding("escape", "focus_table", "To table", show=False),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.rank_by = "cap_density_fF_per_um2"
        self.descending = best_first_descending(self.rank_by)
        self.x_metric = "cap_density_fF_per_um2"
        self.y_metric = "leakage_nA_per_nF"
        self.where = ""
        self.total = 0
        self.front: list[dict[str, Any]] = []
        #: the front cell picked on the plot (. and , step along the front, a click picks)
        self.pointed: dict[str, Any] | None = None
        self._cloud: list[dict[str, Any]] = []
        self._serial = 0

    def compose(self) -> ComposeResult:
        yield TaskBar("ranking", id="taskbar")
        options = [(m, m) for m in RANKABLE]
        with Horizontal(classes="pickers"):
            yield Label("rank by", classes="picker-label")
            yield Select(options, value=self.rank_by, allow_blank=False, compact=True, id="rank-by")
            yield Label("x", classes="picker-label")
            yield Select(options, value=self.x_metric, allow_blank=False, compact=True, id="rank-x")
            yield Label("y", classes="picker-label")
            yield Select(options, value=self.y_metric, allow_blank=False, compact=True, id="rank-y")
        yield FilterBar(check_filter, prompt="constraints", placeholder=f"e.g. {EXAMPLE_FILTER}",
                        pause_s=self.lab.debounce_s, id="rank-filter")
        with Container(id="rank-body"):
            yield CatalogTable(id="rank-table")
            yield PlotView(id="rank-plot")
        yield Static("", id="rank-status", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        self.query_one(CatalogTable).page_size = RANK_LIMIT
        self.query_one(CatalogTable).focus()

    #: terminal width from which the table and the plot sit side by side
    SIDE_BY_SIDE_WIDTH = 160

    def on_resize(self, event: events.Resize) -> None:
        self.set_class(event.size.width >= self.SIDE_BY_SIDE_WIDTH, "-side")

    def on_screen_resume(self) -> None:
        super().on_screen_resume()
        self.refresh_ranking()  # deck, corner or the catalog may have changed meanwhile

    # --- loading ------------------------------------------------------------------------
    def refresh_ranking(self, offset: int = 0) -> None:
        self._serial += 1
        self._load(self._serial, self.lab.current_deck, self.lab.current_corner, self.where,
                   self.rank_by, self.descending, self.x_metric, self.y_metric, offset)

    @work(thread=True, exclusive=True, group="ranking")
    def _load(self, serial: int, deck: str | None, corner: str, where: str, rank_by: str,
              descending: bool, x: str, y: str, offset: int) -> None:
        worker = get_current_worker()
        try:
            with self.lab.using_catalog() as catalog:
                total = catalog.count(deck=deck, corner=corner, where=where)
                ranked = catalog.query(deck=deck, corner=corner, where=where, order_by=rank_by,
                                       descending=descending, limit=RANK_LIMIT, offset=offset)
                if worker.is_cancelled:
                    return
                cloud = catalog.query(deck=deck, corner=corner, where=where, order_by=rank_by,
                                      descending=descending, limit=CLOUD_LIMIT)
                front = catalog.pareto([x, y], deck=deck, corner=corner, where=where) if x != y else []
        except FilterError as exc:
            self.post_message(QueryFailed(exc.problems, "filter"))
            return
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "catalog"))
            return
        if not worker.is_cancelled:
            self.post_message(RankingLoaded(ranked, cloud, front, total, x, y, offset))

    def on_ranking_loaded(self, message: RankingLoaded) -> None:
        self.total = message.total
        self.front = sorted(message.front, key=lambda r: _key(r.get(message.x)))
        self._cloud = message.cloud
        if self.pointed is not None and self.pointed["name"] not in {r["name"] for r in self.front}:
            self.pointed = None
        self.query_one(FilterBar).error = ""
        # the values being ranked right after the name (a narrow table still shows them)
        columns = tuple(dict.fromkeys(("name", self.rank_by, self.x_metric, self.y_metric,
                                       "esd_safe", "topology")))
        self.query_one(CatalogTable).show_page(message.ranked, columns, message.offset, message.total,
                                               self.rank_by, self.descending)
        self._draw_plot()
        shown = len(message.cloud)
        sample = f" (plot: first {shown:,})" if shown < message.total else ""
        self._summary = (
            f"{count_text(message.total, 'cell')} {'meets' if message.total == 1 else 'meet'} "
            f"the constraints{sample} · Pareto front "
            f"{len(message.front)} · deck {self.lab.current_deck} · {self.lab.current_corner}")
        self._show_status()

    def _draw_plot(self) -> None:
        self.query_one(PlotView).spec = pareto_plot(self._cloud, self.front, self.x_metric,
                                                    self.y_metric, self.pointed)

    def _show_status(self) -> None:
        text = getattr(self, "_summary", "")
        if self.pointed is not None:
            p = self.pointed
            text = (f"◎ {p['name']}: {self.x_metric} {format_number(p[self.x_metric])}, "
                    f"{self.y_metric} {format_number(p[self.y_metric])} · o opens\n{text}")
        self.query_one("#rank-status", Static).update(text)

    # --- picking a front cell on the plot --------------------------------------------------
    def action_point(self, step: int) -> None:
        if not self.front:
            self.notify("no Pareto front to step along", severity="warning")
            return
        names = [r["name"] for r in self.front]
        if self.pointed is None or self.pointed["name"] not in names:
            index = 0 if step > 0 else len(names) - 1
        else:
            index = (names.index(self.pointed["name"]) + step) % len(names)
        self.point_at_row(self.front[index])

    def point_at_row(self, row: dict[str, Any]) -> None:
        self.pointed = row
        self._draw_plot()
        self._show_status()

    @on(PlotPointed)
    def _plot_clicked(self, message: PlotPointed) -> None:
        message.stop()
        if not self.front:
            return
        spec = message.plot.spec
        (x_lo, x_hi), (y_lo, y_hi) = axis_limits(spec)

        def norm(value: float, lo: float, hi: float, log: bool) -> float:
            if log:
                value, lo, hi = (np.log10(max(v, 1e-300)) for v in (value, lo, hi))
            return (value - lo) / ((hi - lo) or 1.0)

        def distance(row: dict[str, Any]) -> float:
            dx = norm(float(row[self.x_metric]), x_lo, x_hi, spec.x_log) - norm(message.x, x_lo, x_hi, spec.x_log)
            dy = norm(float(row[self.y_metric]), y_lo, y_hi, spec.y_log) - norm(message.y, y_lo, y_hi, spec.y_log)
            return float(np.hypot(dx, dy))

        self.point_at_row(min(self.front, key=distance))

    def action_open_pointed(self) -> None:
        if self.pointed is None:
            self.notify("pick a front cell first: . and , step along the front, or click it",
                        severity="warning")
            return
        from celllab.tui.screens.cell import CellScreen

        self.app.push_screen(CellScreen(str(self.pointed["name"]),
                                        self.pointed.get("deck") or self.lab.current_deck))

    def on_query_failed(self, message: QueryFailed) -> None:
        text = "\n".join(p.message for p in message.problems)
        if message.kind == "filter":
            self.query_one(FilterBar).error = text
        else:
            self.query_one("#rank-status", Static).update(text)

    def ranked_rows(self) -> list[dict[str, Any]]:
        return list(self.query_one(CatalogTable).rows_shown)

    # --- controls -----------------------------------------------------------------------
    @on(FilterChanged)
    def _filter_changed(self, message: FilterChanged) -> None:
        message.stop()  # the filter bar already waited for typing to pause
        text = message.text.strip()
        if text != self.where:
            self.where = text
            self.refresh_ranking()
        if message.submitted:
            self.query_one(CatalogTable).focus()

    @on(Select.Changed)
    def _select_changed(self, event: Select.Changed) -> None:
        if event.value is Select.BLANK:
            return
        value = str(event.value)
        if event.select.id == "rank-by" and value != self.rank_by:
            self.rank_by, self.descending = value, best_first_descending(value)
        elif event.select.id == "rank-x" and value != self.x_metric:
            self.x_metric = value
        elif event.select.id == "rank-y" and value != self.y_metric:
            self.y_metric = value
        else:
            return
        self.refresh_ranking()

    @on(SortRequested)
    def _sort(self, message: SortRequested) -> None:
        message.stop()
        if message.column in RANKABLE:
            self.query_one("#rank-by", Select).value = message.column

    @on(PageRequested)
    def _page(self, message: PageRequested) -> None:
        message.stop()
        self._serial += 1
        self._load(self._serial, self.lab.current_deck, self.lab.current_corner, self.where,
                   self.rank_by, self.descending, self.x_metric, self.y_metric, message.offset)

    @on(CellChosen)
    def _open(self, message: CellChosen) -> None:
        message.stop()
        from celllab.tui.screens.cell import CellScreen

        self.app.push_screen(CellScreen(message.name, message.deck or self.lab.current_deck))

    def action_pick(self, which: str) -> None:
        select = self.query_one({"rank": "#rank-by", "x": "#rank-x", "y": "#rank-y"}[which], Select)
        select.focus()
        select.expanded = True

    def action_reverse(self) -> None:
        self.descending = not self.descending
        self.refresh_ranking()

    def action_focus_filter(self) -> None:
        self.query_one(FilterBar).input.focus()

    def action_focus_table(self) -> None:
        self.query_one(CatalogTable).focus()

    def export_context(self) -> Any:
        from celllab.tui.screens.export import ExportContext

        return ExportContext(deck=self.lab.current_deck, corner=self.lab.current_corner,
                             query={"deck": self.lab.current_deck, "corner": self.lab.current_corner,
                                    "where": self.where, "order_by": self.rank_by,
                                    "descending": self.descending})
