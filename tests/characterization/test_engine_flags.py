"""Every empty metric the engine produces carries a flag naming it; no numpy warning escapes.

Decks inside their documented ranges can drive a model past float range (a reference-scaled
leakage 20 decades/nm over 19 nm of thinning, a power-law TDDB life with exponent 200): the
value is then stored empty with a flag that names the metric and says why. pytest turns every
warning into an error here (``filterwarnings = error``), so a numpy overflow warning reaching
the caller fails these tests.
"""

from __future__ import annotations

import math

import pytest

from celllab.catalog import open_catalog
from celllab.catalog.validate import flag_names_metric, metric_problem
from celllab.cells import parse_cells
from celllab.deck import Deck, load_deck
from celllab.engine import characterize

CELLS = {"cell": [
    {"name": "n1", "topology": "nmos_inversion", "width_sites": 16},
    {"name": "x1", "topology": "cross_coupled", "width_sites": 24},
    {"name": "m1", "topology": "mom", "width_sites": 16},
    {"name": "mm1", "topology": "mos_mom", "width_sites": 16},
]}


@pytest.fixture(scope="module")
def quill(deck_dir) -> Deck:  # type: ignore[no-untyped-def]
    return load_deck(deck_dir / "quill28hk.toml")


EXTREMES = {
    "reference leakage past float range": {"oxides.core.leakage.decades_per_nm": 20,
                                           "oxides.core.leakage.j_ref_t_ox_nm": 20},
    "TDDB life past float range": {"oxides.core.reliability.acceleration_exponent": 200,
                                   "oxides.core.reliability.eta_ref_s": 1e20,
                                   "oxides.core.reliability.v_ref_V": 50},
}


@pytest.mark.parametrize("changes", EXTREMES.values(), ids=list(EXTREMES))
def test_overflowing_models_store_flagged_empty_metrics(quill: Deck, changes: dict[str, float],
                                                         tmp_path) -> None:  # type: ignore[no-untyped-def]
    deck = quill.with_changes(changes)
    run = characterize(deck, parse_cells(CELLS, deck))
    empty = 0
    for cell in run.cells:
        for c in cell.corners:
            for m, value in c.metrics.items():
                assert metric_problem(m, value, c.flags) is None, (cell.name, c.corner, m, value, c.flags)
                if math.isnan(value):
                    empty += 1
                    assert flag_names_metric(m, c.flags)
    assert empty > 0  # the extreme deck really drove a model out of range
    with open_catalog(tmp_path / "c.sqlite") as cat:
        assert cat.store_run(run).inserted == len(CELLS["cell"])


def test_mom_cells_say_why_oxide_metrics_are_empty(quill: Deck) -> None:
    run = characterize(quill, parse_cells({"cell": [CELLS["cell"][2]]}, quill))
    for c in run.cells[0].corners:
        for m in ("tddb_fit_per_mm2", "pulse_vbd_V", "hbm_margin_V", "broken_oxide_mA"):
            assert math.isnan(c.metrics[m]) and flag_names_metric(m, c.flags)
        assert any("gate oxide" in f for f in c.flags)
