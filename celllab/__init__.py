"""celllab: characterize on-chip decoupling cells from process parameters.

Public API (no UI imports here)::

    from celllab import load_deck, load_cells, characterize, open_catalog
    deck = load_deck("process_decks/lumen130.toml")
    cells = load_cells("process_decks/cells/lumen130_cells.toml", deck)
    run = characterize(deck, cells)
    catalog = open_catalog("db/celllab.sqlite")
    catalog.store_run(run)
    plan = plan("process_decks/blocks/lumen130_dsp.toml", "db/celllab.sqlite")  # BlockPlan

Results are engineering estimates from analytic models, not sign-off.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

__version__ = "0.1.0"
MODEL_VERSION = "celllab-models-0.3"

#: Said wherever numbers could drive tape-out decisions: exports, reports, help and the UI.
CAUTION = (
    "Engineering estimates from analytic models, not sign-off; defer to the foundry's design "
    "rules, qualified device models, ESD/reliability qualification standards and licensed "
    "practice."
)
#: The same, for a footer line under a table.
CAUTION_SHORT = "Engineering estimates from analytic models, not sign-off."

#: Where the catalog lives unless told otherwise (relative to the working directory).
DEFAULT_CATALOG = Path("db") / "celllab.sqlite"

__all__ = ["load_deck", "load_cells", "characterize", "open_catalog", "plan", "__version__",
           "MODEL_VERSION", "CAUTION", "CAUTION_SHORT", "DEFAULT_CATALOG"]


def __getattr__(name: str) -> Any:
    # Lazy, so that importing the physics core never pulls in the catalog or the UI.
    if name == "load_deck":
        from celllab.deck import load_deck

        return load_deck
    if name == "load_cells":
        from celllab.cells import load_cells

        return load_cells
    if name == "characterize":
        from celllab.engine import characterize

        return characterize
    if name == "open_catalog":
        from celllab.catalog import open_catalog

        return open_catalog
    if name == "plan":
        from celllab.planner.plan import plan_file

        return plan_file
    raise AttributeError(name)
