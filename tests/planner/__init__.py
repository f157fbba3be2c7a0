"""Helpers for the planner tests: synthetic catalogs of ideal cells and block-file text.

The synthetic cells are series R-C elements (ESR + capacitor) whose stored Z(f) is exact and
whose stored equivalent circuit is that R-C, so checks run through the whole planner path
(catalog query, candidates, fill, stored Z(f), block impedance, supply network) without the
characterization engine. The process is invented: the deck stored with them is the demo
lumen130 deck under another name.
"""

from __future__ import annotations

import copy
import hashlib
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from celllab.catalog import Catalog, open_catalog
from celllab.deck import load_deck
from celllab.physics.netlist import Element, Netlist
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    FrequencyResponse,
)

REPO = Path(__file__).resolve().parents[2]
DECK = "invented_pdn"
SUPPLY_V = 1.0
#: Dense sweep so that interpolation between stored points is negligible (200 / decade).
FREQ_HZ = np.logspace(5.0, 10.0, 1001)
#: The layout of the deck stored with the synthetic cells (the demo lumen130 deck's).
_LAYOUT = load_deck(REPO / "process_decks" / "lumen130.toml").layout
SITE_UM, ROW_UM = _LAYOUT.site_width_um, _LAYOUT.row_height_um


@dataclass(frozen=True)
class IdealCell:
    """One synthetic cell: capacitance, ESR, leakage, footprint, gate area; corners scale the
    cap and the leakage."""

    name: str
    cap_fF: float
    esr_ohm: float = 0.0
    leakage_nA: float = 0.0
    width_sites: int = 1
    height_rows: int = 1
    esd_safe: bool = True
    gate_area_um2: float = 0.0
    oxide: str = "core"


#: corner -> (capacitance factor, leakage factor): slow_125C has the least cap, leaky_125C
#: the most leakage
CORNERS = {"typ_25C": (1.0, 1.0), "slow_125C": (0.9, 1.5), "fast_m40C": (1.05, 0.5),
           "leaky_125C": (1.0, 2.0)}


def _corner(cell: IdealCell, corner: str, cap_factor: float, leak_factor: float) -> CornerResult:
    c_F = cell.cap_fF * cap_factor * 1e-15
    w = 2 * np.pi * FREQ_HZ
    z = cell.esr_ohm + 1.0 / (1j * w * c_F)
    metrics = {m: 1.0 for m in METRIC_NAMES}
    area = cell.width_sites * SITE_UM * cell.height_rows * ROW_UM
    metrics.update(
        cap_fF=cell.cap_fF * cap_factor, cap_density_fF_per_um2=cell.cap_fF * cap_factor / area,
        cap_ox_fF=cell.cap_fF * cap_factor, esr_ohm=cell.esr_ohm, esr_1GHz_ohm=cell.esr_ohm,
        bandwidth_GHz=(1 / (2 * np.pi * cell.esr_ohm * c_F) / 1e9 if cell.esr_ohm else 1e3),
        # without an ESR there is no RC cutoff: 1000 GHz is only a lower bound, flagged as such
        bandwidth_is_bound=0.0 if cell.esr_ohm else 1.0, srf_is_bound=0.0,
        esl_pH=0.0, leakage_nA=cell.leakage_nA * leak_factor,
        leakage_nA_per_nF=cell.leakage_nA * leak_factor / (cell.cap_fF * 1e-6),
    )
    return CornerResult(corner, 25.0, SUPPLY_V, metrics, FrequencyResponse(FREQ_HZ.copy(), z))


def ideal_circuit(cell: IdealCell, cap_factor: float) -> Netlist:
    """The cell's equivalent circuit at a corner: ESR in series with C (C alone without ESR)."""
    c_F = cell.cap_fF * cap_factor * 1e-15
    if cell.esr_ohm > 0:
        return Netlist("ideal", (Element("R", "esr", "vdd", "x", cell.esr_ohm),
                                 Element("C", "c", "x", "vss", c_F)))
    return Netlist("ideal", (Element("C", "c", "vdd", "vss", c_F),))


