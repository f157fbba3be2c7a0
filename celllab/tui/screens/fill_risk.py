"""Fill-risk view: may this cell fill a block for a mission, and what does a rail zap do to it?

For one catalog cell and a typed fill area, mission life, junction temperature, failure target
and HBM / CDM voltages, the view answers with ``celllab.fill_risk``: the fill's oxide failure
fraction and FIT over the mission (`fill_oxide_risk`), the largest fill within the target, what
one broken oxide costs the supply, and each event's peak oxide voltage, time above the pulse
breakdown voltage and margin (`esd_exposure`, with the fill's capacitance on the rail), per
corner with the worst corner marked. The deck and cell definition come from the catalog (as for
the what-if and sweep views); the work runs in a worker, one step at a time, so Esc leaves at
once. Nothing is stored.
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widgets import Footer, Input, Label, LoadingIndicator, Static
from textual.worker import Worker, get_current_worker

from celllab.errors import CelllabError, Problem
from celllab.fill_risk import CAUTION as FILL_CAUTION
from celllab.records import CellResult
from celllab.tui.messages import FillRiskComputed, FillRiskFailed, FillRiskProgressed, QueryFailed
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.task_bar import TaskBar
from celllab.tui.widgets.values import format_number

#: Where problems of the typed values are located.
SOURCE = "<fill risk>"
#: Largest fill area accepted, mm^2 (as ``celllab afford --area-mm2``).
MAX_FILL_MM2 = 1e6
#: Fill area offered before the user types one, mm^2 (the figures then read "per mm^2").
DEFAULT_FILL_MM2 = 1.0
#: Marks the worst corner's row in every table.
WORST_MARK = "▸"


@dataclass(frozen=True)
class FillField:
    """One input of the form: its key, its label, and the deck table whose field sets its
    default and allowed range (None: the fill area, which the deck does not hold)."""

    key: str
    label: str
    unit: str
    deck_table: str | None = None
    deck_field: str | None = None


FIELDS: tuple[FillField, ...] = (
    FillField("area_mm2", "fill", "mm²"),
    FillField("life_years", "life", "yr", "mission", "life_years"),
    FillField("temperature_C", "temp", "°C", "mission", "temperature_C"),
    FillField("target_ppm", "target", "ppm", "mission", "target_ppm"),
    FillField("hbm_V", "HBM", "V", "esd", "hbm_V"),
    FillField("cdm_V", "CDM", "V", "esd", "cdm_V"),
)
FIELD_BY_KEY = {f.key: f for f in FIELDS}


@dataclass(frozen=True)
class FillInputs:
    """The question, in the units people type (mm^2, years, degC, ppm, V)."""

    area_mm2: float
    life_years: float
    temperature_C: float
    target_ppm: float
    hbm_V: float
    cdm_V: float


@dataclass(frozen=True)
class FillAnswer:
    """What the view shows: the wear-out answer and one ESD exposure per event (HBM, CDM)."""

    inputs: FillInputs
    risk: Any                  # fill_risk.FillOxideRisk
    events: tuple[Any, ...]    # fill_risk.CellEsdExposure, one event each


# --- the form ---------------------------------------------------------------------------------

def default_texts(deck: Any) -> dict[str, str]:
    """The form's starting values: the deck's ``[mission]`` and ``[esd]`` tables (their own
    defaults when the deck leaves them out) and `DEFAULT_FILL_MM2`."""
    out = {"area_mm2": f"{DEFAULT_FILL_MM2:g}"}
    for f in FIELDS:
        if f.deck_table is not None:
            out[f.key] = f"{getattr(getattr(deck, f.deck_table), f.deck_field):g}"
    return out


def field_limits(deck: Any, field: FillField) -> tuple[float, bool, float]:
    """(lowest, lowest excluded, highest) a field allows: the deck schema's own bounds for the
    mission and ESD values, ``> 0`` and `MAX_FILL_MM2` for the fill area."""
    if field.deck_table is None:
        return 0.0, True, MAX_FILL_MM2
    model = type(getattr(deck, field.deck_table))
    lo, strict, hi = -math.inf, False, math.inf
    for rule in model.model_fields[field.deck_field].metadata:
        if hasattr(rule, "gt"):
            lo, strict = float(rule.gt), True
        elif hasattr(rule, "ge"):
            lo, strict = float(rule.ge), False
        if hasattr(rule, "le"):
            hi = float(rule.le)
        elif hasattr(rule, "lt"):
            hi = float(rule.lt)
    return lo, strict, hi


def allowed_text(deck: Any, field: FillField) -> str:
    lo, strict, hi = field_limits(deck, field)
    parts = []
    if math.isfinite(lo):
        parts.append(f"{'>' if strict else '>='} {lo:g}")
    if math.isfinite(hi):
        parts.append(f"<= {hi:g}")
    return f"a number {' and '.join(parts)} ({field.unit})"


def read_inputs(texts: Mapping[str, str], deck: Any) -> tuple[FillInputs | None, list[Problem]]:
    """Typed texts -> FillInputs, or one located problem per field that is empty, not a number
    or outside what it allows."""
    values: dict[str, float] = {}
    problems: list[Problem] = []
    for f in FIELDS:
        text = texts.get(f.key, "").strip()
        name = f"{f.label} {f.unit}"
        if not text:
            problems.append(Problem(SOURCE, name, f"empty: type {allowed_text(deck, f)}",
                                    has_value=False))
            continue
        try:
            value = float(text)
        except ValueError:
            problems.append(Problem(SOURCE, name, f"not a number: type {allowed_text(deck, f)}",
                                    text))
            continue
        lo, strict, hi = field_limits(deck, f)
        if not (math.isfinite(value) and (value > lo if strict else value >= lo) and value <= hi):
            problems.append(Problem(SOURCE, name, f"must be {allowed_text(deck, f)}", text))
            continue
        values[f.key] = value
    if problems:
        return None, problems
    return FillInputs(**values), []


def problems_line(problems: Sequence[Problem]) -> Text:
    """One line per problem, ``✗ field = 'value': what is allowed`` (fits under the form)."""
    text = Text()
    for k, p in enumerate(problems):
        if k:
            text.append("\n")
        text.append("✗ ", style="red")
        if p.field:
            text.append(p.field, style="bold")
            if p.has_value:
                text.append(f" = {p.value!r}")
            text.append(": ")
        text.append(p.message, style="red")
    return text


def problem_fields(problems: Sequence[Problem]) -> set[str]:
    """Keys of the form fields the problems are about."""
    names = {f"{f.label} {f.unit}": f.key for f in FIELDS}
    return {names[p.field] for p in problems if p.field in names}


# --- the computation (worker side) ------------------------------------------------------------

def esd_events_for(inputs: FillInputs) -> tuple[Any, ...]:
    """The two rail events of the question: HBM and CDM, positive, unpowered (as the catalog's
    columns and ``celllab afford``)."""
    from celllab.characterization.esd_events import EsdEvent

    return (EsdEvent("hbm", inputs.hbm_V), EsdEvent("cdm", inputs.cdm_V))


def wearout_answer(deck: Any, spec: Any, inputs: FillInputs,
                   corners: Sequence[str] | None = None) -> Any:
    """`fill_risk.fill_oxide_risk` for one cell filling ``inputs.area_mm2``."""
    from celllab.fill_risk import fill_oxide_risk

    return fill_oxide_risk(deck, [spec], inputs.area_mm2, corners=corners,
                           life_years=inputs.life_years, temperature_C=inputs.temperature_C,
                           target_ppm=inputs.target_ppm)


def event_answer(deck: Any, spec: Any, inputs: FillInputs, event: Any,
                 corners: Sequence[str] | None = None) -> Any:
    """`fill_risk.esd_exposure` of one event, the fill's capacitance on the rail."""
    from celllab.fill_risk import esd_exposure

    return esd_exposure(deck, [spec], events=[event], fill_mm2=inputs.area_mm2,
                        corners=corners)[0]


