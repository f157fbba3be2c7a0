"""Located input problems: file:line, field, the given value and what is wrong with it."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from rich.text import Text
from textual.reactive import reactive
from textual.widgets import Static

from celllab.errors import Problem


def problems_text(problems: Sequence[Problem]) -> Text:
    """Two lines per problem: ``file:line  field = given``, then what is wrong (any width)."""
    out = Text()
    for index, p in enumerate(problems):
        if index:
            out.append("\n")
        where = Path(p.file).name if p.file else "<input>"
        if p.line is not None:
            where += f":{p.line}"
        out.append("✗ ", style="red")
        out.append(where, style="bold")
        if p.field:
            out.append("  " + p.field, style="cyan")
            if p.has_value:
                out.append(f" = {p.value!r}")
        out.append("\n")
        for line in p.message.splitlines() or [""]:
            out.append(f"    {line}\n", style="red")
    return out


class ProblemsView(Static):
    """Shows ``problems``; empty list: the ``ok_text``."""

    DEFAULT_CSS = """
    ProblemsView { height: auto; }
    """

    problems: reactive[tuple[Problem, ...]] = reactive(tuple)

    def __init__(self, ok_text: str = "", *, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__("", id=id, classes=classes)
        self._ok_text = ok_text

    def on_mount(self) -> None:
        self.watch_problems(self.problems)

    def watch_problems(self, problems: tuple[Problem, ...]) -> None:
        self.set_class(bool(problems), "-problems")
        if problems:
            self.update(problems_text(problems))
        else:
            self.update(Text(self._ok_text, style="green") if self._ok_text else "")
