"""Deck parameters as SI arrays over corners, and cell geometry as SI arrays over variants.

Axis order everywhere: (variant, corner). A corner table has shape (1, n_corner); a geometry
table (n_variant, 1); they broadcast to (n_variant, n_corner).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from celllab.deck.schema import Deck
from celllab.units import to_si


@dataclass
class CornerSet:
    """The deck evaluated at each corner (``decks[i]`` has corner i's set/scale applied)."""

    names: list[str]
    decks: list[Deck]
    temperature_K: np.ndarray       # (n_corner,)
    reference_temperature_K: float

    @classmethod
    def from_deck(cls, deck: Deck, corners: list[str] | None = None) -> "CornerSet":
        from celllab.errors import DeckError, Problem

        names = corners or deck.corner_names()
        unknown = [c for c in names if c not in deck.corners]
        if unknown:
            raise DeckError([Problem(deck.name, "corners", "unknown corner; allowed: " + ", ".join(deck.corners), c)
                             for c in unknown])
        decks = [deck.at_corner(c) for c in names]
        temps = to_si(np.array([deck.corners[c].temperature_C for c in names]), "degC")
        return cls(names, decks, temps, to_si(deck.reference_temperature_C, "degC"))

    def oxide_table(self, attr: str, oxides: np.ndarray) -> np.ndarray:
        """(n_variant, n_corner) array of an OxideFlavour attribute, chosen per variant's oxide."""
        return _table(self.decks, oxides, lambda ox: getattr(ox, attr))

    def device_table(self, oxides: np.ndarray, device: np.ndarray, attr: str) -> np.ndarray:
        """(n_variant, n_corner) of a DeviceParams attribute; ``device`` holds 'nmos'/'pmos' per variant."""
        keys = np.char.add(np.char.add(np.asarray(oxides, dtype=str), "/"), np.asarray(device, dtype=str))
        combos, index = np.unique(keys, return_inverse=True)
        values = np.empty((len(combos), len(self.decks)))
        for k, combo in enumerate(combos):   # a handful of (oxide, device) pairs, not variants
            ox, dev = str(combo).split("/")
            for j, d in enumerate(self.decks):
                value = getattr(getattr(d.oxides[ox], dev), attr)
                values[k, j] = np.nan if value is None else value
        return values[index.reshape(-1)]

    def deck_value(self, getter: Any) -> np.ndarray:
        """(1, n_corner) array of any deck value."""
        return np.array([[getter(d) for d in self.decks]], dtype=float)


def _table(decks: list[Deck], oxides: np.ndarray, getter: Any, dtype: Any = float) -> np.ndarray:
    """(n_variant, n_corner) of ``getter(oxide flavour)``; None becomes NaN for numbers.

    Per-flavour lookup then fancy indexing: the loop runs over corners x oxide flavours (a
    handful), never over variants.
    """
    flavours, index = np.unique(np.asarray(oxides, dtype=str), return_inverse=True)
    values = [[getter(d.oxides[str(f)]) for d in decks] for f in flavours]
    if dtype is float:
        values = [[np.nan if v is None else v for v in row] for row in values]
    return np.array(values, dtype=dtype)[index.reshape(-1)]