def cell_corners(cell: CellResult | None, deck: Any) -> list[str] | None:
    """The cell's corners in the order the cell view lists them (the run's, typical first), those
    the deck still defines; None: the deck's own order."""
    if cell is None:
        return None
    names = [c.corner for c in cell.corners if c.corner in deck.corners]
    return names or None


# --- the answer as tables ---------------------------------------------------------------------

def number(value: float, *, none: str = "—") -> str:
    """A figure as every table shows it (4 significant digits); NaN -> ``none``."""
    value = float(value)
    if math.isnan(value):
        return none
    if math.isinf(value):
        return "no limit" if value > 0 else "-inf"
    return format_number(value)


def _table(*headers: str) -> Table:
    table = Table(box=None, padding=(0, 1), show_edge=False, header_style="bold")
    table.add_column("corner", no_wrap=True)
    for head in headers:
        table.add_column(head, justify="right", no_wrap=True)
    return table


def _corner_cell(name: str, worst: bool) -> Text:
    return Text(f"{WORST_MARK} {name}" if worst else f"  {name}", style="bold" if worst else "")


def mission_text(risk: Any, area_mm2: float) -> Text:
    """One line: the fill and the mission it was computed for."""
    from scipy.constants import year, zero_Celsius

    m = risk.mission
    return Text(f"{number(area_mm2)} mm² of fill ({number(risk.gate_area_mm2)} mm² of gate oxide) "
                f"for {number(m.life_s / year)} years at {number(m.temperature_K - zero_Celsius)} °C, "
                f"supply ×{number(m.supply_scale)} of nominal", style="dim")


