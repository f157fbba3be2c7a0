"""Block files: what a block needs from its power delivery, and which decap cells may fill it.

A block file is TOML with two tables (every number's unit is in its name)::

    [block]
    name = "dsp_core"
    deck = "lumen130"              # catalog deck name
    empty_sites = 60000            # free placement sites to fill
    row_sites = 900                # sites per placement row (a cell wider than this cannot fit)
    supply_V = 1.2                 # optional: default the deck's core supply
    switching_power_W = 0.35
    clock_GHz = 0.4
    activity = 0.15                # switching factor, 0 < a <= 1
    current_step_A = 0.3
    ripple_fraction = 0.05
    package_inductance_nH = 0.6
    package_resistance_mohm = 15
    leakage_budget_uA = 400

    [fill]
    where = "height_rows = 1"      # filter text in the catalog's language
    corner = "worst"               # a corner of the deck, or "worst" (default)
    max_kinds = 3                  # at most this many distinct cells
    require_esd_safe = false

``load_block`` reports every problem at once as a ``PlanError`` naming file, line, field,
the value given and what is allowed. Values stay in the units typed; the planner converts to SI.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError

from celllab.deck.load import find_line, read_toml, validation_problems
from celllab.errors import PlanError, Problem

__all__ = ["BlockFile", "BlockParams", "FillParams", "load_block", "parse_block"]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class BlockParams(_Strict):
    """The block: its free sites, its load and the package it sits behind."""

    name: str = Field(pattern=r"^[A-Za-z][A-Za-z0-9_\-]{0,59}$",
                      description="block name: letters, digits, _ or -")
    deck: str = Field(min_length=1, description="catalog deck the cells come from")
    empty_sites: int = Field(gt=0, le=10**9, description="free placement sites to fill")
    row_sites: int = Field(gt=0, le=10**6, description="placement sites per row")
    supply_V: float | None = Field(None, gt=0, le=10,
                                   description="supply, V; omitted: the deck's core supply")
    switching_power_W: float = Field(gt=0, le=1e3, description="dynamic power of the block, W")
    clock_GHz: float = Field(gt=0, le=100, description="clock frequency, GHz")
    activity: float = Field(gt=0, le=1, description="switching factor of the logic, 0 < a <= 1")
    current_step_A: float = Field(gt=0, le=1e3, description="worst load current step, A")
    ripple_fraction: float = Field(gt=0, lt=1, description="allowed supply ripple / V_DD")
    package_inductance_nH: float = Field(gt=0, le=1e3,
                                         description="package + board loop inductance, nH")
    package_resistance_mohm: float = Field(ge=0, le=1e6,
                                           description="package + board loop resistance, mohm")
    leakage_budget_uA: float = Field(ge=0, le=1e9, description="decap leakage allowed, uA")


class FillParams(_Strict):
    """Which catalog cells may fill the block."""

    where: str = Field("", description="catalog filter text, e.g. 'height_rows = 1'")
    corner: str = Field("worst", min_length=1,
                        description="corner of the deck, or 'worst' (each metric at its worst)")
    max_kinds: int = Field(3, ge=1, le=50, description="at most this many distinct cells")
    require_esd_safe: bool = Field(False, description="only cells with no gate tied to a rail")


class BlockFile(_Strict):
    """A whole block file. ``source_file``/``line_of`` locate later (catalog-side) problems."""

    block: BlockParams
    fill: FillParams = Field(default_factory=lambda: FillParams.model_validate({}))

    _file: str = PrivateAttr(default="<block>")
    _text: str | None = PrivateAttr(default=None)

    @property
    def source_file(self) -> str:
        return self._file

    def line_of(self, dotted: str) -> int | None:
        """Line of a dotted field (``"fill.where"``) in the source text, if known."""
        return find_line(self._text, dotted.split("."))

    def problem(self, dotted: str, message: str, value: Any = None,
                has_value: bool = True) -> Problem:
        """A located problem about field ``dotted`` of this file."""
        return Problem(self._file, dotted, message, value, self.line_of(dotted), has_value)


def parse_block(data: dict[str, Any], file: str = "<block>", text: str | None = None) -> BlockFile:
    """Validate already-parsed TOML data; ``PlanError`` lists every problem."""
    try:
        block = BlockFile.model_validate(data)
    except ValidationError as exc:
        problems = validation_problems(exc, file, text, BlockFile)
        # a missing key has no line of its own: point at its table
        raise PlanError([replace(p, line=p.line or find_line(text, p.field.split(".")[:1]))
                         if "." in p.field else p for p in problems]) from None
    block._file, block._text = file, text
    return block


def load_block(path: str | Path) -> BlockFile:
    """Load and validate one block file (TOML)."""
    data, text = read_toml(path, PlanError)
    return parse_block(data, str(path), text)
