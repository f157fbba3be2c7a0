"""Process decks: the pydantic model and the TOML loader."""

from celllab.deck.load import (
    apply_changes,
    content_hash,
    corner_deck,
    load_deck,
    load_decks,
    numeric_paths,
    parse_deck,
)
from celllab.deck.schema import Deck, DeviceParams, MetalLayer, OxideFlavour

__all__ = [
    "Deck", "DeviceParams", "MetalLayer", "OxideFlavour", "apply_changes", "content_hash",
    "corner_deck", "load_deck", "load_decks", "numeric_paths", "parse_deck",
]
