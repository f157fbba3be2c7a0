"""Exporters: catalog rows and cell records rendered for other planning tools.

Each format has a pure ``render_*`` function returning text and a one-line ``write_*`` that
stores it through ``celllab.export.files.write_text_atomic``: atomically (temporary file in the
destination folder, then a rename), an existing file only replaced with ``force=True``, links,
pipes and read-only files never, so a failure never leaves half a file behind.

==========  ===========================================  ============================
format      render                                       write
==========  ===========================================  ============================
CSV         ``render_csv(rows)``                         ``write_csv(path, rows)``
JSON        ``render_json(cells, deck_name)``            ``write_json(path, cells)``
schema      ``export_json_schema()``                     ``write_json_schema(path)``
SPICE       ``render_spice_subckt(cell, corner)``        ``write_spice(path, cells)``
Touchstone  ``render_touchstone(cell, corner)``          ``write_touchstone(path, ...)``
datasheet   ``render_datasheet_html(cell, deck_name)``   ``write_datasheet(path, ...)``
            ``render_datasheet_pdf(cell, deck_name)``    ``write_datasheet_pdf(path, ...)``
Liberty     ``render_liberty(cells, deck, corner)``      ``write_liberty(path, ...)``
LEF         ``render_lef(cells, deck)``                  ``write_lef(path, ...)``
block plan  ``render_fill_csv(plan)``, ``render_fill_    ``write_plan_files(plan,
            json``, ``render_plan_html``, ``render_      folder)``
            impedance_csv``, ``render_impedance_
            touchstone`` (``export.plan``)
==========  ===========================================  ============================

The library views (Liberty: one library per corner, ``write_liberty_set``; LEF: technology
section and cell abstracts) need the ``Deck`` the cells were characterized under;
``stored_deck(catalog, name)`` rebuilds it from the catalog.

Every export carries :data:`CAUTION`: the numbers are estimates, not sign-off.
"""

from __future__ import annotations

import importlib
import os
from pathlib import Path
from typing import Any

from celllab import CAUTION  # printed in every export (numbers could drive tape-out decisions)

#: Public name -> submodule that defines it (loaded on first use, so that exporting CSV
#: never imports matplotlib or pydantic).
_LAZY: dict[str, str] = {
    "render_csv": "csv",
    "rows_from_cells": "csv",
    "write_csv": "csv",
    "render_json": "json",
    "write_json": "json",
    "export_json_schema": "schema",
    "write_json_schema": "schema",
    "CellExport": "schema",
    "CornerExport": "schema",
    "CellsDocument": "schema",
    "render_spice_subckt": "spice",
    "render_spice_library": "spice",
    "spice_name": "spice",
    "spice_number": "spice",
    "write_spice": "spice",
    "render_touchstone": "touchstone",
    "write_touchstone": "touchstone",
    "render_datasheet_html": "datasheet",
    "render_library_html": "datasheet",
    "write_datasheet": "datasheet",
    "write_library_datasheet": "datasheet",
    "render_datasheet_pdf": "datasheet",
    "write_datasheet_pdf": "datasheet",
    "render_liberty": "liberty",
    "write_liberty": "liberty",
    "write_liberty_set": "liberty",
    "liberty_filename": "liberty",
    "leakage_parts": "liberty",
    "cell_leakage_power_nW": "liberty",
    "render_lef": "lef",
    "write_lef": "lef",
    "macro_view": "lef",
    "lef_grid": "lef",
    "placement_class": "lef",
    "stored_deck": "catalog_deck",
    "render_fill_csv": "plan",
    "render_fill_json": "plan",
    "render_plan_html": "plan",
    "render_impedance_csv": "plan",
    "render_impedance_touchstone": "plan",
    "write_plan_files": "plan",
}

__all__ = [  # noqa: PLE0604 - the lazily loaded names are listed in _LAZY
    "CAUTION",
    "atomic_write_text",
    *_LAZY,
]


def atomic_write_text(path: str | os.PathLike[str], text: str, force: bool = True) -> Path:
    """Write ``text`` (UTF-8) to ``path`` all at once (``celllab.export.files.write_text_atomic``).

    Kept for existing callers, which expect an existing regular file to be replaced (``force``
    defaults to True here); links, pipes, devices and read-only files are never written or
    replaced. New code calls ``write_text_atomic``, where replacing must be asked for.
    """
    from celllab.export.files import write_text_atomic

    return write_text_atomic(path, text, force=force)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        module = importlib.import_module(f"celllab.export.{_LAZY[name]}")
        return getattr(module, name)
    raise AttributeError(f"module 'celllab.export' has no attribute {name!r}")
