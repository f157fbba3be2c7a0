"""Name prompt for saving a what-if as a new catalog variant."""

from __future__ import annotations

import re
from dataclasses import dataclass

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Static

#: Same rule as a cell variant name in a cell file; the model validates again on save.
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_\-\.]{0,79}$")
_DECK_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_\-]{0,39}$")


@dataclass(frozen=True)
class SaveChoice:
    """Names for the new variant (and for the changed deck, when deck parameters changed)."""

    cell_name: str
    deck_name: str | None = None


class SaveVariantDialog(ModalScreen[SaveChoice | None]):
    """Asks for the variant name (and a deck name if the deck was changed)."""

    BINDINGS = [Binding("escape", "dismiss(None)", "Cancel", show=False)]

    def __init__(self, cell_name: str, deck_name: str | None, taken: set[str] | None = None,
                 summary: str = "") -> None:
        super().__init__()
        self._cell_name = cell_name
        self._deck_name = deck_name
        self._taken = taken or set()
        self._summary = summary

    def compose(self) -> ComposeResult:
        with Vertical(id="save-box", classes="dialog") as box:
            box.border_title = "Save what-if as a new variant"
            box.border_subtitle = "enter saves · esc cancels"
            if self._summary:
                yield Static(self._summary, id="save-summary", markup=False)
            yield Label("variant name")
            yield Input(self._cell_name, id="save-cell-name")
            if self._deck_name is not None:
                yield Label("deck parameters changed: name of the new deck")
                yield Input(self._deck_name, id="save-deck-name")
            yield Label("", id="save-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Save (enter)", id="save-ok", variant="primary")
                yield Button("Cancel (esc)", id="save-cancel")

    def on_mount(self) -> None:
        self.query_one("#save-cell-name", Input).focus()

    def _problem(self, cell: str, deck: str | None) -> str:
        if not _NAME.match(cell):
            return "variant name: start with a letter; letters, digits, _ - . only (max 80)"
        if cell in self._taken:
            return f"variant name: {cell!r} is already in the catalog for this deck"
        if deck is not None and not _DECK_NAME.match(deck):
            return "deck name: start with a letter; letters, digits, _ or - only (max 40)"
        return ""

    def _try_save(self) -> None:
        cell = self.query_one("#save-cell-name", Input).value.strip()
        deck = (self.query_one("#save-deck-name", Input).value.strip()
                if self._deck_name is not None else None)
        problem = self._problem(cell, deck)
        if problem:
            self.query_one("#save-error", Label).update("✗ " + problem)
            return
        self.dismiss(SaveChoice(cell, deck))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._try_save()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "save-ok":
            self._try_save()
        else:
            self.dismiss(None)
