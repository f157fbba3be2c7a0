"""Corner policies: each planning figure at its worst corner, the same 'worst' as the
catalog's per-metric aggregate."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.planner.corners import (
    CAPACITANCE,
    LEAKAGE_BUDGET,
    PDN_RESPONSE,
    POLICIES,
    USEFUL_CAPACITANCE,
)
from celllab.records import METRIC_BY_NAME

from . import CORNERS, DECK, IdealCell, synthetic_catalog


def test_policies_follow_the_metric_direction() -> None:
    # Source: the metric registry's "better" direction (leakage lower is better, cap higher)
    assert LEAKAGE_BUDGET.worst_is_largest and not CAPACITANCE.worst_is_largest
    values = np.array([[3.0, 5.0, np.nan, 1.0]])
    assert LEAKAGE_BUDGET.worst_index(values).tolist() == [1]
    assert CAPACITANCE.worst_index(values).tolist() == [3]
    assert LEAKAGE_BUDGET.worst(values).tolist() == [5.0]
    for p in POLICIES:
        assert p.metric in METRIC_BY_NAME and p.name and p.purpose
    assert {USEFUL_CAPACITANCE.metric, PDN_RESPONSE.metric} == {"cap_fF"}


def test_policies_agree_with_the_catalog_worst_aggregate(tmp_path: Path) -> None:
    # Source: the catalog's corner="worst" aggregate (MIN of cap, MAX of leakage per cell)
    catalog = synthetic_catalog(tmp_path / "c.sqlite", [IdealCell("a", 100.0, leakage_nA=2.0),
                                                        IdealCell("b", 50.0, leakage_nA=1.0)])
    worst = {r["name"]: r for r in catalog.query(deck=DECK, corner="worst", limit=None)}
    for name in ("a", "b"):
        record = catalog.cell(name, deck=DECK)
        caps = np.array([c.metrics["cap_fF"] for c in record.corners])
        leaks = np.array([c.metrics["leakage_nA"] for c in record.corners])
        assert float(CAPACITANCE.worst(caps)) == pytest.approx(worst[name]["cap_fF"], rel=1e-12)
        assert float(LEAKAGE_BUDGET.worst(leaks)) == pytest.approx(worst[name]["leakage_nA"],
                                                                   rel=1e-12)
        names = list(CORNERS)
        assert names[int(CAPACITANCE.worst_index(caps))] == "slow_125C"
        assert names[int(LEAKAGE_BUDGET.worst_index(leaks))] == "leaky_125C"
