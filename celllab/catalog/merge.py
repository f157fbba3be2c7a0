"""Importing another catalog file by content hash, in one transaction.

The other file is read through a read-only connection into memory and every deck, run and
result in it is checked as a fresh run is, its hashes recomputed (``catalog.source``); a file
that fails any check is refused whole, with the problems naming it, and nothing is written.

Decks are matched by deck hash, runs by run uid, results by (deck hash, cell hash, model
version). Identical results (same ``result_digest``) are skipped; new ones are added. Two kinds
of conflict are reported and never imported:

* the same key with different numbers (different digest): this catalog's result is kept;
* a cell name that has a different cell hash under the same deck here.

A deck hash stored under another name or with other parameters is a conflict too (nothing of
that deck is imported). A merge never changes which deck is current: imported decks arrive
not current, unless ``make_current`` asks that each deck name's current deck be the one made
current most recently in either catalog. Each cell name keeps one current result per deck.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import sqlite_utils

from celllab.catalog.schema import write_transaction
from celllab.catalog.source import SourceContent, open_source, read_source
from celllab.catalog.store import CellWriter
from celllab.errors import CatalogError


@dataclass(frozen=True)
class MergeReport:
    """added / identical: cell results imported / already here; conflicts: one line each.

    decks_not_current: decks (``name (hash)``) current in the other catalog but not here; their
    results are stored, but queries show them only once the deck is current here.
    decks_made_current: decks that became current because ``make_current`` was asked.
    """

    added: int
    identical: int
    conflicts: list[str] = field(default_factory=list)
    decks_added: int = 0
    runs_added: int = 0
    decks_not_current: list[str] = field(default_factory=list)
    decks_made_current: list[str] = field(default_factory=list)


def _short(h: str) -> str:
    return h[:12]


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.samefile(b)
    except OSError:
        return False


def _import_decks(
    db: sqlite_utils.Database, content: SourceContent, conflicts: list[str]
) -> tuple[set[str], list[str]]:
    """Insert unknown decks (not current); return the usable deck hashes and the added decks."""
    usable: set[str] = set()
    added: list[str] = []
    for h, source_deck in content.decks.items():
        d = source_deck.row
        here = db.execute("SELECT name, params_json FROM decks WHERE deck_hash = ?", [h]).fetchone()
        if here is None:
            db.table("decks").insert({**d, "current": 0})
            added.append(h)
        elif here[0] != d["name"] or json.loads(here[1]) != json.loads(d["params_json"]):
            what = "name" if here[0] != d["name"] else "parameters"
            conflicts.append(
                f"deck {d['name']} ({_short(h)}): same hash as deck "
                f"{here[0]} here but different {what}; deck not imported"
            )
            continue
        usable.add(h)
    return usable, added


def _settle_current_decks(
    db: sqlite_utils.Database, content: SourceContent, names: set[str]
) -> list[str]:
    """One current deck per name: the most recently made current in either catalog.
    Returns the decks that became current."""
    src_current = {
        h: d.row["current_since_utc"] for h, d in content.decks.items() if d.row["current"]
    }
    made = []
    for name in sorted(names):
        rows = db.execute(
            "SELECT deck_hash, current, current_since_utc FROM decks WHERE name = ?", [name]
        ).fetchall()
        candidates = [(since, h) for h, cur, since in rows if cur]
        candidates += [(src_current[h], h) for h, _, _ in rows if h in src_current]
        if not candidates:
            continue
        since, winner = max(candidates)
        if not any(cur for h, cur, _ in rows if h == winner):
            made.append(f"{name} ({_short(winner)})")
        db.execute("UPDATE decks SET current = (deck_hash = ?) WHERE name = ?", [winner, name])
        db.execute(
            "UPDATE decks SET current_since_utc = ? WHERE deck_hash = ? AND current_since_utc < ?",
            [since, winner, since],
        )
    return made


def _run_id_for(
    db: sqlite_utils.Database, content: SourceContent, src_run_id: int, cache: dict[int, int],
    counter: list[int],
) -> int:
    if src_run_id in cache:
        return cache[src_run_id]
    run = content.runs[src_run_id]
    here = db.execute("SELECT run_id FROM runs WHERE run_uid = ?", [run["run_uid"]]).fetchone()
    if here is not None:
        cache[src_run_id] = int(here[0])
    else:
        row = {k: v for k, v in run.items() if k not in ("run_id", "corners")}
        cols = list(row)
        cur = db.execute(
            f"INSERT INTO runs ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
            [row[c] for c in cols],
        )
        cache[src_run_id] = int(cur.lastrowid or 0)
        counter[0] += 1
    return cache[src_run_id]


def merge_from(
    db: sqlite_utils.Database, own_path: Path, other_path: str | Path, make_current: bool = False
) -> MergeReport:
    """Import ``other_path`` into ``db`` (see the module docstring); one transaction."""
    other = Path(other_path)
    if _same_file(other, own_path):
        raise CatalogError.single(str(other), "", "cannot merge a catalog into itself")
    src = open_source(other)
    try:
        content = read_source(src, other)
    finally:
        src.close()
    conflicts: list[str] = []
    added = identical = 0
    with write_transaction(db):
        usable, decks_added = _import_decks(db, content, conflicts)
        names_of = {h: d.row["name"] for h, d in content.decks.items()}
        writer = CellWriter(db, defer_cells=False)
        run_ids: dict[int, int] = {}
        runs_added = [0]
        current_imports: list[tuple[int, str, str, str]] = []
        for c in content.cells:
            if c.deck_hash not in usable:
                continue
            p = c.prepared
            label = (
                f"deck {names_of[c.deck_hash]} ({_short(c.deck_hash)}) cell "
                f"{p.name} ({_short(p.cell_hash)}) model {c.model_version}"
            )
            here = db.execute(
                "SELECT result_digest FROM cells WHERE deck_hash = ? AND cell_hash = ? "
                "AND model_version = ?",
                [c.deck_hash, p.cell_hash, c.model_version],
            ).fetchone()
            if here is not None:
                if here[0] == p.digest:
                    identical += 1
                else:
                    conflicts.append(
                        f"{label}: numbers differ from this catalog's; kept this catalog's result"
                    )
                continue
            clash = db.execute(
                "SELECT cell_hash FROM cells WHERE deck_hash = ? AND name = ? "
                "AND cell_hash != ? LIMIT 1",
                [c.deck_hash, p.name, p.cell_hash],
            ).fetchone()
            if clash is not None:
                conflicts.append(
                    f"{label}: the name has cell hash {_short(clash[0])} here; not imported"
                )
                continue
            run_id = _run_id_for(db, content, c.run_id, run_ids, runs_added)
            new_id = writer.add(
                p,
                deck_hash=c.deck_hash,
                model_version=c.model_version,
                run_id=run_id,
                stored_utc=c.stored_utc,
                current=False,
            )
            added += 1
            if c.current:
                current_imports.append((new_id, c.deck_hash, p.name, c.stored_utc))
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
        made: list[str] = []
        if make_current:
            made = _settle_current_decks(db, content, {d.row["name"] for d in content.decks.values()})
        not_current = [
            f"{d.row['name']} ({_short(h)})"
            for h, d in content.decks.items()
            if h in usable and d.row["current"]
            and not db.execute("SELECT current FROM decks WHERE deck_hash = ?", [h]).fetchone()[0]
        ]
    return MergeReport(added, identical, conflicts, len(decks_added), runs_added[0], not_current, made)
