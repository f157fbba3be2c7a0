"""The key-help overlay: every key active on the screen underneath, grouped by where it works."""

from __future__ import annotations

from collections.abc import Iterable

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import ActiveBinding, Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

#: Keys every list and table understands (shown once, at the end).
MOVING_AROUND: tuple[tuple[str, str], ...] = (
    ("↑ ↓ PgUp PgDn", "move in a table or list"),
    ("tab / shift+tab", "next / previous control"),
    ("enter", "open the highlighted cell, apply a filter, pick an option"),
    ("escape", "back / close a dialog"),
    ("mouse", "click rows, column headers (sort), tabs and buttons"),
)


#: Friendly names of our widgets that carry their own keys.
_WIDGET_NAMES = {"CatalogTable": "In the table", "WhatIfForm": "In the form",
                 "FilterBar": "In the filter line"}


def _group_title(binding: ActiveBinding) -> str:
    from textual.app import App
    from textual.screen import Screen

    node = binding.node
    if isinstance(node, App):
        return "Everywhere"
    if isinstance(node, Screen):
        return "On this screen"
    return _WIDGET_NAMES.get(type(node).__name__, f"In the {type(node).__name__}")


def _own_actions(node: object) -> set[str]:
    """Actions bound by celllab's own classes (Textual's built-in keys are described once)."""
    actions: set[str] = set()
    for cls in type(node).__mro__:
        if not cls.__module__.startswith("celllab"):
            continue
        for b in cls.__dict__.get("BINDINGS", []):
            actions.add(b.action if isinstance(b, Binding) else b[1])
    return actions


class KeysOverlay(ModalScreen[None]):
    """Lists the active keys of the screen underneath; any of escape, ?, F1 closes it."""

    BINDINGS = [
        Binding("escape,question_mark,f1,q", "dismiss", "Close", show=False),
    ]

    def __init__(self, title: str, bindings: Iterable[tuple[str, str, str]]) -> None:
        super().__init__()
        self._title = title
        self._entries = list(bindings)

    @classmethod
    def for_screen(cls, title: str, active: dict[str, ActiveBinding],
                   key_display: object) -> "KeysOverlay":
        """Build from ``Screen.active_bindings`` (key -> ActiveBinding)."""
        seen: dict[tuple[str, str], tuple[str, str, str]] = {}
        own: dict[int, set[str]] = {}
        for active_binding in active.values():
            b: Binding = active_binding.binding
            node = active_binding.node
            if id(node) not in own:
                own[id(node)] = _own_actions(node)
            if not b.description or b.system or b.action not in own[id(node)]:
                continue
            keys = key_display(b) if callable(key_display) else b.key  # type: ignore[operator]
            group = _group_title(active_binding)
            entry = seen.get((group, b.description))
            if entry is None:
                seen[(group, b.description)] = (group, keys, b.description)
            elif keys not in entry[1]:
                seen[(group, b.description)] = (group, f"{entry[1]} {keys}", b.description)
        return cls(title, seen.values())

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="keys-box", classes="dialog") as box:
            box.border_title = f"Keys · {self._title}"
            box.border_subtitle = "escape closes"
            yield Static(self._table(), id="keys-table")

    def _table(self) -> Table:
        table = Table(box=None, show_header=False, expand=True, padding=(0, 1))
        table.add_column("key", style="bold", no_wrap=True, min_width=12)
        table.add_column("does")
        order = ["On this screen"]
        groups = sorted({g for g, _, _ in self._entries},
                        key=lambda g: (g not in order, g == "Everywhere", g))
        for group in groups:
            table.add_row(Text(group, style="underline"), "")
            for g, keys, desc in self._entries:
                if g == group:
                    table.add_row(keys, desc)
            table.add_row("", "")
        table.add_row(Text("Moving around", style="underline"), "")
        for keys, desc in MOVING_AROUND:
            table.add_row(keys, desc)
        return table

    def on_click(self) -> None:
        self.dismiss(None)
