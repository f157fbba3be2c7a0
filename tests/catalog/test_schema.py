"""Catalog file layout: fresh files, migrations from version 1, refusal of bad or newer files."""

from __future__ import annotations

import hashlib
import sqlite3
from pathlib import Path

import pytest

from celllab.catalog import open_catalog
from celllab.catalog.schema import APPLICATION_ID, SCHEMA_VERSION, TABLES, v1_ddl
from celllab.errors import CatalogError
from celllab.records import CELL_COLUMNS, METRIC_NAMES

from .conftest import make_run


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _columns(conn: sqlite3.Connection, table: str) -> dict[str, str]:
    return {r[1]: r[2] for r in conn.execute(f"PRAGMA table_info({table})")}


def test_fresh_catalog_layout(catalog_path: Path) -> None:
    open_catalog(catalog_path).close()
    # Source: SQLite documentation of PRAGMA user_version / application_id / journal_mode
    conn = sqlite3.connect(catalog_path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert conn.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    assert set(TABLES) <= tables
    metric_cols = _columns(conn, "corner_metrics")
    for m in METRIC_NAMES:  # typed REAL columns named exactly as the metrics
        assert metric_cols[m] == "REAL"
    assert metric_cols["temperature_C"] == "REAL" and metric_cols["supply_V"] == "REAL"
    assert set(CELL_COLUMNS) <= set(_columns(conn, "cells"))
    indexes = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'index'")}
    assert {
        "cells_by_deck",
        "cells_by_topology",
        "corner_metrics_by_corner",
        "corner_metrics_by_cap_density_fF_per_um2",
    } <= indexes
    conn.close()


def test_foreign_keys_enforced(catalog) -> None:  # type: ignore[no-untyped-def]
    db = catalog._db
    assert db.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    with pytest.raises(sqlite3.IntegrityError):
        db.execute(
            "INSERT INTO corner_metrics (cell_id, corner, temperature_C, supply_V) "
            "VALUES (999, 'typ', 25, 1.2)"
        )


def _write_v1_copy(v2_path: Path, v1_path: Path) -> None:
    """A version-1 file holding the same data as ``v2_path`` (columns v2 added are left out)."""
    dst = sqlite3.connect(v1_path)
    dst.executescript(v1_ddl())
    dst.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    dst.execute("PRAGMA user_version = 1")
    layout = {table: _columns(dst, table) for table in TABLES}
    dst.execute("ATTACH DATABASE ? AS src", [str(v2_path)])
    for table in TABLES:
        if not (v1_cols := layout[table]):
            continue  # a table version 2 added
        cols = ", ".join(f'"{c}"' for c in v1_cols)
        dst.execute(f"INSERT INTO main.{table} ({cols}) SELECT {cols} FROM src.{table}")
    dst.commit()
    dst.execute("DETACH DATABASE src")
    dst.close()


def test_v1_file_is_migrated(tmp_path: Path) -> None:
    v2_path, v1_path = tmp_path / "v2.sqlite", tmp_path / "v1.sqlite"
    run = make_run(n_cells=8)
    with open_catalog(v2_path) as fresh:
        fresh.store_run(run)
        expected_rows = fresh.query(corner=None, order_by="name")
        expected_digests = dict(fresh._db.execute("SELECT cell_hash, result_digest FROM cells"))
    _write_v1_copy(v2_path, v1_path)
    conn = sqlite3.connect(v1_path)
    assert "result_digest" not in _columns(conn, "cells")
    assert not _columns(conn, "corner_extremes")
    conn.close()

    with open_catalog(v1_path) as migrated:
        assert migrated._db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
        assert migrated.query(corner=None, order_by="name") == expected_rows
        # the digest recomputed from stored rows equals the one computed when storing
        assert (
            dict(migrated._db.execute("SELECT cell_hash, result_digest FROM cells"))
            == expected_digests
        )
        uids = [r[0] for r in migrated._db.execute("SELECT run_uid FROM runs")]
        assert all(len(u) == 32 for u in uids)
        # the migrated catalog behaves like a fresh one: re-storing the run is a no-op
        assert migrated.store_run(run).inserted == 0
    conn, fresh_conn = sqlite3.connect(v1_path), sqlite3.connect(v2_path)
    for table in TABLES:  # migrated layout has the same columns as a fresh one
        assert set(_columns(conn, table)) == set(_columns(fresh_conn, table))
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
    fresh_conn.close()


def test_missing_metric_column_is_added(catalog_path: Path) -> None:
    open_catalog(catalog_path).close()
    conn = sqlite3.connect(catalog_path)
    dropped = METRIC_NAMES[-1]
    conn.execute(f'ALTER TABLE corner_metrics DROP COLUMN "{dropped}"')
    conn.commit()
    conn.close()
    with open_catalog(catalog_path) as cat:
        assert dropped in cat._db["corner_metrics"].columns_dict
        cat.store_run(make_run(n_cells=2))


def test_newer_schema_is_refused(catalog_path: Path) -> None:
    open_catalog(catalog_path).close()
    conn = sqlite3.connect(catalog_path)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    before = _digest(catalog_path)
    with pytest.raises(CatalogError) as err:
        open_catalog(catalog_path)
    assert str(catalog_path) in str(err.value)
    assert "newer" in str(err.value)
    assert _digest(catalog_path) == before


def _no_sidecars(path: Path) -> bool:
    return not Path(f"{path}-wal").exists() and not Path(f"{path}-journal").exists()


def test_text_file_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "notes.sqlite"
    path.write_text("these are my notes, not a database\n" * 20)
    before = _digest(path)
    with pytest.raises(CatalogError) as err:
        open_catalog(path)
    assert str(path) in str(err.value) and "not an SQLite database" in str(err.value)
    assert _digest(path) == before and _no_sidecars(path)


@pytest.mark.parametrize("keep", [50, 4096 + 100, "half", "whole pages"])
def test_truncated_file_is_refused(tmp_path: Path, keep: object) -> None:
    whole = tmp_path / "whole.sqlite"
    with open_catalog(whole) as cat:
        cat.store_run(make_run(n_cells=20, n_freq=64))
        cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    data = whole.read_bytes()
    page = 4096
    n = {"half": len(data) // 2 + 123, "whole pages": len(data) // page // 2 * page}.get(
        str(keep)
    ) or int(keep)  # type: ignore[call-overload]
    path = tmp_path / "cut.sqlite"
    path.write_bytes(data[:n])
    before = _digest(path)
    with pytest.raises(CatalogError) as err:
        open_catalog(path)
    assert str(path) in str(err.value) and "truncated" in str(err.value)
    assert _digest(path) == before and _no_sidecars(path)


def test_other_sqlite_database_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "other.sqlite"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY, total REAL)")
    conn.commit()
    conn.close()
    with pytest.raises(CatalogError) as err:
        open_catalog(path)
    assert "not a celllab catalog" in str(err.value) and "invoices" in str(err.value)


