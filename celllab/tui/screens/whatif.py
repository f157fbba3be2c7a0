"""What-if editor: change a geometry field or a deck parameter and watch the metrics move.

Every edit is validated by the same model methods the files go through
(``CellSpec.with_changes``, ``Deck.with_changes``) and characterized in an exclusive worker
(a newer edit supersedes an older one, typing never waits). Nothing reaches the catalog until
the user saves the variant under a new name, through ``Catalog.store_run``.
"""

from __future__ import annotations

import math
import re
import time
import typing
from collections.abc import Mapping
from typing import Any

from rich.table import Table
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.timer import Timer
from textual.widgets import Footer, Input, Select, Static, TabbedContent, TabPane
from textual.worker import get_current_worker

from celllab.columns import METRICS, Column
from celllab.display import LOWER_BOUND
from celllab.errors import CelllabError, Problem
from celllab.records import CellResult, corner_bounds, corner_metrics
from celllab.topologies import REGISTRY
from celllab.tui.curves import ceff_plot, cv_plot, esr_plot, impedance_plot
from celllab.tui.messages import (
    CellLoaded,
    QueryFailed,
    VariantRemoved,
    VariantSaved,
    WhatIfComputed,
    WhatIfEdited,
    WhatIfRejected,
)
from celllab.tui.screens.base import TaskScreen
from celllab.tui.screens.cell import cell_summary
from celllab.tui.widgets.plot import PlotView
from celllab.tui.widgets.problems_view import ProblemsView
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import value_text
from celllab.tui.widgets.whatif_form import WhatIfForm, geometry_help, value_to_text
from celllab.units import from_si

_INT = re.compile(r"^[+-]?\d+$")
_FLOAT = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")

def relevant_fields(topology: str, fields: list[str]) -> list[str]:
    """The geometry fields a cell of this topology uses (``Topology.fields`` of the registry)."""
    applies = REGISTRY[topology].fields
    return [name for name in fields if name in applies]


def parse_field_text(text: str, annotation: Any = None) -> Any:
    """Input text -> value: empty/auto -> None, true/false for booleans, ints, floats, text."""
    value = text.strip()
    if value == "" or value.lower() == "auto":
        return None
    allows_bool = annotation is bool or bool in typing.get_args(annotation)
    if allows_bool and value.lower() in ("true", "false", "yes", "no", "on", "off"):
        return value.lower() in ("true", "yes", "on")
    if _INT.match(value):
        return int(value)
    if _FLOAT.match(value):
        return float(value)
    return value


def input_kind(annotation: Any) -> str:
    """The Input type of a geometry field: "integer", "number" or "text"."""
    args = set(typing.get_args(annotation)) - {type(None)} or {annotation}
    if args == {int}:
        return "integer"
    if args <= {int, float}:
        return "number"
    return "text"


def field_placeholder(info: Any) -> str:
    """What an empty geometry input means: required, derived (None default) or the default."""
    if info.is_required():
        return "required"
    if info.default is None:
        return "auto (derived)"
    return f"default {value_to_text(info.default)}"


def required_missing(spec: Any, texts: Mapping[str, str]) -> list[str]:
    """Geometry fields left empty that have no default."""
    fields = type(spec).model_fields
    return [name for name, text in texts.items()
            if not text.strip() and name in fields and fields[name].is_required()]


def geometry_changes(spec: Any, texts: Mapping[str, str]) -> dict[str, Any]:
    """Fields whose typed value differs from the spec's own value; an empty field is its
    default (None for a derived one)."""
    fields = type(spec).model_fields
    changes: dict[str, Any] = {}
    for name, text in texts.items():
        annotation = fields[name].annotation if name in fields else None
        value = parse_field_text(text, annotation)
        if value is None and name in fields and not fields[name].is_required():
            value = fields[name].default
        current = getattr(spec, name, None)
        if value != current:
            changes[name] = value
    return changes


def deck_changes(texts: Mapping[str, str]) -> dict[str, Any]:
    """Deck dotted path -> number (text that is not a number is passed on to be rejected)."""
    out: dict[str, Any] = {}
    for path, text in texts.items():
        value = text.strip()
        out[path] = float(value) if _FLOAT.match(value) else value
    return out


