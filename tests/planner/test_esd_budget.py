"""ESD and broken-oxide budgets of a block file: candidates whose stored figures say the deck's
zap breaks their oxide (negative hbm/cdm margin), or whose broken oxide exceeds the rail's fault
limit, are left out when the block asks for it; cells without ESD figures stay in."""

from __future__ import annotations

import hashlib
import math
from pathlib import Path

from celllab.catalog import open_catalog
from celllab.planner.block import load_block
from celllab.planner.candidates import check_catalog, load_candidates
from celllab.records import CharacterizationRun

from . import CORNERS, DECK, IdealCell, block_text, deck_params, ideal_record

CELLS = [IdealCell("zapped", 400.0, width_sites=4, gate_area_um2=2.0, esd_safe=False),
         IdealCell("shorts", 300.0, width_sites=4, gate_area_um2=2.0, esd_safe=False),
         IdealCell("sturdy", 200.0, width_sites=4, gate_area_um2=2.0),
         IdealCell("unknown", 100.0, width_sites=4, gate_area_um2=2.0)]


def _catalog(path: Path):  # type: ignore[no-untyped-def]
    records = [ideal_record(c) for c in CELLS]
    for r in records:
        for corner in r.corners:
            m = corner.metrics
            m.update(hbm_margin_V=1.0, cdm_margin_V=0.5, broken_oxide_ok=1.0)
            if r.name == "zapped" and corner.corner == "fast_m40C":
                m["cdm_margin_V"] = -0.7  # one corner breaks: the worst row shows it
            if r.name == "shorts":
                m["broken_oxide_ok"] = 0.0
            if r.name == "unknown":
                m.update(hbm_margin_V=math.nan, cdm_margin_V=math.nan, broken_oxide_ok=math.nan)
    run = CharacterizationRun(deck_name=DECK, deck_hash=hashlib.sha256(b"esd").hexdigest()[:16],
                              deck_params=deck_params(), model_version="test", corners=list(CORNERS),
                              cells=records)
    catalog = open_catalog(path)
    catalog.store_run(run)
    return catalog


def _names(tmp_path: Path, **changes: object) -> tuple[set[str], dict[str, int]]:
    catalog = _catalog(tmp_path / "c.sqlite")
    path = tmp_path / "b.toml"
    path.write_text(block_text(**changes))
    block = load_block(path)
    cells, excluded = load_candidates(block, catalog, check_catalog(block, catalog))
    return {c.name for c in cells}, excluded


def test_budgets_off_keep_every_cell(tmp_path: Path) -> None:
    names, excluded = _names(tmp_path)
    assert names == {"zapped", "shorts", "sturdy", "unknown"} and not excluded


def test_esd_survive_drops_the_cell_a_corner_breaks(tmp_path: Path) -> None:
    names, excluded = _names(tmp_path, budgets__esd_survive=True)
    assert names == {"shorts", "sturdy", "unknown"}
    assert excluded == {"broken by the ESD zap (esd_survive)": 1}


def test_broken_oxide_ok_drops_the_cell_over_the_fault_limit(tmp_path: Path) -> None:
    names, excluded = _names(tmp_path, budgets__esd_survive=True, budgets__broken_oxide_ok=True)
    assert names == {"sturdy", "unknown"}
    assert excluded["broken oxide over the fault limit (broken_oxide_ok)"] == 1
