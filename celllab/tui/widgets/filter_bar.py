"""A one-line filter input: checks its text when typing pauses (or on Enter), error under it."""

from __future__ import annotations

from collections.abc import Callable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.reactive import reactive
from textual.timer import Timer
from textual.widget import Widget
from textual.widgets import Input, Label, Static

from celllab.tui.messages import FilterChanged

#: Returns None when the text is acceptable, else the message to show.
FilterCheck = Callable[[str], str | None]


class FilterBar(Widget):
    """Filter text in the catalog's filter language; posts ``FilterChanged`` when it parses.

    ``pause_s``: how long typing must pause before the text is checked and posted.
    """

    DEFAULT_CSS = """
    FilterBar { height: auto; }
    FilterBar > Horizontal { height: 1; }
    FilterBar .filter-prompt { width: auto; padding: 0 1 0 0; }
    FilterBar Input { width: 1fr; height: 1; }  /* fixed size: a keystroke needs no relayout */
    FilterBar > .filter-error { display: none; height: auto; max-height: 4; padding: 0 0 0 2; }
    FilterBar.-error > .filter-error { display: block; }
    """

    BINDINGS = [
        # the filter language has no "/": pressed again it selects the text, so typing replaces it
        Binding("slash", "select_text", "Select filter", show=False, priority=True),
    ]

    error: reactive[str] = reactive("")

    def __init__(self, check: FilterCheck | None = None, *, prompt: str = "where",
                 placeholder: str = "", value: str = "", pause_s: float = 0.15,
                 id: str | None = None) -> None:
        super().__init__(id=id)
        self._check = check
        self._prompt = prompt
        self._placeholder = placeholder
        self._value = value
        self.pause_s = pause_s
        self._pending: Timer | None = None

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield Label(self._prompt, classes="filter-prompt")
            yield Input(self._value, placeholder=self._placeholder, compact=True,
                        classes="filter-input")
        yield Static("", classes="filter-error", markup=False)

    def action_select_text(self) -> None:
        self.input.focus()
        self.input.select_all()

    @property
    def input(self) -> Input:
        return self.query_one(Input)

    @property
    def text(self) -> str:
        return self.input.value

    def watch_error(self, error: str) -> None:
        self.set_class(bool(error), "-error")
        self.query_one(".filter-error", Static).update("✗ " + error if error else "")

    def _checked(self, text: str) -> bool:
        message = self._check(text) if self._check else None
        self.error = message or ""
        return message is None

    def _cancel_pending(self) -> None:
        if self._pending is not None:
            self._pending.stop()
            self._pending = None

    def on_input_changed(self, event: Input.Changed) -> None:
        # Checked once typing pauses: half-typed text is not an error worth flashing.
        event.stop()
        self._cancel_pending()
        text = event.value

        def settled() -> None:
            self._pending = None
            if self._checked(text):
                self.post_message(FilterChanged(text))

        self._pending = self.set_timer(self.pause_s, settled)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._cancel_pending()
        if self._checked(event.value):
            self.post_message(FilterChanged(event.value, submitted=True))