def verdict_text(risk: Any) -> Text:
    """PASS / FAIL at the worst corner and the largest fill within the target."""
    j = risk.corners.index(risk.worst_corner)
    target = risk.mission.target_fraction * 1e6
    text = Text()
    if bool(np.all(risk.within_target)):
        text.append(" PASS ", style="bold reverse green")
        text.append(f" within the {number(target)} ppm target at every corner")
    else:
        over = [c for c, ok in zip(risk.corners, risk.within_target) if not ok]
        text.append(" FAIL ", style="bold reverse red")
        text.append(f" over the {number(target)} ppm target at {', '.join(over)}")
    affordable = float(risk.affordable_footprint_mm2[j])
    if math.isinf(affordable):
        text.append("\nno gate oxide wears out: the target sets no largest fill")
    else:
        text.append(f"\nlargest fill within the target: {number(affordable)} mm² "
                    f"({risk.corner_label})")
    return text


def wearout_table(risk: Any) -> Table:
    """Per corner: failure fraction and FIT over the mission, the affordable fill, the verdict."""
    table = _table("failures\nppm", "FIT\nover life", "largest fill\nmm²", "\ntarget")
    one_answer = risk.corner_label == "every corner"  # no corner to single out
    for j, corner in enumerate(risk.corners):
        ok = bool(risk.within_target[j])
        table.add_row(_corner_cell(corner, corner == risk.worst_corner and not one_answer),
                      number(risk.failure_ppm[j]), number(risk.fit[j]),
                      number(risk.affordable_footprint_mm2[j]),
                      Text("within" if ok else "EXCEEDS", style="green" if ok else "bold red"))
    return table


def fault_worst(cell: Any) -> int | None:
    """Corner index where one broken oxide draws the most current (None: no gate oxide)."""
    current = np.asarray(cell.fault_current_mA, dtype=float)
    return int(np.nanargmax(current)) if np.any(np.isfinite(current)) else None


def fault_table(cell: Any) -> Table | Text:
    """Per corner: the supply current and power when the cell's worst oxide breaks."""
    worst = fault_worst(cell)
    if worst is None:
        return Text("no gate oxide to break", style="green")
    table = _table("current\nmA", "power\nmW", "limit\nmA", "\nsupply")
    for j, corner in enumerate(cell.corners):
        ok = bool(cell.fault_survives[j])
        table.add_row(_corner_cell(corner, j == worst), number(cell.fault_current_mA[j]),
                      number(cell.fault_power_mW[j]), number(cell.fault_limit_mA[j]),
                      Text("survives" if ok else "FAILS", style="green" if ok else "bold red"))
    return table


