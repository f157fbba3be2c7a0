"""Ranking, counting, worst/best aggregation and lookups against brute force written in the test."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from typing import Any

import pytest

from celllab.catalog import Catalog
from celllab.catalog.query import ROW_KEYS, ranked_query_sql
from celllab.errors import CatalogError, FilterError
from celllab.records import CELL_COLUMNS, METRIC_BY_NAME, METRIC_NAMES, CharacterizationRun

from .conftest import make_run

Row = dict[str, Any]


def brute_rows(run: CharacterizationRun, corner: str | None) -> list[Row]:
    """Catalog rows computed in plain Python from the run objects (brute force, written in the test).

    worst = least favourable value over the corners by METRICS.better (min of higher-is-better,
    max of lower-is-better), best the opposite; empty (NaN) values are skipped.
    """
    out = []
    for cell in run.cells:
        base = {
            "name": cell.name,
            "deck": run.deck_name,
            "family": cell.family,
            "topology": cell.topology,
            "oxide": cell.oxide,
            **{k: getattr(cell, k) for k in CELL_COLUMNS},
        }
        if corner in ("worst", "best"):
            metrics: dict[str, float | None] = {}
            for m in METRIC_NAMES:
                values = [c.metrics[m] for c in cell.corners if not math.isnan(c.metrics[m])]
                take_min = (METRIC_BY_NAME[m].better == "higher") == (corner == "worst")
                metrics[m] = (min(values) if take_min else max(values)) if values else None
            for m in METRIC_NAMES:  # a bound flag follows the corner that gives its metric's extreme
                marked = METRIC_BY_NAME[m].bounds
                if marked:
                    flags = [c.metrics[m] for c in cell.corners if c.metrics[marked] == metrics[marked]]
                    metrics[m] = max(flags) if flags else None
            out.append({**base, "corner": corner, **metrics})
        else:
            for c in cell.corners:
                if corner is None or c.corner == corner:
                    out.append(
                        {
                            **base,
                            "corner": c.corner,
                            **{m: None if math.isnan(v) else v for m, v in c.metrics.items()},
                        }
                    )
    return out


def brute_rank(
    rows: list[Row], keep: Callable[[Row], bool], by: str, descending: bool
) -> list[Row]:
    kept = [r for r in rows if keep(r)]
    kept.sort(key=lambda r: (r["name"], r["deck"], r["corner"]))
    present = [r for r in kept if r[by] is not None]
    present.sort(key=lambda r: r[by], reverse=descending)  # stable: ties keep name order
    return present + [r for r in kept if r[by] is None]


def _le(a: Any, b: float) -> bool:
    return a is not None and a <= b


FILTERS: list[tuple[str, Callable[[Row], bool]]] = [
    ("", lambda r: True),
    (
        "leakage_nA_per_nF <= 50 and esd_safe",
        lambda r: _le(r["leakage_nA_per_nF"], 50) and r["esd_safe"],
    ),
    (
        "topology in (cross_coupled, mom) or height_rows = 1",
        lambda r: r["topology"] in ("cross_coupled", "mom") or r["height_rows"] == 1,
    ),
    (
        "not (esr_ohm > 30 or bandwidth_GHz < 50)",
        lambda r: not (r["esr_ohm"] > 30 or r["bandwidth_GHz"] < 50),
    ),
    (
        'oxide = io and name ~ "*io_00[0-2]*"',
        lambda r: r["oxide"] == "io" and r["name"][-4:-2] == "00" and r["name"][-2] in "012",
    ),
    (
        "cap_fF > cap_ox_fF or width_sites >= 30",
        lambda r: r["cap_fF"] > r["cap_ox_fF"] or r["width_sites"] >= 30,
    ),
    ("pulse_vbd_V >= 5", lambda r: r["pulse_vbd_V"] is not None and r["pulse_vbd_V"] >= 5),
]


@pytest.fixture(scope="module")
def two_deck_catalog(
    tmp_path_factory: pytest.TempPathFactory,
) -> Iterator[tuple[Catalog, list[CharacterizationRun]]]:
    from celllab.catalog import open_catalog

    runs = [make_run(n_cells=36, seed=3), make_run(n_cells=18, seed=4, deck_name="invented_m9z")]
    cat = open_catalog(tmp_path_factory.mktemp("q") / "cat.sqlite")
    for run in runs:
        cat.store_run(run)
    yield cat, runs
    cat.close()


def _all_brute(runs: list[CharacterizationRun], corner: str | None) -> list[Row]:
    return [r for run in runs for r in brute_rows(run, corner)]


@pytest.mark.parametrize("corner", ["worst", "best", "slow_125C", None])
@pytest.mark.parametrize("where, keep", FILTERS, ids=[f[0] or "all" for f in FILTERS])
def test_ranking_equals_brute_force(
    two_deck_catalog: Any, corner: str | None, where: str, keep: Callable[[Row], bool]
) -> None:
    cat, runs = two_deck_catalog
    for by in ("cap_density_fF_per_um2", "leakage_nA_per_nF", "pulse_vbd_V", "area_um2"):
        info = METRIC_BY_NAME.get(by) or CELL_COLUMNS[by]
        expected = brute_rank(_all_brute(runs, corner), keep, by, info.better == "higher")
        got = cat.query(corner=corner, where=where, order_by=by, limit=None)
        assert [(r["name"], r["deck"], r["corner"], r[by]) for r in got] == [
            (r["name"], r["deck"], r["corner"], r[by]) for r in expected
        ]
        assert cat.count(corner=corner, where=where) == len(expected)
    # every metric of every row, not only the ranking column
    got = cat.query(corner=corner, where=where, limit=None)
    expected = brute_rank(_all_brute(runs, corner), keep, "cap_density_fF_per_um2", True)
    for g, e in zip(got, expected, strict=True):
        assert {m: g[m] for m in METRIC_NAMES} == {m: e[m] for m in METRIC_NAMES}


@pytest.mark.parametrize("descending", [True, False])
def test_explicit_direction_paging_and_deck(two_deck_catalog: Any, descending: bool) -> None:
    cat, runs = two_deck_catalog
    expected = brute_rank(brute_rows(runs[1], "worst"), lambda r: True, "esr_ohm", descending)
    pages = [
        cat.query(deck="invented_m9z", order_by="esr_ohm", descending=descending, limit=5, offset=o)
        for o in range(0, 20, 5)
    ]
    assert [r["name"] for page in pages for r in page] == [r["name"] for r in expected]
    assert [len(p) for p in pages] == [5, 5, 5, 3]
    assert cat.count(deck="invented_m9z") == 18
    assert cat.count(deck=runs[1].deck_hash) == 18


def test_rows_have_contract_keys(two_deck_catalog: Any) -> None:
    cat, _ = two_deck_catalog
    row = cat.query(limit=1)[0]
    assert list(row) == list(ROW_KEYS)
    assert isinstance(row["esd_safe"], bool) and isinstance(row["flags"], list)
    assert row["temperature_C"] is None  # worst: no single corner
    typ = cat.query(corner="typ_25C", limit=1)[0]
    assert typ["temperature_C"] == 25.0 and typ["supply_V"] == 1.2


def test_worst_flags_are_union_of_corners(two_deck_catalog: Any) -> None:
    cat, runs = two_deck_catalog
    for cell in runs[0].cells[:10]:
        row = cat.compare([cell.name], deck=runs[0].deck_name)[0]
        assert row["flags"] == sorted({f for c in cell.corners for f in c.flags})


def test_compare_keeps_order_and_reports_missing(two_deck_catalog: Any) -> None:
    cat, runs = two_deck_catalog
    names = [runs[0].cells[5].name, runs[0].cells[1].name]
    rows = cat.compare(names, deck=runs[0].deck_name, corner="typ_25C")
    assert [r["name"] for r in rows] == names
    assert rows[0]["cap_fF"] == runs[0].cells[5].corner("typ_25C").metrics["cap_fF"]
    with pytest.raises(CatalogError) as err:
        cat.compare([names[0], "no_such_cell"])
    assert "no_such_cell" in str(err.value)


def test_corners_decks_and_params(two_deck_catalog: Any) -> None:
    cat, runs = two_deck_catalog
    assert cat.corners() == ["typ_25C", "slow_125C", "fast_m40C"]
    assert cat.corners("invented_m9z") == runs[1].corners
    infos = cat.decks()
    assert [(d.name, d.n_cells, d.current) for d in infos] == [
        ("invented_m9z", 18, True),
        ("invented_n7x", 36, True),
    ]
    assert cat.deck_params("invented_m9z") == runs[1].deck_params


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda c: c.query(deck="invented_n7"), "did you mean 'invented_n7x'"),
        (lambda c: c.query(corner="typ_25"), "did you mean 'typ_25C'"),
        (lambda c: c.count(corner="hot"), "corners: typ_25C, slow_125C, fast_m40C, worst, best"),
        (lambda c: c.deck_params("nope"), "no such deck"),
    ],
)
def test_lookup_errors(two_deck_catalog: Any, call: Callable[[Catalog], Any], message: str) -> None:
    cat, _ = two_deck_catalog
    with pytest.raises(CatalogError) as err:
        call(cat)
    assert message in str(err.value)


def test_order_by_unknown_column() -> None:
    with pytest.raises(FilterError) as err:
        ranked_query_sql(order_by="cap_density")
    assert "cap_density_fF_per_um2" in str(err.value)


def test_sql_builder_is_parameterized() -> None:
    sql, params = ranked_query_sql(
        corner="slow_125C", deck="d'x", where='name = "q\'"', order_by="esr_ohm", limit=3, offset=6
    )
    assert "d'x" not in sql and "q'" not in sql and "slow_125C" not in sql
    assert params[-2:] == [3, 6] and "d'x" in params and "q'" in params
    assert 'ORDER BY r."esr_ohm" ASC NULLS LAST' in sql  # lower is better -> ascending


def test_name_taken_and_identical_cell(two_deck_catalog: Any) -> None:
    cat, runs = two_deck_catalog
    cell, deck = runs[0].cells[3], runs[0].deck_name
    assert cat.name_taken(cell.name, deck) and cat.name_taken(cell.name, runs[0].deck_hash)
    assert cat.name_taken(cell.name, runs[1].deck_name) == (cell.name in {c.name for c in runs[1].cells})
    assert not cat.name_taken("no_such_cell", deck) and not cat.name_taken(cell.name, "no_such_deck")
    assert cat.identical_cell(cell.cell_hash, deck) == cell.name
    assert cat.identical_cell("0" * 16, deck) is None
    assert cat.identical_cell(cell.cell_hash, "no_such_deck") is None
