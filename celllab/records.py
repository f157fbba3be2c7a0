"""Characterization results: the records the engine produces and the catalog stores.

This module is the contract between characterization (``engine``) and everything downstream
(catalog, exports, CLI, TUI). It holds plain data only: no physics, no I/O.

Units: every numeric field carries its unit in its name (``cap_fF``, ``esr_ohm``); frequency
responses are stored in SI (Hz, ohm) as numpy arrays.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

Better = Literal["higher", "lower"]


@dataclass(frozen=True)
class MetricInfo:
    """Description of one per-corner metric column."""

    name: str
    unit: str
    description: str
    better: Better


#: Per cell x corner metrics, in display order. Catalog columns, filter names, CSV headers and
#: TUI column headers are exactly these names.
METRICS: tuple[MetricInfo, ...] = (
    MetricInfo("cap_fF", "fF", "low-frequency capacitance at the operating bias", "higher"),
    MetricInfo("cap_density_fF_per_um2", "fF/um^2", "capacitance per cell footprint area", "higher"),
    MetricInfo("cap_ox_fF", "fF", "plain Cox x gate area (no depletion, centroid or overlap)", "higher"),
    MetricInfo("esr_ohm", "ohm", "low-frequency equivalent series resistance", "lower"),
    MetricInfo("esr_1GHz_ohm", "ohm", "series resistance Re Z at 1 GHz", "lower"),
    MetricInfo("bandwidth_GHz", "GHz", "usable bandwidth: where C_eff falls to C/sqrt(2)", "higher"),
    MetricInfo("esl_pH", "pH", "equivalent series inductance", "lower"),
    MetricInfo("srf_GHz", "GHz", "self-resonance frequency", "higher"),
    MetricInfo("tau_ps", "ps", "RC time constant ESR x C", "lower"),
    MetricInfo("leakage_nA", "nA", "gate tunnelling leakage at the supply", "lower"),
    MetricInfo("leakage_nA_per_nF", "nA/nF", "leakage per nF of capacitance", "lower"),
    MetricInfo("oxide_field_MV_per_cm", "MV/cm", "oxide field at the supply", "lower"),
    MetricInfo("tddb_life_years", "years", "time to 0.01 % oxide breakdown of this cell at the supply", "higher"),
    MetricInfo("pulse_vbd_V", "V", "gate-oxide breakdown voltage under a ~100 ns ESD-like pulse (rail clamps must hold the rails below it; empty for MOM)", "higher"),
)

METRIC_NAMES: tuple[str, ...] = tuple(m.name for m in METRICS)
METRIC_BY_NAME: dict[str, MetricInfo] = {m.name: m for m in METRICS}

#: Per-cell (corner-independent) columns that can be filtered and ranked too.
CELL_COLUMNS: dict[str, MetricInfo] = {
    m.name: m
    for m in (
        MetricInfo("area_um2", "um^2", "cell footprint area", "lower"),
        MetricInfo("width_sites", "sites", "cell width in placement sites", "lower"),
        MetricInfo("height_rows", "rows", "cell height in placement rows", "lower"),
        MetricInfo("gate_area_um2", "um^2", "total gate (or plate) area", "higher"),
        MetricInfo("esd_safe", "bool", "1 when no gate is tied directly to a rail", "higher"),
    )
}


@dataclass
class FrequencyResponse:
    """Small-signal impedance between the cell's two rail ports.

    freq_Hz : (n_freq,) Hz;  z_ohm : (n_freq,) complex ohm.
    """

    freq_Hz: np.ndarray
    z_ohm: np.ndarray

    def c_eff_F(self) -> np.ndarray:
        """Effective capacitance C_eff = -1/(omega Im Z), F."""
        w = 2 * np.pi * self.freq_Hz
        return -1.0 / (w * np.imag(self.z_ohm))


@dataclass
class CVCurve:
    """Quasi-static capacitance versus gate-to-body bias for the cell, and its operating point."""

    bias_V: np.ndarray
    cap_F: np.ndarray
    operating_bias_V: float
    operating_cap_F: float


@dataclass
class CornerResult:
    """Metrics of one cell at one corner. ``metrics`` keys are ``METRIC_NAMES``."""

    corner: str
    temperature_C: float
    supply_V: float
    metrics: dict[str, float]
    response: FrequencyResponse
    cv: CVCurve | None = None
    flags: list[str] = field(default_factory=list)


@dataclass
class CellResult:
    """One characterized cell variant under one deck.

    ``geometry`` is the resolved geometry (all derived values filled in), in the cell file's
    units (um, sites, rows). ``netlist`` maps corner name -> the one-variant
    ``physics.netlist.Netlist`` equivalent circuit at that corner.
    """

    name: str
    cell_hash: str
    family: str
    topology: str
    oxide: str
    geometry: dict[str, Any]
    area_um2: float
    width_sites: int
    height_rows: int
    gate_area_um2: float
    esd_safe: bool
    corners: list[CornerResult]
    netlist: Any = None
    notes: list[str] = field(default_factory=list)

    def corner(self, name: str) -> CornerResult:
        for c in self.corners:
            if c.corner == name:
                return c
        raise KeyError(name)


@dataclass
class CharacterizationRun:
    """Everything one ``characterize`` call produced: the deck it used and the cell results."""

    deck_name: str
    deck_hash: str
    deck_params: dict[str, Any]
    model_version: str
    corners: list[str]
    cells: list[CellResult]
    source_files: list[str] = field(default_factory=list)


def netlist_to_dict(netlist: Any) -> dict[str, Any]:
    """A one-variant ``physics.netlist.Netlist`` as plain JSON-able data."""
    elements = []
    for el in netlist.elements:
        item: dict[str, Any] = {"kind": el.kind, "name": el.name, "node_a": el.node_a, "node_b": el.node_b,
                                "value": float(np.asarray(el.value).reshape(-1)[0])}
        if el.kind == "RCLINE":
            item["c_total"] = float(np.asarray(el.c_total).reshape(-1)[0])
            item["contacted_ends"] = int(el.contacted_ends)
            if el.node_far is not None:
                item["node_far"] = el.node_far
        elements.append(item)
    return {"name": netlist.name, "ports": list(netlist.ports), "elements": elements}


def netlist_from_dict(data: dict[str, Any]) -> Any:
    """Inverse of ``netlist_to_dict``."""
    from celllab.physics.netlist import Element, Netlist

    elements = tuple(
        Element(e["kind"], e["name"], e["node_a"], e["node_b"], e["value"], e.get("c_total"),
                contacted_ends=e.get("contacted_ends", 1), node_far=e.get("node_far"))
        for e in data["elements"])
    return Netlist(data["name"], elements, tuple(data["ports"]))
