"""Catalog file layout: DDL, schema version, opening checks and forward migrations.

The layout version lives in ``PRAGMA user_version`` and the file is marked as a celllab catalog
with ``PRAGMA application_id``. ``open_database`` refuses (with a ``CatalogError`` naming the
file) anything that is not SQLite, is truncated, belongs to another program or was written by a
newer schema; an older catalog is migrated forward step by step, each step in a transaction.

Metric columns follow ``records.METRICS``: a catalog opened by a version that knows more
metrics gets the missing ``REAL`` columns added (``sync_metric_columns``); columns of metrics
that no longer exist stay in the file and are ignored.
"""

from __future__ import annotations

import contextlib
import sqlite3
import struct
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import sqlite_utils

from celllab.columns import AGGREGATE_CORNERS, CELL_COLUMNS, METRIC_BY_NAME, METRIC_NAMES
from celllab.errors import CatalogError

#: Layout version written by this code.
SCHEMA_VERSION = 3
#: ``PRAGMA application_id`` of celllab catalogs (ASCII "CELL").
APPLICATION_ID = 0x43454C4C

SQLITE_MAGIC = b"SQLite format 3\x00"

#: Tables every catalog has.
TABLES = ("decks", "runs", "cells", "corner_metrics", "corner_extremes", "responses", "cv_curves")

#: SQL types of the per-cell columns (text columns are TEXT, the rest of CELL_COLUMNS REAL).
_CELL_COLUMN_TYPES = {"width_sites": "INTEGER", "height_rows": "INTEGER", "esd_safe": "INTEGER"}

#: Metrics indexed for ranking and filtering.
INDEXED_METRICS = (
    "cap_fF",
    "cap_density_fF_per_um2",
    "esr_ohm",
    "bandwidth_GHz",
    "leakage_nA_per_nF",
)


def cell_column_type(name: str) -> str:
    column = CELL_COLUMNS.get(name)
    if column is not None and column.kind == "text":
        return "TEXT"
    return _CELL_COLUMN_TYPES.get(name, "REAL")


def _metric_columns_sql() -> str:
    return "".join(f',\n    "{m}" REAL' for m in METRIC_NAMES)


def _cell_columns_sql() -> str:
    return "".join(f',\n    "{c}" {cell_column_type(c)}' for c in CELL_COLUMNS)


