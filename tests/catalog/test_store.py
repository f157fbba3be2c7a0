"""Storing runs: exact round trip, no-op re-store, supersession with history, all-or-nothing."""

from __future__ import annotations

import math
import sqlite3
import threading
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog, open_catalog, store
from celllab.errors import CatalogError
from celllab.records import METRIC_NAMES, CharacterizationRun

from .conftest import make_run, scaled_copy


def _counts(cat: Catalog) -> dict[str, int]:
    return {
        t: cat._db.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
        for t in ("decks", "runs", "cells", "corner_metrics", "responses", "cv_curves")
    }


def test_round_trip_is_exact(filled: Catalog, run: CharacterizationRun) -> None:
    for original in run.cells:
        back = filled.cell(original.name)
        assert (back.name, back.cell_hash, back.family, back.topology, back.oxide) == (
            original.name,
            original.cell_hash,
            original.family,
            original.topology,
            original.oxide,
        )
        assert back.geometry == original.geometry and back.notes == original.notes
        assert (back.width_sites, back.height_rows, back.esd_safe) == (
            original.width_sites,
            original.height_rows,
            original.esd_safe,
        )
        assert back.area_um2 == original.area_um2
        assert [c.corner for c in back.corners] == [c.corner for c in original.corners]
        for b, o in zip(back.corners, original.corners, strict=True):
            assert (b.temperature_C, b.supply_V, b.flags) == (o.temperature_C, o.supply_V, o.flags)
            for m in METRIC_NAMES:  # float64 stored exactly; NaN comes back as NaN
                assert b.metrics[m] == o.metrics[m] or (
                    math.isnan(b.metrics[m]) and math.isnan(o.metrics[m])
                )
            np.testing.assert_array_equal(b.response.freq_Hz, o.response.freq_Hz)
            np.testing.assert_array_equal(b.response.z_ohm, o.response.z_ohm)
            assert b.response.z_ohm.dtype == np.complex128
            if o.cv is None:
                assert b.cv is None
            else:
                assert b.cv is not None
                np.testing.assert_array_equal(b.cv.cap_F, o.cv.cap_F)
                np.testing.assert_array_equal(b.cv.bias_V, o.cv.bias_V)
                assert b.cv.operating_cap_F == o.cv.operating_cap_F


def test_first_store_report(catalog: Catalog, run: CharacterizationRun) -> None:
    report = catalog.store_run(run)
    assert (report.inserted, report.unchanged, report.superseded) == (len(run.cells), 0, 0)
    assert report.run_id is not None and report.changed
    counts = _counts(catalog)
    assert counts["cells"] == len(run.cells)
    assert counts["corner_metrics"] == len(run.cells) * len(run.corners)
    assert counts["cv_curves"] == sum(c.cv is not None for cell in run.cells for c in cell.corners)


def test_restore_unchanged_is_noop(filled: Catalog, run: CharacterizationRun) -> None:
    before = _counts(filled)
    first_run = filled._db.execute("SELECT MAX(run_id) FROM runs").fetchone()[0]
    report = filled.store_run(run)
    assert (report.inserted, report.unchanged, report.superseded) == (0, len(run.cells), 0)
    assert report.run_id == first_run and not report.changed and report.differing == []
    assert _counts(filled) == before


def test_changed_deck_supersedes_and_keeps_history(
    filled: Catalog, run: CharacterizationRun
) -> None:
    newer = make_run(deck_version=2, n_cells=10)
    report = filled.store_run(newer)
    assert report.inserted == 10 and report.superseded == len(run.cells)
    decks = filled.decks()
    assert [(d.deck_hash, d.current) for d in decks] == [
        (run.deck_hash, False),
        (newer.deck_hash, True),
    ]
    assert filled.count() == 10  # queries default to current results
    assert filled.count(current_only=False) == len(run.cells) + 10  # history is still there
    assert filled.deck_params(run.deck_name) == newer.deck_params
    assert filled.deck_params(run.deck_hash) == run.deck_params
    # storing the old deck again makes it current again without re-inserting anything
    again = filled.store_run(run)
    assert again.inserted == 0 and again.superseded == 10
    assert filled.count() == len(run.cells)


