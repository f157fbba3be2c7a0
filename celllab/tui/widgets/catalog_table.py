"""A table that shows one page of catalog rows at a time.

The table never holds more than one page (the screen fetches pages from the catalog with
``limit``/``offset``); moving past the last row asks for the next page, so scrolling through
100 000 rows stays as quick as scrolling through one page.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from rich.text import Text
from textual.binding import Binding
from textual.coordinate import Coordinate
from textual.widgets import DataTable

from celllab.columns import is_lower_bound
from celllab.tui.messages import CellChosen, PageRequested, SortRequested
from celllab.tui.widgets.values import column_header, header_width, value_text

#: Identity columns whose content decides their width; every other column is numeric.
_TEXT_COLUMNS = frozenset({"name", "deck", "family", "corner", "topology", "oxide"})


def _width(column: str, rows: Sequence[dict[str, Any]] = ()) -> int:
    """Fixed width for numeric columns (stable from page to page); text columns as wide as
    their longest value on the page (room for the mark of a marked name), at most 48."""
    if column in _TEXT_COLUMNS:
        longest = max((len(str(r.get(column) or "")) for r in rows), default=0)
        return min(48, max(len(column) + 2, longest + (2 if column == "name" else 0)))
    return max(header_width(column), 10)


class CatalogTable(DataTable[Any]):
    """One page of catalog rows; posts ``PageRequested``, ``SortRequested``, ``CellChosen``."""

    BINDINGS = [
        Binding("right_square_bracket", "next_page", "Next page", show=False),
        Binding("left_square_bracket", "previous_page", "Prev page", show=False),
        Binding("home", "first_page", "First page", show=False),
    ]

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes, cursor_type="row", zebra_stripes=True,
                         header_height=3)
        self.rows_shown: list[dict[str, Any]] = []
        self.columns_shown: tuple[str, ...] = ()
        self.row_offset = 0
        self.total = 0
        self.page_size = 100
        self._pending_cursor: int | None = None
        self._header_state: tuple[Any, ...] = ()
        #: (name, deck) of rows marked for a comparison; a tick before their name
        self.marked: set[tuple[str, str | None]] = set()

    # --- attributes down ---------------------------------------------------------------
    def show_page(self, rows: Sequence[dict[str, Any]], columns: Sequence[str], offset: int,
                  total: int, sort_column: str = "", descending: bool = True) -> None:
        """Replace the table's content with one page of rows."""
        columns = tuple(columns)
        header_state = (columns, sort_column, descending)
        keep_cursor = self.cursor_row if columns == self.columns_shown else 0
        # columns are rebuilt with every page: a cleared table keeps the auto-width text
        # columns (names) at their header's width, cutting every name to four letters
        self.clear(columns=True)
        for column in columns:
            mark = ("▼" if descending else "▲") if column == sort_column else ""
            self.add_column(column_header(column, mark), key=column, width=_width(column, rows))
        self.columns_shown = columns
        self._header_state = header_state
        self.rows_shown = list(rows)
        self.row_offset = offset
        self.total = total
        self.add_rows([[self._cell(row, c) for c in columns] for row in self.rows_shown])
        if self.rows_shown:
            target = self._pending_cursor if self._pending_cursor is not None else keep_cursor
            target = max(0, min(target, len(self.rows_shown) - 1))
            self.move_cursor(row=target, animate=False)
        self._pending_cursor = None
        self.refresh()

    def in_view(self, column: str) -> bool:
        """Whether ``column`` is shown whole without scrolling sideways."""
        if column not in self.columns_shown:
            return False
        right = 0
        for key in self.columns_shown[:self.columns_shown.index(column) + 1]:
            right += self.columns[key].get_render_width(self) if key in self.columns else 0
        return right <= self.scrollable_content_region.width

    def _cell(self, row: dict[str, Any], column: str) -> Text:
        if column == "name":
            mark = "✓ " if (row.get("name"), row.get("deck")) in self.marked else ""
            return Text(mark + str(row.get("name")), style="bold" if mark else "")
        return value_text(row.get(column), column, is_lower_bound(row, column))

    def toggle_mark(self) -> tuple[str, str | None] | None:
        """Mark or unmark the row under the cursor; returns its (name, deck)."""
        row = self.highlighted_row()
        if row is None:
            return None
        key = (str(row["name"]), row.get("deck"))
        if key in self.marked:
            self.marked.discard(key)
        else:
            self.marked.add(key)
        if "name" in self.columns_shown:
            self.update_cell_at(Coordinate(self.cursor_row, self.columns_shown.index("name")),
                                self._cell(row, "name"), update_width=True)
        return key

    def highlighted_row(self) -> dict[str, Any] | None:
        """The row under the cursor, or None when the page is empty."""
        if not self.rows_shown or self.cursor_row < 0:
            return None
        return self.rows_shown[min(self.cursor_row, len(self.rows_shown) - 1)]

    # --- messages up -------------------------------------------------------------------
    def on_data_table_header_selected(self, event: DataTable.HeaderSelected) -> None:
        event.stop()
        if event.column_key.value:
            self.post_message(SortRequested(event.column_key.value))

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        row = self.highlighted_row()
        if row is not None:
            self.post_message(CellChosen(str(row["name"]), row.get("deck")))

    def action_next_page(self) -> None:
        if self.row_offset + self.page_size < self.total:
            self._pending_cursor = 0
            self.post_message(PageRequested(self.row_offset + self.page_size))

    def action_previous_page(self) -> None:
        if self.row_offset > 0:
            self._pending_cursor = 0
            self.post_message(PageRequested(max(0, self.row_offset - self.page_size)))

    def action_first_page(self) -> None:
        if self.row_offset > 0:
            self._pending_cursor = 0
            self.post_message(PageRequested(0))
        else:
            self.move_cursor(row=0)

    def action_cursor_down(self) -> None:
        if self.rows_shown and self.cursor_row >= len(self.rows_shown) - 1:
            if self.row_offset + len(self.rows_shown) < self.total:
                self._pending_cursor = 0
                self.post_message(PageRequested(self.row_offset + self.page_size))
            return
        super().action_cursor_down()

    def action_cursor_up(self) -> None:
        if self.cursor_row <= 0 and self.row_offset > 0:
            self._pending_cursor = self.page_size - 1
            self.post_message(PageRequested(max(0, self.row_offset - self.page_size)))
            return
        super().action_cursor_up()