def event_worst(exposure: Any, e: int = 0) -> int | None:
    """Corner index of the smallest margin of event ``e`` (None: no gate oxide)."""
    if not np.any(np.isfinite(np.asarray(exposure.peak_oxide_V[e], dtype=float))):
        return None
    return int(np.argmin(np.asarray(exposure.margin[e], dtype=float)))


def event_title(exposure: Any, e: int = 0) -> Text:
    j = event_worst(exposure, e)
    ok = bool(np.all(exposure.survives[e]))
    text = Text(f"{exposure.events[e]}", style="bold")
    text.append(f"  unpowered, {number(exposure.fill_capacitance_nF)} nF of fill on the rail · ")
    if j is None:
        text.append("no gate oxide", style="green")
        return text
    if ok:
        text.append("survives at every corner", style="green")
    else:
        broken = [c for c, s in zip(exposure.corners, exposure.survives[e]) if not s]
        text.append(f"BREAKS at {', '.join(broken)}", style="bold red")
    text.append(f" (worst {exposure.corners[j]})", style="dim")
    return text


def event_table(exposure: Any, e: int = 0) -> Table:
    """Per corner: rail and oxide peaks, pulse breakdown voltage, time above it, margin."""
    table = _table("rail\nV", "oxide\nV", "V_BD\nV", ">V_BD\nns", "margin\n×", "\nresult")
    worst = event_worst(exposure, e)
    for j, corner in enumerate(exposure.corners):
        ok = bool(exposure.survives[e][j])
        no_oxide = math.isnan(float(exposure.peak_oxide_V[e][j]))
        table.add_row(_corner_cell(corner, j == worst), number(exposure.peak_rail_V[e][j]),
                      number(exposure.peak_oxide_V[e][j]), number(exposure.v_bd_pulse_V[j]),
                      number(exposure.time_above_ns[e][j]), number(exposure.margin[e][j]),
                      Text("no oxide" if no_oxide else "ok" if ok else "BREAKS",
                           style="green" if ok else "bold red"))
    return table


def event_note(exposure: Any, e: int = 0) -> Text:
    """Does the cell's own circuit (the pair's series path, a long line) keep the event off
    its oxide? The sentence of the worst corner."""
    j = event_worst(exposure, e)
    note = exposure.notes[e][j] if j is not None and exposure.notes and exposure.notes[e] else ""
    return Text(f"  {note}" if note else "", style="dim")


def answer_view(answer: FillAnswer) -> Group:
    """Everything the view shows for one answer, top to bottom."""
    risk = answer.risk
    parts: list[Any] = [mission_text(risk, answer.inputs.area_mm2), verdict_text(risk),
                        Text(""), Text("Oxide wear-out over the mission", style="underline"),
                        wearout_table(risk), Text("")]
    for cell in risk.cells:
        parts += [Text("One broken oxide", style="underline"), fault_table(cell), Text("")]
    parts.append(Text("Rail ESD events", style="underline"))
    for exposure in answer.events:
        for e in range(len(exposure.events)):
            parts += [event_title(exposure, e), event_table(exposure, e), event_note(exposure, e)]
    parts.append(Text(f"{WORST_MARK} worst corner · margin: pulse breakdown voltage / |peak oxide "
                      "voltage|, > 1 survives · FIT: failures per 1e9 device-hours over the life",
                      style="dim"))
    return Group(*parts)


# --- the screen -------------------------------------------------------------------------------

