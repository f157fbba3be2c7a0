"""Sweep view: one parameter of a cell (geometry or deck) over a range, any metric against it.

The x axis is the swept parameter or any metric (leakage against density while the oxide
thickness runs, for example); the y axis any metric, at a corner or worst/best. The sweep runs in
a worker (``celllab.sweep.sweep_cell``); nothing is stored in the catalog.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.suggester import SuggestFromList
from textual.widgets import DataTable, Footer, Input, Label, Select, Static
from textual.worker import get_current_worker

from celllab.columns import METRIC_NAMES, unit_of
from celllab.errors import CelllabError, Problem
from celllab.records import CellResult, corner_bounds, corner_metrics
from celllab.topologies import REGISTRY
from celllab.tui.messages import QueryFailed
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.plot import Marker, PlotSpec, PlotView, Series
from celllab.tui.widgets.problems_view import ProblemsView
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import format_number, value_text
from celllab.units import pretty_unit, unit_from_name

PARAMETER = "(swept parameter)"


class SweepReady(Message):
    """The deck and cell definition behind the sweep are loaded."""

    def __init__(self, deck: Any, spec: Any, cell: CellResult) -> None:
        super().__init__()
        self.deck, self.spec, self.cell = deck, spec, cell


class SweepComputed(Message):
    """A sweep finished (``result``: celllab.sweep.SweepResult)."""

    def __init__(self, serial: int, result: Any) -> None:
        super().__init__()
        self.serial = serial
        self.result = result


class SweepFailed(Message):
    def __init__(self, serial: int, problems: list[Problem]) -> None:
        super().__init__()
        self.serial = serial
        self.problems = problems


def _numeric(annotation: Any) -> bool:
    """Whether a geometry field holds a number (``int``, ``float``, a ``Literal`` of numbers;
    optional or not)."""
    import typing

    if typing.get_origin(annotation) is typing.Literal:
        return all(isinstance(v, (int, float)) and not isinstance(v, bool)
                   for v in typing.get_args(annotation))
    args = set(typing.get_args(annotation)) - {type(None)} or {annotation}
    if any(typing.get_origin(a) is typing.Literal for a in args):
        return all(_numeric(a) for a in args)
    return bool(args) and args <= {int, float}


def _integer(annotation: Any) -> bool:
    """Whether a numeric geometry field takes whole numbers only (``int``, ``Literal[1, 2]``)."""
    import typing

    if typing.get_origin(annotation) is typing.Literal:
        return all(isinstance(v, int) for v in typing.get_args(annotation))
    args = set(typing.get_args(annotation)) - {type(None)} or {annotation}
    return all(a is int or _integer(a) if typing.get_origin(a) is typing.Literal else a is int
               for a in args)


def _label(name: str) -> str:
    unit = pretty_unit(unit_of(name) or unit_from_name(name.rsplit(".", 1)[-1]))
    return f"{name} [{unit}]" if unit else name


class SweepScreen(TaskScreen):
    """Parameter and range on top; the curve and its values below. Enter runs the sweep."""

    TASK_TITLE = "Sweep"
    BINDINGS = [
        Binding("ctrl+r", "run", "Run sweep"),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, name: str, deck: str | None, spec: Any = None, deck_model: Any = None,
                 parameter: str = "", start: str = "", stop: str = "") -> None:
        super().__init__()
        self.cell_name = name
        self.deck_name = deck
        self.spec = spec
        self.deck = deck_model
        self.cell: CellResult | None = None
        self.result: Any = None
        self.x_axis = PARAMETER
        self.y_axis = "leakage_nA_per_nF"
        self.corner = "worst"
        self._initial = (parameter, start, stop)
        self._serial = 0
        self.computing = False

    def compose(self) -> ComposeResult:
        parameter, start, stop = self._initial
        yield TaskBar(self.app.current_mode, f"sweep {self.cell_name}", id="taskbar")
        with Vertical(id="sweep-form"):
            with Horizontal(classes="sweep-row"):
                yield Label("parameter", classes="picker-label")
                yield Input(parameter, placeholder="e.g. oxides.core.t_ox_nm or fingers",
                            compact=True, id="sweep-parameter")
            with Horizontal(classes="sweep-row"):
                yield Label("from", classes="picker-label")
                yield Input(start, type="number", compact=True, id="sweep-from")
                yield Label("to", classes="picker-label")
                yield Input(stop, type="number", compact=True, id="sweep-to")
                yield Label("points", classes="picker-label")
                yield Input("9", type="integer", compact=True, id="sweep-points")
                yield Select([("linear", "linear"), ("log", "log")], value="linear",
                             allow_blank=False, compact=True, id="sweep-spacing")
            with Horizontal(classes="sweep-row"):
                metrics = [(m, m) for m in METRIC_NAMES]
                yield Label("x", classes="picker-label")
                yield Select([(PARAMETER, PARAMETER), *metrics], value=PARAMETER,
                             allow_blank=False, compact=True, id="sweep-x")
                yield Label("y", classes="picker-label")
                yield Select(metrics, value=self.y_axis, allow_blank=False, compact=True,
                             id="sweep-y")
                yield Label("corner", classes="picker-label")
                yield Select([("worst", "worst")], value="worst", allow_blank=False,
                             compact=True, id="sweep-corner")
        yield Static("loading the cell and its deck…", id="sweep-status")
        yield ProblemsView(id="sweep-problems")
        with Horizontal(id="sweep-body"):
            yield PlotView(id="sweep-plot")
            yield DataTable(id="sweep-table", cursor_type="row", zebra_stripes=True)
        yield Footer()

    def on_mount(self) -> None:
        self.TASK = self.app.current_mode
        # focus now, not when loading ends: typing ahead must not be moved to another field
        self.query_one("#sweep-parameter", Input).focus()
        self._prepare()

    @work(thread=True, exclusive=True, group="sweep-prepare")
    def _prepare(self) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                cell = catalog.cell(self.cell_name, self.deck_name)
            deck = self.deck or self.lab.deck_named(self.deck_name)
            spec = self.spec or self.lab.spec_for(cell, self.deck_name)
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "prepare"))
            return
        self.post_message(SweepReady(deck, spec, cell))

    def on_query_failed(self, message: QueryFailed) -> None:
        self.query_one("#sweep-status", Static).update(
            Text(f"cannot sweep {self.cell_name}: it needs its deck and cell definition",
                 style="red"))
        self.query_one(ProblemsView).problems = tuple(message.problems)

    def on_sweep_ready(self, message: SweepReady) -> None:
        from celllab.deck import numeric_paths

        self.deck, self.spec, self.cell = message.deck, message.spec, message.cell
        applies = REGISTRY[self.spec.topology].fields
        fields = type(self.spec).model_fields
        # numbers only: a text field (placement) has no range to sweep
        geometry = [f for f in self.spec.geometry if f in applies and f in fields
                    and _numeric(fields[f].annotation)]
        example = f"oxides.{self.spec.oxide}.t_ox_nm"
        self.query_one("#sweep-parameter", Input).placeholder = (
            f"e.g. {example} or {geometry[0]}" if geometry else f"e.g. {example}")
        self.query_one("#sweep-parameter", Input).suggester = SuggestFromList(
            geometry + numeric_paths(self.deck), case_sensitive=True)
        corners = [c.corner for c in self.cell.corners]
        select = self.query_one("#sweep-corner", Select)
        with select.prevent(Select.Changed):
            select.set_options([(c, c) for c in ("worst", "best", *corners)])
            select.value = "worst"
        # wraps on a narrow terminal rather than losing the end of the list
        self.query_one("#sweep-status", Static).update(Text(
            "enter runs · a deck path or one of " + ", ".join(geometry)
            + " · → accepts a suggestion", style="dim"))
        if all(self._initial):
            self.action_run()

    # --- running --------------------------------------------------------------------------
    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_run()

    def action_run(self) -> None:
        if self.spec is None:
            self.notify("still loading the cell and its deck", severity="warning")
            return
        from celllab.sweep import sweep_values

        parameter = self.query_one("#sweep-parameter", Input).value.strip()
        texts = {k: self.query_one(f"#sweep-{k}", Input).value.strip()
                 for k in ("from", "to", "points")}
        problems = [Problem("<sweep>", k, "a number is needed", has_value=False)
                    for k, v in texts.items() if not v]
        if not parameter:
            problems.insert(0, Problem("<sweep>", "parameter", "name the parameter to sweep",
                                       has_value=False))
        values: list[float] = []
        if not problems:
            fields = type(self.spec).model_fields
            integer = parameter in fields and _integer(fields[parameter].annotation)
            spacing = str(self.query_one("#sweep-spacing", Select).value)
            try:
                values = sweep_values(float(texts["from"]), float(texts["to"]),
                                      int(texts["points"]), spacing,  # type: ignore[arg-type]
                                      integer=integer)
            except ValueError as exc:
                problems.append(Problem("<sweep>", "range", str(exc), has_value=False))
        if problems:
            self.query_one(ProblemsView).problems = tuple(problems)
            return
        self.query_one(ProblemsView).problems = ()
        self._serial += 1
        self.computing = True
        self.query_one("#sweep-status", Static).update(
            Text(f"computing {len(values)} points…", style="yellow"))
        self._compute(self._serial, parameter, values)

    @work(thread=True, exclusive=True, group="sweep-compute")
    def _compute(self, serial: int, parameter: str, values: list[float]) -> None:
        from celllab.sweep import sweep_cell

        worker = get_current_worker()
        try:
            result = sweep_cell(self.deck, self.spec, parameter, values)
        except CelllabError as exc:
            if not worker.is_cancelled:
                self.post_message(SweepFailed(serial, exc.problems))
            return
        if not worker.is_cancelled:
            self.post_message(SweepComputed(serial, result))

    def on_sweep_failed(self, message: SweepFailed) -> None:
        if message.serial == self._serial:
            self.computing = False
            self.query_one(ProblemsView).problems = tuple(message.problems)
            self.query_one("#sweep-status", Static).update(Text("sweep not run", style="red"))

    def on_sweep_computed(self, message: SweepComputed) -> None:
        if message.serial != self._serial:
            return
        self.computing = False
        self.result = message.result
        rejected = [p for ps in self.result.problems for p in ps]
        self.query_one(ProblemsView).problems = tuple(rejected[:4])
        n_ok = len(self.result.ok())
        self.query_one("#sweep-status", Static).update(Text(
            f"{n_ok} of {len(self.result.values)} values computed · not stored", style="green"))
        self.refresh_views()

    # --- showing ------------------------------------------------------------------------------
    def points(self) -> list[tuple[float, dict[str, float], frozenset[str]]]:
        """(parameter value, metrics at the chosen corner, bound metrics) per computed value."""
        out = []
        for value, cell in (self.result.ok() if self.result is not None else []):
            try:
                out.append((value, corner_metrics(cell, self.corner),
                            corner_bounds(cell, self.corner)))
            except KeyError:
                continue
        return out

    def refresh_views(self) -> None:
        if self.result is None:
            return
        parameter = self.result.parameter
        points = self.points()
        par = np.array([p for p, _, _ in points], dtype=float)
        x = par if self.x_axis == PARAMETER else np.array(
            [m.get(self.x_axis, math.nan) for _, m, _ in points], dtype=float)
        y = np.array([m.get(self.y_axis, math.nan) for _, m, _ in points], dtype=float)
        x_name = parameter if self.x_axis == PARAMETER else self.x_axis
        positive = lambda v: bool(v.size and np.all(v[np.isfinite(v)] > 0))  # noqa: E731
        wide = lambda v: bool(positive(v) and np.nanmax(v) / np.nanmin(v) > 100)  # noqa: E731
        markers = tuple(Marker(float(a), float(b), "sweep start", glyph="▲")
                        for a, b in zip(x[:1], y[:1]))
        self.query_one("#sweep-plot", PlotView).spec = PlotSpec(
            title=f"{self.y_axis} vs {x_name} · {self.corner}", x_label=_label(x_name),
            y_label=_label(self.y_axis), x_log=wide(x), y_log=wide(y),
            series=(Series(x, y, f"{parameter} {format_number(par[0])}…{format_number(par[-1])}"
                           if par.size else parameter),),
            markers=markers)
        table = self.query_one("#sweep-table", DataTable)
        table.clear(columns=True)
        columns = list(dict.fromkeys([parameter, *( [self.x_axis] if self.x_axis != PARAMETER
                                                    else []), self.y_axis]))
        for c in columns:  # a deck path's last part is enough for a header
            table.add_column(Text(c.rsplit(".", 1)[-1], justify="right"), key=c)
        for value, metrics, bounds in points:
            row = [value_text(value, parameter)]
            row += [value_text(metrics.get(c), c, c in bounds) for c in columns[1:]]
            table.add_row(*row)

    @on(Select.Changed)
    def _select_changed(self, event: Select.Changed) -> None:
        if event.value is Select.BLANK:
            return
        value = str(event.value)
        if event.select.id == "sweep-x":
            self.x_axis = value
        elif event.select.id == "sweep-y":
            self.y_axis = value
        elif event.select.id == "sweep-corner":
            self.corner = value
        else:
            return
        self.refresh_views()

    def action_back(self) -> None:
        if isinstance(self.focused, Input):
            self.set_focus(None)
            return
        self.app.pop_screen()

