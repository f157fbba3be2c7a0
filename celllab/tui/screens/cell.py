"""Cell view: every metric at every corner, plots, the equivalent circuit and the flags explained."""

from __future__ import annotations

from typing import Any

import numpy as np
from rich.table import Table
from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Footer, Static, TabbedContent, TabPane, TextArea

from celllab import CAUTION_SHORT
from celllab.columns import is_lower_bound
from celllab.display import count_text
from celllab.errors import CelllabError
from celllab.records import METRICS, CellResult
from celllab.tui.curves import ceff_plot, cv_plot, esr_plot, impedance_plot
from celllab.tui.messages import CellLoaded, QueryFailed
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.plot import PlotView
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import format_number, value_text

#: Tab ids in display order ([ and ] step through them).
TABS: tuple[tuple[str, str], ...] = (
    ("tab-metrics", "Metrics"),
    ("tab-cv", "C-V"),
    ("tab-z", "|Z|(f)"),
    ("tab-esr", "ESR(f)"),
    ("tab-ceff", "C_eff(f)"),
    ("tab-circuit", "Circuit"),
    ("tab-flags", "Flags"),
)


# --- text panels -----------------------------------------------------------------------------

def cell_summary(cell: CellResult, deck: str | None) -> Text:
    """Two header lines: identity and footprint."""
    text = Text()
    text.append(cell.name, style="bold")
    text.append(f"  {cell.topology} · {cell.oxide} oxide · ")
    text.append("ESD-safe" if cell.esd_safe else "not ESD-safe (gate on a rail)",
                style="green" if cell.esd_safe else "yellow")
    place = "open region" if cell.placement == "open_region" else "core row"
    text.append(f"\ndeck {deck or '?'} · {place}, {cell.rail} rail · area "
                f"{format_number(cell.area_um2)} µm² ({count_text(cell.width_sites, 'site')} × "
                f"{count_text(cell.height_rows, 'row')}) · gate area "
                f"{format_number(cell.gate_area_um2)} µm²", style="dim")
    return text


_UNITS = {"R": "Ω", "C": "F", "L": "H"}


def _si(value: float, unit: str) -> str:
    from celllab.tui.widgets.plot import format_tick

    return f"{format_tick(float(value), log=True)}{unit}"


def element_list(netlist: Any) -> str:
    """A plain element list of a ``physics.netlist.Netlist`` (one variant)."""
    elements = list(getattr(netlist, "elements", ()))
    ports = getattr(netlist, "ports", ("vdd", "vss"))
    lines = [f"* {getattr(netlist, 'name', 'circuit')}: ports {ports[0]} (driven), {ports[1]} (reference)"]
    for e in elements:
        value = float(np.asarray(e.value, dtype=float).ravel()[0])
        if e.kind == "RCLINE":
            c_total = float(np.asarray(e.c_total, dtype=float).ravel()[0])
            far = e.node_far or ("open" if e.contacted_ends == 1 else e.node_a)
            lines.append(f"RCLINE {e.name:<12} {e.node_a} {e.node_b} far={far}  "
                         f"R={_si(value, 'Ω')} C={_si(c_total, 'F')} (distributed)")
        else:
            lines.append(f"{e.kind:<6} {e.name:<12} {e.node_a} {e.node_b}  {_si(value, _UNITS[e.kind])}")
    return "\n".join(lines)


def circuit_text(cell: CellResult, corner: str | None = None, deck: str | None = None) -> str:
    """The equivalent circuit as SPICE-like text (the SPICE exporter when present)."""
    try:
        from celllab.export import render_spice_subckt

        return str(render_spice_subckt(cell, corner, deck_name=deck))
    except (ImportError, AttributeError, TypeError, ValueError, KeyError):
        pass
    if cell.netlist is None:
        return "(no equivalent circuit stored for this cell)"
    try:
        return element_list(cell.netlist)
    except (AttributeError, TypeError, ValueError, IndexError):
        return str(cell.netlist)