def v1_ddl() -> str:
    """DDL of schema version 1 (frozen apart from the metric columns, which follow METRICS).

    Version 2 added ``runs.run_uid`` (to recognise a run across merged catalogs),
    ``cells.result_digest`` (to tell identical results from conflicting ones) and the
    ``corner_extremes`` table (worst/best values precomputed for fast ranking).
    """
    return f"""
CREATE TABLE decks (
    deck_hash TEXT PRIMARY KEY,
    name TEXT NOT NULL,
    params_json TEXT NOT NULL,
    created_utc TEXT NOT NULL,
    current_since_utc TEXT NOT NULL,
    current INTEGER NOT NULL DEFAULT 1 CHECK (current IN (0, 1))
);
CREATE INDEX decks_by_name ON decks(name, current);

CREATE TABLE runs (
    run_id INTEGER PRIMARY KEY,
    deck_hash TEXT NOT NULL REFERENCES decks(deck_hash),
    model_version TEXT NOT NULL,
    created_utc TEXT NOT NULL,
    corners_json TEXT NOT NULL,
    source_files_json TEXT NOT NULL
);
CREATE INDEX runs_by_deck ON runs(deck_hash);

-- one row per cell characterized under one deck with one model version
CREATE TABLE cells (
    cell_id INTEGER PRIMARY KEY,
    deck_hash TEXT NOT NULL REFERENCES decks(deck_hash),
    cell_hash TEXT NOT NULL,
    model_version TEXT NOT NULL,
    run_id INTEGER NOT NULL REFERENCES runs(run_id),
    name TEXT NOT NULL,
    family TEXT NOT NULL,
    topology TEXT NOT NULL,
    oxide TEXT NOT NULL,
    geometry_json TEXT NOT NULL,
    notes_json TEXT NOT NULL DEFAULT '[]'{_cell_columns_sql()},
    stored_utc TEXT NOT NULL,
    current INTEGER NOT NULL DEFAULT 1 CHECK (current IN (0, 1)),
    UNIQUE (deck_hash, cell_hash, model_version)
);
CREATE INDEX cells_by_deck ON cells(deck_hash, current);
CREATE INDEX cells_by_name ON cells(name);
CREATE INDEX cells_by_deck_name ON cells(deck_hash, name);
CREATE INDEX cells_by_topology ON cells(topology);
CREATE INDEX cells_by_run ON cells(run_id);

CREATE TABLE corner_metrics (
    cell_id INTEGER NOT NULL REFERENCES cells(cell_id) ON DELETE CASCADE,
    corner TEXT NOT NULL,
    temperature_C REAL NOT NULL,
    supply_V REAL NOT NULL{_metric_columns_sql()},
    flags_json TEXT NOT NULL DEFAULT '[]',
    PRIMARY KEY (cell_id, corner)
);
CREATE INDEX corner_metrics_by_corner ON corner_metrics(corner);
{
        "".join(
            f'CREATE INDEX corner_metrics_by_{m} ON corner_metrics("{m}");{chr(10)}'
            for m in INDEXED_METRICS
            if m in METRIC_NAMES
        )
    }
-- freq_Hz: little-endian float64; z_ohm: little-endian complex128 (re, im pairs); exact
CREATE TABLE responses (
    cell_id INTEGER NOT NULL,
    corner TEXT NOT NULL,
    n_freq INTEGER NOT NULL,
    freq_Hz BLOB NOT NULL,
    z_ohm BLOB NOT NULL,
    PRIMARY KEY (cell_id, corner),
    FOREIGN KEY (cell_id, corner) REFERENCES corner_metrics(cell_id, corner) ON DELETE CASCADE
);

-- bias_V, cap_F: little-endian float64; exact
CREATE TABLE cv_curves (
    cell_id INTEGER NOT NULL,
    corner TEXT NOT NULL,
    n_bias INTEGER NOT NULL,
    bias_V BLOB NOT NULL,
    cap_F BLOB NOT NULL,
    operating_bias_V REAL NOT NULL,
    operating_cap_F REAL NOT NULL,
    PRIMARY KEY (cell_id, corner),
    FOREIGN KEY (cell_id, corner) REFERENCES corner_metrics(cell_id, corner) ON DELETE CASCADE
);
"""


def _create_v1(db: sqlite_utils.Database) -> None:
    db.executescript(v1_ddl())
    db.execute(f"PRAGMA application_id = {APPLICATION_ID}")


def extremes_ddl() -> str:
    """DDL of ``corner_extremes`` (added in version 2): per cell, each metric at its worst and
    best corner, kept in step with ``corner_metrics`` whenever results are written."""
    return f"""
CREATE TABLE corner_extremes (
    cell_id INTEGER NOT NULL REFERENCES cells(cell_id) ON DELETE CASCADE,
    kind TEXT NOT NULL CHECK (kind IN ('worst', 'best')){_metric_columns_sql()},
    PRIMARY KEY (cell_id, kind)
);
CREATE INDEX corner_extremes_by_kind ON corner_extremes(kind);
{
        "".join(
            f'CREATE INDEX corner_extremes_by_{m} ON corner_extremes(kind, "{m}");{chr(10)}'
            for m in INDEXED_METRICS
            if m in METRIC_NAMES
        )
    }"""


def fill_extremes(db: sqlite_utils.Database, after_cell_id: int = 0) -> None:
    """Compute ``corner_extremes`` of every cell with ``cell_id > after_cell_id`` from its corners."""
    cols = ", ".join(f'"{m}"' for m in METRIC_NAMES)
    for kind in AGGREGATE_CORNERS:  # worst / best as defined in celllab.columns; MIN/MAX skip NULLs
        aggs = ", ".join(f'{METRIC_BY_NAME[m].sql_aggregate(kind)}("{m}")' for m in METRIC_NAMES)
        db.execute(
            f"INSERT INTO corner_extremes (cell_id, kind, {cols}) "
            f"SELECT cell_id, '{kind}', {aggs} FROM corner_metrics "
            f"WHERE cell_id > ? GROUP BY cell_id",
            [after_cell_id],
        )
        for flag, metric in ((m, METRIC_BY_NAME[m].bounds) for m in METRIC_NAMES if METRIC_BY_NAME[m].bounds):
            # a bound flag follows the corner that gives its metric's extreme, not its own
            db.execute(
                f'UPDATE corner_extremes SET "{flag}" = (SELECT MAX(m."{flag}") FROM corner_metrics m '
                f'WHERE m.cell_id = corner_extremes.cell_id AND m."{metric}" = corner_extremes."{metric}") '
                f"WHERE kind = ? AND cell_id > ?",
                [kind, after_cell_id],
            )


