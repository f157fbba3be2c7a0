"""Catalog view: a sortable, filterable table of cells for one deck and corner, page by page."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.timer import Timer
from textual.widgets import Footer, Label, Select, Static
from textual.worker import get_current_worker

from celllab.columns import CELL_COLUMNS, METRIC_NAMES, best_first_descending
from celllab.errors import CelllabError, FilterError
from celllab.tui.messages import (
    CellChosen,
    DecksLoaded,
    FilterChanged,
    PageLoaded,
    PagePrefetched,
    PageQuery,
    PageRequested,
    QueryFailed,
    RowsCounted,
    SortRequested,
)
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.catalog_table import CatalogTable
from celllab.tui.widgets.filter_bar import FilterBar
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import column_description, column_unit

#: Every column a catalog row has, in the order the column picker lists them.
ALL_COLUMNS: tuple[str, ...] = ("name", "family", "topology", "oxide", "corner",
                                *CELL_COLUMNS, *METRIC_NAMES)
DEFAULT_COLUMNS: tuple[str, ...] = (
    "name", "esd_safe", "cap_density_fF_per_um2", "leakage_nA_per_nF", "topology", "oxide",
    "cap_fF", "esr_ohm", "bandwidth_GHz", "tddb_fit_per_mm2", "area_um2",
)
SORTABLE: tuple[str, ...] = ("name", *CELL_COLUMNS, *METRIC_NAMES)
EXAMPLE_FILTER = "esd_safe and leakage_nA_per_nF <= 50"


def check_filter(text: str) -> str | None:
    """None when ``text`` parses in the catalog's filter language, else the error text."""
    if not text.strip():
        return None
    try:
        from celllab.catalog.filters import parse_filter
    except ImportError:  # no parser installed: the catalog query reports errors instead
        return None
    try:
        parse_filter(text)
    except FilterError as exc:
        return "\n".join(p.message for p in exc.problems) or "bad filter"
    return None


