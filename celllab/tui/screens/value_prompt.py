"""A one-number prompt: a positive value in a stated unit, or empty to clear it."""

from __future__ import annotations

import math

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static


class NumberPrompt(ModalScreen[float | None]):
    """Returns the number typed (> 0), ``None`` when cleared; escape keeps the old value.

    Dismisses with ``math.nan`` on escape, so the caller can tell "cleared" from "cancelled".
    """

    BINDINGS = [Binding("escape", "cancel", "Cancel", show=False)]

    def __init__(self, title: str, question: str, unit: str, current: float | None = None) -> None:
        super().__init__()
        self._title = title
        self._question = question
        self._unit = unit
        self._current = current

    def compose(self) -> ComposeResult:
        with Vertical(id="prompt-box", classes="dialog") as box:
            box.border_title = self._title
            box.border_subtitle = "enter sets · empty clears · esc cancels"
            yield Static(self._question, markup=False)
            yield Label(f"value [{self._unit}]")
            yield Input("" if self._current is None else f"{self._current:g}", type="number",
                        id="prompt-value")
            yield Label("", id="prompt-error", classes="dialog-error")

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    def action_cancel(self) -> None:
        self.dismiss(math.nan)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        text = event.value.strip()
        if not text:
            self.dismiss(None)
            return
        try:
            value = float(text)
        except ValueError:
            value = math.nan
        if not (math.isfinite(value) and value > 0):
            self.query_one("#prompt-error", Label).update(f"✗ a number > 0 in {self._unit}, or "
                                                          "empty to clear")
            return
        self.dismiss(value)