def _v1_to_v2(db: sqlite_utils.Database) -> None:
    from celllab.catalog.store import stored_result_digest  # store imports this module

    db.executescript(extremes_ddl())
    fill_extremes(db)
    db.table("runs").add_column("run_uid", str)
    db.execute("UPDATE runs SET run_uid = lower(hex(randomblob(16))) WHERE run_uid IS NULL")
    db.execute("CREATE UNIQUE INDEX runs_by_uid ON runs(run_uid)")
    db.table("cells").add_column("result_digest", str)
    for (cell_id,) in db.execute("SELECT cell_id FROM cells").fetchall():
        db.execute(
            "UPDATE cells SET result_digest = ? WHERE cell_id = ?",
            [stored_result_digest(db, cell_id), cell_id],
        )


def _v2_to_v3(db: sqlite_utils.Database) -> None:
    # Equivalent circuit per cell x corner (JSON of records.netlist_to_dict); empty for results
    # stored before version 3 (exports then fall back to a model built from the metrics).
    db.table("responses").add_column("circuit_json", str)


#: MIGRATIONS[v] turns a version-v file into version v + 1 (v = 0: an empty file).
MIGRATIONS: dict[int, Callable[[sqlite_utils.Database], None]] = {
    0: _create_v1,
    1: _v1_to_v2,
    2: _v2_to_v3,
}


@contextlib.contextmanager
def write_transaction(db: sqlite_utils.Database) -> Iterator[sqlite_utils.Database]:
    """One ``BEGIN IMMEDIATE`` transaction: all or nothing (the write lock is taken up front)."""
    db.execute("BEGIN IMMEDIATE")
    try:
        yield db
    except BaseException:
        db.rollback()
        raise
    else:
        db.execute("COMMIT")


def migrate(db: sqlite_utils.Database, target: int = SCHEMA_VERSION) -> int:
    """Apply forward migrations from the file's ``user_version`` up to ``target``; each in a transaction."""
    version = user_version(db)
    while version < target:
        with write_transaction(db):
            # another process may have migrated (or created) the file while this one waited
            version = user_version(db)
            if version >= target:
                break
            MIGRATIONS[version](db)
            version += 1
            db.execute(f"PRAGMA user_version = {version}")
    return version


def missing_metric_columns(db: sqlite_utils.Database) -> dict[str, list[tuple[str, str]]]:
    """Table -> (column, type) of the metric and cell columns this version knows and the file lacks."""
    wanted = {
        "corner_metrics": {m: "REAL" for m in METRIC_NAMES},
        "corner_extremes": {m: "REAL" for m in METRIC_NAMES},
        "cells": {c: cell_column_type(c) for c in CELL_COLUMNS},
    }
    return {t: [(c, typ) for c, typ in cols.items() if c not in db[t].columns_dict]
            for t, cols in wanted.items() if t in db.table_names()}


def sync_metric_columns(db: sqlite_utils.Database) -> list[str]:
    """Add REAL columns for metrics this version knows and the file lacks; return their names."""
    missing = missing_metric_columns(db)
    added = sorted({c for cols in missing.values() for c, _ in cols})
    if added:  # new columns hold no values yet, so the stored extremes stay consistent
        with write_transaction(db):
            for table, cols in missing.items():
                for c, typ in cols:
                    db.execute(f'ALTER TABLE {table} ADD COLUMN "{c}" {typ}')
    return added


def ranking_indexes() -> dict[str, str]:
    """Indexes the ranked query walks to stop early (name -> DDL), beyond the version-1 ones:
    per corner and metric, so one corner's rows come in metric order."""
    return {
        f"corner_metrics_by_corner_{m}": f'ON corner_metrics(corner, "{m}")'
        for m in INDEXED_METRICS
        if m in METRIC_NAMES
    }