def spec_from_result(cell: CellResult) -> Any:
    """Rebuild the CellSpec of a catalog cell from its stored geometry."""
    from celllab.cells import spec_from_record

    return spec_from_record(cell)


def renamed_deck(deck: Any, name: str) -> Any:
    """The deck under another process name (validated like any deck)."""
    from celllab.deck import parse_deck

    data = deck.model_dump(mode="json")
    data["process"] = {**data["process"], "name": name}
    return parse_deck(data, f"<what-if deck {name}>")


def metrics_at(cell: CellResult, corner: str) -> dict[str, float]:
    """The cell's metrics at a corner name or "worst" (as the catalog's worst rows); {} if absent."""
    try:
        return corner_metrics(cell, corner)
    except KeyError:
        return {}


def bounds_at(cell: CellResult, corner: str) -> frozenset[str]:
    """Metrics whose value at ``corner`` (a name, "worst" or "best") is only a lower bound."""
    try:
        return corner_bounds(cell, corner)
    except KeyError:
        return frozenset()


def change_text(before: float | None, after: float | None, column: Column,
                before_bound: bool = False, after_bound: bool = False) -> Text:
    """Relative change, green when it moves the better way.

    A value that is only a lower bound makes the change a bound too: ``≥`` when the new value
    is one (the change is at least this), ``≤`` when the old one is, ``?`` when both are.
    """
    if before is None or after is None or math.isnan(before) or math.isnan(after):
        return Text("")
    if before_bound and after_bound:
        return Text("?", style="dim", justify="right")
    if before == after and not (before_bound or after_bound):
        return Text("=", style="dim", justify="right")
    if before == 0:
        return Text("new", justify="right")
    rel = (after - before) / abs(before) * 100
    good = column.improved(before, after)
    mark = LOWER_BOUND if after_bound else ("≤" if before_bound else "")
    return Text(f"{mark}{rel:+.1f} %", style="green" if good else "red", justify="right")


def compare_table(before: Mapping[str, float], after: Mapping[str, float] | None,
                  before_bounds: frozenset[str] = frozenset(),
                  after_bounds: frozenset[str] = frozenset()) -> Table:
    """metric | cell | what-if | change, compact enough for an 80-column terminal."""
    table = Table(box=None, padding=(0, 1, 0, 0), expand=True, show_edge=False)
    table.add_column("metric", ratio=1, no_wrap=True, overflow="ellipsis")
    table.add_column("cell", justify="right", no_wrap=True)
    table.add_column("what-if", justify="right", no_wrap=True)
    table.add_column("change", justify="right", no_wrap=True)
    for info in METRICS:
        if info.bounds:  # a bound flag reads as the ≥ in front of its metric
            continue
        b = before.get(info.name)
        a = after.get(info.name) if after is not None else None
        name = Text(info.name)
        name.append(f" {info.arrow}", style="dim")
        b_bound, a_bound = info.name in before_bounds, info.name in after_bounds
        table.add_row(name, value_text(b, info.name, b_bound),
                      value_text(a, info.name, a_bound) if after is not None
                      else Text("–", style="dim"),
                      change_text(b, a, info, b_bound, a_bound) if after is not None else Text(""))
    return table


