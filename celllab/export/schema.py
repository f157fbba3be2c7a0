"""Pydantic models of the JSON export and the JSON Schema generated from them.

The models mirror ``celllab.records`` (``CellResult`` -> :class:`CellExport`, ``CornerResult``
-> :class:`CornerExport`) in a JSON-friendly form: complex impedances split into real and
imaginary parts, numpy arrays as lists, and every non-finite number (NaN, +-inf: an undefined
metric such as no self-resonance in the swept band) written as ``null``, since JSON has no
such numbers. Every metric key of ``celllab.records.METRICS`` is required, with its unit in
the schema description.

``export_json_schema()`` returns a JSON Schema (Draft 2020-12) document; ``render_json``
builds its output through these same models, so an export always validates.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, Field, create_model

from celllab.columns import CORNER_COLUMNS, METRICS
from celllab.export import CAUTION, atomic_write_text
from celllab.strict import StrictModel

FORMAT_NAME: Literal["celllab.cells"] = "celllab.cells"
FORMAT_VERSION: Literal[1] = 1
SCHEMA_DIALECT = "https://json-schema.org/draft/2020-12/schema"

from celllab.cells.schema import OxideChoice as Oxide  # noqa: E402  (one closed set, defined once)
from celllab.topologies import REGISTRY  # noqa: E402
from celllab.topologies.geometry import Placement  # noqa: E402

#: The topologies known when the export format was loaded (an enum in the JSON Schema).
Topology = Literal[REGISTRY.names()]  # type: ignore[valid-type]

def _described(name: str) -> str:
    column = CORNER_COLUMNS[name]
    return f"{column.description} [{column.unit}]"


#: JSON has no NaN/inf; those are written as null.
Number = float | None

__all__ = [
    "CVExport",
    "CellExport",
    "CellsDocument",
    "CircuitElementExport",
    "CornerExport",
    "MetricsExport",
    "ResponseExport",
    "export_json_schema",
    "write_json_schema",
]


class ResponseExport(StrictModel):
    """Small-signal impedance between the rails, Z = z_real_ohm + j z_imag_ohm."""

    freq_Hz: list[Number] = Field(description="frequency points [Hz], increasing")
    z_real_ohm: list[Number] = Field(description="Re Z at each frequency [ohm]")
    z_imag_ohm: list[Number] = Field(description="Im Z at each frequency [ohm]")


class CVExport(StrictModel):
    """Quasi-static capacitance versus gate-to-body bias, and the operating point."""

    bias_V: list[Number] = Field(description="gate-to-body bias [V]")
    cap_F: list[Number] = Field(description="capacitance at each bias [F]")
    operating_bias_V: Number = Field(description="bias at the supply [V]")
    operating_cap_F: Number = Field(description="capacitance at the operating bias [F]")


MetricsExport: type[BaseModel] = create_model(  # type: ignore[call-overload]
    "MetricsExport",
    __base__=StrictModel,
    __doc__="Per-corner metrics; null when undefined or not finite.",
    **{
        m.name: (Number, Field(description=f"{m.description} [{m.unit}]; {m.better} is better"))
        for m in METRICS
    },
)


class CircuitElementExport(StrictModel):
    """One element of a corner's equivalent circuit between the ports vdd and vss."""

    name: str = Field(description="element name, unique in the circuit")
    kind: str = Field(description="R, C, L or RCLINE (uniform distributed RC line)")
    nodes: list[str] = Field(
        description="node names ('vdd', 'vss' are the ports); RCLINE: near end, plate[, far end]"
    )
    values: dict[str, Number] = Field(
        description="values in SI, unit in the key: r_ohm, c_F, l_H; RCLINE: total r_ohm and "
        "c_F, contacted_ends (1: far end open, 2: tied to the near end; unused with 3 nodes)"
    )


class CornerExport(StrictModel):
    """Metrics and curves of one cell at one corner."""

    corner: str = Field(description="deck-defined corner name")
    temperature_C: Number = Field(description=_described("temperature_C"))
    supply_V: Number = Field(description=_described("supply_V"))
    metrics: MetricsExport  # type: ignore[valid-type]
    flags: list[str] = Field(description="warnings, e.g. a model used outside its range")
    response: ResponseExport | None = Field(description="Z(f), or null when omitted")
    cv: CVExport | None = Field(description="C-V curve, or null when absent or omitted")
    circuit: list[CircuitElementExport] | None = Field(
        description="equivalent circuit at this corner, or null when none is stored"
    )


class CellExport(StrictModel):
    """One characterized cell variant under one deck."""

    name: str
    cell_hash: str = Field(description="content hash of the resolved cell definition")
    family: str
    topology: Topology
    oxide: Oxide
    placement: Placement = Field(description="where the cell sits: core_row or open_region")
    rail: str = Field(description="supply rail the cell decouples and was characterized at")
    geometry: dict[str, Any] = Field(description="resolved geometry in um, sites, rows")
    area_um2: Number = Field(description="cell footprint area [um^2]")
    width_sites: int = Field(description="cell width [placement sites]")
    height_rows: int = Field(description="cell height [placement rows]")
    gate_area_um2: Number = Field(description="total gate (or plate) area [um^2]")
    esd_safe: bool = Field(description="true when no gate is tied directly to a rail")
    notes: list[str]
    corners: list[CornerExport] = Field(min_length=1)


class CellsDocument(StrictModel):
    """A celllab JSON export: cells characterized under one process deck."""

    format: Literal["celllab.cells"] = FORMAT_NAME
    format_version: Literal[1] = FORMAT_VERSION
    generator: str = Field(description="tool and version that wrote the file")
    model_version: str = Field(description="version of the analytic models used")
    caution: str = Field(description="how far these numbers may be trusted")
    deck: str | None = Field(description="process deck name, or null if not known")
    units: dict[str, str] = Field(description="unit of every metric key")
    cells: list[CellExport]


def export_json_schema() -> dict[str, Any]:
    """JSON Schema (Draft 2020-12) of :class:`CellsDocument`, from ``model_json_schema()``."""
    generated = CellsDocument.model_json_schema()
    schema: dict[str, Any] = {"$schema": SCHEMA_DIALECT}
    schema.update(generated)
    schema["description"] = f"{generated.get('description', '')} CAUTION: {CAUTION}".strip()
    return schema


def write_json_schema(path: str | os.PathLike[str], force: bool = False) -> Path:
    """Write :func:`export_json_schema` to ``path`` atomically (indented JSON; ``force``:
    replace a file)."""
    return atomic_write_text(path, json.dumps(export_json_schema(), indent=2) + "\n", force)
