"""Synthetic characterization runs for the catalog tests (no physics engine involved).

Numbers are invented but plausible for on-chip decaps (fF capacitances, ohm ESR, pH ESL, a
series R-L-C impedance, a tanh-shaped C-V curve); the process is fictional. ``make_run`` is
deterministic for a given seed, so a subprocess can rebuild exactly the same run.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog, open_catalog
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)

TOPOLOGIES = ("nmos_inversion", "pmos_inversion", "accumulation", "cross_coupled", "mom", "mos_mom")
ESD_SAFE = {"cross_coupled", "mom"}
#: corner name -> (temperature_C, supply_V, speed factor on resistance, leakage factor)
CORNERS = {
    "typ_25C": (25.0, 1.20, 1.00, 1.0),
    "slow_125C": (125.0, 1.08, 1.35, 6.0),
    "fast_m40C": (-40.0, 1.32, 0.80, 0.4),
}
#: fF/um^2 at the typical corner, per topology (invented, order of magnitude of thin-oxide decaps)
DENSITY = {
    "nmos_inversion": 12.0,
    "pmos_inversion": 11.0,
    "accumulation": 13.0,
    "cross_coupled": 6.5,
    "mom": 2.2,
    "mos_mom": 14.0,
}
SHORT = {
    "nmos_inversion": "ninv",
    "pmos_inversion": "pinv",
    "accumulation": "accu",
    "cross_coupled": "xcpl",
    "mom": "mom",
    "mos_mom": "mosmom",
}
SITE_UM, ROW_UM = 0.19, 1.2


def _hash(obj: object) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True).encode()).hexdigest()


def deck_params(deck_name: str, version: int) -> dict[str, object]:
    return {
        "name": deck_name,
        "note": "invented process for tests, not foundry data",
        "revision": version,
        "oxides": {"core": {"t_ox_nm": 1.8 + 0.01 * version}, "io": {"t_ox_nm": 5.2}},
        "corners": list(CORNERS),
    }


def make_metrics(
    rng: np.random.Generator, topology: str, oxide: str, area_um2: float, corner: str
) -> dict[str, float]:
    _temp, vdd, r_factor, leak_factor = CORNERS[corner]
    cap_fF = (
        DENSITY[topology] * area_um2 * (0.9 if oxide == "io" else 1.0) * rng.uniform(0.97, 1.03)
    )
    esr = rng.uniform(2.0, 60.0) * r_factor
    esl_pH = rng.uniform(5.0, 50.0)
    c_F, l_H = cap_fF * 1e-15, esl_pH * 1e-12
    t_ox_nm = 5.2 if oxide == "io" else 1.8
    mom = topology == "mom"
    leak_per_nF = (
        0.0 if mom else rng.uniform(1.0, 40.0) * leak_factor * (0.01 if oxide == "io" else 1)
    )
    leak_nA = leak_per_nF * cap_fF * 1e-6
    values = {
        "cap_fF": cap_fF,
        "cap_density_fF_per_um2": cap_fF / area_um2,
        "cap_ox_fF": cap_fF * rng.uniform(1.05, 1.3),
        "esr_ohm": esr,
        "esr_1GHz_ohm": esr * rng.uniform(0.9, 1.1),
        "bandwidth_GHz": 1.0 / (2 * math.pi * esr * c_F) / 1e9,
        "esl_pH": esl_pH,
        "srf_GHz": 1.0 / (2 * math.pi * math.sqrt(l_H * c_F)) / 1e9,
        "tau_ps": esr * c_F * 1e12,
        "leakage_nA": leak_nA,
        "leakage_nA_per_nF": leak_per_nF,
        "oxide_field_MV_per_cm": 0.0 if mom else vdd / (t_ox_nm * 1e-7) / 1e6,
        "tddb_life_years": float(10 ** rng.uniform(0.5, 4.0)) / leak_factor,
        "pulse_vbd_V": math.nan if mom else rng.uniform(3.5, 8.0),
    }
    # metrics added to records later get an invented positive value, so the factory keeps working
    return {m: values.get(m, float(rng.uniform(0.1, 10.0))) for m in METRIC_NAMES}


def make_cell(
    index: int,
    rng: np.random.Generator,
    corners: tuple[str, ...],
    n_freq: int = 12,
    family: str | None = None,
) -> CellResult:
    topology = TOPOLOGIES[index % len(TOPOLOGIES)]
    oxide = "io" if index % 5 == 4 else "core"
    width_sites = int(4 + rng.integers(0, 37))
    height_rows = int(1 + rng.integers(0, 3))
    area = width_sites * SITE_UM * height_rows * ROW_UM
    geometry = {
        "width_sites": width_sites,
        "height_rows": height_rows,
        "fingers": int(1 + index % 4),
        "gate_length_um": round(float(rng.uniform(0.1, 1.0)), 3),
    }
    name = f"{SHORT[topology]}_{oxide}_{index:04d}"
    freq = np.logspace(6, 11, n_freq)
    result_corners = []
    for k, corner in enumerate(corners):
        metrics = make_metrics(rng, topology, oxide, area, corner)
        w = 2 * np.pi * freq
        c_F = metrics["cap_fF"] * 1e-15
        z = metrics["esr_ohm"] + 1j * w * metrics["esl_pH"] * 1e-12 + 1 / (1j * w * c_F)
        bias = np.linspace(-1.5, 1.5, 9)
        cv = (
            None
            if topology == "mom"
            else CVCurve(bias, c_F * (0.6 + 0.4 * np.tanh(2 * bias)), CORNERS[corner][1], c_F)
        )
        flags = ["outside model range: gate_length_um"] if (index + k) % 7 == 0 else []
        if topology == "mom":  # an empty metric carries a flag naming it
            flags.append("no_gate_oxide: pulse_vbd_V is empty (no gate oxide in a mom cell)")
        result_corners.append(
            CornerResult(
                corner,
                CORNERS[corner][0],
                CORNERS[corner][1],
                metrics,
                FrequencyResponse(freq, z),
                cv,
                flags,
            )
        )
    return CellResult(
        name=name,
        cell_hash=_hash({"name": name, "topology": topology, "oxide": oxide, "geometry": geometry}),
        family=family or f"fam_{'abc'[index % 3]}",
        topology=topology,
        oxide=oxide,
        geometry=geometry,
        area_um2=area,
        width_sites=width_sites,
        height_rows=height_rows,
        gate_area_um2=area * (1.0 if topology == "mom" else 0.6),
        esd_safe=topology in ESD_SAFE,
        corners=result_corners,
        notes=["synthetic test cell"],
    )


def make_run(
    n_cells: int = 30,
    seed: int = 1,
    deck_name: str = "invented_n7x",
    deck_version: int = 1,
    model_version: str = "test-models-1",
    corners: tuple[str, ...] = tuple(CORNERS),
    n_freq: int = 12,
    first_index: int = 0,
) -> CharacterizationRun:
    """A deterministic synthetic run of ``n_cells`` cells at ``corners``."""
    rng = np.random.default_rng(seed)
    params = deck_params(deck_name, deck_version)
    cells = [make_cell(first_index + i, rng, corners, n_freq) for i in range(n_cells)]
    return CharacterizationRun(
        deck_name=deck_name,
        deck_hash=_hash(params),
        deck_params=params,
        model_version=model_version,
        corners=list(corners),
        cells=cells,
        source_files=["decks/invented_n7x.toml", "cells/invented_cells.toml"],
    )


def scaled_copy(cell: CellResult, factor: float) -> CellResult:
    """The same cell (same hash) with every capacitance-like number scaled: a conflicting result."""
    corners = [
        replace(
            c, metrics={k: (v * factor if k.startswith("cap") else v) for k, v in c.metrics.items()}
        )
        for c in cell.corners
    ]
    return replace(cell, corners=corners)


@pytest.fixture
def catalog_path(tmp_path: Path) -> Path:
    return tmp_path / "catalog.sqlite"


@pytest.fixture
def catalog(catalog_path: Path) -> Catalog:
    cat = open_catalog(catalog_path)
    yield cat
    cat.close()


@pytest.fixture
def run() -> CharacterizationRun:
    return make_run()


@pytest.fixture
def filled(catalog: Catalog, run: CharacterizationRun) -> Catalog:
    """A catalog holding ``make_run()``."""
    catalog.store_run(run)
    return catalog
