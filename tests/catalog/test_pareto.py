"""Pareto fronts against the definition of dominance (brute force, written in the test)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.catalog.pareto import pareto_mask
from celllab.errors import FilterError
from celllab.records import CELL_COLUMNS, METRIC_BY_NAME

from .conftest import make_run


def brute_front(points: list[tuple[float, ...]]) -> list[int]:
    """Indices of rows no other row dominates (<= everywhere, < somewhere), all minimised.

    Brute force, written in the test: the textbook definition, O(n^2) plain Python.
    """
    front = []
    for i, p in enumerate(points):
        dominated = any(
            all(q[k] <= p[k] for k in range(len(p))) and any(q[k] < p[k] for k in range(len(p)))
            for j, q in enumerate(points)
            if j != i
        )
        if not dominated:
            front.append(i)
    return front


@pytest.mark.parametrize("k", [2, 3])
@pytest.mark.parametrize("seed", range(6))
def test_mask_equals_brute_force(k: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    # small integer grid: many ties and duplicate points, the tricky cases
    values = rng.integers(0, 6 if seed % 2 else 40, size=(300, k)).astype(float)
    if seed == 5:
        values[:50] = values[0]  # a block of identical points
    assert np.flatnonzero(pareto_mask(values)).tolist() == brute_front([tuple(v) for v in values])


def test_mask_with_infinities_and_tiny_inputs() -> None:
    v = np.array([[1.0, np.inf], [np.inf, 1.0], [2.0, 2.0], [-np.inf, 5.0]])
    assert np.flatnonzero(pareto_mask(v)).tolist() == brute_front([tuple(x) for x in v])
    assert pareto_mask(np.zeros((0, 2))).tolist() == []
    assert pareto_mask(np.array([[1.0, 2.0, 3.0]])).tolist() == [True]
    with pytest.raises(ValueError):
        pareto_mask(np.array([[1.0, np.nan]]))


@pytest.mark.parametrize("k", [2, 3])
def test_mask_on_100k_rows_satisfies_the_definition(k: int) -> None:
    """100 000 rows: every row left out is dominated by a front row; no front row is dominated.

    Check by the definition, vectorised over the front (written in the test).
    """
    rng = np.random.default_rng(42)
    values = np.round(rng.normal(size=(100_000, k)), 2)
    mask = pareto_mask(values)
    front, rest = values[mask], values[~mask]
    assert 0 < len(front) < 2000

    def dominated(points: np.ndarray, by: np.ndarray) -> np.ndarray:
        out = np.zeros(len(points), dtype=bool)
        for q in by:
            out |= np.all(q <= points, axis=1) & np.any(q < points, axis=1)
        return out

    assert dominated(rest, front).all()
    assert not dominated(front, values[rng.choice(len(values), 5000, replace=False)]).any()
    assert not dominated(front, front).any()


def _sign(metric: str) -> float:
    info = METRIC_BY_NAME.get(metric) or CELL_COLUMNS[metric]
    return -1.0 if info.better == "higher" else 1.0


@pytest.mark.parametrize(
    "metrics",
    [
        ["cap_density_fF_per_um2", "leakage_nA_per_nF"],
        ["bandwidth_GHz", "esr_ohm", "area_um2"],
        ["cap_fF", "pulse_vbd_V", "tddb_fit_per_mm2"],
    ],
)
def test_catalog_pareto_equals_brute_force(catalog: Catalog, metrics: list[str]) -> None:
    catalog.store_run(make_run(n_cells=60, seed=9))
    rows = catalog.query(corner="worst", where="height_rows <= 2", limit=None)
    usable = [r for r in rows if all(r[m] is not None and not math.isnan(r[m]) for m in metrics)]
    points = [tuple(_sign(m) * r[m] for m in metrics) for r in usable]
    expected = {usable[i]["name"] for i in brute_front(points)}
    got = catalog.pareto(metrics, corner="worst", where="height_rows <= 2")
    assert {r["name"] for r in got} == expected
    firsts = [_sign(metrics[0]) * r[metrics[0]] for r in got]
    assert firsts == sorted(firsts)  # best first by the first metric


@pytest.mark.parametrize(
    "metrics",
    [
        ["cap_fF"],
        ["cap_fF", "cap_fF"],
        ["cap_fF", "a", "b", "c"],
        ["cap_fF", "topology"],
        ["cap_fF", "capfF"],
    ],
)
def test_bad_metric_choice(catalog: Catalog, metrics: list[str]) -> None:
    with pytest.raises(FilterError):
        catalog.pareto(metrics)


def test_empty_pareto(catalog: Catalog) -> None:
    catalog.store_run(make_run(n_cells=3))
    assert catalog.pareto(["cap_fF", "esr_ohm"], where="cap_fF < 0") == []
    assert catalog.pareto(["cap_fF", "pulse_vbd_V"], where="topology = mom") == []  # empty values
