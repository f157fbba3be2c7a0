"""The deck a catalog's cells were characterized under, rebuilt from the catalog.

The library views (Liberty, LEF) need the deck itself - net names, supplies per corner, layout
rules and metals - not just its name. The catalog keeps every deck's full parameters with its
results; this rebuilds the validated ``Deck`` from them.
"""

from __future__ import annotations

from typing import Any

from celllab.deck import Deck, parse_deck
from celllab.errors import DeckError, ExportError, Problem

__all__ = ["stored_deck"]


def stored_deck(catalog: Any, deck: str) -> Deck:
    """The current deck named ``deck`` (or with that hash) as stored in ``catalog``.

    Raises ``CatalogError`` for an unknown deck and ``ExportError`` when the stored parameters
    are not a complete, valid deck.
    """
    params = catalog.deck_params(deck)
    try:
        return parse_deck(params, file=f"{catalog.path}: deck {deck}")
    except DeckError as exc:
        raise ExportError(
            [
                Problem(
                    str(catalog.path),
                    "deck",
                    "the catalog does not hold a complete, valid deck "
                    "under this name, so no library view can be written; characterize the cells "
                    "again with 'celllab build'",
                    deck,
                ),
                *exc.problems[:3],
            ]
        ) from None
