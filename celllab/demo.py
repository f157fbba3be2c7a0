"""The embedded default: the invented demo decks and cell families under ``process_decks/``.

``build_demo_catalog`` characterizes every demo deck with its cell file and stores the results.
Deck ``process_decks/NAME.toml`` pairs with ``process_decks/cells/NAME_cells.toml``.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from celllab import DEFAULT_CATALOG
from celllab.errors import CelllabError, Problem


def demo_dir() -> Path:
    """The demo deck folder: ./process_decks if present, else the one beside the package."""
    here = Path.cwd() / "process_decks"
    if here.is_dir():
        return here
    beside = Path(__file__).resolve().parents[1] / "process_decks"
    if beside.is_dir():
        return beside
    raise CelllabError([Problem("process_decks", "", "demo deck folder not found (run from the "
                                "project folder)", has_value=False)])


def demo_pairs(folder: Path | None = None) -> list[tuple[Path, Path]]:
    """(deck file, cell file) pairs of the demo scenario, sorted by deck name."""
    folder = folder or demo_dir()
    pairs = []
    for deck in sorted(folder.glob("*.toml")):
        cells = folder / "cells" / f"{deck.stem}_cells.toml"
        if cells.is_file():
            pairs.append((deck, cells))
    return pairs


def build_demo_catalog(path: str | Path = DEFAULT_CATALOG, folder: Path | None = None,
                       progress: Callable[[str, int, int], None] | None = None, esd: bool = True) -> Path:
    """Characterize every demo deck and store it in the catalog at ``path``; returns the path.

    ``esd=False`` leaves the HBM/CDM and broken-oxide columns empty (their transients are most of
    the run time)."""
    from celllab.catalog import open_catalog
    from celllab.cells import load_cells
    from celllab.deck import load_deck
    from celllab.engine import characterize

    pairs = demo_pairs(folder)
    loaded = []
    problems: list[Problem] = []
    for deck_file, cell_file in pairs:  # validate everything before writing anything
        try:
            deck = load_deck(deck_file)
            loaded.append((deck, load_cells(cell_file, deck), [str(deck_file), str(cell_file)]))
        except CelllabError as exc:
            problems.extend(exc.problems)
    if problems:
        raise CelllabError(problems)
    with open_catalog(path) as catalog:
        for deck, cells, sources in loaded:
            run = characterize(deck, cells, progress=progress, sources=sources, esd=esd)
            catalog.store_run(run)
    return Path(path)
