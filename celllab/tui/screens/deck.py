"""Deck view: a process deck's parameters with units and its corners; a bad deck's problems."""

from __future__ import annotations

import re
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widgets import DataTable, Footer, OptionList, Static, TabbedContent, TabPane
from textual.widgets.option_list import Option

from celllab.columns import CORNER_COLUMNS
from celllab.display import count_text
from celllab.errors import CelllabError, Problem
from celllab.tui.messages import CatalogDecksLoaded
from celllab.tui.screens.base import TaskScreen
from celllab.tui.widgets.problems_view import ProblemsView
from celllab.tui.widgets.task_bar import TaskBar
from celllab.units import pretty_unit, unit_from_name

_PART = re.compile(r"\.|\[|\]")


def _split(path: str) -> list[str]:
    return [p for p in _PART.split(path) if p]


#: widest change line in the Corners tab: what is left of 80 columns beside the deck list
CHANGE_WIDTH = 40
_INDEXED = re.compile(r"^(?P<head>[^\[]*)\[(?P<index>\d+)\](?P<tail>.*)$")


def corner_changes(corner: dict[str, Any]) -> list[str]:
    """A corner's ``set`` and ``scale`` changes, one per line; the same change to several
    entries of a list reads once with their indices (``metals[0–4].thickness_nm × 1.06``)."""
    grouped: dict[tuple[str, str, str, str], list[int]] = {}
    for op, table in (("=", corner.get("set") or {}), ("×", corner.get("scale") or {})):
        for path, value in table.items():
            match = _INDEXED.match(path)
            head, index, tail = ((match["head"], int(match["index"]), match["tail"]) if match
                                 else (path, -1, ""))
            grouped.setdefault((head, tail, op, f"{value:g}"), []).append(index)
    lines = []
    for (head, tail, op, value), indices in grouped.items():
        if indices == [-1]:
            lines.append(f"{head} {op} {value}")
        else:
            lines.append(f"{head}[{_index_ranges(sorted(indices))}]{tail} {op} {value}")
    return lines


def _fold(line: str, width: int = CHANGE_WIDTH) -> list[str]:
    """A change longer than ``width`` broken after a dot, the rest indented."""
    pieces = []
    while len(line) > width and "." in line[1:width]:
        cut = line.rindex(".", 1, width) + 1
        pieces.append(line[:cut])
        line = "  " + line[cut:]
    return pieces + [line]


def _index_ranges(indices: list[int]) -> str:
    """``[0, 1, 2, 4]`` -> ``0–2,4``."""
    runs: list[list[int]] = []
    for i in indices:
        if runs and i == runs[-1][-1] + 1:
            runs[-1].append(i)
        else:
            runs.append([i])
    return ",".join(f"{r[0]}–{r[-1]}" if len(r) > 2 else ",".join(map(str, r)) for r in runs)


def deck_value(data: Any, path: str) -> Any:
    """Value at a dotted path (``metals[0].thickness_nm``) of a dumped deck."""
    cur = data
    for part in _split(path):
        cur = cur[int(part)] if isinstance(cur, list) else cur[part]
    return cur


def _model_of(annotation: Any) -> Any:
    """The pydantic model inside an annotation (Optional, list[...], dict[..., ...])."""
    from pydantic import BaseModel

    candidates = [annotation, *typing.get_args(annotation)]
    for cand in candidates:
        if isinstance(cand, type) and issubclass(cand, BaseModel):
            return cand
        for sub in typing.get_args(cand):
            if isinstance(sub, type) and issubclass(sub, BaseModel):
                return sub
    return None


def describe_deck_path(path: str) -> str:
    """The schema description of a deck parameter ('' when unknown)."""
    try:
        from celllab.deck import Deck
    except ImportError:
        return ""
    model: Any = Deck
    info = None
    for part in _split(path):
        if part.isdigit() or model is None:
            continue
        fields = getattr(model, "model_fields", {})
        if part in fields:
            info = fields[part]
            model = _model_of(info.annotation)
        else:  # a dict key (oxide flavour, corner name): stay on the value model
            continue
    return (getattr(info, "description", "") or "") if info is not None else ""


