"""Messages that travel up the widget tree (past tense: something happened).

Widgets post these; the screen that owns them decides what to do. Worker threads post the
``*Loaded`` / ``*Computed`` / ``*Failed`` ones back to their screen with the results.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from textual.message import Message

from celllab.errors import Problem


class FilterChanged(Message):
    """The filter text changed and parses (``submitted`` when the user pressed Enter)."""

    def __init__(self, text: str, submitted: bool = False) -> None:
        super().__init__()
        self.text = text
        self.submitted = submitted


class SortRequested(Message):
    """The user asked to sort by a column (``descending`` None: the column's better direction)."""

    def __init__(self, column: str, descending: bool | None = None) -> None:
        super().__init__()
        self.column = column
        self.descending = descending


class PageRequested(Message):
    """The user asked for another page of rows, starting at ``offset``."""

    def __init__(self, offset: int) -> None:
        super().__init__()
        self.offset = offset


class CellChosen(Message):
    """A cell row was chosen (Enter or double click) to be opened."""

    def __init__(self, name: str, deck: str | None) -> None:
        super().__init__()
        self.name = name
        self.deck = deck


@dataclass(frozen=True)
class PageQuery:
    """Everything that defines one page of the catalog table."""

    deck: str | None
    corner: str
    where: str
    order_by: str
    descending: bool | None
    offset: int
    limit: int
    want_count: bool = True


class PageLoaded(Message):
    """A worker fetched one page (and the total row count when the query changed)."""

    def __init__(self, query: PageQuery, rows: list[dict[str, Any]], total: int | None) -> None:
        super().__init__()
        self.query = query
        self.rows = rows
        self.total = total


class PagePrefetched(Message):
    """A worker fetched the page after the one on screen, ahead of the user asking for it."""

    def __init__(self, query: PageQuery, rows: list[dict[str, Any]]) -> None:
        super().__init__()
        self.query = query
        self.rows = rows


class RowsCounted(Message):
    """A worker counted the rows matching (deck, corner, filter)."""

    def __init__(self, key: tuple[str | None, str, str], total: int) -> None:
        super().__init__()
        self.key = key
        self.total = total


class QueryFailed(Message):
    """A worker's catalog query failed with located problems (bad filter, unknown column)."""

    def __init__(self, problems: list[Problem], kind: str = "filter") -> None:
        super().__init__()
        self.problems = problems
        self.kind = kind


class DecksLoaded(Message):
    """A worker read the catalog's current decks and their corner names."""

    def __init__(self, decks: list[str], corners: dict[str, list[str]],
                 sizes: dict[str, int] | None = None) -> None:
        super().__init__()
        self.decks = decks
        self.corners = corners
        self.sizes = sizes or {}


class CatalogDecksLoaded(Message):
    """A worker read the catalog's decks with their full parameters: (DeckInfo, params)."""

    def __init__(self, found: list[tuple[Any, dict[str, Any]]]) -> None:
        super().__init__()
        self.found = found


class CellLoaded(Message):
    """A worker read a full cell record from the catalog."""

    def __init__(self, cell: Any, deck: str | None) -> None:
        super().__init__()
        self.cell = cell
        self.deck = deck


class CellsLoaded(Message):
    """A worker read the full records of several cells: (label, CellResult) pairs."""

    def __init__(self, cells: list[tuple[str, Any]]) -> None:
        super().__init__()
        self.cells = cells


class WhatIfComputed(Message):
    """A what-if characterization finished (``seconds`` of compute)."""

    def __init__(self, serial: int, cell: Any, run: Any, spec: Any, deck: Any,
                 seconds: float) -> None:
        super().__init__()
        self.serial = serial
        self.cell = cell
        self.run = run
        self.spec = spec
        self.deck = deck
        self.seconds = seconds


class WhatIfRejected(Message):
    """A what-if change failed validation; nothing was computed."""

    def __init__(self, serial: int, problems: list[Problem], saving: bool = False) -> None:
        super().__init__()
        self.serial = serial
        self.problems = problems
        self.saving = saving


class VariantSaved(Message):
    """A what-if variant was stored in the catalog."""

    def __init__(self, name: str, deck: str, report: Any) -> None:
        super().__init__()
        self.name = name
        self.deck = deck
        self.report = report


class VariantRemoved(Message):
    """A saved what-if variant was taken back out of the catalog (its run removed)."""

    def __init__(self, run_id: int) -> None:
        super().__init__()
        self.run_id = run_id


class RankingLoaded(Message):
    """A worker computed the ranked rows, the scatter cloud and the Pareto front."""

    def __init__(self, ranked: list[dict[str, Any]], cloud: list[dict[str, Any]],
                 front: list[dict[str, Any]], total: int, x: str, y: str,
                 offset: int = 0) -> None:
        super().__init__()
        self.offset = offset
        self.ranked = ranked
        self.cloud = cloud
        self.front = front
        self.total = total
        self.x = x
        self.y = y


class ExportFinished(Message):
    """An export was written (or failed with ``error``)."""

    def __init__(self, path: str, error: str | None = None) -> None:
        super().__init__()
        self.path = path
        self.error = error


class WhatIfEdited(Message):
    """The what-if form changed: field -> text of the geometry inputs and of deck changes."""

    def __init__(self, geometry: dict[str, str], deck: dict[str, str], immediate: bool) -> None:
        super().__init__()
        self.geometry = geometry
        self.deck = deck
        self.immediate = immediate


class PlanProgressed(Message):
    """The planning worker reached a new stage (short text, e.g. "solving the fill")."""

    def __init__(self, serial: int, stage: str) -> None:
        super().__init__()
        self.serial = serial
        self.stage = stage


class PlanFinished(Message):
    """The planning worker finished: ``plan`` (a BlockPlan) or ``problems`` (located), or it
    was cancelled (both None)."""

    def __init__(self, serial: int, plan: Any = None, problems: list[Problem] | None = None,
                 seconds: float = 0.0) -> None:
        super().__init__()
        self.serial = serial
        self.plan = plan
        self.problems = problems
        self.seconds = seconds


class FillRiskProgressed(Message):
    """The fill-risk worker started step ``step`` of ``steps`` (short text: what it computes)."""

    def __init__(self, serial: int, step: int, steps: int, stage: str) -> None:
        super().__init__()
        self.serial = serial
        self.step = step
        self.steps = steps
        self.stage = stage


class FillRiskComputed(Message):
    """The fill-risk worker answered (``answer``: tui.screens.fill_risk.FillAnswer)."""

    def __init__(self, serial: int, answer: Any, seconds: float) -> None:
        super().__init__()
        self.serial = serial
        self.answer = answer
        self.seconds = seconds


class FillRiskFailed(Message):
    """The models refused the fill-risk question (located problems); nothing was computed."""

    def __init__(self, serial: int, problems: list[Problem]) -> None:
        super().__init__()
        self.serial = serial
        self.problems = problems
