"""Planning view: pick a block file, set the budgets and the network analysis, plan it in a
worker (spinner, Esc cancels), read the report (per-region fill, budgets, resonances, damping
trade, droop and emission) and the plots, and write the plan's files.

The report is the ``plan`` verb's own text (``export.plan_text``), so the terminal and the UI
show the same figures. Estimates, not sign-off.
"""

from __future__ import annotations

import io
import textwrap
import time
from pathlib import Path
from typing import Any

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import (
    Footer,
    Input,
    Label,
    LoadingIndicator,
    Select,
    Static,
    TabbedContent,
    TabPane,
)
from textual.worker import Worker, get_current_worker

from celllab import CAUTION
from celllab.errors import CelllabError, Problem
from celllab.tui.messages import PlanFinished, PlanProgressed
from celllab.tui.plan_plots import droop_plot, emission_plot, impedance_plot
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.plot import PlotView
from celllab.tui.widgets.task_bar import TaskBar

__all__ = ["PlanScreen", "budget_overrides", "find_block_files"]

REPORT_MIN_WIDTH = 80

INTRO = "\n".join([
    "Choose a block file (b, or type a path), change the leakage budget or the kind",
    "limit if you like (l; empty keeps the file's), then press r to plan it.",
    "d and g switch the droop runs and the damping (entrance resistors, damping",
    "through the fill) on and off; t steps through the tabs, n through the regions",
    "of the |Z| plot; x writes the fill list, HTML report and network files.",
    "",
    *textwrap.wrap(CAUTION, 78),
])


class _Cancelled(Exception):
    """Raised inside the planning worker when the user cancelled it."""


def find_block_files(given: list[Path], folders: list[Path]) -> list[Path]:
    """The block files to offer: those given, then ``*.toml`` of each folder (sorted), once."""
    seen: dict[Path, None] = {}
    for path in given:
        seen.setdefault(Path(path), None)
    for folder in folders:
        if folder.is_dir():
            for path in sorted(folder.glob("*.toml")):
                seen.setdefault(path, None)
    return list(seen)


def budget_overrides(leakage_text: str, kinds_text: str) -> tuple[dict[str, Any], list[Problem]]:
    """The [budgets] changes typed in the view: leakage_uA (empty: as the file says; "none":
    no limit) and max_kinds (empty: as the file says). Returns (changes, problems)."""
    changes: dict[str, Any] = {}
    problems: list[Problem] = []
    text = leakage_text.strip()
    if text.lower() in ("none", "off"):
        changes["leakage_uA"] = None
    elif text:
        try:
            value = float(text)
        except ValueError:
            value = -1.0
        if not 0 <= value <= 1e9:
            problems.append(Problem("<planning view>", "budgets.leakage_uA",
                                    "a number of uA from 0 to 1e9, or none", text))
        else:
            changes["leakage_uA"] = value
    text = kinds_text.strip()
    if text:
        if not text.isdigit() or not 1 <= int(text) <= 500:
            problems.append(Problem("<planning view>", "budgets.max_kinds",
                                    "a whole number from 1 to 500", text))
        else:
            changes["max_kinds"] = int(text)
    return changes, problems


def render_text(plan: Any, width: int) -> str:
    """The plan report as plain text, ``width`` columns."""
    from rich.console import Console

    from celllab.export.plan_text import render_report

    out = io.StringIO()
    console = Console(file=out, width=max(width, REPORT_MIN_WIDTH), color_system=None,
                      highlight=False, emoji=False)
    render_report(plan.to_dict(), console)
    # free-text lines (headings, notes) come out unwrapped: wrap them at the width; table
    # rows (one leading space) are left whole, the view scrolls sideways
    lines: list[str] = []
    for line in out.getvalue().splitlines():
        table_row = line.startswith(" ") and not line.startswith("  ")
        lines += (textwrap.wrap(line, width, subsequent_indent="  ")
                  if len(line) > width and not table_row else [line])
    return "\n".join(lines)


