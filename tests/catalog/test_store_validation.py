"""What a run must be to be stored: finite plausible numbers, or empty ones a flag explains.

Each refused run leaves the catalog exactly as it was. Plausible ranges are those of
``celllab.catalog.validate.METRIC_RANGES`` (derived there from the deck limits and
docs/references.md [10]).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import pytest

from celllab.catalog import Catalog
from celllab.catalog.validate import METRIC_RANGES, flag_names_metric, metric_problem
from celllab.errors import CatalogError
from celllab.records import CellResult, CharacterizationRun

from .conftest import make_run


def _with_metric(run: CharacterizationRun, metric: str, value: Any, flags: list[str] | None = None,
                 cell: int = 0) -> CharacterizationRun:
    original = run.cells[cell]
    corners = [replace(original.corners[0], metrics={**original.corners[0].metrics, metric: value},
                       flags=original.corners[0].flags if flags is None else flags),
               *original.corners[1:]]
    cells = list(run.cells)
    cells[cell] = replace(original, corners=corners)
    return replace(run, cells=cells)


def _counts(cat: Catalog) -> tuple[int, ...]:
    return tuple(cat._db.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
                 for t in ("decks", "runs", "cells", "corner_metrics"))


def _refused(cat: Catalog, run: CharacterizationRun) -> str:
    before = _counts(cat)
    with pytest.raises(CatalogError) as info:
        cat.store_run(run)
    assert _counts(cat) == before
    return str(info.value)


@pytest.mark.parametrize("value", [math.nan, None])
def test_empty_metric_without_a_flag_is_refused(catalog: Catalog, value: Any) -> None:
    message = _refused(catalog, _with_metric(make_run(n_cells=3), "leakage_nA", value, flags=[]))
    assert "metrics.leakage_nA" in message and "no flag" in message


def test_empty_metric_with_a_flag_naming_it_is_stored(catalog: Catalog) -> None:
    flag = "leakage_overflow: leakage_nA is empty (the model overflows at this corner)"
    run = _with_metric(make_run(n_cells=3), "leakage_nA", math.nan, flags=[flag])
    assert catalog.store_run(run).inserted == 3
    stored = catalog.cell(run.cells[0].name).corners[0]
    assert math.isnan(stored.metrics["leakage_nA"]) and flag in stored.flags


def test_a_flag_must_name_the_metric_as_a_word() -> None:
    # leakage_nA_per_nF does not explain an empty leakage_nA, nor the other way round
    assert not flag_names_metric("leakage_nA", ["leakage_nA_per_nF beyond range"])
    assert not flag_names_metric("leakage_nA_per_nF", ["leakage_nA empty"])
    assert flag_names_metric("leakage_nA", ["empty: leakage_nA, tddb_fit_per_mm2"])


@pytest.mark.parametrize(("metric", "value", "says"), [
    ("cap_fF", math.inf, "not a finite number"),
    ("cap_fF", -math.inf, "not a finite number"),
    ("cap_fF", 0.0, "plausible range"),
    ("cap_fF", -1.0, "plausible range"),
    ("cap_density_fF_per_um2", 1e6, "plausible range"),
    ("esr_ohm", -0.5, "plausible range"),
    ("cap_fF", "12.5", "not a number"),
    ("cap_fF", b"\x00" * 8, "not a number"),
    ("esr_ohm", True, "not a number"),
])
def test_implausible_or_mistyped_metric_is_refused(catalog: Catalog, metric: str, value: Any,
                                                    says: str) -> None:
    message = _refused(catalog, _with_metric(make_run(n_cells=2), metric, value))
    assert f"metrics.{metric}" in message and says in message


def test_every_range_admits_the_synthetic_values() -> None:
    run = make_run(n_cells=12)
    for cell in run.cells:
        for c in cell.corners:
            for m, value in c.metrics.items():
                assert metric_problem(m, value, c.flags) is None, (cell.name, c.corner, m, value)
    assert set(METRIC_RANGES) <= set(run.cells[0].corners[0].metrics)


@pytest.mark.parametrize(("attr", "value"), [
    ("name", "ok\x1b[31mred"),
    ("name", "two\nlines"),
    ("name", "x" * 10_000_000),
    ("family", "fam\x1b]0;title\x07"),
    ("topology", "nmos_inv"),
    ("oxide", "thick"),
    ("area_um2", -1.0),
    ("area_um2", math.nan),
    ("width_sites", 0),
])
def test_cell_identity_and_columns_are_checked(catalog: Catalog, attr: str, value: Any) -> None:
    run = make_run(n_cells=2)
    bad: CellResult = replace(run.cells[1], **{attr: value})
    message = _refused(catalog, replace(run, cells=[run.cells[0], bad]))
    assert f".{attr} = " in message
    assert "\x1b" not in message and "\n" not in message.replace("\nrun of deck", "")
    assert len(message) < 2000


def test_non_finite_response_is_refused(catalog: Catalog) -> None:
    run = make_run(n_cells=2)
    cell = run.cells[0]
    z = cell.corners[0].response.z_ohm.copy()
    z[3] = complex(math.inf, 0)
    corner = replace(cell.corners[0], response=replace(cell.corners[0].response, z_ohm=z))
    bad = replace(cell, corners=[corner, *cell.corners[1:]])
    message = _refused(catalog, replace(run, cells=[bad, run.cells[1]]))
    assert "response.z_ohm" in message
