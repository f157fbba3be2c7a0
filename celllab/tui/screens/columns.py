"""Checklist dialog: which catalog columns the table shows."""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Label, SelectionList
from textual.widgets.selection_list import Selection

from celllab.tui.widgets.check_list import CheckList
from celllab.tui.widgets.values import column_description, column_unit


class ColumnPicker(ModalScreen[tuple[str, ...] | None]):
    """Returns the chosen columns (kept ones in place, new ones after), or None when cancelled."""

    BINDINGS = [
        Binding("escape", "dismiss(None)", "Cancel", show=False),
        Binding("ctrl+s,a", "apply", "Apply", show=False),
    ]

    def __init__(self, available: Sequence[str], shown: Sequence[str]) -> None:
        super().__init__()
        self._available = list(available)
        self._order = list(shown)
        self._shown = set(shown)

    def compose(self) -> ComposeResult:
        with Vertical(id="columns-box", classes="dialog") as box:
            box.border_title = "Columns shown"
            box.border_subtitle = "space toggles · a applies · esc cancels"
            selections = []
            for column in self._available:
                unit = column_unit(column)
                unit_text = f"[{unit}]" if unit and unit != "bool" else ""
                label = Text(f"{column:<24} {unit_text:<10} {column_description(column)}",
                             no_wrap=True, overflow="ellipsis")
                selections.append(Selection(label, column, column in self._shown))
            yield CheckList(*selections, id="columns-list")
            yield Label("", id="columns-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Apply (a)", id="columns-apply", variant="primary")
                yield Button("Cancel (esc)", id="columns-cancel")

    def action_apply(self) -> None:
        chosen = set(self.query_one(SelectionList).selected)
        if not chosen:
            self.query_one("#columns-error", Label).update("pick at least one column")
            return
        if "name" not in chosen:
            chosen.add("name")  # rows must stay identifiable
        kept = [c for c in self._order if c in chosen]  # shown columns keep their places
        self.dismiss(tuple(kept + [c for c in self._available if c in chosen and c not in kept]))

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "columns-apply":
            self.action_apply()
        else:
            self.dismiss(None)
