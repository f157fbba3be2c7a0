"""JSON export of full cell records (metrics per corner, Z(f), C-V, equivalent circuit).

The document layout is :class:`celllab.export.schema.CellsDocument`; ``render_json`` builds
the document through those pydantic models, so its output always validates against
``export_json_schema()``. Non-finite numbers are written as ``null``.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, __version__
from celllab.display import finite_or_none
from celllab.export import CAUTION, atomic_write_text
from celllab.export.schema import CellsDocument
from celllab.records import METRIC_NAMES, METRICS, CellResult, CornerResult

__all__ = ["cells_document", "render_json", "write_json"]


def _numbers(values: Any) -> list[float | None]:
    array = np.asarray(values, dtype=float).ravel()
    finite = np.isfinite(array)
    listed: list[float | None] = array.tolist()
    if not finite.all():
        for index in np.flatnonzero(~finite):
            listed[index] = None
    return listed


def _plain(value: Any) -> Any:
    """Geometry values as JSON-ready Python (numpy scalars/arrays, tuples, non-finite)."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return finite_or_none(value)
    return value


def _circuit(netlist: Any) -> list[dict[str, Any]] | None:
    """A circuit's elements with the ports renamed vdd/vss and values in SI."""
    if netlist is None:
        return None
    from celllab.export.spice import element_values

    ports = {netlist.ports[0]: "vdd", netlist.ports[1]: "vss"}
    return [
        {
            "name": el.name,
            "kind": el.kind,
            "nodes": [ports.get(n, n) for n in el.nodes],
            "values": {k: finite_or_none(v) for k, v in element_values(el).items()},
        }
        for el in netlist.elements
    ]


def _corner(result: CornerResult, include_curves: bool, netlist: Any) -> dict[str, Any]:
    response = None
    cv = None
    if include_curves:
        z = np.asarray(result.response.z_ohm, dtype=complex)
        response = {
            "freq_Hz": _numbers(result.response.freq_Hz),
            "z_real_ohm": _numbers(z.real),
            "z_imag_ohm": _numbers(z.imag),
        }
        if result.cv is not None:
            cv = {
                "bias_V": _numbers(result.cv.bias_V),
                "cap_F": _numbers(result.cv.cap_F),
                "operating_bias_V": finite_or_none(result.cv.operating_bias_V),
                "operating_cap_F": finite_or_none(result.cv.operating_cap_F),
            }
    return {
        "corner": result.corner,
        "temperature_C": finite_or_none(result.temperature_C),
        "supply_V": finite_or_none(result.supply_V),
        "metrics": {m: finite_or_none(result.metrics.get(m)) for m in METRIC_NAMES},
        "flags": [str(f) for f in result.flags],
        "response": response,
        "cv": cv,
        "circuit": _circuit(netlist),
    }


def _cell(cell: CellResult, include_curves: bool) -> dict[str, Any]:
    circuits: dict[str, Any] = {}
    if cell.netlist is not None:
        from celllab.export.spice import stored_circuits

        circuits = stored_circuits(cell)
    return {
        "name": cell.name,
        "cell_hash": cell.cell_hash,
        "family": cell.family,
        "topology": cell.topology,
        "oxide": cell.oxide,
        "placement": cell.placement,
        "rail": cell.rail,
        "geometry": _plain(cell.geometry),
        "area_um2": finite_or_none(cell.area_um2),
        "width_sites": int(cell.width_sites),
        "height_rows": int(cell.height_rows),
        "gate_area_um2": finite_or_none(cell.gate_area_um2),
        "esd_safe": bool(cell.esd_safe),
        "notes": [str(n) for n in cell.notes],
        "corners": [_corner(c, include_curves, circuits.get(c.corner)) for c in cell.corners],
    }


def cells_document(
    cells: Iterable[CellResult],
    deck_name: str | None = None,
    include_curves: bool = True,
    model_version: str = MODEL_VERSION,
) -> CellsDocument:
    """The validated export document (pydantic model) for ``cells``."""
    return CellsDocument.model_validate(
        {
            "generator": f"celllab {__version__}",
            "model_version": model_version,
            "caution": CAUTION,
            "deck": deck_name,
            "units": {m.name: m.unit for m in METRICS},
            "cells": [_cell(c, include_curves) for c in cells],
        }
    )


def render_json(
    cells: Sequence[CellResult],
    deck_name: str | None = None,
    include_curves: bool = True,
    model_version: str = MODEL_VERSION,
    indent: int | None = 2,
) -> str:
    """Render cell records as a JSON document (see :class:`CellsDocument`).

    Parameters
    ----------
    cells : sequence of CellResult
    deck_name : str, optional   process deck the cells were characterized under
    include_curves : bool   include Z(f) and C-V arrays (``False``: metrics only, curves null)
    model_version : str   written into the document
    indent : int or None   pretty-print indent; ``None`` for one compact line

    Returns
    -------
    str   UTF-8 JSON text ending in a newline
    """
    document = cells_document(cells, deck_name, include_curves, model_version)
    return document.model_dump_json(indent=indent) + "\n"


def write_json(
    path: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck_name: str | None = None,
    include_curves: bool = True,
    force: bool = False,
) -> Path:
    """Write :func:`render_json` output to ``path`` atomically (``force``: replace a file)."""
    return atomic_write_text(path, render_json(cells, deck_name, include_curves), force)
