"""The what-if form: one input per cell geometry field, and deck parameter changes."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.reactive import reactive
from textual.suggester import SuggestFromList
from textual.widgets import Input, Label, Static

from celllab.tui.messages import WhatIfEdited


def value_to_text(value: Any) -> str:
    """How a field value reads in an input (None: empty, meaning derived/automatic)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


class WhatIfForm(VerticalScroll):
    """Posts ``WhatIfEdited`` on every change (``immediate`` on Enter)."""

    DEFAULT_CSS = """
    WhatIfForm { height: 1fr; }
    WhatIfForm .form-row { height: 1; }
    WhatIfForm .form-label { width: 20; }
    WhatIfForm .form-row Input { width: 1fr; height: 1; }
    WhatIfForm .form-section { text-style: bold; margin: 1 0 0 0; }
    WhatIfForm #deck-path, WhatIfForm #deck-value { width: 1fr; height: 1; }
    WhatIfForm #deck-path-help, WhatIfForm #deck-pinned { height: auto; color: $foreground-muted; }
    """

    invalid: reactive[frozenset[str]] = reactive(frozenset)

    def __init__(self, geometry: Mapping[str, Any], field_help: Mapping[str, str],
                 deck_values: Mapping[str, float], describe: Callable[[str], str],
                 *, kinds: Mapping[str, str] | None = None,
                 placeholders: Mapping[str, str] | None = None, id: str | None = None) -> None:
        super().__init__(id=id)
        #: Input type per geometry field ("integer", "number" or "text"): letters stay out of
        #: numeric fields
        self._kinds = dict(kinds or {})
        self._placeholders = dict(placeholders or {})
        self._geometry = dict(geometry)
        self._field_help = dict(field_help)
        self._deck_values = dict(deck_values)
        self._describe = describe
        self.pinned: dict[str, str] = {}

    def compose(self) -> ComposeResult:
        yield Label("Geometry · empty = default", classes="form-section")
        for name, value in self._geometry.items():
            with Horizontal(classes="form-row"):
                yield Label(name, classes="form-label")
                inp = Input(value_to_text(value), placeholder=self._placeholders.get(name, "auto"),
                            compact=True, id=f"geo-{name}",
                            type=self._kinds.get(name, "text"))  # type: ignore[arg-type]
                inp.tooltip = self._field_help.get(name, "")
                yield inp
        yield Label("Deck parameter", classes="form-section")
        yield Input(placeholder="path, e.g. oxides.core.t_ox_nm", compact=True, id="deck-path",
                    suggester=SuggestFromList(sorted(self._deck_values), case_sensitive=True))
        yield Static("", id="deck-path-help", markup=False)
        yield Input(placeholder="new value (enter keeps it)", compact=True, id="deck-value",
                    type="number")
        yield Static("", id="deck-pinned", markup=False)

    # --- reading the form ---------------------------------------------------------------
    def geometry_text(self) -> dict[str, str]:
        return {name: self.query_one(f"#geo-{name}", Input).value for name in self._geometry}

    def deck_text(self) -> dict[str, str]:
        changes = dict(self.pinned)
        path = self.query_one("#deck-path", Input).value.strip()
        value = self.query_one("#deck-value", Input).value.strip()
        if path and value:
            changes[path] = value
        return changes

    def set_field(self, name: str, text: str) -> None:
        """Put text into a geometry input (as if typed)."""
        self.query_one(f"#geo-{name}", Input).value = text

    def reset(self) -> None:
        """Every input back to the cell's own values; deck changes dropped."""
        self.pinned.clear()
        for name, value in self._geometry.items():
            self.query_one(f"#geo-{name}", Input).value = value_to_text(value)
        self.query_one("#deck-path", Input).value = ""
        self.query_one("#deck-value", Input).value = ""
        self._show_pinned()

    def watch_invalid(self, invalid: frozenset[str]) -> None:
        for name in self._geometry:
            self.query_one(f"#geo-{name}", Input).set_class(name in invalid, "-invalid-field")
        path = self.query_one("#deck-path", Input).value.strip()
        self.query_one("#deck-value", Input).set_class(path in invalid, "-invalid-field")

    # --- events -------------------------------------------------------------------------
    def _post(self, immediate: bool) -> None:
        self.post_message(WhatIfEdited(self.geometry_text(), self.deck_text(), immediate))

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        if event.input.id == "deck-path":
            path = event.value.strip()
            help_text = ""
            if path in self._deck_values:
                help_text = f"now {self._deck_values[path]:g} · {self._describe(path)}"
            elif path:
                help_text = "not a numeric deck parameter (→ accepts a suggestion)"
            self.query_one("#deck-path-help", Static).update(help_text)
        self._post(immediate=False)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if event.input.id == "deck-path":
            self.query_one("#deck-value", Input).focus()
            return
        if event.input.id == "deck-value":
            path = self.query_one("#deck-path", Input).value.strip()
            value = event.value.strip()
            if path and value:
                self.pinned[path] = value
                with self.prevent(Input.Changed):
                    self.query_one("#deck-path", Input).value = ""
                    self.query_one("#deck-value", Input).value = ""
                self.query_one("#deck-path-help", Static).update("")
                self._show_pinned()
                self.query_one("#deck-path", Input).focus()
        self._post(immediate=True)

    def _show_pinned(self) -> None:
        lines = [f"{path} = {value}  (was {self._deck_values[path]:g})"
                 if path in self._deck_values else f"{path} = {value}  (not a deck parameter)"
                 for path, value in self.pinned.items()]
        self.query_one("#deck-pinned", Static).update("\n".join(lines))

    def unpin_all(self) -> None:
        self.pinned.clear()
        self._show_pinned()


def geometry_help(spec_fields: Mapping[str, Any], names: Sequence[str]) -> dict[str, str]:
    """Field descriptions (pydantic ``Field(description=...)``) for the tooltips."""
    out = {}
    for name in names:
        info = spec_fields.get(name)
        out[name] = getattr(info, "description", "") or ""
    return out