def test_changed_cell_supersedes_old_result(filled: Catalog, run: CharacterizationRun) -> None:
    cell = run.cells[0]
    changed = replace(cell, cell_hash="f" * 64, geometry={**cell.geometry, "fingers": 9})
    report = filled.store_run(replace(run, cells=[changed]))
    assert (report.inserted, report.superseded) == (1, 1)
    assert filled.cell(cell.name).geometry["fingers"] == 9
    assert filled.count() == len(run.cells)
    names = [r["name"] for r in filled.query(current_only=False, limit=None)]
    assert names.count(cell.name) == 2


def test_new_model_version_supersedes(filled: Catalog, run: CharacterizationRun) -> None:
    report = filled.store_run(replace(run, model_version="test-models-2"))
    assert report.inserted == len(run.cells) and report.superseded == len(run.cells)
    rows = filled.query(limit=None)
    assert {r["model_version"] for r in rows} == {"test-models-2"}


def test_same_key_other_numbers_is_reported(filled: Catalog, run: CharacterizationRun) -> None:
    altered = replace(run, cells=[scaled_copy(run.cells[0], 2.0), *run.cells[1:]])
    report = filled.store_run(altered)
    assert report.inserted == 0 and report.differing == [run.cells[0].name]
    kept = filled.cell(run.cells[0].name).corners[0].metrics["cap_fF"]
    assert kept == run.cells[0].corners[0].metrics["cap_fF"]  # stored numbers kept


@pytest.mark.parametrize(
    "breakage",
    ["missing metric", "unknown metric", "foreign corner", "duplicate name", "ragged response"],
)
def test_bad_run_is_rejected_with_nothing_written(catalog: Catalog, breakage: str) -> None:
    run = make_run(n_cells=4)
    cell = run.cells[2]
    corner = cell.corners[1]
    if breakage == "missing metric":
        metrics = dict(corner.metrics)
        metrics.pop("esr_ohm")
        cell.corners[1] = replace(corner, metrics=metrics)
    elif breakage == "unknown metric":
        cell.corners[1] = replace(corner, metrics={**corner.metrics, "esr_mohm": 1.0})
    elif breakage == "foreign corner":
        cell.corners[1] = replace(corner, corner="hot_200C")
    elif breakage == "duplicate name":
        run.cells[3] = replace(run.cells[3], name=cell.name)
    else:
        cell.corners[1] = replace(
            corner, response=replace(corner.response, z_ohm=corner.response.z_ohm[:-1])
        )
    with pytest.raises(CatalogError) as err:
        catalog.store_run(run)
    assert cell.name in str(err.value)
    assert _counts(catalog) == dict.fromkeys(_counts(catalog), 0)


def test_failure_mid_batch_rolls_back(filled: Catalog, monkeypatch: pytest.MonkeyPatch) -> None:
    before = _counts(filled)

    def explode(n: int) -> None:
        if n == 5:
            raise RuntimeError("disk on fire")

    monkeypatch.setattr(store, "_cell_stored_hook", explode)
    with pytest.raises(RuntimeError):
        filled.store_run(make_run(deck_version=3, n_cells=12))
    assert _counts(filled) == before
    assert all(d.current for d in filled.decks())  # the supersession was rolled back too
    monkeypatch.setattr(store, "_cell_stored_hook", None)
    assert filled.store_run(make_run(deck_version=3, n_cells=12)).inserted == 12


def test_deck_hash_under_other_name_is_refused(filled: Catalog, run: CharacterizationRun) -> None:
    with pytest.raises(CatalogError) as err:
        filled.store_run(replace(run, deck_name="renamed"))
    assert "already stored under the deck name" in str(err.value)


def test_cell_lookup_errors(filled: Catalog) -> None:
    with pytest.raises(CatalogError) as err:
        filled.cell("mom_core_00044")
    assert "did you mean" in str(err.value)
    filled.store_run(make_run(deck_name="invented_other", n_cells=3))
    with pytest.raises(CatalogError) as err:
        filled.cell("ninv_core_0000")
    assert "several decks" in str(err.value)
    assert filled.cell("ninv_core_0000", deck="invented_other").name == "ninv_core_0000"


def test_catalog_is_usable_from_a_worker_thread(filled: Catalog) -> None:
    results: list[int] = []
    worker = threading.Thread(target=lambda: results.append(filled.count(corner=None)))
    worker.start()
    worker.join()
    assert results == [filled.count(corner=None)]


