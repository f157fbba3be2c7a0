"""Merging catalogs by content hash: identical skipped, new added, conflicts reported, one transaction."""

from __future__ import annotations

import hashlib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog, merge, open_catalog
from celllab.errors import CatalogError

from .conftest import CORNERS, make_cell, make_run, scaled_copy


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _counts(cat: Catalog) -> dict[str, int]:
    return {
        t: cat._db.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
        for t in (
            "decks",
            "runs",
            "cells",
            "corner_metrics",
            "corner_extremes",
            "responses",
            "cv_curves",
        )
    }


@pytest.fixture
def other_path(tmp_path: Path) -> Path:
    return tmp_path / "other.sqlite"


def _make_other(path: Path, *runs) -> None:  # type: ignore[no-untyped-def]
    with open_catalog(path) as other:
        for run in runs:
            other.store_run(run)
        other._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")


def test_identical_catalog_adds_nothing(filled: Catalog, run, other_path: Path) -> None:  # type: ignore[no-untyped-def]
    _make_other(other_path, run)
    before = _counts(filled)
    report = filled.merge_from(other_path)
    assert (report.added, report.identical, report.conflicts) == (0, len(run.cells), [])
    assert _counts(filled) == before


def test_new_results_are_added_exactly(filled: Catalog, run, other_path: Path) -> None:  # type: ignore[no-untyped-def]
    extra = make_run(deck_name="invented_m9z", n_cells=7, seed=5)
    more_cells = make_run(n_cells=5, seed=6, first_index=500)  # same deck, new cells
    _make_other(other_path, run, extra, more_cells)
    sha_before = _sha(other_path)
    report = filled.merge_from(other_path, make_current=True)
    assert report.added == 12 and report.identical == len(run.cells) and not report.conflicts
    assert report.decks_added == 1 and report.runs_added == 2
    assert report.decks_made_current == [f"invented_m9z ({extra.deck_hash[:12]})"]
    assert _sha(other_path) == sha_before  # the other file is not changed
    assert filled.count(deck="invented_m9z") == 7
    assert filled.count(deck=run.deck_name) == len(run.cells) + 5
    with open_catalog(other_path) as other:
        for name in (extra.cells[0].name, more_cells.cells[4].name):
            deck = "invented_m9z" if name == extra.cells[0].name else run.deck_name
            assert filled.compare([name], deck=deck, corner=None) == other.compare(
                [name], deck=deck, corner=None
            )
    # merging again is a no-op
    again = filled.merge_from(other_path)
    assert again.added == 0 and again.identical == len(run.cells) + 12


def test_conflicting_numbers_are_reported_not_overwritten(
    filled: Catalog,
    run,  # type: ignore[no-untyped-def]
    other_path: Path,
) -> None:
    altered = replace(run, cells=[scaled_copy(run.cells[0], 1.5), *run.cells[1:]])
    _make_other(other_path, altered)
    report = filled.merge_from(other_path)
    assert report.added == 0 and report.identical == len(run.cells) - 1
    assert len(report.conflicts) == 1 and run.cells[0].name in report.conflicts[0]
    assert "numbers differ" in report.conflicts[0]
    kept = filled.cell(run.cells[0].name).corners[0].metrics["cap_fF"]
    assert kept == run.cells[0].corners[0].metrics["cap_fF"]


def test_name_with_other_hash_is_a_conflict(filled: Catalog, run, other_path: Path) -> None:  # type: ignore[no-untyped-def]
    cell = run.cells[3]
    redefined = make_cell(3, np.random.default_rng(9), tuple(CORNERS), fingers=2)  # same name
    assert redefined.name == cell.name and redefined.cell_hash != cell.cell_hash
    _make_other(other_path, replace(run, cells=[redefined]))
    report = filled.merge_from(other_path)
    assert report.added == 0
    assert len(report.conflicts) == 1 and "not imported" in report.conflicts[0]
    assert filled.cell(cell.name).cell_hash == cell.cell_hash
    assert filled.count() == len(run.cells)


def test_newer_deck_from_other_stays_not_current(filled: Catalog, run, other_path: Path) -> None:  # type: ignore[no-untyped-def]
    newer = make_run(deck_version=2, n_cells=4)
    _make_other(other_path, run, newer)  # stored after ours: more recent
    report = filled.merge_from(other_path)
    assert report.added == 4 and report.decks_made_current == []
    assert report.decks_not_current == [f"{newer.deck_name} ({newer.deck_hash[:12]})"]
    current = [d for d in filled.decks() if d.current]
    assert [d.deck_hash for d in current] == [run.deck_hash]
    assert filled.count() == len(run.cells)


def test_newer_deck_from_other_becomes_current_when_asked(filled: Catalog, run, other_path: Path) -> None:  # type: ignore[no-untyped-def]
    newer = make_run(deck_version=2, n_cells=4)
    _make_other(other_path, run, newer)  # stored after ours: more recent
    report = filled.merge_from(other_path, make_current=True)
    assert report.added == 4
    assert report.decks_made_current == [f"{newer.deck_name} ({newer.deck_hash[:12]})"]
    current = [d for d in filled.decks() if d.current]
    assert [d.deck_hash for d in current] == [newer.deck_hash]
    assert filled.count() == 4


def test_merge_is_one_transaction(
    filled: Catalog,
    run,
    other_path: Path,  # type: ignore[no-untyped-def]
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    _make_other(other_path, make_run(deck_name="invented_m9z", n_cells=9, seed=8))
    before = _counts(filled)
    real_add = merge.CellWriter.add
    calls = {"n": 0}

    def failing_add(self, *a, **k):  # type: ignore[no-untyped-def]
        calls["n"] += 1
        if calls["n"] == 6:
            raise RuntimeError("power cut")
        return real_add(self, *a, **k)

    monkeypatch.setattr(merge.CellWriter, "add", failing_add)
    with pytest.raises(RuntimeError):
        filled.merge_from(other_path)
    assert _counts(filled) == before
    monkeypatch.setattr(merge.CellWriter, "add", real_add)
    assert filled.merge_from(other_path).added == 9


def test_merge_refuses_bad_sources(filled: Catalog, tmp_path: Path) -> None:
    junk = tmp_path / "junk.sqlite"
    junk.write_text("not a catalog")
    with pytest.raises(CatalogError) as err:
        filled.merge_from(junk)
    assert str(junk) in str(err.value)
    with pytest.raises(CatalogError):
        filled.merge_from(tmp_path / "missing.sqlite")
    with pytest.raises(CatalogError) as err:
        filled.merge_from(filled.path)
    assert "itself" in str(err.value)