class FillRiskScreen(TaskScreen):
    """The question on top (six numbers), the answer below; Enter or ctrl+r recomputes."""

    TASK_TITLE = "Fill risk"
    BINDINGS = [
        Binding("ctrl+r", "compute", "Compute"),
        # priority: an input (which holds the focus while typing) would take them otherwise
        Binding("pagedown", "scroll_answer(1)", "Scroll the answer down", show=False,
                priority=True),
        Binding("pageup", "scroll_answer(-1)", "Scroll the answer up", show=False, priority=True),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, name: str, deck: str | None, cell: CellResult | None = None) -> None:
        super().__init__()
        self.cell_name = name
        self.deck_name = deck
        self.cell: CellResult | None = cell
        self.deck: Any = None
        self.spec: Any = None
        self.answer: FillAnswer | None = None
        self.problems: list[Problem] = []
        self.computing = False
        self._serial = 0
        self._worker: Worker[None] | None = None

    def compose(self) -> ComposeResult:
        yield TaskBar(self.app.current_mode, f"fill risk {self.cell_name}", id="taskbar")
        yield Static(Text(f"{self.cell_name} · loading its deck and cell definition…"),
                     id="fr-summary")
        with Vertical(id="fr-form"):
            for row in (FIELDS[:3], FIELDS[3:]):
                with Horizontal(classes="fr-row"):
                    for f in row:
                        yield Label(f"{f.label} {f.unit}", classes="picker-label fr-label")
                        yield Input(type="text", compact=True, id=f"fr-{f.key}",
                                    classes="fr-input")
        yield Static("", id="fr-problems")
        with Horizontal(id="fr-statusbar"):
            yield LoadingIndicator(id="fr-spinner")
            yield Static("", id="fr-status")
        with VerticalScroll(id="fr-results"):
            yield Static("", id="fr-answer")
        yield Static(Text(FILL_CAUTION, style="dim"), id="fr-caution")
        yield Footer()

    def on_mount(self) -> None:
        self.TASK = self.app.current_mode
        self.query_one("#fr-spinner").display = True
        self._say("loading the deck and cell definition… (esc leaves)")
        self._prepare()

    # --- loading ------------------------------------------------------------------------
    @work(thread=True, exclusive=True, group="fill-risk-prepare")
    def _prepare(self) -> None:
        try:
            cell, deck, spec = self.lab.cell_definition(self.cell, self.cell_name, self.deck_name)
        except CelllabError as exc:
            self.post_message(QueryFailed(exc.problems, "prepare"))
            return
        self.app.call_from_thread(self._ready, cell, deck, spec)

    def _ready(self, cell: CellResult, deck: Any, spec: Any) -> None:
        self.cell, self.deck, self.spec = cell, deck, spec
        summary = Text(cell.name, style="bold")
        summary.append(f"  {cell.topology} · {cell.oxide} oxide · {self.deck_name or '?'} · "
                       f"{format_number(cell.area_um2)} µm²/cell", style="dim")
        self.query_one("#fr-summary", Static).update(summary)
        for key, text in default_texts(deck).items():
            field = self.query_one(f"#fr-{key}", Input)
            if not field.value:
                field.value = text
        self.action_compute()

    def on_query_failed(self, message: QueryFailed) -> None:
        self.query_one("#fr-spinner").display = False
        self._say(Text(f"cannot assess {self.cell_name}: it needs its deck and cell definition",
                       style="red"))
        self._show_problems(message.problems)

    # --- computing ----------------------------------------------------------------------
    def texts(self) -> dict[str, str]:
        return {f.key: self.query_one(f"#fr-{f.key}", Input).value for f in FIELDS}

    def _mark_invalid(self, keys: set[str]) -> None:
        for f in FIELDS:
            self.query_one(f"#fr-{f.key}", Input).set_class(f.key in keys, "-invalid-field")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_compute()

    @on(Input.Changed)
    def _typed(self, event: Input.Changed) -> None:
        # a corrected field loses its mark as soon as it reads right
        if self.deck is None or not event.input.has_class("-invalid-field"):
            return
        key = (event.input.id or "").removeprefix("fr-")
        _, problems = read_inputs({**self.texts(), key: event.value}, self.deck)
        if key not in problem_fields(problems):
            event.input.remove_class("-invalid-field")

    def action_compute(self) -> None:
        if self.deck is None or self.spec is None:
            self._say("still loading the deck and cell definition (esc leaves)")
            return
        inputs, problems = read_inputs(self.texts(), self.deck)
        self._show_problems(problems)
        self._mark_invalid(problem_fields(problems))
        if inputs is None:
            self._clear_answer()
            self._say(Text(f"{len(problems)} value(s) to correct; nothing computed",
                           style="red"))
            return
        if self._worker is not None and self._worker.is_running:
            self._worker.cancel()
        self._serial += 1
        self.computing = True
        self.query_one("#fr-spinner").display = True
        self._say("oxide wear-out over the mission… (esc leaves)")
        self._worker = self._compute(self._serial, inputs)

    @work(thread=True, exclusive=True, group="fill-risk")
    def _compute(self, serial: int, inputs: FillInputs) -> None:
        worker = get_current_worker()
        started = time.perf_counter()
        events = esd_events_for(inputs)
        steps = 1 + len(events)
        # the stored deck lists its corners in its own order: show them as the cell view does
        corners = cell_corners(self.cell, self.deck)
        try:
            risk = wearout_answer(self.deck, self.spec, inputs, corners)
            exposures = []
            for k, event in enumerate(events):
                if worker.is_cancelled:
                    return
                self.post_message(FillRiskProgressed(
                    serial, k + 2, steps, f"{event.label} transient at "
                    f"{len(risk.corners)} corners"))
                exposures.append(event_answer(self.deck, self.spec, inputs, event, corners))
        except CelllabError as exc:
            if not worker.is_cancelled:
                self.post_message(FillRiskFailed(serial, list(exc.problems)))
            return
        except (ValueError, ArithmeticError) as exc:  # a value the models refuse: say which
            if not worker.is_cancelled:
                self.post_message(FillRiskFailed(serial, [Problem(SOURCE, "", str(exc),
                                                                  has_value=False)]))
            return
        if not worker.is_cancelled:
            self.post_message(FillRiskComputed(serial, FillAnswer(inputs, risk, tuple(exposures)),
                                               time.perf_counter() - started))

    def on_fill_risk_progressed(self, message: FillRiskProgressed) -> None:
        if message.serial == self._serial:
            self._say(f"step {message.step} of {message.steps}: {message.stage}… (esc leaves)")

    def on_fill_risk_failed(self, message: FillRiskFailed) -> None:
        if message.serial != self._serial:
            return
        self.computing = False
        self.query_one("#fr-spinner").display = False
        self._show_problems(message.problems)
        self._clear_answer()
        self._say(Text("not computed", style="red"))

    def on_fill_risk_computed(self, message: FillRiskComputed) -> None:
        if message.serial != self._serial:
            return
        self.computing = False
        self.answer = message.answer
        self.query_one("#fr-spinner").display = False
        self.query_one("#fr-answer", Static).update(answer_view(message.answer))
        self._say(Text(f"computed in {message.seconds:.1f} s · not stored · edit a value, "
                       "enter recomputes", style="green"))

    # --- the rest -----------------------------------------------------------------------
    def _show_problems(self, problems: Sequence[Problem]) -> None:
        self.problems = list(problems)
        box = self.query_one("#fr-problems", Static)
        box.set_class(bool(problems), "-problems")
        box.update(problems_line(problems))

    def _clear_answer(self) -> None:
        """No answer on screen that does not belong to the values in the form."""
        self.answer = None
        self.query_one("#fr-answer", Static).update("")

    def _say(self, text: str | Text) -> None:
        self.query_one("#fr-status", Static).update(text)

    def action_scroll_answer(self, step: int) -> None:
        scroll = self.query_one("#fr-results", VerticalScroll)
        if step > 0:
            scroll.scroll_page_down()
        else:
            scroll.scroll_page_up()

    def action_back(self) -> None:
        if self._worker is not None and self._worker.is_running:
            self._worker.cancel()
        self.app.pop_screen()

    def export_context(self) -> Any:
        from celllab.tui.screens.export import ExportContext

        return ExportContext(cell=self.cell, deck=self.deck_name)