class CatalogScreen(TaskScreen):
    """Deck and corner pickers, the filter line and one page of matching cells."""

    TASK = "catalog"
    TASK_TITLE = "Catalog"
    BINDINGS = [
        Binding("slash", "focus_filter", "Filter"),
        Binding("s", "choose_sort", "Sort"),
        Binding("r", "reverse_sort", "Reverse", show=False),
        Binding("c", "choose_columns", "Columns"),
        Binding("d", "choose_deck", "Deck", show=False),
        Binding("o", "choose_corner", "Corner", show=False),
        Binding("w", "what_if", "What-if"),
        Binding("f", "fill_risk", "Fill risk", show=False),
        Binding("space", "mark", "Mark"),
        Binding("v", "compare", "Compare marked"),
        Binding("right_square_bracket", "page(1)", "Next page", show=False),
        Binding("left_square_bracket", "page(-1)", "Prev page", show=False),
        Binding("escape", "focus_table", "To table", show=False),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.columns: tuple[str, ...] = DEFAULT_COLUMNS
        self.order_by = "cap_density_fF_per_um2"
        self.descending = best_first_descending(self.order_by)
        self.where = ""
        self.total: int | None = 0
        self.row_offset = 0
        self._shown = 0
        self._counts: dict[tuple[str | None, str, str], int] = {}
        self._pages: dict[PageQuery, list[dict[str, Any]]] = {}
        self._prefetch_timer: Timer | None = None
        self._latest: PageQuery | None = None
        self._decks_loaded = False

    def compose(self) -> ComposeResult:
        yield TaskBar("catalog", id="taskbar")
        with Horizontal(id="catalog-pickers", classes="pickers"):
            yield Label("deck", classes="picker-label")
            yield Select([], prompt="(no deck)", allow_blank=True, compact=True, id="deck-select")
            yield Label("corner", classes="picker-label")
            yield Select([("worst", "worst"), ("best", "best")], value="worst", allow_blank=False,
                         compact=True, id="corner-select")
        yield FilterBar(check_filter, placeholder=f"e.g. {EXAMPLE_FILTER}",
                        pause_s=self.lab.debounce_s, id="catalog-filter")
        yield CatalogTable(id="catalog-table")
        yield Static("loading…", id="catalog-status", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(CatalogTable)
        table.page_size = self.lab.page_size
        if self.lab.catalog is not None:
            path = getattr(self.lab.catalog, "path", None)
            self.query_one(TaskBar).context = f"catalog {Path(path).name}" if path else ""
        table.focus()
        self._load_decks()

    def on_screen_resume(self) -> None:
        super().on_screen_resume()
        if self._decks_loaded:  # back from a cell or what-if: a saved variant may be new
            self._load_decks()

    # --- what the tests and the export dialog read --------------------------------------
    def visible_rows(self) -> list[dict[str, Any]]:
        """The rows of the page on screen."""
        return list(self.query_one(CatalogTable).rows_shown)

    def query_keywords(self) -> dict[str, Any]:
        """``Catalog.query`` keywords of the current table (without paging)."""
        return {"deck": self.lab.current_deck, "corner": self.lab.current_corner,
                "where": self.where, "order_by": self.order_by, "descending": self.descending}

    def export_context(self) -> Any:
        from celllab.tui.screens.export import ExportContext

        return ExportContext(deck=self.lab.current_deck, corner=self.lab.current_corner,
                             query=self.query_keywords(), columns=self.columns)

    # --- decks and corners ---------------------------------------------------------------
    @work(thread=True, exclusive=True, group="catalog-decks")
    def _load_decks(self) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                infos = [d for d in catalog.decks() if getattr(d, "current", True)]
                corners = {d.name: list(catalog.corners(d.name)) for d in infos}
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "catalog"))
            return
        self.post_message(DecksLoaded([d.name for d in infos], corners,
                                      {d.name: int(d.n_cells) for d in infos}))

    def on_decks_loaded(self, message: DecksLoaded) -> None:
        decks, corners = message.decks, message.corners
        self._pages.clear()  # the catalog may have changed (a saved variant)
        self._corners = corners
        # without a filter every cell has one row (a corner's, or its worst/best): no count query
        self._counts = {(d, c, ""): n for d, n in message.sizes.items()
                        for c in ("worst", "best", *corners.get(d, []))}
        deck_select = self.query_one("#deck-select", Select)
        current = self.lab.current_deck
        if current not in decks:
            current = decks[0] if decks else None
        self.lab.current_deck = current
        with deck_select.prevent(Select.Changed):
            deck_select.set_options([(d, d) for d in decks])
            if current is not None:
                deck_select.value = current
        self._set_corner_options()
        self._decks_loaded = True
        if not decks:
            self.query_one("#catalog-status", Static).update(
                "the catalog is empty: characterize cells into it first (celllab build)")
            return
        self.request_page(self.row_offset)

    def _set_corner_options(self) -> None:
        corners = getattr(self, "_corners", {}).get(self.lab.current_deck, [])
        select = self.query_one("#corner-select", Select)
        current = self.lab.current_corner
        options = ["worst", "best", *corners]
        if current not in options:
            current = "worst"
            self.lab.current_corner = current
        with select.prevent(Select.Changed):
            select.set_options([(o, o) for o in options])
            select.value = current

    @on(Select.Changed, "#deck-select")
    def _deck_changed(self, event: Select.Changed) -> None:
        if event.value is Select.BLANK or event.value == self.lab.current_deck:
            return
        self.lab.current_deck = str(event.value)
        self._set_corner_options()
        self.request_page(0)

    @on(Select.Changed, "#corner-select")
    def _corner_changed(self, event: Select.Changed) -> None:
        if event.value is Select.BLANK or event.value == self.lab.current_corner:
            return
        self.lab.current_corner = str(event.value)
        self.request_page(0)

    # --- paging -------------------------------------------------------------------------
    def request_page(self, offset: int, count: bool = True) -> None:
        """Ask a worker for the page at ``offset``; the row count follows when ``count``."""
        key = (self.lab.current_deck, self.lab.current_corner, self.where)
        known = self._counts.get(key)
        if count:
            self.total = known
        query = PageQuery(key[0], key[1], key[2], self.order_by, self.descending, max(0, offset),
                          self.lab.page_size, count and known is None)
        self._latest = query
        if self._prefetch_timer is not None:
            self._prefetch_timer.stop()
            self._prefetch_timer = None
        cached = self._pages.get(replace(query, want_count=False))
        if cached is not None and not query.want_count:
            self.post_message(PageLoaded(query, cached, None))  # prefetched: no query at all
            return
        self._fetch(query)

    @work(thread=True, exclusive=True, group="catalog-page")
    def _fetch(self, query: PageQuery) -> None:
        # The page first (what the user waits for), the count after it (status line only).
        worker = get_current_worker()
        try:
            with self.lab.using_catalog() as catalog:
                if worker.is_cancelled:
                    return
                rows = catalog.query(deck=query.deck, corner=query.corner, where=query.where,
                                     order_by=query.order_by, descending=query.descending,
                                     limit=query.limit, offset=query.offset)
            if worker.is_cancelled:
                return
            self.post_message(PageLoaded(query, rows, None))
        except FilterError as exc:
            self.post_message(QueryFailed(exc.problems, "filter"))
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "catalog"))

    @work(thread=True, exclusive=True, group="catalog-count")
    def _count(self, key: tuple[str | None, str, str]) -> None:
        """The row count for the status line, on the app's second connection: the page
        queries never wait for it, and a newer count stops one still running."""
        worker = get_current_worker()
        self.lab.interrupt_count()
        try:
            with self.lab.counting_catalog() as catalog:
                if worker.is_cancelled:
                    return
                total = catalog.count(deck=key[0], corner=key[1], where=key[2])
        except CelllabError as exc:
            if not worker.is_cancelled:  # a stale count stopped on purpose says nothing
                self.post_message(QueryFailed(exc.problems, "catalog"))
            return
        if not worker.is_cancelled:
            self.post_message(RowsCounted(key, total))

    def _schedule_prefetch(self, shown: PageQuery, n_rows: int) -> None:
        """Once the user rests on a full page, fetch the next one (] then needs no query)."""
        if self._prefetch_timer is not None:
            self._prefetch_timer.stop()
            self._prefetch_timer = None
        if n_rows < shown.limit:
            return
        ahead = replace(shown, offset=shown.offset + shown.limit, want_count=False)
        if ahead not in self._pages:
            self._prefetch_timer = self.set_timer(0.4, lambda: self._prefetch(ahead))

    @work(thread=True, exclusive=True, group="catalog-prefetch")
    def _prefetch(self, query: PageQuery) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                rows = catalog.query(deck=query.deck, corner=query.corner, where=query.where,
                                     order_by=query.order_by, descending=query.descending,
                                     limit=query.limit, offset=query.offset)
        except CelllabError:
            return  # only a shortcut: the page is fetched again when asked for
        self.post_message(PagePrefetched(query, rows))

    def on_page_prefetched(self, message: PagePrefetched) -> None:
        if len(self._pages) >= 8:
            self._pages.pop(next(iter(self._pages)))
        self._pages[message.query] = message.rows

    def on_page_loaded(self, message: PageLoaded) -> None:
        if message.query != self._latest:
            return  # a newer request is on its way
        self.row_offset = message.query.offset
        self.query_one(FilterBar).error = ""
        self._shown = len(message.rows)
        self.query_one(CatalogTable).show_page(message.rows, self.columns, self.row_offset,
                                               self._table_total(), self.order_by, self.descending)
        self._update_status()
        self._schedule_prefetch(message.query, len(message.rows))
        if message.query.want_count:
            q = message.query
            self._count((q.deck, q.corner, q.where))

    def on_rows_counted(self, message: RowsCounted) -> None:
        self._counts[message.key] = message.total
        if self._latest is not None and message.key == (self._latest.deck, self._latest.corner,
                                                        self._latest.where):
            self.total = message.total
            self.query_one(CatalogTable).total = message.total
            self._update_status()

    def _table_total(self) -> int:
        """The row count, or while it is being counted a lower bound that allows paging on."""
        if self.total is not None:
            return self.total
        full = self._shown == self.lab.page_size
        return self.row_offset + self._shown + (self.lab.page_size if full else 0)

    def on_query_failed(self, message: QueryFailed) -> None:
        text = "\n".join(p.message if p.file in ("", "filter", "<filter>") else str(p)
                         for p in message.problems)
        if message.kind == "filter":
            self.query_one(FilterBar).error = text or "bad filter"
        else:
            self.query_one("#catalog-status", Static).update(text)

    def _update_status(self) -> None:
        arrow = "↓" if self.descending else "↑"
        shown = self._shown
        of = f"{self.total:,}" if self.total is not None else "… (counting)"
        if self.total == 0 or (self.total is None and shown == 0 and self.row_offset == 0):
            rows = "no cell matches" if self.where else "no cells"
        else:
            last = self.row_offset + shown
            rows = (f"row {last} of {of}" if shown == 1 else
                    f"rows {self.row_offset + 1}–{last} of {of}")
        sort = f"{arrow} {self.order_by}"
        n_marked = len(self.query_one(CatalogTable).marked)
        marks = f" · {n_marked} marked (v compares)" if n_marked else ""
        self.query_one("#catalog-status", Static).update(
            f"{rows} · {sort} · corner {self.lab.current_corner}{marks}")

    @on(PageRequested)
    def _page_requested(self, message: PageRequested) -> None:
        message.stop()
        self.request_page(message.offset, count=False)

    def action_page(self, step: int) -> None:
        table = self.query_one(CatalogTable)
        if step > 0:
            table.action_next_page()
        else:
            table.action_previous_page()

    # --- filter and sort ----------------------------------------------------------------
    @on(FilterChanged)
    def _filter_changed(self, message: FilterChanged) -> None:
        message.stop()  # the filter bar already waited for typing to pause
        self._apply_filter(message.text)
        if message.submitted:
            self.query_one(CatalogTable).focus()

    def _apply_filter(self, text: str) -> None:
        if text.strip() == self.where and self._latest is not None:
            return
        self.where = text.strip()
        self.request_page(0)

    @on(SortRequested)
    def _sort_requested(self, message: SortRequested) -> None:
        message.stop()
        self.sort_by(message.column, message.descending)

    def sort_by(self, column: str, descending: bool | None = None) -> None:
        if descending is None:
            descending = (not self.descending) if column == self.order_by else best_first_descending(column)
        self.order_by, self.descending = column, descending
        table = self.query_one(CatalogTable)
        if column not in self.columns or (column in table.columns_shown
                                          and not table.in_view(column)):
            # the values being sorted are shown: a hidden column, or one off the right edge,
            # moves next to the name
            rest = tuple(c for c in self.columns if c != column)
            at = 1 if rest and rest[0] == "name" else 0
            self.columns = (*rest[:at], column, *rest[at:])
        self.request_page(0, count=False)

    def action_reverse_sort(self) -> None:
        self.sort_by(self.order_by, not self.descending)

    def action_choose_sort(self) -> None:
        from celllab.tui.screens.choice import ChoicePicker

        choices = []
        for column in SORTABLE:
            unit = column_unit(column)
            unit_text = f"[{unit}]" if unit and unit != "bool" else ""
            choices.append((column, Text(f"{column:<24} {unit_text:<10} {column_description(column)}",
                                         no_wrap=True, overflow="ellipsis")))

        def picked(column: str | None) -> None:
            if column:
                self.sort_by(column, best_first_descending(column))

        self.app.push_screen(ChoicePicker("Sort by (best first; r reverses)", choices,
                                          self.order_by), picked)

    def action_choose_columns(self) -> None:
        from celllab.tui.screens.columns import ColumnPicker

        def picked(columns: tuple[str, ...] | None) -> None:
            if columns:
                self.columns = columns
                self.request_page(self.row_offset, count=False)

        self.app.push_screen(ColumnPicker(ALL_COLUMNS, self.columns), picked)

    def action_choose_deck(self) -> None:
        select = self.query_one("#deck-select", Select)
        select.focus()
        select.expanded = True

    def action_choose_corner(self) -> None:
        select = self.query_one("#corner-select", Select)
        select.focus()
        select.expanded = True

    def action_focus_filter(self) -> None:
        self.query_one(FilterBar).input.focus()

    def action_focus_table(self) -> None:
        self.query_one(CatalogTable).focus()

    # --- opening cells ------------------------------------------------------------------
    @on(CellChosen)
    def _cell_chosen(self, message: CellChosen) -> None:
        message.stop()
        from celllab.tui.screens.cell import CellScreen

        self.app.push_screen(CellScreen(message.name, message.deck or self.lab.current_deck))

    def action_mark(self) -> None:
        table = self.query_one(CatalogTable)
        if table.toggle_mark() is not None:
            table.action_cursor_down()
        self._update_status()

    def action_compare(self) -> None:
        from celllab.tui.screens.compare import MAX_CELLS, MIN_CELLS, CompareScreen

        marked = sorted(self.query_one(CatalogTable).marked, key=lambda k: (k[0], k[1] or ""))
        if not MIN_CELLS <= len(marked) <= MAX_CELLS:
            self.notify(f"mark {MIN_CELLS} to {MAX_CELLS} cells with space first "
                        f"({len(marked)} marked)", severity="warning")
            return
        self.app.push_screen(CompareScreen([(n, d or self.lab.current_deck) for n, d in marked],
                                           self.lab.current_corner))

    def _highlighted_cell(self) -> tuple[str, str | None] | None:
        """(name, deck) of the highlighted row; None (with a warning) when there is none."""
        row = self.query_one(CatalogTable).highlighted_row()
        if row is None:
            self.notify("no cell highlighted", severity="warning")
            return None
        return str(row["name"]), row.get("deck") or self.lab.current_deck

    def action_fill_risk(self) -> None:
        if (cell := self._highlighted_cell()) is not None:
            from celllab.tui.screens.fill_risk import FillRiskScreen

            self.app.push_screen(FillRiskScreen(*cell))

    def action_what_if(self) -> None:
        if (cell := self._highlighted_cell()) is not None:
            from celllab.tui.screens.whatif import WhatIfScreen

            self.app.push_screen(WhatIfScreen(*cell))