def sync_indexes(db: sqlite_utils.Database) -> list[str]:
    """Create the ranking indexes a file lacks (no layout change: older versions ignore them)."""
    have = {r[0] for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'index'")}
    missing = {n: ddl for n, ddl in ranking_indexes().items() if n not in have}
    if missing:
        with write_transaction(db):
            for name, ddl in missing.items():
                db.execute(f"CREATE INDEX IF NOT EXISTS {name} {ddl}")
    return sorted(missing)


def user_version(db: sqlite_utils.Database) -> int:
    return int(db.execute("PRAGMA user_version").fetchone()[0])


def _fail(path: Path, message: str) -> CatalogError:
    return CatalogError.single(str(path), "", message)  # type: ignore[return-value]


def _header_problem(path: Path) -> tuple[str, bool] | None:
    """(message, whether a writer at work could explain it) for a file that is not a readable
    SQLite file, or None when the header and the file size agree."""
    size = path.stat().st_size
    if size == 0:
        return None  # SQLite treats an empty file as an empty database
    with path.open("rb") as fh:
        header = fh.read(100)
    if not header.startswith(SQLITE_MAGIC[: min(len(header), 16)]) or len(header) < 16:
        return "not an SQLite database (a celllab catalog is an SQLite file)", False
    if len(header) < 100:
        return f"truncated SQLite file ({size} bytes, shorter than its 100-byte header)", False
    (page_size,) = struct.unpack(">H", header[16:18])
    page_size = 65536 if page_size == 1 else page_size
    if page_size < 512 or page_size & (page_size - 1):
        return f"damaged SQLite header (page size {page_size})", False
    change_counter, page_count = struct.unpack(">II", header[24:32])
    (valid_for,) = struct.unpack(">I", header[92:96])
    if size % page_size:
        return (
            f"truncated SQLite file ({size} bytes, not a whole number of {page_size}-byte pages)",
            True,
        )
    if valid_for == change_counter and page_count * page_size > size:
        return f"truncated SQLite file ({size} bytes; its header says {page_count * page_size})", True
    return None


#: Pauses between looks at a file whose size and header disagree (a checkpoint copies pages
#: from the write-ahead log in page order, so page 1 - the header - is rewritten before the
#: file has grown to the size it announces).
HEADER_RETRY_PAUSES_S = (0.01, 0.02, 0.05, 0.1, 0.2)


def check_file_header(path: Path) -> None:
    """Refuse a file that is not SQLite or is shorter than its header says, before SQLite opens it.

    A size that disagrees with the header is only a fault when no other process is writing:
    while a write-ahead log sits beside the file (``-wal``), a checkpoint may be growing it and
    SQLite reads the pages still missing from the log, so the check leaves the file to SQLite.
    Without a log the check looks again after short pauses before it refuses, so a checkpoint
    that finished (and removed its log) between two looks is not mistaken for damage. The
    header layout is SQLite's file format, docs/references.md [126].
    """
    for pause in (*HEADER_RETRY_PAUSES_S, None):
        found = _header_problem(path)
        if found is None:
            return
        message, transient = found
        if not transient or pause is None:
            raise _fail(path, message)
        if _write_ahead_log(path).exists():
            return
        time.sleep(pause)


def _write_ahead_log(path: Path) -> Path:
    return path.with_name(path.name + "-wal")


def connect(path: Path) -> sqlite_utils.Database:
    """A sqlite-utils Database over a connection usable from worker threads (callers serialise)."""
    conn = sqlite3.connect(str(path), check_same_thread=False, timeout=10.0)
    return sqlite_utils.Database(conn, execute_plugins=False)


def _cannot_write(exc: sqlite3.Error) -> bool:
    text = str(exc).lower()
    return "readonly database" in text or "unable to open database" in text


def connect_read_only(path: Path) -> sqlite3.Connection:
    """A read-only connection to an existing file, which never writes to it.

    A catalog in write-ahead-log mode needs its ``-shm`` index beside it; where this user may
    not create one (a read-only folder) and no log is there - so nothing awaits a checkpoint -
    the file is opened immutable (SQLite's ``immutable`` URI parameter, docs/references.md
    [126]): it is read as it stands. Raises ``sqlite3.Error`` when neither way works.
    """
    base = path.resolve().as_uri()
    conn = sqlite3.connect(f"{base}?mode=ro", uri=True, check_same_thread=False, timeout=10.0)
    try:
        conn.execute("PRAGMA schema_version").fetchone()  # the first read opens the log index
        return conn
    except sqlite3.OperationalError as exc:
        conn.close()
        if not _cannot_write(exc) or _write_ahead_log(path).exists():
            raise
    return sqlite3.connect(f"{base}?mode=ro&immutable=1", uri=True, check_same_thread=False, timeout=10.0)


def _open_read_only(path: Path) -> sqlite_utils.Database:
    """The catalog at ``path`` opened for reading only (this user may not write it or its
    folder); it must already have this version's layout, since migrating would write."""
    try:
        db = sqlite_utils.Database(connect_read_only(path), execute_plugins=False)
    except sqlite3.Error as exc:
        raise _fail(path, f"cannot open the catalog read-only: {exc}") from None
    try:
        version = inspect(db, path)
        if version < SCHEMA_VERSION or any(missing_metric_columns(db).values()):
            raise _fail(path, f"catalog schema version {version} needs an upgrade this user cannot "
                        "write (the file or its folder is read-only); open it once with write access")
        check_tables(db, path)
    except sqlite3.DatabaseError as exc:
        db.close()
        raise _fail(path, f"cannot open the catalog: {exc}") from None
    except BaseException:
        db.close()
        raise
    return db


def inspect(db: sqlite_utils.Database, path: Path) -> int:
    """Return the file's schema version; raise CatalogError when it is not a catalog we can read."""
    try:
        version = user_version(db)
        app_id = int(db.execute("PRAGMA application_id").fetchone()[0])
        tables = db.table_names()
    except sqlite3.DatabaseError as exc:
        raise _fail(path, f"unreadable SQLite file: {exc}") from None
    if app_id != APPLICATION_ID and (tables or version):
        shown = ", ".join(tables[:8]) + (", ..." if len(tables) > 8 else "")
        raise _fail(
            path, f"an SQLite database but not a celllab catalog (tables: {shown or 'none'})"
        )
    if version > SCHEMA_VERSION:
        raise _fail(
            path,
            f"catalog schema version {version} was written by a newer celllab; this "
            f"version reads up to {SCHEMA_VERSION}; upgrade celllab to open it",
        )
    return version


def check_tables(db: sqlite_utils.Database, path: Path) -> None:
    """After migration every table of the current layout must be there."""
    tables = set(db.table_names())
    if missing := [t for t in TABLES if t not in tables]:
        raise _fail(path, f"damaged catalog: missing tables {', '.join(missing)}")


def open_database(path: Path, create: bool = True) -> sqlite_utils.Database:
    """Open (creating or migrating if needed) the catalog at ``path``: WAL mode, foreign keys on."""
    if path.exists():
        if not path.is_file():
            raise _fail(path, "not a file")
        check_file_header(path)
    elif not create:
        raise _fail(path, "no catalog here (store a characterization run first)")
    else:
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except FileExistsError:
            raise _fail(path, f"cannot create the catalog: {path.parent} is not a folder") from None
        except OSError as exc:
            raise _fail(path, f"cannot create the catalog: {exc.strerror or exc}") from None
    try:
        db = connect(path)
    except (sqlite3.Error, OSError, ValueError) as exc:
        raise _fail(path, f"cannot open or create the catalog here: {exc}") from None
    try:
        version = inspect(db, path)
    except CatalogError as exc:
        db.close()
        if path.stat().st_size and "readonly database" in str(exc):
            return _open_read_only(path)  # a reader without write access to the file or folder
        raise
    try:
        db.execute("PRAGMA foreign_keys = ON")
        db.execute("PRAGMA busy_timeout = 10000")
        db.enable_wal()
        if version < SCHEMA_VERSION:
            migrate(db)
        check_tables(db, path)
        sync_metric_columns(db)
        sync_indexes(db)
    except sqlite3.DatabaseError as exc:
        db.close()
        raise _fail(path, f"cannot open the catalog: {exc}") from None
    except BaseException:
        db.close()
        raise
    return db
