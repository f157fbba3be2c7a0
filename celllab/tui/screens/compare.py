"""Comparison view: 2-5 cells marked in the table, metrics side by side and curves overlaid."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.widgets import DataTable, Footer, Label, Select, Static, TabbedContent, TabPane

from celllab.columns import METRICS
from celllab.display import count_text
from celllab.errors import CelllabError
from celllab.records import CellResult, corner_bounds, corner_metrics
from celllab.tui.curves import MAX_CURVES, ceff_plot, cv_plot, esr_plot, impedance_plot
from celllab.tui.messages import CellsLoaded, QueryFailed
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.plot import PlotView
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import value_text

#: How many cells one comparison holds (the plots' distinct colours).
MIN_CELLS, MAX_CELLS = 2, MAX_CURVES

TABS = ("cmp-metrics", "cmp-cv", "cmp-z", "cmp-esr", "cmp-ceff")


#: Width of a cell's column in the metrics table; longer names break over header lines.
NAME_WIDTH = 13


def name_lines(name: str, width: int = NAME_WIDTH) -> list[str]:
    """A cell name in lines of at most ``width``, broken after ``-`` or ``_``."""
    lines: list[str] = []
    rest = name
    while len(rest) > width:
        cut = max(rest.rfind("-", 0, width), rest.rfind("_", 0, width)) + 1
        if cut <= 0:
            cut = width
        lines.append(rest[:cut])
        rest = rest[cut:]
    return [*lines, rest] if rest else lines


class CompareScreen(TaskScreen):
    """The marked cells side by side at one corner (or worst/best for the metrics)."""

    TASK_TITLE = "Compare"
    BINDINGS = [
        Binding("right_square_bracket", "tab(1)", "Next tab"),
        Binding("left_square_bracket", "tab(-1)", "Prev tab"),
        Binding("o", "choose_corner", "Corner"),
        Binding("t", "set_target", "Target |Z|"),
        Binding("escape,backspace", "back", "Back"),
    ]

    def __init__(self, cells: list[tuple[str, str | None]], corner: str = "worst") -> None:
        super().__init__()
        self.wanted = list(cells)
        self.cells: list[tuple[str, CellResult]] = []
        self.corner = corner

    def compose(self) -> ComposeResult:
        decks = list(dict.fromkeys(deck or "?" for _, deck in self.wanted))
        names = f"{count_text(len(self.wanted), 'cell')} of {', '.join(decks)}"
        yield TaskBar(self.app.current_mode, f"compare {len(self.wanted)} cells", id="taskbar")
        with Horizontal(classes="pickers"):
            yield Label("corner", classes="picker-label")
            yield Select([(self.corner, self.corner)], value=self.corner, allow_blank=False,
                         compact=True, id="cmp-corner")
            yield Static(Text(names, style="dim", no_wrap=True, overflow="ellipsis"),
                         id="cmp-names")
        with TabbedContent(id="cmp-tabs"):
            with TabPane("Metrics", id="cmp-metrics"):
                yield DataTable(id="cmp-table", cursor_type="row", zebra_stripes=True)
            with TabPane("C-V", id="cmp-cv"):
                yield PlotView(id="cmp-plot-cv")
            with TabPane("|Z|(f)", id="cmp-z"):
                yield PlotView(id="cmp-plot-z")
            with TabPane("ESR(f)", id="cmp-esr"):
                yield PlotView(id="cmp-plot-esr")
            with TabPane("C_eff(f)", id="cmp-ceff"):
                yield PlotView(id="cmp-plot-ceff")
        yield Footer()

    def on_mount(self) -> None:
        self.TASK = self.app.current_mode
        self._load()

    @work(thread=True, exclusive=True, group="compare-load")
    def _load(self) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                cells = [(name, catalog.cell(name, deck)) for name, deck in self.wanted]
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "catalog"))
            return
        self.post_message(CellsLoaded(cells))

    def on_query_failed(self, message: QueryFailed) -> None:
        text = "\n".join(str(p) for p in message.problems)
        self.query_one("#cmp-names", Static).update(Text(f"cannot compare: {text}", style="red"))

    def on_cells_loaded(self, message: CellsLoaded) -> None:
        self.cells = message.cells
        corners = list(dict.fromkeys(c.corner for _, cell in self.cells for c in cell.corners))
        select = self.query_one("#cmp-corner", Select)
        with select.prevent(Select.Changed):
            select.set_options([(c, c) for c in ("worst", "best", *corners)])
            select.value = self.corner if self.corner in ("worst", "best", *corners) else "worst"
        self.corner = str(select.value)
        self.refresh_views()

    def curve_corner(self) -> str | None:
        """The corner the curves are drawn at: the chosen one, else every cell's first."""
        return None if self.corner in ("worst", "best") else self.corner

    def refresh_views(self) -> None:
        """Metrics side by side (best value of each row in bold) and the overlaid curves."""
        table = self.query_one("#cmp-table", DataTable)
        table.clear(columns=True)
        table.add_column(Text("metric\n↑↓ better"), key="metric")
        # a long cell name breaks over header lines: three cells fit 80 columns side by side
        heads = [name_lines(name) for name, _ in self.cells]
        for (name, _), lines in zip(self.cells, heads):
            table.add_column(Text("\n".join(lines), justify="right"), key=name,
                             width=max(NAME_WIDTH, *map(len, lines)))
        table.header_height = max(2, *map(len, heads))
        values = []
        for _, cell in self.cells:
            try:
                values.append((corner_metrics(cell, self.corner), corner_bounds(cell, self.corner)))
            except KeyError:
                values.append(({}, frozenset()))
        for info in METRICS:
            if info.bounds:  # a bound flag reads as the ≥ in front of its metric
                continue
            row = [v.get(info.name) for v, _ in values]
            # the best value is starred when it stands out: not a tie of every cell, and not
            # a lower bound (a bound is not known to beat anything)
            finite = [x for (_m, b), x in zip(values, row)
                      if x is not None and x == x and info.name not in b]
            best = (max(finite) if info.higher_is_better else min(finite)) if finite else None
            if best is not None and all(x == best for x in finite):
                best = None
            cells = []
            for (_metrics, bounds), value in zip(values, row):
                text = value_text(value, info.name, info.name in bounds)
                if best is not None and value == best and info.name not in bounds:
                    text.stylize("bold")
                    text.append(" ★")
                cells.append(text)
            name = Text(info.name)
            name.append(f" {info.arrow}", style="dim")
            table.add_row(name, *cells, key=info.name)
        at = self.curve_corner()
        corners = [at] if at else None
        pairs = [(name, cell) for name, cell in self.cells]
        first = [(name, cell) for name, cell in pairs]
        if corners is None:  # each cell at its first corner (the run's typical one)
            first = [(name, _first_corner(cell)) for name, cell in pairs]
        self.query_one("#cmp-plot-cv", PlotView).spec = cv_plot(first, corners)
        self.query_one("#cmp-plot-z", PlotView).spec = impedance_plot(first, corners,
                                                                      self.lab.z_target_ohm)
        self.query_one("#cmp-plot-esr", PlotView).spec = esr_plot(first, corners)
        self.query_one("#cmp-plot-ceff", PlotView).spec = ceff_plot(first, corners)

    @on(Select.Changed, "#cmp-corner")
    def _corner_changed(self, event: Select.Changed) -> None:
        if event.value is not Select.BLANK and str(event.value) != self.corner:
            self.corner = str(event.value)
            self.refresh_views()

    def action_choose_corner(self) -> None:
        select = self.query_one("#cmp-corner", Select)
        select.focus()
        select.expanded = True

    def action_tab(self, step: int) -> None:
        tabs = self.query_one("#cmp-tabs", TabbedContent)
        index = TABS.index(tabs.active) if tabs.active in TABS else 0
        tabs.active = TABS[(index + step) % len(TABS)]

    def action_set_target(self) -> None:
        self.lab.ask_target(lambda _value: self.refresh_views())

    def action_back(self) -> None:
        self.app.pop_screen()


def _first_corner(cell: CellResult) -> Any:
    """The cell with only its first corner (curves of several cells at their typical corner)."""
    from dataclasses import replace

    return replace(cell, corners=list(cell.corners[:1]))