class WhatIfScreen(TaskScreen):
    """Edit on the left, compare on the right; ctrl+s saves a new variant."""

    TASK_TITLE = "What-if"
    BINDINGS = [
        Binding("e", "edit", "Edit fields"),
        Binding("ctrl+s", "save", "Save variant"),
        Binding("ctrl+z", "undo_save", "Undo save"),
        Binding("ctrl+w", "sweep", "Sweep"),
        Binding("ctrl+r", "reset", "Reset"),
        Binding("right_square_bracket", "tab(1)", "Next tab", show=False),
        Binding("left_square_bracket", "tab(-1)", "Prev tab", show=False),
        Binding("ctrl+o", "choose_corner", "Corner"),
        Binding("escape", "back", "Back"),
    ]

    TABS = ("wi-metrics", "wi-cv", "wi-z", "wi-esr", "wi-ceff")

    def __init__(self, name: str, deck: str | None, cell: CellResult | None = None) -> None:
        super().__init__()
        self.cell_name = name
        self.deck_name = deck
        self.original: CellResult | None = cell
        self.spec: Any = None
        self.deck: Any = None
        self.variant: CellResult | None = None
        self.variant_spec: Any = None
        self.variant_deck: Any = None
        self.geometry_edits: dict[str, Any] = {}
        self.deck_edits: dict[str, Any] = {}
        self.corner = "worst"
        self.problems: list[Problem] = []
        self._serial = 0
        self._debounce: Timer | None = None
        self.computing = False
        self.saved_as: tuple[str, str] | None = None

    # --- layout -------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield TaskBar(self.app.current_mode, f"what-if {self.cell_name}", id="taskbar")
        yield Static(f"loading {self.cell_name}…", id="wi-summary")
        with Horizontal(id="wi-body"):
            with Vertical(id="wi-left"):
                yield Static("", id="wi-form-slot")
                yield ProblemsView(id="wi-problems")
            with Vertical(id="wi-right"):
                with Horizontal(classes="pickers"):
                    yield Static("corner", classes="picker-label")
                    yield Select([("worst", "worst")], value="worst", allow_blank=False,
                                 compact=True, id="wi-corner")
                    yield Static("", id="wi-status")
                with TabbedContent(id="wi-tabs"):
                    with TabPane("Metrics", id="wi-metrics"):
                        with VerticalScroll():
                            yield Static("", id="wi-table")
                    with TabPane("C-V", id="wi-cv"):
                        yield PlotView(id="wi-plot-cv")
                    with TabPane("|Z|(f)", id="wi-z"):
                        yield PlotView(id="wi-plot-z")
                    with TabPane("ESR(f)", id="wi-esr"):
                        yield PlotView(id="wi-plot-esr")
                    with TabPane("C_eff(f)", id="wi-ceff"):
                        yield PlotView(id="wi-plot-ceff")
        yield Footer()

    def on_mount(self) -> None:
        self.TASK = self.app.current_mode
        self._prepare()

    @work(thread=True, exclusive=True, group="whatif-prepare")
    def _prepare(self) -> None:
        try:
            cell, deck, spec = self.lab.cell_definition(self.original, self.cell_name, self.deck_name)
            import celllab.engine  # noqa: F401  (loaded now, so the first edit is quick)
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "prepare"))
            return
        self.spec, self.deck = spec, deck
        self.post_message(CellLoaded(cell, self.deck_name))

    def on_query_failed(self, message: QueryFailed) -> None:
        self.query_one("#wi-summary", Static).update(
            Text(f"cannot edit {self.cell_name}: what-if needs its deck and cell definition",
                 style="red"))
        self.query_one(ProblemsView).problems = tuple(message.problems)

    def on_cell_loaded(self, message: CellLoaded) -> None:
        from celllab.deck import numeric_paths
        from celllab.tui.screens.deck import deck_value, describe_deck_path

        cell = message.cell
        self.original = cell
        self.query_one("#wi-summary", Static).update(cell_summary(cell, self.deck_name))
        names = relevant_fields(cell.topology, list(self.spec.geometry))
        geometry = {n: getattr(self.spec, n) for n in names}
        data = self.deck.full_dump()
        deck_values = {p: deck_value(data, p) for p in numeric_paths(self.deck)}
        model_fields = type(self.spec).model_fields
        form = WhatIfForm(geometry, geometry_help(model_fields, names), deck_values,
                          describe_deck_path, kinds={n: input_kind(model_fields[n].annotation)
                                                     for n in names},
                          placeholders={n: field_placeholder(model_fields[n]) for n in names},
                          id="wi-form")
        slot = self.query_one("#wi-form-slot")
        self.query_one("#wi-left").mount(form, before=slot)
        slot.remove()
        corners = [c.corner for c in cell.corners]
        select = self.query_one("#wi-corner", Select)
        with select.prevent(Select.Changed):
            select.set_options([(c, c) for c in ["worst", *corners]])
            select.value = "worst"
        self.variant = None
        self._refresh_views()
        # no field takes focus by itself: keys typed while the view loaded must not land in
        # one; e (or tab) starts editing
        self.query_one("#wi-status", Static).update(Text("e or tab: edit the fields",
                                                         style="dim"))

    def action_edit(self) -> None:
        forms = self.query(WhatIfForm)
        if forms:
            inputs = forms.first().query(Input)
            if inputs:
                inputs.first().focus()

    # --- edits --------------------------------------------------------------------------
    @on(WhatIfEdited)
    def _edited(self, message: WhatIfEdited) -> None:
        message.stop()
        if self.spec is None:
            return
        missing = required_missing(self.spec, message.geometry)
        if missing:
            if self._debounce is not None:
                self._debounce.stop()
                self._debounce = None
            self._serial += 1
            self.post_message(WhatIfRejected(self._serial, [Problem(
                "<what-if>", name, "required: this field has no default to fall back on; "
                "type a value", has_value=False) for name in missing]))
            return
        self.geometry_edits = geometry_changes(self.spec, message.geometry)
        self.deck_edits = deck_changes(message.deck)
        if self._debounce is not None:
            self._debounce.stop()
            self._debounce = None
        if message.immediate:
            self._start_compute()
        else:
            self._debounce = self.set_timer(self.lab.debounce_s, self._start_compute)

    def _start_compute(self) -> None:
        self._debounce = None
        self._serial += 1
        if not self.geometry_edits and not self.deck_edits:
            self.variant = None
            self.problems = []
            self.query_one(ProblemsView).problems = ()
            self.query_one(WhatIfForm).invalid = frozenset()
            self._refresh_views()
            return
        self.computing = True
        self.query_one("#wi-status", Static).update(Text("computing…", style="yellow"))
        self._compute(self._serial, dict(self.geometry_edits), dict(self.deck_edits))

    @work(thread=True, exclusive=True, group="whatif-compute")
    def _compute(self, serial: int, geometry: dict[str, Any], deck_edits: dict[str, Any]) -> None:
        from celllab.engine import characterize

        worker = get_current_worker()
        started = time.perf_counter()
        try:
            deck = self.deck.with_changes(deck_edits) if deck_edits else self.deck
            spec = self.spec.with_changes(geometry, deck) if geometry else (
                self.spec.with_changes({}, deck) if deck_edits else self.spec)
            if worker.is_cancelled:
                return
            run = characterize(deck, [spec])
        except CelllabError as exc:
            if not worker.is_cancelled:
                self.post_message(WhatIfRejected(serial, exc.problems))
            return
        except (ValueError, ArithmeticError) as exc:  # a model outside its domain: say so
            if not worker.is_cancelled:
                self.post_message(WhatIfRejected(serial, [Problem(
                    "<what-if>", "", f"the models could not evaluate this variant: {exc}",
                    has_value=False)]))
            return
        if not worker.is_cancelled:
            self.post_message(WhatIfComputed(serial, run.cells[0], run, spec, deck,
                                             time.perf_counter() - started))

    def on_what_if_computed(self, message: WhatIfComputed) -> None:
        if message.serial != self._serial:
            return
        self.computing = False
        self.variant, self.variant_spec, self.variant_deck = message.cell, message.spec, message.deck
        self.problems = []
        self.query_one(ProblemsView).problems = ()
        self.query_one(WhatIfForm).invalid = frozenset()
        self.query_one("#wi-status", Static).update(
            Text(f"updated in {from_si(message.seconds, 'ms'):.0f} ms · not saved (ctrl+s)", style="green"))
        self._refresh_views()

    def on_what_if_rejected(self, message: WhatIfRejected) -> None:
        if message.serial != self._serial:
            return
        self.computing = False
        self.problems = list(message.problems)
        self.query_one(ProblemsView).problems = tuple(message.problems)
        if not message.saving:  # the shown what-if no longer matches the form: drop it
            self.variant = None
            self._refresh_views()
        fields = [p.field for p in message.problems]
        names = [*self.query_one(WhatIfForm).geometry_text(), *self.deck_edits]
        bad = {n for n in names if any(re.search(rf"(^|[.\s]){re.escape(n)}($|[.\s\[])", f)
                                       for f in fields)}
        self.query_one(WhatIfForm).invalid = frozenset(bad)
        if message.saving:
            self.notify("\n".join(str(p) for p in message.problems), title="Not saved",
                        severity="error", timeout=8)
            self.query_one("#wi-status", Static).update(Text("not saved: see left", style="red"))
            return
        self.query_one("#wi-status", Static).update(Text("invalid change: see left", style="red"))

    # --- views --------------------------------------------------------------------------
    @on(Select.Changed, "#wi-corner")
    def _corner_changed(self, event: Select.Changed) -> None:
        if event.value is not Select.BLANK:
            self.corner = str(event.value)
            self._refresh_views()

    def _refresh_views(self) -> None:
        if self.original is None:
            return
        before = metrics_at(self.original, self.corner)
        after = metrics_at(self.variant, self.corner) if self.variant is not None else None
        self.query_one("#wi-table", Static).update(compare_table(
            before, after, bounds_at(self.original, self.corner),
            bounds_at(self.variant, self.corner) if self.variant is not None else frozenset()))
        plot_corner = None if self.corner == "worst" else self.corner
        typical = plot_corner or self._typical(self.original)
        pairs: list[tuple[str, CellResult]] = [("cell", self.original)]
        if self.variant is not None:
            pairs.append(("what-if", self.variant))
        at = [typical] if typical else None
        self.query_one("#wi-plot-cv", PlotView).spec = cv_plot(pairs, at)
        self.query_one("#wi-plot-z", PlotView).spec = impedance_plot(pairs, at, self.lab.z_target_ohm)
        self.query_one("#wi-plot-esr", PlotView).spec = esr_plot(pairs, at)
        self.query_one("#wi-plot-ceff", PlotView).spec = ceff_plot(pairs, at)
        if self.variant is None and not self.computing:
            self.query_one("#wi-status", Static).update(
                Text("no changes yet: edit a field on the left", style="dim"))

    @staticmethod
    def _typical(cell: CellResult) -> str | None:
        names = [c.corner for c in cell.corners]
        return next((n for n in names if n.startswith(("typ", "nom"))), names[0] if names else None)

    def comparison(self) -> dict[str, tuple[float | None, float | None]]:
        """metric -> (cell, what-if) at the chosen corner (what the Metrics tab shows)."""
        if self.original is None:
            return {}
        before = metrics_at(self.original, self.corner)
        after = metrics_at(self.variant, self.corner) if self.variant is not None else {}
        return {m.name: (before.get(m.name), after.get(m.name)) for m in METRICS}

    # --- actions ------------------------------------------------------------------------
    def action_tab(self, step: int) -> None:
        tabs = self.query_one("#wi-tabs", TabbedContent)
        index = self.TABS.index(tabs.active) if tabs.active in self.TABS else 0
        tabs.active = self.TABS[(index + step) % len(self.TABS)]

    def action_choose_corner(self) -> None:
        select = self.query_one("#wi-corner", Select)
        select.focus()
        select.expanded = True

    def action_reset(self) -> None:
        if self.spec is not None:
            self.query_one(WhatIfForm).reset()

    def action_back(self) -> None:
        if isinstance(self.focused, Input):
            self.set_focus(None)  # first escape leaves the field; the next one leaves the screen
            return
        if self.variant is not None:
            self.notify("what-if discarded (nothing was saved)", timeout=3)
        self.app.pop_screen()

    def action_save(self) -> None:
        from celllab.tui.screens.save_variant import SaveChoice, SaveVariantDialog

        if self.variant is None or self.computing:
            why = "still computing" if self.computing else (
                "fix the invalid change first" if self.problems else "change something first")
            self.notify(f"nothing to save: {why}", severity="warning")
            return
        changes = [f"{k} = {v}" for k, v in {**self.geometry_edits, **self.deck_edits}.items()]
        default_deck = f"{self.deck.name}-wi" if self.deck_edits else None

        def chosen(choice: SaveChoice | None) -> None:
            if choice is not None:
                self._save(choice.cell_name, choice.deck_name, dict(self.geometry_edits),
                           dict(self.deck_edits))

        self.app.push_screen(SaveVariantDialog(self._default_name(), default_deck,
                                               summary="changes: " + ", ".join(changes)), chosen)

    def _default_name(self) -> str:
        """The cell's name with the changed geometry's tags rewritten (``-f2`` -> ``-f4``);
        ``_wi1`` appended when only deck parameters changed."""
        from celllab.cells.expand import renamed_variant

        fields = list(self.geometry_edits)
        name = renamed_variant(self.cell_name, {f: getattr(self.spec, f, None) for f in fields},
                               dict(self.geometry_edits))
        if name == self.cell_name:
            name = f"{name}_wi1"
        return name if len(name) <= 80 else name[:77] + "_wi"

    @work(thread=True, exclusive=True, group="whatif-save")
    def _save(self, cell_name: str, deck_name: str | None, geometry: dict[str, Any],
              deck_edits: dict[str, Any]) -> None:
        from celllab.engine import characterize

        try:
            deck = self.deck.with_changes(deck_edits) if deck_edits else self.deck
            if deck_name is not None:
                deck = renamed_deck(deck, deck_name)
            spec = self.spec.with_changes(geometry, deck, name=cell_name)
            run = characterize(deck, [spec])
            with self.lab.using_catalog() as catalog:
                if catalog.name_taken(cell_name, deck.name):
                    raise CelllabError([Problem("<what-if>", "name", "already in the catalog "
                                                f"for deck {deck.name}; pick another name",
                                                cell_name)])
                twin = catalog.identical_cell(run.cells[0].cell_hash, deck.name)
                if twin:
                    raise CelllabError([Problem(
                        "<what-if>", "geometry", f"this variant is cell {twin!r} of the "
                        "catalog (same geometry and deck); nothing new to store",
                        has_value=False)])
                report = catalog.store_run(run)
        except CelllabError as exc:
            self.post_message(WhatIfRejected(self._serial, exc.problems, saving=True))
            return
        except (ValueError, ArithmeticError) as exc:
            self.post_message(WhatIfRejected(self._serial, [Problem(
                "<what-if>", "", f"not saved: {exc}", has_value=False)], saving=True))
            return
        self.lab.remember_spec(deck.name, spec)
        self.post_message(VariantSaved(cell_name, deck.name, report))

    def on_variant_saved(self, message: VariantSaved) -> None:
        self.saved_as = (message.name, message.deck)
        self._saved_report = message.report
        self._deck_before_save = self.lab.current_deck
        if message.deck != self.deck_name:
            # a changed deck is a new deck: the catalog follows it, so the variant is in view
            self.lab.current_deck = message.deck
            where = (f"the new deck {message.deck}; the catalog now shows that deck "
                     f"(d there picks {self.deck_name} again)")
        else:
            where = f"deck {message.deck}"
        self.notify(f"{message.name} stored in {where} · ctrl+z takes it back",
                    title="Saved variant", timeout=8)
        self.query_one("#wi-status", Static).update(
            Text(f"saved as {message.name} (deck {message.deck}) · ctrl+z undoes", style="green"))

    def action_sweep(self) -> None:
        """Sweep one parameter from this what-if (its current edits included)."""
        if self.spec is None:
            return
        from celllab.tui.screens.sweep import SweepScreen

        spec = self.variant_spec if self.variant is not None else self.spec
        deck = self.variant_deck if self.variant is not None else self.deck
        self.app.push_screen(SweepScreen(self.cell_name, self.deck_name, spec=spec,
                                         deck_model=deck))

    def action_undo_save(self) -> None:
        report = getattr(self, "_saved_report", None)
        if self.saved_as is None or report is None:
            self.notify("nothing saved here to take back", severity="warning")
            return
        # a save that replaced results (or completed ones stored without the ESD events) took
        # their rows out; removing its run would lose them
        if report.superseded or report.completed or report.run_id is None:
            self.notify("this save replaced earlier results; it cannot be taken back here",
                        severity="warning")
            return
        self._undo(report.run_id)

    @work(thread=True, exclusive=True, group="whatif-save")
    def _undo(self, run_id: int) -> None:
        try:
            with self.lab.using_catalog() as catalog:
                catalog.remove_run(run_id)
        except CelllabError as exc:
            self.post_message(WhatIfRejected(self._serial, exc.problems, saving=True))
            return
        self.post_message(VariantRemoved(run_id))

    def on_variant_removed(self, message: VariantRemoved) -> None:
        name, deck = self.saved_as or ("", "")
        self.saved_as = None
        self._saved_report = None
        if self.lab.current_deck == deck and deck != self.deck_name:
            self.lab.current_deck = getattr(self, "_deck_before_save", self.deck_name)
        self.notify(f"{name} taken out of the catalog (deck {deck})", title="Save undone",
                    timeout=5)
        self.query_one("#wi-status", Static).update(
            Text(f"{name} removed · not saved (ctrl+s)", style="yellow"))

    def export_context(self) -> Any:
        from celllab.tui.screens.export import ExportContext

        cell = self.variant or self.original
        return ExportContext(cell=cell, deck=self.deck_name,
                             corner=None if self.corner == "worst" else self.corner)