def unit_of(path: str, description: str = "") -> str:
    """The parameter's unit: the tail of its description when it names one, else the suffix."""
    if description and ", " in description:
        tail = description.rsplit(", ", 1)[1].strip()
        if tail == "unitless" or (0 < len(tail) <= 14 and " " not in tail.replace("(V s)", "(Vs)")):
            return tail
    return unit_from_name(_split(path)[-1]) if path else ""


def flatten(data: Any, prefix: str = "") -> list[tuple[str, Any]]:
    """(dotted path, leaf value) of every parameter, corners excluded."""
    out: list[tuple[str, Any]] = []
    if isinstance(data, dict):
        for key, value in data.items():
            if not prefix and key == "corners":
                continue
            out.extend(flatten(value, f"{prefix}.{key}" if prefix else str(key)))
    elif isinstance(data, list):
        for index, value in enumerate(data):
            out.extend(flatten(value, f"{prefix}[{index}]"))
    else:
        out.append((prefix, data))
    return out


@dataclass
class DeckEntry:
    """One line of the deck list: a loaded deck, a catalog deck or a deck that failed."""

    key: str
    label: str
    params: dict[str, Any] | None = None
    problems: list[Problem] = field(default_factory=list)
    source: str = ""


class DeckScreen(TaskScreen):
    """Decks on the left; parameters, corners and problems of the highlighted one."""

    TASK = "decks"
    TASK_TITLE = "Decks"
    BINDINGS = [
        Binding("right_square_bracket", "tab(1)", "Next tab"),
        Binding("left_square_bracket", "tab(-1)", "Prev tab"),
        Binding("slash", "focus_params", "Parameters", show=False),
    ]
    TABS = ("deck-params-tab", "deck-corners-tab", "deck-problems-tab")

    def __init__(self) -> None:
        super().__init__()
        self.entries: dict[str, DeckEntry] = {}
        self.shown: str | None = None

    def compose(self) -> ComposeResult:
        yield TaskBar("decks", id="taskbar")
        with Horizontal(id="deck-body"):
            with Vertical(id="deck-left"):
                yield Static("Decks", classes="section-title")
                yield OptionList(id="deck-list")
            with Vertical(id="deck-right"):
                yield Static("", id="deck-title")
                with TabbedContent(id="deck-tabs"):
                    with TabPane("Parameters", id="deck-params-tab"):
                        yield DataTable(id="deck-params", cursor_type="row", zebra_stripes=True)
                    with TabPane("Corners", id="deck-corners-tab"):
                        yield DataTable(id="deck-corners", cursor_type="row")
                    with TabPane("Problems", id="deck-problems-tab"):
                        yield ProblemsView("no problems: the deck validated", id="deck-problems")
        yield Footer()

    def on_mount(self) -> None:
        for failure in self.lab.deck_failures:
            key = f"bad:{failure.path}"
            self.entries[key] = DeckEntry(key, f"✗ {Path(failure.path).name}", None,
                                          list(failure.problems), failure.path)
        for name, deck in self.lab.decks.items():
            key = f"file:{name}"
            self.entries[key] = DeckEntry(key, f"✓ {name} (file)", deck.model_dump(mode="json"),
                                          source="deck file")
        self._refresh_list()
        self.query_one("#deck-list", OptionList).focus()
        self._load_catalog_decks()

    @work(thread=True, exclusive=True, group="deck-load")
    def _load_catalog_decks(self) -> None:
        if self.lab.catalog is None:
            return
        try:
            with self.lab.using_catalog() as catalog:
                infos = [d for d in catalog.decks() if getattr(d, "current", True)]
                found = [(d, catalog.deck_params(d.name)) for d in infos]
        except CelllabError:
            return
        self.post_message(CatalogDecksLoaded(found))

    def on_catalog_decks_loaded(self, message: CatalogDecksLoaded) -> None:
        for info, params in message.found:
            if f"file:{info.name}" in self.entries:
                continue
            key = f"catalog:{info.name}"
            n_cells = getattr(info, "n_cells", None)
            label = f"✓ {info.name} ({count_text(int(n_cells), 'cell') if n_cells is not None else '?'})"
            self.entries[key] = DeckEntry(key, label, params, source="catalog")
        self._refresh_list()

    def _refresh_list(self) -> None:
        options = self.query_one("#deck-list", OptionList)
        highlighted = self.shown
        options.clear_options()
        for entry in self.entries.values():
            style = "red" if entry.problems else ""
            options.add_option(Option(Text(entry.label, style=style), id=entry.key))
        if self.entries:
            keys = list(self.entries)
            index = keys.index(highlighted) if highlighted in keys else 0
            options.highlighted = index
            self.show_entry(keys[index])
        else:
            self.query_one("#deck-title", Static).update("no decks: start with --deck FILE or a catalog")

    @on(OptionList.OptionHighlighted, "#deck-list")
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        if event.option.id:
            self.show_entry(event.option.id)

    def show_entry(self, key: str) -> None:
        """Fill the tabs from one entry of the deck list."""
        entry = self.entries[key]
        self.shown = key
        title = Text(entry.label.lstrip("✓✗ "), style="bold")
        if entry.problems:
            title.append(f"  {len(entry.problems)} problem(s): this deck did not load", style="red")
            title.append(f"\n{entry.source}", style="dim")
        elif entry.params is not None:
            invented = (entry.params.get("process") or {}).get("invented")
            title.append(f"  from {entry.source}" + ("  · invented demo data" if invented else ""),
                         style="dim")
        self.query_one("#deck-title", Static).update(title)
        self._fill_params(entry)
        self._fill_corners(entry)
        self.query_one("#deck-problems", ProblemsView).problems = tuple(entry.problems)
        tabs = self.query_one("#deck-tabs", TabbedContent)
        tabs.active = "deck-problems-tab" if entry.problems else (
            tabs.active if tabs.active != "deck-problems-tab" else "deck-params-tab")

    def _fill_params(self, entry: DeckEntry) -> None:
        table = self.query_one("#deck-params", DataTable)
        table.clear(columns=True)
        table.add_column("parameter", key="parameter")
        table.add_column(Text("value", justify="right"), key="value", width=10)
        table.add_column("unit", key="unit")
        table.add_column("meaning", key="meaning")
        if entry.params is None:
            return
        # one heading per group, its parameters under it: a nested table (oxides.core.nmos)
        # sits between two runs of its parent's leaves, so group before adding rows
        groups: dict[str, list[tuple[str, str, Any]]] = {}
        for path, value in flatten(entry.params):
            head, _, leaf = path.rpartition(".")
            groups.setdefault(head, []).append((path, leaf, value))
        for head, members in groups.items():
            if head:
                table.add_row(Text(head, style="bold"), "", "", "", key=f"group:{head}")
            for path, leaf, value in members:
                self._add_param(table, head, path, leaf, value)

    @staticmethod
    def _add_param(table: DataTable[Any], head: str, path: str, leaf: str, value: Any) -> None:
        description = describe_deck_path(path)
        shown = f"{value:g}" if isinstance(value, float) else ("–" if value is None else str(value))
        if len(shown) > 10:
            shown = shown[:9] + "…"
        text = Text(shown, justify="right" if isinstance(value, (int, float)) else "left")
        label = f"  {leaf}" if head else leaf
        table.add_row(label, text, unit_of(path, description), description, key=path)

    def _fill_corners(self, entry: DeckEntry) -> None:
        table = self.query_one("#deck-corners", DataTable)
        table.clear(columns=True)
        unit = pretty_unit(CORNER_COLUMNS["temperature_C"].unit)
        # the corner's name, temperature and supply stacked in one column leave the width to
        # its changes, one per line (an 80-column terminal shows every change whole)
        table.add_columns("corner", "changes (set =, scale ×)")
        corners = (entry.params or {}).get("corners") or {}
        for name, corner in corners.items():
            changes = [piece for line in corner_changes(corner) for piece in _fold(line)]
            head = Text(name, style="bold")
            head.append(f"\n{corner.get('temperature_C', float('nan')):g} {unit}"
                        f"\nVdd × {corner.get('supply_scale', 1.0):g}")
            table.add_row(head, "\n".join(changes) or "no changes", key=name,
                          height=max(3, len(changes)))

    def action_tab(self, step: int) -> None:
        tabs = self.query_one("#deck-tabs", TabbedContent)
        index = self.TABS.index(tabs.active) if tabs.active in self.TABS else 0
        tabs.active = self.TABS[(index + step) % len(self.TABS)]

    def action_focus_params(self) -> None:
        self.query_one("#deck-params", DataTable).focus()
