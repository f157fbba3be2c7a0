"""A short pick-one list (sort column, deck, corner, plot metric)."""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList
from textual.widgets.option_list import Option


class ChoicePicker(ModalScreen[str | None]):
    """Returns the chosen value, or None on escape."""

    BINDINGS = [Binding("escape", "dismiss(None)", "Cancel", show=False)]

    def __init__(self, title: str, choices: Sequence[tuple[str, str | Text]], current: str | None = None,
                 hint: str = "enter picks · esc cancels") -> None:
        super().__init__()
        self._title = title
        self._choices = list(choices)
        self._current = current
        self._hint = hint

    def compose(self) -> ComposeResult:
        with Vertical(id="choice-box", classes="dialog") as box:
            box.border_title = self._title
            box.border_subtitle = self._hint
            yield OptionList(*[Option(Text(label) if isinstance(label, str) else label, id=value)
                               for value, label in self._choices],
                             id="choice-list")

    def on_mount(self) -> None:
        options = self.query_one(OptionList)
        values = [v for v, _ in self._choices]
        if self._current in values:
            options.highlighted = values.index(self._current)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.dismiss(event.option.id)