def test_missing_file_without_create(tmp_path: Path) -> None:
    path = tmp_path / "nothing.sqlite"
    with pytest.raises(CatalogError) as err:
        open_catalog(path, create=False)
    assert str(path) in str(err.value)
    assert not path.exists()


def test_default_path_is_created(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    with open_catalog() as cat:
        assert cat.path == Path("db") / "celllab.sqlite"
    assert (tmp_path / "db" / "celllab.sqlite").is_file()


def test_catalog_missing_a_table_is_refused(catalog_path: Path) -> None:
    open_catalog(catalog_path).close()
    conn = sqlite3.connect(catalog_path)
    conn.execute("DROP TABLE cv_curves")
    conn.commit()
    conn.close()
    with pytest.raises(CatalogError) as err:
        open_catalog(catalog_path)
    assert "missing tables cv_curves" in str(err.value) and str(catalog_path) in str(err.value)


def test_placement_and_rail_columns_reach_an_older_file(catalog_path: Path) -> None:
    from dataclasses import replace

    run = make_run(n_cells=6)
    older = replace(run, cells=run.cells[:3])
    with open_catalog(catalog_path) as cat:
        cat.store_run(older)
    # a file written before the placement and rail columns existed: drop them, empty as such a file
    conn = sqlite3.connect(catalog_path)
    for column in ("placement", "rail"):
        conn.execute(f'ALTER TABLE cells DROP COLUMN "{column}"')
    conn.commit()
    conn.close()
    with open_catalog(catalog_path) as cat:
        columns = cat._db["cells"].columns_dict
        assert columns["placement"] is str and columns["rail"] is str     # TEXT columns added back
        # old rows: no value stored, read back as core-row cells on the rail named like their oxide
        for stored in older.cells:
            cell = cat.cell(stored.name, deck=older.deck_name)
            assert cell.placement == "core_row" and cell.rail == cell.oxide
        newer = replace(run, cells=[replace(c, placement="open_region", rail="io") if i == 4 else c
                                    for i, c in enumerate(run.cells)])
        cat.store_run(newer)
        rows = cat.query(corner="worst", where="placement = open_region")
        assert [r["name"] for r in rows] == [run.cells[4].name]
        assert rows[0]["rail"] == "io"
        assert {r["name"] for r in cat.query(corner="worst", where="rail = io")} == {run.cells[4].name}


def test_rows_without_placement_and_rail_keep_their_digest() -> None:
    from celllab.catalog.store import prepare_cell, result_digest

    prepared = prepare_cell(make_run(n_cells=1).cells[0])
    rest = (prepared.corner_rows, prepared.response_rows, prepared.cv_rows)
    before_columns = {k: v for k, v in prepared.cell_row.items() if k not in ("placement", "rail")}
    empty = {**prepared.cell_row, "placement": None, "rail": None}
    # a row stored before these columns existed (empty) digests as it did then
    assert result_digest(empty, *rest) == result_digest(before_columns, *rest)
    # a stored placement or rail is part of the result
    assert prepared.digest == result_digest(prepared.cell_row, *rest) != result_digest(empty, *rest)
    moved = {**prepared.cell_row, "placement": "open_region"}
    assert result_digest(moved, *rest) != prepared.digest
