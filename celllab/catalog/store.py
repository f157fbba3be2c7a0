"""Writing characterization runs into the catalog, and reading full cell records back.

``store_run`` is one transaction. Per cell the key is (deck hash, cell hash, model version):

* a key already stored is left alone (``unchanged``); if its numbers differ from the new run the
  stored ones are kept and the cell is listed in ``StoreReport.differing``; except that a result
  stored without the deck's ESD events (``esd_not_run``) gives way to the same key's result with
  them (``StoreReport.completed``): the new one holds all the old one did;
* a new key is inserted and becomes the current result of that cell name under that deck; the
  previous current result of the name is kept as history (``superseded``);
* storing a deck supersedes every other deck of the same name (its results stay, not current).

Arrays are stored exactly: frequency, bias and capacitance as little-endian float64 blobs,
impedance as little-endian complex128 blobs.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import uuid
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
import sqlite_utils

from celllab.catalog.schema import cell_column_type, fill_extremes, write_transaction
from celllab.collector import collector_paused
from celllab.display import nan_to_none, none_to_nan  # SQLite stores NaN as NULL
from celllab.errors import CatalogError, Problem
from celllab.records import (
    CELL_COLUMNS,
    ESD_NOT_RUN,
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
    netlist_from_dict,
    netlist_to_dict,
)

#: Test-only: when set, called inside the store transaction after each inserted cell with the
#: number of cells inserted so far. The crash test uses it to stop a process mid-transaction.
_cell_stored_hook: Callable[[int], None] | None = None

_F64 = np.dtype("<f8")
_C128 = np.dtype("<c16")


@dataclass(frozen=True)
class StoreReport:
    """What ``store_run`` did.

    run_id : id of the run record written; when nothing changed, of the latest earlier run of
        this deck and model version (None if there is none).
    inserted, unchanged : cells stored now / already stored with the same key.
    superseded : results that stopped being current (older deck of the same name, older result
        of the same cell name).
    differing : names of unchanged cells whose new numbers differ from the stored ones (kept).
    completed : stored results built without the ESD events (``esd_not_run``) replaced by the
        same key's result with them (counted in ``inserted`` too).
    """

    run_id: int | None
    inserted: int
    unchanged: int
    superseded: int
    differing: list[str] = field(default_factory=list)
    completed: int = 0

    @property
    def changed(self) -> bool:
        return self.inserted > 0 or self.superseded > 0


def utc_now() -> str:
    """UTC time as sortable ISO 8601 text with microseconds."""
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _json_default(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, (Path, datetime)):
        return str(value)
    if isinstance(value, (set, frozenset)):
        return sorted(value)
    raise TypeError(f"{type(value).__name__} is not JSON serialisable")


#: One encoder for all canonical text (``json.dumps`` with these options builds one per call).
_CANONICAL = json.JSONEncoder(
    sort_keys=True, separators=(",", ":"), default=_json_default, allow_nan=True
)


#: A str as ``json`` writes it by default (ASCII, escaped).
_json_text = json.encoder.encode_basestring_ascii


def canonical_json(value: Any) -> str:
    """JSON text with sorted keys and no spaces, so equal content gives equal text."""
    return _CANONICAL.encode(value)


def _text_list_json(values: Iterable[Any]) -> str:
    """``canonical_json(list(values))``, written directly when every value is a str."""
    values = list(values)
    if all(type(v) is str for v in values):
        return "[" + ",".join(map(_json_text, values)) + "]"
    return canonical_json(values)


def _column_value(name: str, value: Any) -> Any:
    kind = cell_column_type(name)
    if kind == "INTEGER":
        return None if value is None else int(value)
    if kind == "TEXT":
        return None if value is None else str(value)
    return nan_to_none(value)


#: Cell columns held as numbers / as text (``columns.CELL_COLUMNS`` kinds).
_NUMBER_CELL_COLUMNS = tuple(k for k in CELL_COLUMNS if cell_column_type(k) != "TEXT")
_TEXT_CELL_COLUMNS = tuple(k for k in CELL_COLUMNS if cell_column_type(k) == "TEXT")


def encode_f64(values: Any) -> bytes:
    return np.ascontiguousarray(np.asarray(values, dtype=float).ravel(), dtype=_F64).tobytes()


def encode_c128(values: Any) -> bytes:
    return np.ascontiguousarray(np.asarray(values, dtype=complex).ravel(), dtype=_C128).tobytes()


def decode_f64(blob: bytes) -> np.ndarray:
    return np.frombuffer(blob, dtype=_F64).astype(float)


def decode_c128(blob: bytes) -> np.ndarray:
    return np.frombuffer(blob, dtype=_C128).astype(complex)


@dataclass
class PreparedCell:
    """Rows of one cell ready for insertion (cell_id and keys filled in by ``CellWriter.add``)."""

    name: str
    cell_hash: str
    cell_row: dict[str, Any]
    corner_rows: list[dict[str, Any]]
    response_rows: list[dict[str, Any]]
    cv_rows: list[dict[str, Any]]
    digest: str


_DIGEST_TEXT_KEYS = ("name", "family", "topology", "oxide", "geometry_json", "notes_json")


def _feed(h: Any, data: bytes) -> None:
    h.update(len(data).to_bytes(8, "little"))
    h.update(data)


def _f64(values: Iterable[Any]) -> bytes:
    """Values as float64 bytes, empty -> NaN (one canonical NaN, since NaN is stored as empty:
    numpy reads None as that NaN)."""
    return np.array(list(values), dtype=_F64).tobytes()


def _framed(parts: Iterable[bytes]) -> bytes:
    """``parts`` each preceded by its length (8 bytes, little-endian): what ``_feed`` hashes."""
    return b"".join([b for p in parts for b in (len(p).to_bytes(8, "little"), p)])


def _corner_text(corner: Any, flags_json: Any) -> bytes:
    """``json.dumps([corner, flags_json]).encode()``, written directly for two str."""
    if type(corner) is str and type(flags_json) is str:
        return f"[{_json_text(corner)}, {_json_text(flags_json)}]".encode()
    return json.dumps([corner, flags_json]).encode()


def result_digest(
    cell_row: Mapping[str, Any],
    corner_rows: Iterable[Mapping[str, Any]],
    response_rows: Iterable[Mapping[str, Any]],
    cv_rows: Iterable[Mapping[str, Any]],
) -> str:
    """SHA-256 over the stored content of one result.

    Takes the rows as stored (REAL values float or None, as both ``prepare_cell`` and SQLite
    give them). Two results with the same digest hold the same numbers bit for bit.
    """
    parts: dict[str, list[bytes]] = {}
    for row in corner_rows:
        parts[row["corner"]] = [
            _corner_text(row["corner"], row["flags_json"]),
            _f64([row["temperature_C"], row["supply_V"], *map(row.get, METRIC_NAMES)]),
        ]
    for row in response_rows:
        parts[row["corner"]] += _response_parts(row)
    for row in cv_rows:
        parts[row["corner"]] += _cv_parts(row)
    return _hash_parts(cell_row, parts)


def _response_parts(row: Mapping[str, Any]) -> list[bytes]:
    return [b"response", bytes(row["freq_Hz"]), bytes(row["z_ohm"])]


def _cv_parts(row: Mapping[str, Any]) -> list[bytes]:
    return [
        b"cv",
        bytes(row["bias_V"]),
        bytes(row["cap_F"]),
        _f64([nan_to_none(row["operating_bias_V"]), nan_to_none(row["operating_cap_F"])]),
    ]


def _hash_parts(cell_row: Mapping[str, Any], corner_parts: dict[str, list[bytes]]) -> str:
    """The digest of a cell row and the parts of each of its corners (``result_digest``)."""
    head = [
        json.dumps([cell_row[k] for k in _DIGEST_TEXT_KEYS]).encode(),
        _f64(_column_value(k, cell_row.get(k)) for k in _NUMBER_CELL_COLUMNS),
    ]
    text_cells = [cell_row.get(k) for k in _TEXT_CELL_COLUMNS]
    if any(v is not None for v in text_cells):  # results stored before these columns keep their digest
        head.append(json.dumps(text_cells).encode())
    # hashed as one string: the same bytes as feeding the parts one by one
    corners = (p for c in sorted(corner_parts) for p in corner_parts[c])
    return hashlib.sha256(_framed([*head, *corners])).hexdigest()


def stored_result_digest(db: sqlite_utils.Database, cell_id: int) -> str:
    """``result_digest`` recomputed from the rows stored for ``cell_id``."""
    cell_row = next(db.query("SELECT * FROM cells WHERE cell_id = ?", [cell_id]))
    where = "WHERE cell_id = ?"
    return result_digest(
        cell_row,
        list(db.query(f"SELECT * FROM corner_metrics {where}", [cell_id])),
        list(db.query(f"SELECT * FROM responses {where}", [cell_id])),
        list(db.query(f"SELECT * FROM cv_curves {where}", [cell_id])),
    )


def validate_run(run: CharacterizationRun) -> None:
    """Raise CatalogError listing every structural problem of ``run`` (nothing is written).

    The corners are checked all at once (``validate.unchecked_corners``); the per-value checks
    run on those it cannot clear, and give the messages.
    """
    # imported here: the checks read the deck and topology schemas (pydantic, scipy), which a
    # catalog opened only to query never needs
    from celllab.catalog.validate import (
        DECK_NAME,
        cell_problems,
        run_corner_problems,
        shown,
        unchecked_corners,
    )

    label = f"run of deck {shown(run.deck_name)}"
    msgs: list[str] = []
    if not run.deck_hash or not run.deck_name or not run.model_version:
        msgs.append("deck_name, deck_hash and model_version must be non-empty")
    elif not isinstance(run.deck_name, str) or not DECK_NAME.fullmatch(run.deck_name):
        msgs.append(f"deck_name = {shown(run.deck_name)} -> deck names use letters, digits, _ and -, "
                    "starting with a letter, at most 40")
    seen_names: dict[str, int] = {}
    seen_hashes: dict[str, int] = {}
    run_corners = set(run.corners)
    suspect = unchecked_corners(run.cells, run_corners)
    for i, cell in enumerate(run.cells):
        where = f"cells[{i}] ({shown(cell.name, 40)})"
        if cell.name in seen_names:
            msgs.append(f"{where} -> name repeats cells[{seen_names[cell.name]}]")
        if cell.cell_hash in seen_hashes:
            msgs.append(f"{where} -> cell_hash repeats cells[{seen_hashes[cell.cell_hash]}]")
        seen_names.setdefault(cell.name, i)
        seen_hashes.setdefault(cell.cell_hash, i)
        corner_names = [c.corner for c in cell.corners]
        if len(set(corner_names)) != len(corner_names):
            msgs.append(f"{where}.corners -> repeated corner names {corner_names}")
        for j in suspect[i]:
            msgs += run_corner_problems(f"{where}.corners[{j}]", cell.corners[j], run_corners)
        msgs += cell_problems(where, cell, suspect[i])
    if msgs:
        raise CatalogError([Problem(label, "", m) for m in msgs])


#: Per-corner numbers of a ``corner_metrics`` row, in column order.
_CORNER_NUMBERS = ("temperature_C", "supply_V", *METRIC_NAMES)
_FLOAT_OR_NONE = frozenset({float, type(None)})


def _corner_numbers(corners: list[CornerResult]) -> list[tuple[list[float | None], bytes]]:
    """Per corner its ``_CORNER_NUMBERS`` as stored (float, None for None and NaN:
    ``display.nan_to_none`` of each) and as ``result_digest`` hashes them (float64 bytes, one
    NaN for the empty ones); all corners converted at once."""
    if not corners:
        return []
    given = [(c.temperature_C, c.supply_V, *[c.metrics[m] for m in METRIC_NAMES]) for c in corners]
    numbers = np.array(given, dtype=_F64)
    empty = np.isnan(numbers)
    if _FLOAT_OR_NONE.issuperset(map(type, itertools.chain.from_iterable(given))):
        # the engine's values: the float objects themselves are stored (as float() keeps them)
        values = [list(row) for row in given]
        for k, j in zip(*(a.tolist() for a in np.nonzero(empty)), strict=True):
            values[k][j] = None
    else:
        converted = numbers.astype(object)
        converted[empty] = None
        values = converted.tolist()
    numbers[empty] = np.nan  # the one NaN None stands for (a NaN may carry a sign or payload)
    blob, size = numbers.tobytes(), numbers.shape[1] * _F64.itemsize
    return [(row, blob[k * size:(k + 1) * size]) for k, row in enumerate(values)]


def prepare_cell(cell: CellResult) -> PreparedCell:
    """Encode one cell result as catalog rows and compute its digest (no database access)."""
    return prepare_cells([cell])[0]


def prepare_cells(cells: Iterable[CellResult]) -> list[PreparedCell]:
    """``prepare_cell`` of each cell; the per-corner numbers of all of them converted at once."""
    cells = list(cells)
    numbers = iter(_corner_numbers([c for cell in cells for c in cell.corners]))
    return [_prepare(cell, [next(numbers) for _ in cell.corners]) for cell in cells]


def _prepare(cell: CellResult, numbers: list[tuple[list[float | None], bytes]]) -> PreparedCell:
    try:
        geometry_json = canonical_json(cell.geometry)
        notes_json = _text_list_json(cell.notes)
        flags = [_text_list_json(c.flags) for c in cell.corners]
    except TypeError as exc:
        raise CatalogError.single(f"cell {cell.name}", "geometry", str(exc)) from None
    cell_row: dict[str, Any] = {
        "name": cell.name,
        "cell_hash": cell.cell_hash,
        "family": cell.family,
        "topology": cell.topology,
        "oxide": cell.oxide,
        "geometry_json": geometry_json,
        "notes_json": notes_json,
        **{k: _column_value(k, getattr(cell, k)) for k in CELL_COLUMNS},
    }
    corner_rows, response_rows, cv_rows = [], [], []
    parts: dict[str, list[bytes]] = {}  # what result_digest hashes per corner, from the encoding
    for c, flags_json, (values, number_bytes) in zip(cell.corners, flags, numbers, strict=True):
        corner_rows.append(
            {"corner": c.corner, **dict(zip(_CORNER_NUMBERS, values, strict=True)), "flags_json": flags_json}
        )
        response_rows.append(
            {
                "corner": c.corner,
                "n_freq": int(np.size(c.response.freq_Hz)),
                "freq_Hz": encode_f64(c.response.freq_Hz),
                "z_ohm": encode_c128(c.response.z_ohm),
                "circuit_json": _circuit_json(cell.netlist, c.corner),
            }
        )
        parts[c.corner] = [_corner_text(c.corner, flags_json), number_bytes,
                           *_response_parts(response_rows[-1])]
        if c.cv is not None:
            cv_rows.append(
                {
                    "corner": c.corner,
                    "n_bias": int(np.size(c.cv.bias_V)),
                    "bias_V": encode_f64(c.cv.bias_V),
                    "cap_F": encode_f64(c.cv.cap_F),
                    "operating_bias_V": float(c.cv.operating_bias_V),
                    "operating_cap_F": float(c.cv.operating_cap_F),
                }
            )
            parts[c.corner] += _cv_parts(cv_rows[-1])
    if len(parts) == len(corner_rows):
        digest = _hash_parts(cell_row, parts)
    else:  # a corner name repeats: the rows decide which parts go together
        digest = result_digest(cell_row, corner_rows, response_rows, cv_rows)
    return PreparedCell(
        cell.name, cell.cell_hash, cell_row, corner_rows, response_rows, cv_rows, digest
    )


def insert_rows(db: sqlite_utils.Database, table: str, rows: list[dict[str, Any]]) -> None:
    """Bulk insert rows that share their keys (one executemany inside the open transaction)."""
    if not rows:
        return
    cols = list(rows[0])
    sql = (
        f"INSERT INTO {_q(table)} ({', '.join(_q(c) for c in cols)}) "
        f"VALUES ({', '.join('?' for _ in cols)})"
    )
    db.conn.executemany(sql, [[r[c] for c in cols] for r in rows])


def _insert_with_cell_id(db: sqlite_utils.Database, table: str,
                         rows: list[tuple[dict[str, Any], int]]) -> None:
    """``insert_rows`` of each (row, cell_id) as the row plus its ``cell_id`` column."""
    if not rows:
        return
    keys = tuple(rows[0][0])
    cols = [*keys, "cell_id"]
    sql = (
        f"INSERT INTO {_q(table)} ({', '.join(_q(c) for c in cols)}) "
        f"VALUES ({', '.join('?' for _ in cols)})"
    )
    db.conn.executemany(sql, [
        [*r.values(), cell_id] if tuple(r) == keys else [*map(r.__getitem__, keys), cell_id]
        for r, cell_id in rows
    ])


class CellWriter:
    """Inserts prepared cells in bulk: ids are assigned up front (after the largest stored one,
    which is what SQLite would pick inside the write transaction), rows are buffered and written
    with one ``executemany`` per table every ``FLUSH_EVERY`` cells (``flush``)."""

    FLUSH_EVERY = 256

    def __init__(self, db: sqlite_utils.Database, defer_cells: bool = True) -> None:
        """defer_cells=False writes each ``cells`` row at once, for callers that query the
        cells table between adds (merge checks names against what it imported so far)."""
        self.db = db
        self.defer_cells = defer_cells
        self.cells: list[dict[str, Any]] = []  # written first: the per-corner rows refer to them
        #: per-corner table -> (row, its cell_id)
        self.pending: dict[str, list[tuple[dict[str, Any], int]]] = {
            "corner_metrics": [],
            "responses": [],
            "cv_curves": [],
        }
        self.first_new_id = int(
            db.execute("SELECT COALESCE(MAX(cell_id), 0) FROM cells").fetchone()[0]
        )
        self.n = 0

    def add(
        self,
        cell: PreparedCell,
        *,
        deck_hash: str,
        model_version: str,
        run_id: int,
        stored_utc: str,
        current: bool = True,
    ) -> int:
        cell_id = self.first_new_id + self.n + 1
        self.cells.append(
            {
                "cell_id": cell_id,
                **cell.cell_row,
                "deck_hash": deck_hash,
                "model_version": model_version,
                "run_id": run_id,
                "stored_utc": stored_utc,
                "current": int(current),
                "result_digest": cell.digest,
            }
        )
        if not self.defer_cells:
            insert_rows(self.db, "cells", self.cells)
            self.cells.clear()
        for table, rows in (
            ("corner_metrics", cell.corner_rows),
            ("responses", cell.response_rows),
            ("cv_curves", cell.cv_rows),
        ):
            self.pending[table] += [(r, cell_id) for r in rows]
        self.n += 1
        if self.n % self.FLUSH_EVERY == 0:
            self.flush()
        return cell_id

    def flush(self) -> None:
        insert_rows(self.db, "cells", self.cells)
        self.cells.clear()
        for table, rows in self.pending.items():
            _insert_with_cell_id(self.db, table, rows)
            rows.clear()

    def finish(self) -> None:
        """Write what is buffered and the worst/best values of every cell added."""
        self.flush()
        fill_extremes(self.db, self.first_new_id)


def _q(identifier: str) -> str:
    return '"' + identifier.replace('"', '""') + '"'


def _supersede_other_decks(db: sqlite_utils.Database, run: CharacterizationRun) -> int:
    others = [
        r[0]
        for r in db.execute(
            "SELECT deck_hash FROM decks WHERE name = ? AND deck_hash != ? AND current = 1",
            [run.deck_name, run.deck_hash],
        ).fetchall()
    ]
    if not others:
        return 0
    marks = ", ".join("?" for _ in others)
    n = db.execute(
        f"SELECT COUNT(*) FROM cells WHERE current = 1 AND deck_hash IN ({marks})", others
    ).fetchone()[0]
    db.execute(f"UPDATE decks SET current = 0 WHERE deck_hash IN ({marks})", others)
    return int(n)


def _ensure_deck(db: sqlite_utils.Database, run: CharacterizationRun, now: str) -> bool:
    """Insert the deck or make it current again; True when something was written."""
    row = db.execute(
        "SELECT name, current FROM decks WHERE deck_hash = ?", [run.deck_hash]
    ).fetchone()
    if row is None:
        try:
            params_json = canonical_json(run.deck_params)
        except TypeError as exc:
            raise CatalogError.single(f"deck {run.deck_name}", "deck_params", str(exc)) from None
        db.table("decks").insert(
            {
                "deck_hash": run.deck_hash,
                "name": run.deck_name,
                "params_json": params_json,
                "created_utc": now,
                "current_since_utc": now,
                "current": 1,
            }
        )
        return True
    if row[0] != run.deck_name:
        raise CatalogError.single(
            f"deck {run.deck_name}",
            "deck_hash",
            f"already stored under the deck name {row[0]!r}",
            run.deck_hash,
        )
    if not row[1]:
        db.execute(
            "UPDATE decks SET current = 1, current_since_utc = ? WHERE deck_hash = ?",
            [now, run.deck_hash],
        )
        return True
    return False


def store_run(db: sqlite_utils.Database, run: CharacterizationRun) -> StoreReport:
    """Store ``run`` in one transaction; see the module docstring for what is skipped or superseded."""
    return store_runs(db, [run])


def store_runs(db: sqlite_utils.Database, parts: Iterable[CharacterizationRun]) -> StoreReport:
    """Store the parts of one run (the same deck, model version and corners; consecutive cells
    of one build, characterized a part at a time) in one transaction, as one run record.

    Each part is checked, encoded and written before the next is taken from ``parts``, so a
    build holds one part in memory, not the whole run; a part that fails its checks (or an
    exception from the iterator, e.g. Ctrl-C during the next part's characterization) rolls
    back every part before it: nothing is written. The cycle collector pauses while a part is
    stored (not while the next one is computed).
    """
    now = utc_now()
    with write_transaction(db):
        session: _StoreSession | None = None
        pending = iter(parts)
        while (run := next(pending, None)) is not None:
            with collector_paused():
                validate_run(run)
                if session is None:
                    session = _StoreSession(db, run, now)
                else:
                    session.check_same_run(run)
                session.store(prepare_cells(run.cells))
            del run  # not held while the next part is computed
        if session is None:
            raise ValueError("store_runs needs at least one part")
        return session.report()


class _StoreSession:
    """What one run's store knows across its parts: the stored keys of its deck and model
    version, the run record (written once something is to be stored), the counts so far."""

    def __init__(self, db: sqlite_utils.Database, run: CharacterizationRun, now: str) -> None:
        self.db, self.run, self.now = db, run, now
        self.superseded = _supersede_other_decks(db, run)
        self.deck_written = _ensure_deck(db, run, now)
        self.existing = {
            (r[0]): (r[1], r[2], r[3])
            for r in db.execute(
                "SELECT cell_hash, cell_id, result_digest, current FROM cells "
                "WHERE deck_hash = ? AND model_version = ?",
                [run.deck_hash, run.model_version],
            )
        }
        self.without_esd = _cells_built_without_esd(db, run) if self.existing else set()
        self.run_id: int | None = None
        self.current_names: set[str] = set()
        self.writer: CellWriter | None = None
        self.inserted = self.unchanged = self.completed = 0
        self.differing: list[str] = []
        self.seen_names: set[str] = set()
        self.seen_hashes: set[str] = set()

    def check_same_run(self, run: CharacterizationRun) -> None:
        """A later part must belong to the same run."""
        first = self.run
        same = (run.deck_hash, run.model_version, list(run.corners)) == (
            first.deck_hash, first.model_version, list(first.corners))
        if not same:
            raise CatalogError.single(
                f"run of deck {first.deck_name}", "parts",
                "every part of one stored run needs the same deck version, model version and corners")

    def store(self, prepared: list[PreparedCell]) -> None:
        repeats = [p.name for p in prepared if p.name in self.seen_names or p.cell_hash in self.seen_hashes]
        if repeats:
            raise CatalogError.single(f"run of deck {self.run.deck_name}", "cells",
                                      "name or cell_hash repeats an earlier part of the run: "
                                      + ", ".join(repeats[:5]))
        self.seen_names.update(p.name for p in prepared)
        self.seen_hashes.update(p.cell_hash for p in prepared)
        new, revive, completing = [], [], []
        existing, without_esd = self.existing, self.without_esd
        for p in prepared:
            if p.cell_hash in existing and existing[p.cell_hash][0] in without_esd and _has_esd(p):
                # the same key, stored without the ESD events: the new result holds everything the
                # stored one does plus those events, so it takes the stored one's place
                completing.append(existing[p.cell_hash][0])
                new.append(p)
            elif p.cell_hash in existing:
                cell_id, digest, current = existing[p.cell_hash]
                self.unchanged += 1
                # a result without the ESD events next to a stored one with them differs only there
                if digest != p.digest and (_has_esd(p) or cell_id in without_esd):
                    self.differing.append(p.name)
                if not current:
                    revive.append((p.name, cell_id))
            else:
                new.append(p)
        if not (new or revive or self.deck_written or self.superseded):
            return
        db = self.db
        if self.run_id is None:
            run = self.run
            cur = db.execute(
                "INSERT INTO runs (run_uid, deck_hash, model_version, created_utc, corners_json, "
                "source_files_json) VALUES (?, ?, ?, ?, ?, ?)",
                [
                    uuid.uuid4().hex,
                    run.deck_hash,
                    run.model_version,
                    self.now,
                    canonical_json(list(run.corners)),
                    canonical_json([str(s) for s in run.source_files]),
                ],
            )
            self.run_id = int(cur.lastrowid or 0)
            self.current_names = {
                r[0]
                for r in db.execute(
                    "SELECT name FROM cells WHERE deck_hash = ? AND current = 1", [run.deck_hash]
                )
            }
            self.writer = CellWriter(db)
        assert self.writer is not None
        for cell_id in completing:  # their rows of every table go with them (ON DELETE CASCADE)
            db.execute("DELETE FROM cells WHERE cell_id = ?", [cell_id])
        for name, cell_id in revive:
            if name in self.current_names:
                self.superseded += _retire_name(db, self.run.deck_hash, name)
            db.execute("UPDATE cells SET current = 1 WHERE cell_id = ?", [cell_id])
        for p in new:
            if p.name in self.current_names:
                self.superseded += _retire_name(db, self.run.deck_hash, p.name)
            self.writer.add(
                p,
                deck_hash=self.run.deck_hash,
                model_version=self.run.model_version,
                run_id=self.run_id,
                stored_utc=self.now,
            )
            self.inserted += 1
            if _cell_stored_hook is not None:
                _cell_stored_hook(self.inserted)
        self.completed += len(completing)
        self.writer.flush()

    def report(self) -> StoreReport:
        if self.writer is not None:
            self.writer.finish()
        run_id = self.run_id
        if run_id is None:
            run_id = self.db.execute(
                "SELECT MAX(run_id) FROM runs WHERE deck_hash = ? AND model_version = ?",
                [self.run.deck_hash, self.run.model_version],
            ).fetchone()[0]
        return StoreReport(run_id, self.inserted, self.unchanged, self.superseded, self.differing,
                           self.completed)


#: SQL: the cell ``c`` was stored without the deck's ESD events (a corner carries the flag).
BUILT_WITHOUT_ESD = ("EXISTS (SELECT 1 FROM corner_metrics m WHERE m.cell_id = c.cell_id "
                     f"AND m.flags_json LIKE '%{ESD_NOT_RUN}:%')")


def _has_esd(cell: PreparedCell) -> bool:
    """Whether this prepared result was built with the deck's ESD events."""
    return not any(f"{ESD_NOT_RUN}:" in row["flags_json"] for row in cell.corner_rows)


def _cells_built_without_esd(db: sqlite_utils.Database, run: CharacterizationRun) -> set[int]:
    """cell_id of the results of this deck and model version stored without the ESD events."""
    return {int(r[0]) for r in db.execute(
        f"SELECT cell_id FROM cells c WHERE deck_hash = ? AND model_version = ? AND {BUILT_WITHOUT_ESD}",
        [run.deck_hash, run.model_version])}


def remove_run(db: sqlite_utils.Database, run_id: int) -> int:
    """Take back a ``store_run`` that superseded and completed nothing (``StoreReport``): its
    cells, the run and, when no other run used it, its deck. One transaction; returns the number
    of cells removed.

    Refused (CatalogError) when the run is not the latest of its deck: later runs may build on
    it. The caller knows whether the store superseded anything (``StoreReport.superseded``).
    """
    with write_transaction(db):
        row = db.execute("SELECT deck_hash FROM runs WHERE run_id = ?", [run_id]).fetchone()
        if row is None:
            raise CatalogError.single("catalog", "run_id", "no such run", run_id)
        deck_hash = row[0]
        latest = db.execute("SELECT MAX(run_id) FROM runs WHERE deck_hash = ?",
                            [deck_hash]).fetchone()[0]
        if latest != run_id:
            raise CatalogError.single("catalog", "run_id", "a later run of the same deck exists; "
                                      "only the latest run can be taken back", run_id)
        n = db.execute("DELETE FROM cells WHERE run_id = ?", [run_id]).rowcount
        db.execute("DELETE FROM runs WHERE run_id = ?", [run_id])
        if not db.execute("SELECT 1 FROM runs WHERE deck_hash = ? LIMIT 1", [deck_hash]).fetchone():
            db.execute("DELETE FROM decks WHERE deck_hash = ?", [deck_hash])
    return int(n)


def _retire_name(db: sqlite_utils.Database, deck_hash: str, name: str) -> int:
    cur = db.execute(
        "UPDATE cells SET current = 0 WHERE deck_hash = ? AND name = ? AND current = 1",
        [deck_hash, name],
    )
    return int(cur.rowcount)


def _circuit_json(netlist: Any, corner: str) -> str | None:
    """The corner's equivalent circuit as canonical JSON (None when the result carries none)."""
    if isinstance(netlist, Mapping):
        netlist = netlist.get(corner)
    if netlist is None:
        return None
    return _plain_circuit_json(netlist) or canonical_json(netlist_to_dict(netlist))


def _plain_circuit_json(netlist: Any) -> str | None:
    """``canonical_json(netlist_to_dict(netlist))`` written directly, for a one-variant netlist
    of plain str names and finite float values (None for anything else: the caller then takes
    that path). Keys in sorted order, as ``canonical_json`` puts them; a finite float as its
    ``repr``, as ``json`` writes it."""
    q = _json_text
    if type(netlist.name) is not str or not all(type(p) is str for p in netlist.ports):
        return None
    items = []
    for el in netlist.elements:
        kind, value = el.kind, el.value
        if not (type(kind) is type(el.name) is type(el.node_a) is type(el.node_b) is str
                and type(value) is float and math.isfinite(value)):
            return None
        common = (f'"kind":{q(kind)},"name":{q(el.name)},"node_a":{q(el.node_a)},'
                  f'"node_b":{q(el.node_b)}')
        if kind != "RCLINE":
            items.append(f'{{{common},"value":{value!r}}}')
            continue
        c_total, ends, far = el.c_total, el.contacted_ends, el.node_far
        if not (type(c_total) is float and math.isfinite(c_total) and type(ends) is int
                and (far is None or type(far) is str)):
            return None
        far_item = "" if far is None else f',"node_far":{q(far)}'
        items.append(f'{{"c_total":{c_total!r},"contacted_ends":{ends},{common}'
                     f'{far_item},"value":{value!r}}}')
    ports = ",".join(map(q, netlist.ports))
    return f'{{"elements":[{",".join(items)}],"name":{q(netlist.name)},"ports":[{ports}]}}'


def load_cell(db: sqlite_utils.Database, cell_id: int) -> CellResult:
    """Rebuild the full ``CellResult`` stored as ``cell_id`` (responses, C-V curves, flags)."""
    rows = list(db.query("SELECT * FROM cells WHERE cell_id = ?", [cell_id]))
    if not rows:
        raise CatalogError.single("catalog", "cell_id", "no such stored cell", cell_id)
    c = rows[0]
    responses = {
        r["corner"]: r for r in db.query("SELECT * FROM responses WHERE cell_id = ?", [cell_id])
    }
    cvs = {r["corner"]: r for r in db.query("SELECT * FROM cv_curves WHERE cell_id = ?", [cell_id])}
    corners = []
    circuits = {
        corner: netlist_from_dict(json.loads(r["circuit_json"]))
        for corner, r in responses.items()
        if r.get("circuit_json")
    }
    for m in db.query("SELECT * FROM corner_metrics WHERE cell_id = ? ORDER BY rowid", [cell_id]):
        resp = responses.get(m["corner"])
        response = (
            FrequencyResponse(decode_f64(resp["freq_Hz"]), decode_c128(resp["z_ohm"]))
            if resp
            else FrequencyResponse(np.empty(0), np.empty(0, complex))
        )
        cv_row = cvs.get(m["corner"])
        cv = (
            CVCurve(
                decode_f64(cv_row["bias_V"]),
                decode_f64(cv_row["cap_F"]),
                float(cv_row["operating_bias_V"]),
                float(cv_row["operating_cap_F"]),
            )
            if cv_row
            else None
        )
        corners.append(
            CornerResult(
                corner=m["corner"],
                temperature_C=float(m["temperature_C"]),
                supply_V=float(m["supply_V"]),
                metrics={k: none_to_nan(m.get(k)) for k in METRIC_NAMES},
                response=response,
                cv=cv,
                flags=list(json.loads(m["flags_json"])),
            )
        )
    return CellResult(
        name=c["name"],
        cell_hash=c["cell_hash"],
        family=c["family"],
        topology=c["topology"],
        oxide=c["oxide"],
        geometry=json.loads(c["geometry_json"]),
        area_um2=none_to_nan(c["area_um2"]),
        width_sites=int(c["width_sites"] or 0),
        height_rows=int(c["height_rows"] or 0),
        gate_area_um2=none_to_nan(c["gate_area_um2"]),
        esd_safe=bool(c["esd_safe"]),
        corners=corners,
        # in the run's corner order, so "the first circuit" is the first (typical) corner
        netlist={c.corner: circuits[c.corner] for c in corners if c.corner in circuits} or None,
        notes=list(json.loads(c["notes_json"])),
        # results stored before these columns: core-row cells on the rail named like their oxide
        placement=c.get("placement") or "core_row",
        rail=c.get("rail") or c["oxide"],
    )
