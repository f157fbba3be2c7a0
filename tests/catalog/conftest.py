"""Synthetic characterization runs for the catalog tests (no physics engine involved).

Numbers are invented but plausible for on-chip decaps (fF capacitances, ohm ESR, pH ESL, a
series R-L-C impedance, a tanh-shaped C-V curve); the process is fictional. Each run is what
the engine could have produced - a valid deck (the invented lumen130 demo deck under another
name), valid cell definitions with their real content hashes and the footprints the deck's
layout rules give them - so a catalog of them passes every check a merge makes. ``make_run``
is deterministic for a given seed, so a subprocess can rebuild exactly the same run.
"""

from __future__ import annotations

import functools
import hashlib
import json
import math
import zlib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog, open_catalog
from celllab.cells.geometry import resolve_geometry
from celllab.cells.schema import CellSpec
from celllab.deck import Deck, load_deck
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)
from celllab.topologies import REGISTRY

BASE_DECK = Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml"

TOPOLOGIES = REGISTRY.names()
ESD_SAFE = REGISTRY.esd_safe_names()
#: corner name -> (temperature_C, supply_V, speed factor on resistance, leakage factor)
CORNERS = {
    "typ_25C": (25.0, 1.20, 1.00, 1.0),
    "slow_125C": (125.0, 1.08, 1.35, 6.0),
    "fast_m40C": (-40.0, 1.32, 0.80, 0.4),
}
#: fF/um^2 at the typical corner, per topology (invented, order of magnitude of thin-oxide decaps;
#: a topology added later gets 5)
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


@functools.cache
def _base_params() -> str:
    return json.dumps(load_deck(BASE_DECK).model_dump(mode="json"))


def deck_params(deck_name: str, version: int) -> dict[str, object]:
    """A valid deck's parameters: the invented lumen130 deck renamed, its core oxide nudged by
    the version (so each version has its own hash)."""
    params = json.loads(_base_params())
    params["process"]["name"] = deck_name
    params["process"]["description"] = "invented process for tests, not foundry data"
    params["oxides"]["core"]["t_ox_nm"] = round(2.2 + 0.01 * version, 6)
    return params


def deck_hash(params: dict[str, object]) -> str:
    """The deck's content hash (as ``Deck.content_hash`` computes it)."""
    text = json.dumps(params, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


@functools.cache
def _deck(params_text: str) -> Deck:
    return Deck.model_validate(json.loads(params_text))


def make_metrics(
    rng: np.random.Generator, topology: str, oxide: str, area_um2: float, corner: str
) -> dict[str, float]:
    _temp, vdd, r_factor, leak_factor = CORNERS[corner]
    cap_fF = (
        DENSITY.get(topology, 5.0) * area_um2 * (0.9 if oxide == "io" else 1.0) * rng.uniform(0.97, 1.03)
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
        "srf_is_bound": 1.0 if mom and corner != "slow_125C" else 0.0,  # bounds, to exercise their rules
        "bandwidth_is_bound": 0.0,
        "tau_ps": esr * c_F * 1e12,
        "leakage_nA": leak_nA,
        "leakage_nA_per_nF": leak_per_nF,
        "gate_leakage_nA": 0.85 * leak_nA,
        "junction_leakage_nA": 0.15 * leak_nA,
        "oxide_field_MV_per_cm": 0.0 if mom else vdd / (t_ox_nm * 1e-7) / 1e6,
        "tddb_fit_per_mm2": math.nan if mom else float(10 ** rng.uniform(-3.0, 1.0)) * leak_factor,
        "pulse_vbd_V": math.nan if mom else rng.uniform(3.5, 8.0),
    }
    # metrics added to records later get an invented positive value from their name alone (no
    # random draw), so the factory keeps working and the other values do not move
    return {m: values[m] if m in values else 0.1 + (zlib.crc32(m.encode()) % 9900) / 1000 for m in METRIC_NAMES}


def make_cell(
    index: int,
    rng: np.random.Generator,
    corners: tuple[str, ...],
    n_freq: int = 12,
    family: str | None = None,
    deck: Deck | None = None,
    **definition: object,
) -> CellResult:
    """Cell ``index`` (topology and oxide cycle with it) with a geometry the deck accepts;
    ``definition`` overrides fields of the cell definition."""
    deck = deck or _deck(json.dumps(deck_params("invented_n7x", 1)))
    topology = TOPOLOGIES[index % len(TOPOLOGIES)]
    oxide = "io" if index % 5 == 4 else "core"
    name = f"{SHORT.get(topology, topology[:6])}_{oxide}_{index:04d}"
    spec = CellSpec.model_validate({
        "name": name, "family": family or f"fam_{'abc'[index % 3]}", "topology": topology,
        "oxide": oxide, "width_sites": int(12 + index + rng.integers(0, 2)),  # unique per index
        "height_rows": int(1 + rng.integers(0, 3)), "fingers": int(1 + index % 4), **definition,
    })
    geo = resolve_geometry(spec, deck)
    area = geo.area_um2
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
            flags.append("no_gate_oxide: tddb_fit_per_mm2 and pulse_vbd_V are empty (no gate oxide in a mom cell)")
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
        name=spec.name,
        cell_hash=spec.content_hash,
        family=spec.family,
        topology=topology,
        oxide=oxide,
        geometry=dict(spec.geometry),
        area_um2=area,
        width_sites=spec.width_sites,
        height_rows=spec.height_rows,
        gate_area_um2=geo.gate_area_um2 if geo.gate_area_um2 else geo.mom_plate_area_um2,
        esd_safe=spec.esd_safe,
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
    deck = _deck(json.dumps(params))
    cells = [make_cell(first_index + i, rng, corners, n_freq, deck=deck) for i in range(n_cells)]
    return CharacterizationRun(
        deck_name=deck_name,
        deck_hash=deck_hash(params),
        deck_params=params,
        model_version=model_version,
        corners=list(corners),
        cells=cells,
        source_files=["decks/invented_n7x.toml", "cells/invented_cells.toml"],
    )


def scaled_copy(cell: CellResult, factor: float) -> CellResult:
    """The same cell (same hash) with every capacitance-like number (and the leakage, so that
    leakage per nF stays) scaled: a conflicting result."""
    scaled = ("cap", "leakage_nA")
    corners = [
        replace(
            c,
            metrics={
                k: (v * factor if k.startswith(scaled) and k != "leakage_nA_per_nF" else v)
                for k, v in c.metrics.items()
            },
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
