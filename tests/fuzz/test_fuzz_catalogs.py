"""Fuzzing catalogs to import: a good teammate catalog altered with random SQL (wrong types,
edge numbers, broken JSON, long or escape-laden texts, forged hashes and digests), merged into
a catalog that already holds results.

Either the merge succeeds - and then everything in the destination still passes the checks a
merge makes (nothing implausible got in) - or it is refused with problems naming the source,
and the destination is exactly as it was.
"""

from __future__ import annotations

import importlib.util
import shutil
import sqlite3
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
import sqlite_utils
from hypothesis import given
from hypothesis import strategies as st

from celllab.catalog import open_catalog
from celllab.catalog.source import open_source, read_source
from celllab.catalog.store import stored_result_digest
from celllab.errors import CatalogError

from .conftest import fuzz_settings
from .strategies import EDGE_FLOATS, EDGE_TEXTS, pick

TABLES = ("decks", "runs", "cells", "corner_metrics", "responses", "cv_curves")


def _synthetic_runs():  # type: ignore[no-untyped-def]
    path = Path(__file__).resolve().parents[1] / "catalog" / "conftest.py"
    spec = importlib.util.spec_from_file_location("synthetic_runs_catalogs", path)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def bases(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    synthetic = _synthetic_runs()
    folder = tmp_path_factory.mktemp("merge")
    source, dest = folder / "source.sqlite", folder / "dest.sqlite"
    for path, runs in ((source, [synthetic.make_run(n_cells=3, n_freq=8),
                                 synthetic.make_run(deck_name="invented_m9z", n_cells=3, seed=4, n_freq=8)]),
                       (dest, [synthetic.make_run(n_cells=4, n_freq=8)])):
        with open_catalog(path) as cat:
            for run in runs:
                cat.store_run(run)
            cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn = sqlite3.connect(source)
    columns = {t: [r[1] for r in conn.execute(f"PRAGMA table_info({t})")] for t in TABLES}
    rowids = {t: [r[0] for r in conn.execute(f"SELECT rowid FROM {t}")] for t in TABLES}
    conn.close()
    return {"source": source, "dest": dest, "columns": columns, "rowids": rowids, "folder": folder}


cell_values = st.one_of(
    st.sampled_from(EDGE_FLOATS), st.sampled_from(EDGE_TEXTS), st.integers(-(2**63), 2**63 - 1),
    st.binary(max_size=24), st.none(),
    st.sampled_from(["[]", "{}", "[1]", '["x"]', '{"elements": []}', "not json", "2999-01-01T00:00:00Z",
                     "2020-01-01T00:00:00.000000Z", "0" * 16, "x" * 100_000]),
)


@st.composite
def alterations(draw: st.DrawFn, columns: dict[str, list[str]], rowids: dict[str, list[int]]
                ) -> tuple[list[tuple[str, list[Any]]], bool]:
    statements = []
    for _ in range(draw(st.integers(1, 3))):
        table = pick(draw, list(TABLES))
        column = pick(draw, columns[table])
        value = draw(cell_values)
        if draw(st.integers(0, 3)) == 0:
            statements.append((f'UPDATE {table} SET "{column}" = ?', [value]))
        else:
            statements.append((f'UPDATE {table} SET "{column}" = ? WHERE rowid = ?',
                               [value, pick(draw, rowids[table])]))
    return statements, draw(st.booleans())


def _state(path: Path) -> dict[str, Any]:
    conn = sqlite3.connect(path)
    state = {t: conn.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] for t in TABLES}
    state["current"] = conn.execute("SELECT deck_hash, current FROM decks ORDER BY deck_hash").fetchall()
    conn.close()
    return state


@fuzz_settings("catalog_merge")
@given(data=st.data())
def test_altered_catalogs_merge_cleanly_or_are_refused(bases: dict[str, Any], data: st.DataObject,
                                                       outcomes: Counter[str]) -> None:
    statements, redigest = data.draw(alterations(bases["columns"], bases["rowids"]))
    outcomes["catalog_merge.cases"] += 1
    folder: Path = bases["folder"]
    source, dest = folder / "case_source.sqlite", folder / "case_dest.sqlite"
    shutil.copyfile(bases["source"], source)
    shutil.copyfile(bases["dest"], dest)
    conn = sqlite3.connect(source)
    try:
        for sql, args in statements:
            conn.execute(sql, args)
        conn.commit()
    except sqlite3.Error:  # the alteration broke a constraint: SQLite kept the file as it was
        conn.rollback()
    conn.close()
    if redigest:  # a forger who recomputes the result digests as well
        db = sqlite_utils.Database(source)
        try:
            for (cell_id,) in db.execute("SELECT cell_id FROM cells").fetchall():
                db.execute("UPDATE cells SET result_digest = ? WHERE cell_id = ?",
                           [stored_result_digest(db, cell_id), cell_id])
            db.conn.commit()
        except Exception:  # noqa: BLE001 - a row so broken the digest cannot be computed
            db.conn.rollback()
        db.close()
    before = _state(dest)
    with open_catalog(dest) as cat:
        try:
            cat.merge_from(source)
        except CatalogError as exc:
            assert all(p.file == str(source) for p in exc.problems), str(exc)
            assert "\x1b" not in str(exc) and len(str(exc)) < 100_000
            refused = True
        else:
            refused = False
    if refused:
        assert _state(dest) == before
        outcomes["catalog_merge.rejected"] += 1
        return
    copy = open_source(dest)  # everything now stored passes the import checks
    try:
        read_source(copy, dest)
    finally:
        copy.close()
    outcomes["catalog_merge.accepted"] += 1