def test_equivalent_circuits_round_trip_per_corner(tmp_path) -> None:
    """The catalog keeps each corner's equivalent circuit; the rebuilt netlist gives the same Z(f)."""
    import numpy as np

    from celllab.catalog import open_catalog
    from celllab.cells import CellSpec
    from celllab.deck import load_deck
    from celllab.engine import characterize
    from celllab.physics.netlist import solve_impedance

    deck = load_deck("process_decks/lumen130.toml")
    cells = [CellSpec(name="x", topology="cross_coupled", width_sites=16, fingers=2),
             CellSpec(name="m", topology="mos_mom", width_sites=16, fingers=2)]
    run = characterize(deck, cells)
    cat = open_catalog(tmp_path / "c.sqlite")
    cat.store_run(run)
    for original in run.cells:
        back = cat.cell(original.name)
        assert set(back.netlist) == set(deck.corner_names())
        f = np.logspace(6, 11, 30)
        for corner, net in original.netlist.items():
            np.testing.assert_allclose(solve_impedance(back.netlist[corner], f), solve_impedance(net, f), rtol=1e-12)


def test_circuits_come_back_in_the_run_corner_order(tmp_path) -> None:
    from celllab.catalog import open_catalog
    from celllab.cells import CellSpec
    from celllab.deck import load_deck
    from celllab.engine import characterize

    deck = load_deck("process_decks/lumen130.toml")
    run = characterize(deck, [CellSpec(name="n", topology="nmos_inversion", width_sites=8)])
    cat = open_catalog(tmp_path / "c.sqlite")
    cat.store_run(run)
    back = cat.cell("n")
    assert list(back.netlist) == [c.corner for c in back.corners] == deck.corner_names()


def test_remove_run_takes_back_the_latest_run_and_a_deck_it_alone_used(tmp_path) -> None:  # type: ignore[no-untyped-def]
    from celllab.catalog import open_catalog

    catalog = open_catalog(tmp_path / "c.sqlite")
    base = make_run(n_cells=5)
    catalog.store_run(base)
    other = make_run(n_cells=3, deck_name="otherdeck", seed=2)
    second = catalog.store_run(other)
    assert "otherdeck" in {d.name for d in catalog.decks()}
    assert catalog.remove_run(second.run_id) == 3
    assert "otherdeck" not in {d.name for d in catalog.decks()}
    assert catalog.count(deck=base.deck_name) == 5  # the other deck is untouched
    with pytest.raises(CatalogError):
        catalog.remove_run(second.run_id)  # gone already
    catalog.close()


def test_parts_of_a_run_store_as_one_run(tmp_path: Path) -> None:
    """`store_runs` writes the parts of one run under one run record, with the same rows as
    `store_run` of the whole; a bad part rolls every part back; parts of different runs are
    refused."""
    run = make_run(n_cells=9, seed=4)
    whole, split = open_catalog(tmp_path / "a.sqlite"), open_catalog(tmp_path / "b.sqlite")
    whole.store_run(run)
    parts = [replace(run, cells=run.cells[i:i + 4]) for i in range(0, 9, 4)]
    report = split.store_runs(iter(parts))
    assert report.inserted == 9 and report.run_id == 1
    for cat in (whole, split):
        cat.close()

    def rows(name: str) -> list[tuple[object, ...]]:
        db = sqlite3.connect(tmp_path / name)
        out = sorted(db.execute("SELECT name, result_digest, run_id FROM cells").fetchall())
        out.append(db.execute("SELECT COUNT(*) FROM runs").fetchone())
        db.close()
        return out

    assert rows("a.sqlite") == rows("b.sqlite")
    fresh = open_catalog(tmp_path / "c.sqlite")
    broken = replace(parts[2], cells=[replace(parts[2].cells[0], name="")])
    with pytest.raises(CatalogError):
        fresh.store_runs([parts[0], parts[1], broken])
    with pytest.raises(CatalogError, match="same deck version"):
        fresh.store_runs([parts[0], replace(parts[1], model_version="other")])
    with pytest.raises(CatalogError, match="repeats an earlier part"):
        fresh.store_runs([parts[0], parts[0]])
    assert _counts(fresh)["cells"] == 0 and _counts(fresh)["runs"] == 0
    fresh.close()
