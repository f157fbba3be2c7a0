"""The one base of every model people type or read (decks, cells, export documents).

Unknown fields are errors (a typo is reported, never silently ignored) and validated models
are frozen (a deck or cell changes only through a validated copy).
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict


class StrictModel(BaseModel):
    """pydantic model that forbids unknown fields and is immutable once validated."""

    model_config = ConfigDict(extra="forbid", frozen=True)
