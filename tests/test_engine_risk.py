"""The engine's ESD and broken-oxide columns: every cell with a gate oxide carries them at every
corner, they follow from the cell's own transient (the coarse catalog grid agrees with the fine
grid, which tests/characterization/test_esd_events.py checks against ngspice .tran), cells without
gate oxide leave them empty, and esd=False skips them."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from celllab.cells import CellSpec
from celllab.characterization.cell_risk import catalog_figures, event_figures
from celllab.characterization.esd_events import EsdEvent
from celllab.deck import load_deck
from celllab.engine import characterize
from celllab.fill_risk import gather

DECK = load_deck(Path(__file__).resolve().parents[1] / "process_decks" / "lumen130.toml")
CELLS = [CellSpec(name="tied", topology="nmos_inversion", oxide="core", width_sites=16, fingers=2),
         CellSpec(name="pair", topology="cross_coupled", oxide="core", width_sites=16, fingers=2),
         CellSpec(name="both", topology="tied_cmos", oxide="core", width_sites=16, fingers=2),
         CellSpec(name="plates", topology="mom", width_sites=8)]
ESD_COLUMNS = ("hbm_oxide_peak_V", "hbm_over_vbd_ns", "hbm_margin_V", "cdm_oxide_peak_V",
               "cdm_over_vbd_ns", "cdm_margin_V", "hbm_oxide_share_pct", "esd_series_helps",
               "broken_oxide_mA", "broken_oxide_mW", "broken_oxide_ok")


@pytest.fixture(scope="module")
def run():  # type: ignore[no-untyped-def]
    return characterize(DECK, CELLS, corners=["typ_25C", "slow_125C"])


def test_every_oxide_cell_and_corner_has_the_columns(run) -> None:  # type: ignore[no-untyped-def]
    by_name = {c.name: c for c in run.cells}
    for name in ("tied", "pair", "both"):
        for corner in by_name[name].corners:
            m = corner.metrics
            assert all(math.isfinite(m[k]) for k in ESD_COLUMNS), (name, corner.corner)
            # margin is the pulse breakdown voltage less the peak (definition of the column)
            assert m["hbm_margin_V"] == pytest.approx(m["pulse_vbd_V"] - m["hbm_oxide_peak_V"], rel=1e-12)
            assert m["broken_oxide_mW"] == pytest.approx(m["broken_oxide_mA"] * corner.supply_V, rel=1e-9)
    for corner in by_name["plates"].corners:  # no gate oxide: nothing to zap or break
        assert all(math.isnan(corner.metrics[k]) for k in ESD_COLUMNS)


def test_tied_oxides_see_the_whole_rail(run) -> None:  # type: ignore[no-untyped-def]
    # A gate tied to the rail carries the rail voltage less the drop across a ps R C against a
    # ns edge: within 1 % of the rail (first-order RC low-pass, docs/references.md [95])
    for name in ("tied", "both"):
        m = next(c for c in run.cells if c.name == name).corners[0].metrics
        assert m["hbm_oxide_share_pct"] == pytest.approx(100.0, abs=1.0)
        assert m["esd_series_helps"] == 0.0


def test_without_esd_the_columns_stay_empty() -> None:
    cell = characterize(DECK, CELLS[:1], corners=["typ_25C"], esd=False).cells[0]
    assert all(math.isnan(cell.corners[0].metrics[k]) for k in ESD_COLUMNS)
    # the flag says why they are empty, not that the model had no number
    flags = cell.corners[0].flags
    assert any(f.startswith("esd_not_run:") and "hbm_margin_V" in f for f in flags)
    assert not any(f.startswith("no_value:") and "hbm_margin_V" in f for f in flags)


def test_catalog_grid_agrees_with_the_fine_grid() -> None:
    # The fine grid is checked against ngspice within 2 % (tests/characterization/
    # test_esd_events.py, docs/references.md [95]); the catalog's coarse grid must stay within
    # 2 % of it on the peak oxide voltage and within 1 ns on the time above breakdown
    hbm, cdm = EsdEvent("hbm", 2000.0), EsdEvent("cdm", 250.0)
    for g in gather(DECK, CELLS[:3], ["typ_25C"]):
        coarse = catalog_figures(g, hbm, cdm)
        for ev, got in ((hbm, coarse.hbm), (cdm, coarse.cdm)):
            fine = event_figures(g, [ev])
            np.testing.assert_allclose(np.abs(got.peak_oxide_V), np.abs(fine.peak_oxide_V), rtol=0.02)
            np.testing.assert_allclose(got.time_above_s, fine.time_above_s, atol=1e-9)
