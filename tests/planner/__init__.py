"""Helpers for the planner tests: synthetic catalogs of ideal cells and block-file text.

The synthetic cells are series R-C elements (ESR + capacitor) whose stored Z(f) is exact, so
checks of the PDN closed forms run through the whole planner path (catalog query, fill,
stored Z(f), block impedance) without the characterization engine. The process is invented.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from celllab.catalog import Catalog, open_catalog
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    FrequencyResponse,
)

DECK = "invented_pdn"
SUPPLY_V = 1.0
#: Dense sweep so that interpolation between stored points is negligible (200 / decade).
FREQ_HZ = np.logspace(5.0, 10.0, 1001)


@dataclass(frozen=True)
class IdealCell:
    """One synthetic cell: capacitance, ESR, leakage, footprint; corners scale the cap."""

    name: str
    cap_fF: float
    esr_ohm: float = 0.0
    leakage_nA: float = 0.0
    width_sites: int = 1
    height_rows: int = 1
    esd_safe: bool = True


#: corner -> capacitance factor (the lowest is the worst corner for cap)
CORNERS = {"typ_25C": 1.0, "slow_125C": 0.9, "fast_m40C": 1.05}


def _corner(cell: IdealCell, corner: str, factor: float) -> CornerResult:
    c_F = cell.cap_fF * factor * 1e-15
    w = 2 * np.pi * FREQ_HZ
    z = cell.esr_ohm + 1.0 / (1j * w * c_F)
    metrics = {m: 1.0 for m in METRIC_NAMES}
    area = cell.width_sites * cell.height_rows * 0.5
    metrics.update(
        cap_fF=cell.cap_fF * factor, cap_density_fF_per_um2=cell.cap_fF * factor / area,
        cap_ox_fF=cell.cap_fF * factor, esr_ohm=cell.esr_ohm, esr_1GHz_ohm=cell.esr_ohm,
        bandwidth_GHz=(1 / (2 * np.pi * cell.esr_ohm * c_F) / 1e9 if cell.esr_ohm else 1e3),
        esl_pH=0.0, leakage_nA=cell.leakage_nA * (2.0 if corner == "slow_125C" else 1.0),
        leakage_nA_per_nF=cell.leakage_nA / (cell.cap_fF * 1e-6),
    )
    return CornerResult(corner, 25.0, SUPPLY_V, metrics, FrequencyResponse(FREQ_HZ.copy(), z))


def ideal_record(cell: IdealCell) -> CellResult:
    digest = hashlib.sha256(json.dumps(cell.__dict__, sort_keys=True).encode()).hexdigest()
    return CellResult(
        name=cell.name, cell_hash=digest[:16], family="ideal", topology="mom", oxide="core",
        geometry={"width_sites": cell.width_sites, "height_rows": cell.height_rows},
        area_um2=cell.width_sites * cell.height_rows * 0.5, width_sites=cell.width_sites,
        height_rows=cell.height_rows, gate_area_um2=1.0, esd_safe=cell.esd_safe,
        corners=[_corner(cell, name, f) for name, f in CORNERS.items()],
    )


def synthetic_catalog(path: Path, cells: list[IdealCell], supply_V: float | None = SUPPLY_V
                      ) -> Catalog:
    """A catalog at ``path`` holding ``cells`` under the invented deck ``DECK``."""
    params: dict[str, object] = {"name": DECK, "note": "invented for tests"}
    if supply_V is not None:
        params["supplies"] = {"core_V": supply_V, "io_V": 2 * supply_V}
    run = CharacterizationRun(
        deck_name=DECK, deck_hash=hashlib.sha256(repr(cells).encode()).hexdigest()[:16],
        deck_params=params, model_version="test", corners=list(CORNERS),
        cells=[ideal_record(c) for c in cells])
    catalog = open_catalog(path)
    catalog.store_run(run)
    return catalog


def block_text(**overrides: object) -> str:
    """A valid block file for ``DECK`` (1 V, activity 1 so no intrinsic decap), with
    ``block_<key>`` / ``fill_<key>`` overrides (``None`` leaves the key out)."""
    block: dict[str, object] = {
        "name": "t_block", "deck": DECK, "empty_sites": 100000, "row_sites": 1000,
        "supply_V": 1.0, "switching_power_W": 1.0, "clock_GHz": 1.0, "activity": 1.0,
        "current_step_A": 10.0, "ripple_fraction": 0.05, "package_inductance_nH": 1.0,
        "package_resistance_mohm": 10.0, "leakage_budget_uA": 1000.0,
    }
    fill: dict[str, object] = {"where": "", "corner": "worst", "max_kinds": 3,
                               "require_esd_safe": False}
    for key, value in overrides.items():
        table, _, name = key.partition("_")
        target = block if table == "block" else fill
        if value is None:
            target.pop(name, None)
        else:
            target[name] = value

    def toml_value(v: object) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v)
        return repr(v)

    lines = ["# invented block for tests", "[block]"]
    lines += [f"{k} = {toml_value(v)}" for k, v in block.items()]
    lines += ["", "[fill]"] + [f"{k} = {toml_value(v)}" for k, v in fill.items()]
    return "\n".join(lines) + "\n"