#: What a validity flag means for the numbers, by flag code (the text before the colon).
FLAG_CONSEQUENCES: dict[str, str] = {
    "weak_channel": "ESR, tau and bandwidth are the least certain numbers of this cell.",
    "thin_dielectric": "Leakage, TDDB life and breakdown estimates are the least certain here.",
    "degenerate_body": "The depletion part of the C-V curve and the capacitance at low bias "
                       "are approximate.",
    "bandwidth_beyond_sweep": "The cell is faster than the analysed band: treat the bandwidth "
                              "as 'at least'.",
    "srf_beyond_sweep": "No resonance inside the analysed band: treat the SRF as 'at least'.",
}


def explain_flag(flag: str) -> str:
    """The flag in plain words: its own explanation plus what it means for the numbers."""
    code, _, detail = flag.partition(":")
    code, detail = code.strip(), detail.strip()
    words = detail[:1].upper() + detail[1:] if detail else code.replace("_", " ").capitalize()
    if words and not words.endswith("."):
        words += "."
    consequence = FLAG_CONSEQUENCES.get(code)
    return f"{words} {consequence}" if consequence else words


def flags_table(cell: CellResult) -> Table | Text:
    """Every flag with the corners it occurs at and what it means, then the cell's notes."""
    where: dict[str, list[str]] = {}
    for c in cell.corners:
        for flag in c.flags:
            where.setdefault(flag, []).append(c.corner)
    if not where and not cell.notes:
        return Text("No validity flags: every model was used inside its stated range at every "
                    "corner.\n\n" + CAUTION_SHORT,
                    style="green")
    table = Table(expand=True, box=None, padding=(0, 1), show_lines=True)
    table.add_column("flag", no_wrap=True, style="yellow")
    table.add_column("corners", style="bold")
    table.add_column("what it means", ratio=1)
    n_corners = len(cell.corners)
    for flag, corners in where.items():
        code = flag.partition(":")[0].strip()
        at = "all" if len(corners) == n_corners else ", ".join(corners)
        table.add_row(code, at, explain_flag(flag))
    for note in cell.notes:
        table.add_row("note", "all", note)
    return table


