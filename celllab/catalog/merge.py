"""Importing another catalog file by content hash, in one transaction.

Decks are matched by deck hash, runs by run uid, results by (deck hash, cell hash, model
version). Identical results (same ``result_digest``) are skipped; new ones are added. Two kinds
of conflict are reported and never imported:

* the same key with different numbers (different digest): this catalog's result is kept;
* a cell name that has a different cell hash under the same deck here.

A deck hash stored under another name or with other parameters is a conflict too (nothing of
that deck is imported). Afterwards each deck name has one current deck: a deck name this catalog
already has keeps its current deck (the other catalog's current deck of that name is imported as
history and named in the report) unless ``adopt_current`` asks for the one made current most
recently in either catalog; a deck name new here takes the other catalog's current deck. Each
cell name has one current result per deck.
The other file is read through an in-memory copy, so it is never changed (not even migrated).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import sqlite_utils

from celllab.catalog.schema import open_source_copy, write_transaction
from celllab.catalog.store import CellWriter, PreparedCell
from celllab.errors import CatalogError


@dataclass(frozen=True)
class MergeReport:
    """added / identical: cell results imported / already here; conflicts: one line each."""

    added: int
    identical: int
    conflicts: list[str] = field(default_factory=list)
    decks_added: int = 0
    runs_added: int = 0
    #: deck names whose current deck this merge changed, one line each
    current_changed: list[str] = field(default_factory=list)
    #: deck names whose current deck stayed although the other catalog made another one
    #: current more recently (``adopt_current`` would have switched), one line each
    current_kept: list[str] = field(default_factory=list)


def _short(h: str) -> str:
    return h[:12]


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.samefile(b)
    except OSError:
        return False


def _import_decks(
    db: sqlite_utils.Database, src: sqlite_utils.Database, conflicts: list[str]
) -> tuple[set[str], int]:
    """Insert unknown decks (not current yet); return the deck hashes usable for cells."""
    usable: set[str] = set()
    added = 0
    for d in src.query("SELECT * FROM decks ORDER BY created_utc"):
        here = db.execute(
            "SELECT name, params_json FROM decks WHERE deck_hash = ?", [d["deck_hash"]]
        ).fetchone()
        if here is None:
            db.table("decks").insert({**d, "current": 0})
            added += 1
        elif here[0] != d["name"] or json.loads(here[1]) != json.loads(d["params_json"]):
            what = "name" if here[0] != d["name"] else "parameters"
            conflicts.append(
                f"deck {d['name']} ({_short(d['deck_hash'])}): same hash as deck "
                f"{here[0]} here but different {what}; deck not imported"
            )
            continue
        usable.add(d["deck_hash"])
    return usable, added


def _settle_current_decks(
    db: sqlite_utils.Database, src: sqlite_utils.Database, names: set[str], adopt: bool
) -> tuple[list[str], list[str]]:
    """One current deck per name (see the module docstring); returns the lines for
    ``MergeReport.current_changed`` and ``current_kept``."""
    src_current = {
        r["deck_hash"]: r["current_since_utc"]
        for r in src.query("SELECT deck_hash, current_since_utc FROM decks WHERE current = 1")
    }
    changed: list[str] = []
    kept: list[str] = []
    for name in sorted(names):
        rows = db.execute(
            "SELECT deck_hash, current, current_since_utc FROM decks WHERE name = ?", [name]
        ).fetchall()
        ours = [(since, h) for h, cur, since in rows if cur]
        theirs = [(src_current[h], h) for h, _, _ in rows if h in src_current]
        if not ours and not theirs:
            continue
        since, winner = max(ours + theirs)
        if ours and not adopt:
            if winner != ours[0][1]:
                kept.append(f"deck {name}: kept current deck {_short(ours[0][1])}; the other "
                            f"catalog's current deck {_short(winner)} (current since {since}) "
                            f"is stored as history")
            since, winner = ours[0]
        elif ours and winner != ours[0][1]:
            changed.append(f"deck {name}: current deck is now {_short(winner)} from the other "
                           f"catalog (was {_short(ours[0][1])})")
        elif not ours:
            changed.append(f"deck {name}: new here, current deck {_short(winner)}")
        db.execute("UPDATE decks SET current = (deck_hash = ?) WHERE name = ?", [winner, name])
        db.execute(
            "UPDATE decks SET current_since_utc = ? WHERE deck_hash = ? AND current_since_utc < ?",
            [since, winner, since],
        )
    return changed, kept


def _run_id_for(
    db: sqlite_utils.Database,
    src: sqlite_utils.Database,
    src_run_id: int,
    cache: dict[int, int],
    counter: list[int],
) -> int:
    if src_run_id in cache:
        return cache[src_run_id]
    run = next(src.query("SELECT * FROM runs WHERE run_id = ?", [src_run_id]))
    here = db.execute("SELECT run_id FROM runs WHERE run_uid = ?", [run["run_uid"]]).fetchone()
    if here is not None:
        cache[src_run_id] = int(here[0])
    else:
        row = {k: v for k, v in run.items() if k != "run_id"}
        cols = list(row)
        cur = db.execute(
            f"INSERT INTO runs ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
            [row[c] for c in cols],
        )
        cache[src_run_id] = int(cur.lastrowid or 0)
        counter[0] += 1
    return cache[src_run_id]


def _child_rows(
    src: sqlite_utils.Database, table: str, cell_id: int, columns: dict[str, set[str]]
) -> list[dict[str, Any]]:
    """Rows of ``table`` for one source cell, limited to the columns this catalog has."""
    keep = columns[table] - {"cell_id"}
    rows = src.query(f"SELECT * FROM {table} WHERE cell_id = ? ORDER BY rowid", [cell_id])
    return [{k: v for k, v in r.items() if k in keep} for r in rows]


def merge_from(db: sqlite_utils.Database, own_path: Path, other_path: str | Path, *,
               adopt_current: bool = False) -> MergeReport:
    """Import ``other_path`` into ``db`` (see the module docstring); one transaction.

    ``adopt_current``: a deck name both catalogs have gets the deck made current most recently
    in either; by default this catalog's current deck stays current.
    """
    other = Path(other_path)
    if _same_file(other, own_path):
        raise CatalogError.single(str(other), "", "cannot merge a catalog into itself")
    src = open_source_copy(other)
    conflicts: list[str] = []
    added = identical = 0
    try:
        with write_transaction(db):
            usable, decks_added = _import_decks(db, src, conflicts)
            deck_names = {r[0] for r in src.execute("SELECT name FROM decks")}
            names_of = {r[0]: r[1] for r in src.execute("SELECT deck_hash, name FROM decks")}
            columns = {
                t: set(db[t].columns_dict)
                for t in ("cells", "corner_metrics", "responses", "cv_curves")
            }
            writer = CellWriter(db)
            run_ids: dict[int, int] = {}
            runs_added = [0]
            touched: set[tuple[str, str]] = set()
            current_imports: list[tuple[int, str, str, str]] = []
            for c in src.query("SELECT * FROM cells ORDER BY cell_id"):
                if c["deck_hash"] not in usable:
                    continue
                label = (
                    f"deck {names_of[c['deck_hash']]} ({_short(c['deck_hash'])}) cell "
                    f"{c['name']} ({_short(c['cell_hash'])}) model {c['model_version']}"
                )
                here = db.execute(
                    "SELECT result_digest FROM cells WHERE deck_hash = ? AND cell_hash = ? "
                    "AND model_version = ?",
                    [c["deck_hash"], c["cell_hash"], c["model_version"]],
                ).fetchone()
                if here is not None:
                    if here[0] == c["result_digest"]:
                        identical += 1
                    else:
                        conflicts.append(
                            f"{label}: numbers differ from this catalog's; kept this "
                            f"catalog's result"
                        )
                    continue
                clash = db.execute(
                    "SELECT cell_hash FROM cells WHERE deck_hash = ? AND name = ? "
                    "AND cell_hash != ? LIMIT 1",
                    [c["deck_hash"], c["name"], c["cell_hash"]],
                ).fetchone()
                if clash is not None:
                    conflicts.append(
                        f"{label}: the name has cell hash {_short(clash[0])} here; not imported"
                    )
                    continue
                cell_row = {
                    k: c[k]
                    for k in c
                    if k in columns["cells"]
                    and k
                    not in (
                        "cell_id",
                        "deck_hash",
                        "model_version",
                        "run_id",
                        "stored_utc",
                        "current",
                        "result_digest",
                    )
                }
                prepared = PreparedCell(
                    c["name"],
                    c["cell_hash"],
                    cell_row,
                    _child_rows(src, "corner_metrics", c["cell_id"], columns),
                    _child_rows(src, "responses", c["cell_id"], columns),
                    _child_rows(src, "cv_curves", c["cell_id"], columns),
                    c["result_digest"],
                )
                run_id = _run_id_for(db, src, c["run_id"], run_ids, runs_added)
                new_id = writer.add(
                    prepared,
                    deck_hash=c["deck_hash"],
                    model_version=c["model_version"],
                    run_id=run_id,
                    stored_utc=c["stored_utc"],
                    current=False,
                )
                added += 1
                touched.add((c["deck_hash"], c["name"]))
                if c["current"]:
                    current_imports.append((new_id, c["deck_hash"], c["name"], c["stored_utc"]))
            writer.finish()
            for new_id, deck_hash, name, stored in current_imports:
                latest = db.execute(
                    "SELECT MAX(stored_utc) FROM cells WHERE deck_hash = ? AND "
                    "name = ? AND current = 1",
                    [deck_hash, name],
                ).fetchone()[0]
                if latest is None or stored > latest:
                    db.execute(
                        "UPDATE cells SET current = 0 WHERE deck_hash = ? AND name = ?",
                        [deck_hash, name],
                    )
                    db.execute("UPDATE cells SET current = 1 WHERE cell_id = ?", [new_id])
            changed, kept = _settle_current_decks(db, src, deck_names, adopt_current)
    finally:
        src.close()
    return MergeReport(added, identical, conflicts, decks_added, runs_added[0], changed, kept)
