"""The top line: the app's tasks (clickable, with their number keys) and where data comes from."""

from __future__ import annotations

from textual.content import Content
from textual.reactive import reactive
from textual.widgets import Static

#: (mode, number key, label)
TASKS: tuple[tuple[str, str, str], ...] = (
    ("catalog", "1", "Catalog"),
    ("ranking", "2", "Ranking"),
    ("decks", "3", "Decks"),
    ("plan", "4", "Plan"),
)


class TaskBar(Static):
    """``celllab │ 1 Catalog  2 Ranking  3 Decks  4 Plan │ <context>``; the active task is highlighted."""

    DEFAULT_CSS = """
    TaskBar { height: 1; width: 1fr; }
    """

    active: reactive[str] = reactive("catalog")
    context: reactive[str] = reactive("")

    def __init__(self, active: str, context: str = "", *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.set_reactive(TaskBar.active, active)
        self.set_reactive(TaskBar.context, context)

    def on_mount(self) -> None:
        self._redraw()

    def watch_active(self) -> None:
        self._redraw()

    def watch_context(self) -> None:
        self._redraw()

    def _redraw(self) -> None:
        parts = [Content.from_markup("[b]celllab[/b] │ ")]
        for mode, key, label in TASKS:
            style = "reverse b" if mode == self.active else "underline"
            parts.append(Content.from_markup(
                f"[@click=app.switch_mode('{mode}')][{style}] {key} {label} [/][/] "))
        if self.context:
            parts.append(Content("│ " + self.context))
        self.update(Content("").join(parts))