class PlanScreen(TaskScreen):
    """Block picker and budgets on top; report and plots in tabs; status line below."""

    TASK = "plan"
    TASK_TITLE = "Planning"
    BINDINGS = [
        Binding("r", "run_plan", "Plan"),
        Binding("escape", "cancel_plan", "Cancel"),
        Binding("b", "focus_block", "Block"),
        Binding("l", "focus_budget", "Budgets"),
        Binding("d", "toggle('droop')", "Droop on/off"),
        Binding("g", "toggle('damping')", "Damping on/off"),
        Binding("n", "next_region", "Next region"),
        Binding("t", "next_tab", "Next tab"),
        Binding("x", "export_plan", "Write files"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.plan: Any = None
        self.with_droop = True
        self.with_damping = True
        self.region_index = 0
        self._serial = 0
        self._worker: Worker[None] | None = None

    # --- layout ------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield TaskBar("plan", id="taskbar")
        paths = self.lab.block_files()
        options = [(self._label(p), str(p)) for p in paths]
        with Horizontal(classes="pickers"):
            yield Label("block", classes="picker-label")
            if paths:
                yield Select(options, value=str(paths[0]), allow_blank=False, compact=True,
                             id="plan-block")
            else:
                yield Select([], prompt="none found: type a path below", compact=True,
                             id="plan-block")
            yield Label("leakage uA", classes="picker-label")
            yield Input(placeholder="as file", compact=True, id="plan-leakage")
            yield Label("kinds", classes="picker-label")
            yield Input(placeholder="as file", compact=True, id="plan-kinds")
        yield Input(placeholder="or a block file path (Enter plans it)", compact=True,
                    id="plan-path")
        with TabbedContent(id="plan-tabs"):
            with TabPane("Report", id="tab-report"):
                with VerticalScroll(id="plan-scroll"):
                    yield Static(INTRO, id="plan-report", markup=False)
            with TabPane("|Z| per region", id="tab-z"):
                yield PlotView(id="plot-z")
            with TabPane("Droop", id="tab-droop"):
                yield PlotView(id="plot-droop")
            with TabPane("Emission", id="tab-emission"):
                yield PlotView(id="plot-emission")
        with Horizontal(id="plan-statusbar"):
            yield LoadingIndicator(id="plan-spinner")
            yield Static("", id="plan-status", markup=False)
        yield Footer()

    @staticmethod
    def _label(path: Path) -> str:
        return path.name

    def on_mount(self) -> None:
        self.query_one("#plan-spinner").display = False
        self.query_one("#plan-scroll").focus()
        self._say(self._options_text())

    # --- state shown ---------------------------------------------------------------------
    def _options_text(self) -> str:
        return (f"droop in time {'on' if self.with_droop else 'off'} (d), damping "
                f"{'on' if self.with_damping else 'off'} (g); r plans, x writes the files")

    def _say(self, text: str) -> None:
        self.query_one("#plan-status", Static).update(text)

    def _block_path(self) -> str | None:
        typed = self.query_one("#plan-path", Input).value.strip()
        if typed:
            return typed
        value = self.query_one("#plan-block", Select).value
        return None if value is Select.BLANK else str(value)

    def _show(self, plan: Any) -> None:
        self.plan = plan
        width = max(self.query_one("#plan-scroll").size.width - 3, REPORT_MIN_WIDTH)
        self.query_one("#plan-report", Static).update(render_text(plan, width))
        self._redraw_plots()

    def _redraw_plots(self) -> None:
        if self.plan is None:
            return
        self.query_one("#plot-z", PlotView).spec = impedance_plot(self.plan, self.region_index)
        self.query_one("#plot-droop", PlotView).spec = droop_plot(self.plan)
        self.query_one("#plot-emission", PlotView).spec = emission_plot(self.plan)

    # --- actions -------------------------------------------------------------------------
    def action_focus_block(self) -> None:
        self.query_one("#plan-block", Select).focus()

    def action_focus_budget(self) -> None:
        self.query_one("#plan-leakage", Input).focus()

    def action_toggle(self, what: str) -> None:
        name = f"with_{what}"
        setattr(self, name, not getattr(self, name))
        self._say(self._options_text())

    def action_next_region(self) -> None:
        self.region_index += 1
        self.query_one("#plan-tabs", TabbedContent).active = "tab-z"
        self._redraw_plots()

    def action_next_tab(self) -> None:
        tabs = self.query_one("#plan-tabs", TabbedContent)
        order = ["tab-report", "tab-z", "tab-droop", "tab-emission"]
        tabs.active = order[(order.index(tabs.active) + 1) % len(order)]

    @on(Input.Submitted)
    def _submitted(self, _event: Input.Submitted) -> None:
        self.action_run_plan()

    def action_run_plan(self) -> None:
        path = self._block_path()
        if path is None:
            self._say("no block file: pick one (b) or type a path")
            return
        changes, problems = budget_overrides(self.query_one("#plan-leakage", Input).value,
                                             self.query_one("#plan-kinds", Input).value)
        if problems:
            self._say("; ".join(str(p) for p in problems))
            return
        if self._worker is not None and self._worker.is_running:
            self._worker.cancel()
        self._serial += 1
        self.query_one("#plan-spinner").display = True
        self._say(f"planning {Path(path).name} (Esc cancels)")
        self._worker = self._plan(self._serial, path, changes, self.with_droop, self.with_damping)

    def action_cancel_plan(self) -> None:
        if self._worker is not None and self._worker.is_running:
            self._worker.cancel()
            self._serial += 1  # whatever it still sends is ignored
            self.query_one("#plan-spinner").display = False
            self._say("planning cancelled; " + self._options_text())
        else:
            self.query_one("#plan-tabs", TabbedContent).focus()

    def action_export_plan(self) -> None:
        if self.plan is None:
            self._say("nothing to write yet: plan a block first (r)")
            return
        self._write(self.plan, self.lab.export_folder / "plans")

    # --- workers -------------------------------------------------------------------------
    @work(thread=True, exclusive=True, group="plan")
    def _plan(self, serial: int, path: str, changes: dict[str, Any], droop: bool,
              damping: bool) -> None:
        from celllab.planner import load_block, plan_block
        from celllab.planner.supply import NetworkOptions

        worker = get_current_worker()

        def progress(stage: str) -> None:
            if worker.is_cancelled:
                raise _Cancelled
            self.post_message(PlanProgressed(serial, stage))

        start = time.perf_counter()
        try:
            block = load_block(path)
            if changes:
                block = block.model_copy(
                    update={"budgets": block.budgets.model_copy(update=changes)})
            options = NetworkOptions(droop=droop, entrance=None if damping else False,
                                     fill_damping=damping)
            with self.lab.using_catalog() as catalog:
                plan = plan_block(block, catalog, explain=True, progress=progress,
                                  network=options)
        except _Cancelled:
            self.post_message(PlanFinished(serial))
        except CelllabError as exc:
            self.post_message(PlanFinished(serial, problems=list(exc.problems)))
        else:
            self.post_message(PlanFinished(serial, plan, seconds=time.perf_counter() - start))

    @work(thread=True, exclusive=True, group="plan-export")
    def _write(self, plan: Any, folder: Path) -> None:
        from celllab.export.plan import write_plan_files

        try:
            written = write_plan_files(plan, folder)
        except (CelllabError, OSError) as exc:
            self.app.call_from_thread(self.app.notify, str(exc), title="Write failed",
                                      severity="error", timeout=8)
        else:
            self.app.call_from_thread(self.app.notify, f"{len(written)} files in {folder}",
                                      title="Plan written")

    # --- worker results ------------------------------------------------------------------
    def on_plan_progressed(self, message: PlanProgressed) -> None:
        if message.serial == self._serial:
            self._say(f"{message.stage} (Esc cancels)")

    def on_plan_finished(self, message: PlanFinished) -> None:
        if message.serial != self._serial:
            return
        self.query_one("#plan-spinner").display = False
        if message.problems is not None:
            self.plan = None  # nothing stale to write or plot
            for plot in self.query(PlotView):
                plot.spec = None
            self._say(f"{len(message.problems)} problem(s); see the report tab")
            self.query_one("#plan-report", Static).update(
                "The block could not be planned:\n\n"
                + "\n".join(str(p) for p in message.problems))
            self.query_one("#plan-tabs", TabbedContent).active = "tab-report"
            return
        if message.plan is None:
            self._say("planning cancelled; " + self._options_text())
            return
        self._show(message.plan)
        self._say(f"planned {message.plan.block_name} in {message.seconds:.1f} s; "
                  + self._options_text())
