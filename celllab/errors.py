"""Exceptions the library raises for bad input, each carrying a list of located problems.

A ``Problem`` says where (file, line, dotted field path), what was given and what is allowed;
``did_you_mean`` adds the closest allowed names to a message.
The CLI prints one line per problem and exits 2; the TUI shows them and keeps going.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

#: Longest value quoted in a message (a 10 MB name is cut, not printed).
MAX_SHOWN_VALUE = 200


def _shown(value: Any) -> str:
    text = repr(value)
    if len(text) <= MAX_SHOWN_VALUE:
        return text
    return f"{text[: MAX_SHOWN_VALUE - 3]}... ({len(text)} characters)"


def close_names(value: object, allowed: Iterable[str], n: int = 1, cutoff: float = 0.6,
                fold_case: bool = False) -> list[str]:
    """The allowed names closest to a mistyped ``value`` (difflib ratio >= ``cutoff``), best first.

    ``fold_case``: when nothing is close as typed, compare lower-cased (a case slip).
    """
    names = list(allowed)
    close = difflib.get_close_matches(str(value), names, n=n, cutoff=cutoff)
    if not close and fold_case:
        lowered = difflib.get_close_matches(str(value).lower(), [a.lower() for a in names], n=n, cutoff=cutoff)
        close = [a for a in names if a.lower() in lowered]
    return close


def did_you_mean(value: object, allowed: Iterable[str], n: int = 1, cutoff: float = 0.6,
                 fold_case: bool = False) -> str:
    """``"; did you mean 'a' or 'b'?"`` for the closest allowed names, or ``""`` when none is close."""
    close = close_names(value, allowed, n, cutoff, fold_case)
    return f"; did you mean {' or '.join(repr(c) for c in close)}?" if close else ""


def allowed_hint(value: object, allowed: Iterable[str]) -> str:
    """``did_you_mean`` when a name is close, else ``"; allowed: a, b, c"``."""
    names = list(allowed)
    return did_you_mean(value, names) or "; allowed: " + ", ".join(names)


@dataclass(frozen=True)
class Problem:
    """One located input problem."""

    file: str
    field: str
    message: str
    value: Any = None
    line: int | None = None
    has_value: bool = True

    def __str__(self) -> str:
        where = self.file or "<input>"
        if self.line is not None:
            where += f":{self.line}"
        if self.field and self.has_value:
            return f"{where}: {self.field} = {_shown(self.value)} -> {self.message}"
        if self.field:
            return f"{where}: {self.field} -> {self.message}"
        return f"{where}: {self.message}"


@dataclass
class CelllabError(Exception):
    """Base class: one or more problems found in one input."""

    problems: list[Problem] = field(default_factory=list)

    def __post_init__(self) -> None:
        super().__init__(str(self))

    def __str__(self) -> str:
        return "\n".join(str(p) for p in self.problems)

    @classmethod
    def single(cls, file: str, fieldpath: str, message: str, value: Any = None,
               line: int | None = None, has_value: bool = True) -> "CelllabError":
        return cls([Problem(file, fieldpath, message, value, line, has_value)])


class DeckError(CelllabError):
    """A process deck could not be read or failed validation."""


class CellError(CelllabError):
    """A cell definition file could not be read or failed validation."""


class CatalogError(CelllabError):
    """The catalog could not be opened, read or written."""


class FilterError(CelllabError):
    """A filter or ranking expression is malformed or names an unknown metric."""


class PlanError(CelllabError):
    """A block fill plan is inconsistent."""


class OutputError(CelllabError):
    """An output file could not be written (it exists, is a link, pipe or read-only file, or
    the OS refused the folder)."""


class ExportError(CelllabError):
    """A selection cannot be written in the requested format (unknown corner, no cells, ...)."""