class CellScreen(TaskScreen):
    """Everything about one characterized cell."""

    TASK_TITLE = "Cell"
    BINDINGS = [
        Binding("right_square_bracket", "tab(1)", "Next tab"),
        Binding("left_square_bracket", "tab(-1)", "Prev tab"),
        Binding("w", "what_if", "What-if"),
        Binding("t", "set_target", "Target |Z|"),
        Binding("s", "sweep", "Sweep"),
        Binding("f", "fill_risk", "Fill risk"),
        Binding("escape,backspace", "back", "Back"),
    ]

    def __init__(self, name: str, deck: str | None) -> None:
        super().__init__()
        self.cell_name = name
        self.deck_name = deck
        self.cell: CellResult | None = None

    def compose(self) -> ComposeResult:
        yield TaskBar(self.app.current_mode, f"cell {self.cell_name}", id="taskbar")
        yield Static(f"loading {self.cell_name}…", id="cell-summary")
        with TabbedContent(id="cell-tabs"):
            with TabPane("Metrics", id="tab-metrics"):
                yield DataTable(id="cell-metrics", cursor_type="row", zebra_stripes=True)
            with TabPane("C-V", id="tab-cv"):
                yield PlotView(id="plot-cv")
            with TabPane("|Z|(f)", id="tab-z"):
                yield PlotView(id="plot-z")
            with TabPane("ESR(f)", id="tab-esr"):
                yield PlotView(id="plot-esr")
            with TabPane("C_eff(f)", id="tab-ceff"):
                yield PlotView(id="plot-ceff")
            with TabPane("Circuit", id="tab-circuit"):
                yield TextArea("", read_only=True, soft_wrap=False, id="cell-circuit")
            with TabPane("Flags", id="tab-flags"):
                with VerticalScroll():
                    yield Static("", id="cell-flags")
        yield Footer()

    def on_mount(self) -> None:
        self.TASK = self.app.current_mode
        self.query_one(TaskBar).active = self.TASK
        self._load()

    @work(thread=True, exclusive=True, group="cell-load")
    def _load(self) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                cell = catalog.cell(self.cell_name, self.deck_name)
        except (CelllabError, KeyError) as exc:
            problems = getattr(exc, "problems", [])
            self.post_message(QueryFailed(problems, str(exc)))
            return
        self.post_message(CellLoaded(cell, self.deck_name))

    def on_query_failed(self, message: QueryFailed) -> None:
        text = "\n".join(str(p) for p in message.problems) or message.kind
        self.query_one("#cell-summary", Static).update(Text(f"cannot open {self.cell_name}: {text}",
                                                            style="red"))

    def on_cell_loaded(self, message: CellLoaded) -> None:
        self.show_cell(message.cell)

    def show_cell(self, cell: CellResult) -> None:
        """Fill every tab from a cell record."""
        self.cell = cell
        self.query_one("#cell-summary", Static).update(cell_summary(cell, self.deck_name))
        self._fill_metrics(cell)
        self._draw_plots()
        self.query_one("#cell-circuit", TextArea).text = circuit_text(cell, self._typical(cell), self.deck_name)
        self.query_one("#cell-flags", Static).update(flags_table(cell))

    def _draw_plots(self) -> None:
        """Every corner of the cell in each plot; the target |Z| when one is set."""
        if self.cell is None:
            return
        only = [("", self.cell)]
        self.query_one("#plot-cv", PlotView).spec = cv_plot(only)
        self.query_one("#plot-z", PlotView).spec = impedance_plot(only, None, self.lab.z_target_ohm)
        self.query_one("#plot-esr", PlotView).spec = esr_plot(only)
        self.query_one("#plot-ceff", PlotView).spec = ceff_plot(only)

    def action_set_target(self) -> None:
        def chosen(value: float | None) -> None:
            self._draw_plots()

        self.lab.ask_target(chosen)

    @staticmethod
    def _typical(cell: CellResult) -> str | None:
        names = [c.corner for c in cell.corners]
        for name in names:
            if name.startswith("typ") or name.startswith("nom"):
                return name
        return names[0] if names else None

    def _fill_metrics(self, cell: CellResult) -> None:
        table = self.query_one("#cell-metrics", DataTable)
        table.clear(columns=True)
        table.add_column(Text("metric\n↑↓ better"), key="metric")
        for c in cell.corners:
            table.add_column(Text(f"{c.corner}\n{format_number(c.temperature_C)}°C "
                                  f"{format_number(c.supply_V)}V", justify="right"), key=c.corner)
        table.header_height = 2
        for info in METRICS:
            if info.bounds:  # a bound flag reads as the ≥ in front of its metric
                continue
            name = Text(info.name)
            name.append(f" {info.arrow}", style="dim")
            table.add_row(name, *[value_text(c.metrics.get(info.name), info.name,
                                             is_lower_bound(c, info.name)) for c in cell.corners],
                          key=info.name)

    # --- actions ------------------------------------------------------------------------
    def action_tab(self, step: int) -> None:
        tabs = self.query_one(TabbedContent)
        ids = [tab_id for tab_id, _ in TABS]
        current = ids.index(tabs.active) if tabs.active in ids else 0
        tabs.active = ids[(current + step) % len(ids)]

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_sweep(self) -> None:
        from celllab.tui.screens.sweep import SweepScreen

        self.app.push_screen(SweepScreen(self.cell_name, self.deck_name))

    def action_fill_risk(self) -> None:
        from celllab.tui.screens.fill_risk import FillRiskScreen

        self.app.push_screen(FillRiskScreen(self.cell_name, self.deck_name, cell=self.cell))

    def action_what_if(self) -> None:
        from celllab.tui.screens.whatif import WhatIfScreen

        self.app.push_screen(WhatIfScreen(self.cell_name, self.deck_name, cell=self.cell))

    def export_context(self) -> Any:
        from celllab.tui.screens.export import ExportContext

        return ExportContext(cell=self.cell, deck=self.deck_name, corner=self._typical(self.cell)
                             if self.cell else None)