def ideal_record(cell: IdealCell) -> CellResult:
    digest = hashlib.sha256(json.dumps(cell.__dict__, sort_keys=True).encode()).hexdigest()
    width_um, height_um = cell.width_sites * SITE_UM, cell.height_rows * ROW_UM
    return CellResult(
        name=cell.name, cell_hash=digest[:16], family="ideal",
        topology="mom" if cell.gate_area_um2 == 0 else "nmos_inversion", oxide=cell.oxide,
        geometry={"width_sites": cell.width_sites, "height_rows": cell.height_rows,
                  "resolved_cell_width_um": width_um, "resolved_cell_height_um": height_um,
                  "resolved_gate_area_um2": cell.gate_area_um2},
        area_um2=width_um * height_um, width_sites=cell.width_sites,
        height_rows=cell.height_rows, gate_area_um2=cell.gate_area_um2,
        esd_safe=cell.esd_safe,
        corners=[_corner(cell, name, cf, lf) for name, (cf, lf) in CORNERS.items()],
        netlist={name: ideal_circuit(cell, cf) for name, (cf, _) in CORNERS.items()},
    )


def deck_params() -> dict[str, Any]:
    """The demo lumen130 deck as stored parameters, renamed to ``DECK``, core supply 1 V."""
    params = load_deck(REPO / "process_decks" / "lumen130.toml").model_dump(mode="json")
    params["process"]["name"] = DECK
    params["supplies"]["core_V"] = SUPPLY_V
    params["corners"] = {name: {"temperature_C": 25.0} for name in CORNERS}
    return params


def synthetic_catalog(path: Path, cells: list[IdealCell]) -> Catalog:
    """A catalog at ``path`` holding ``cells`` under the invented deck ``DECK``."""
    run = CharacterizationRun(
        deck_name=DECK, deck_hash=hashlib.sha256(repr(cells).encode()).hexdigest()[:16],
        deck_params=deck_params(), model_version="test", corners=list(CORNERS),
        cells=[ideal_record(c) for c in cells])
    catalog = open_catalog(path)
    catalog.store_run(run)
    return catalog


# --------------------------------------------------------------------------- block files

BASE_BLOCK: dict[str, Any] = {
    "block": {"name": "t_block", "deck": DECK, "supply_V": 1.0, "switching_power_W": 1.0,
              "clock_GHz": 1.0, "activity": 1.0, "current_step_A": 10.0,
              "ripple_fraction": 0.05, "package_inductance_nH": 1.0,
              "package_resistance_mohm": 10.0},
    "candidates": {"where": "", "corner": "worst"},
    "budgets": {"leakage_uA": 1000.0, "max_kinds": 3},
    "objective": {"goal": "max_useful_cap", "mip_rel_gap": 1e-9},
    "region": [{"name": "core", "frequency_MHz": 100.0,
                "row_gaps": [{"name": "fill", "height_rows": 1, "width_sites": [4, 8],
                              "count": [100, 50]}]}],
}


#: A [network] table for ``BASE_BLOCK``-like files with one region named "core" (invented):
#: no board, no grid, the package of [block] alone in front of the region.
NETWORK: dict[str, Any] = {
    "ir_drop_limit_mV": 20.0, "f_min_MHz": 1.0, "f_max_GHz": 10.0, "points_per_decade": 40,
    "regions": {"core": {"grid_resistance_mohm": 0.0, "grid_inductance_pH": 0.0}},
}


def block_data(**changes: Any) -> dict[str, Any]:
    """``BASE_BLOCK`` with dotted-path changes (``budgets__max_kinds=2``: ``__`` for ``.``,
    ``region__0__quiet=True``; a value of ``None`` removes the key)."""
    data = copy.deepcopy(BASE_BLOCK)
    for key, value in changes.items():
        parts = key.split("__")
        node: Any = data
        for part in parts[:-1]:
            node = node[int(part)] if part.isdigit() else node.setdefault(part, {})
        last = parts[-1]
        if value is None:
            node.pop(last, None)
        else:
            node[last] = value
    return data


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {_value(x)}" for k, x in v.items()) + " }"
    return repr(v)


def toml_text(data: dict[str, Any], prefix: str = "") -> str:
    """TOML for nested tables and arrays of tables (enough for block files)."""
    lines: list[str] = []
    scalars = {k: v for k, v in data.items()
               if not isinstance(v, dict) and not (isinstance(v, list) and v
                                                   and isinstance(v[0], dict))}
    lines += [f"{k} = {_value(v)}" for k, v in scalars.items()]
    for key, value in data.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict) and key not in scalars:
            lines += ["", f"[{name}]", toml_text(value, name + ".")]
        elif isinstance(value, list) and value and isinstance(value[0], dict):
            for item in value:
                lines += ["", f"[[{name}]]", toml_text(item, name + ".")]
    return "\n".join(line for line in lines if line is not None)


def block_text(**changes: Any) -> str:
    """A valid block file for ``DECK`` (``block_data`` changes applied)."""
    return "# invented block for tests\n" + toml_text(block_data(**changes)).lstrip() + "\n"
