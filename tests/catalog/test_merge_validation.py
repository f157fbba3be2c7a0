"""Merging a hostile or damaged catalog: refused whole, naming the source, nothing written.

Each crafted source starts as a good catalog (``make_run``: a valid deck, real content hashes)
and is altered with plain SQL, as a careless or hostile teammate could. The merge must refuse
it with problems that name the source file (never the destination), quote at most a short,
escaped excerpt of the offending value, and leave the destination as it was. SQLite's own
storage rules (type affinity: text that does not look like a number stays text in a REAL
column) are those of docs/references.md [125]; the read-only URI mode of [126].
"""

from __future__ import annotations

import contextlib
import io
import json
import shutil
import sqlite3
from pathlib import Path

import pytest

from celllab.catalog import Catalog, open_catalog
from celllab.catalog.store import stored_result_digest
from celllab.cli.main import main
from celllab.errors import CatalogError

from .conftest import deck_hash, make_run

FIRST_METRIC_ROW = "(SELECT MIN(rowid) FROM corner_metrics)"
FIRST_CELL = "(SELECT MIN(cell_id) FROM cells)"


@pytest.fixture
def good_source(tmp_path: Path) -> Path:
    path = tmp_path / "teammate.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(make_run(deck_name="invented_m9z", n_cells=8, seed=5))
        cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return path


def _alter(path: Path, *statements: str, args: tuple[object, ...] = (), redigest: bool = False) -> None:
    conn = sqlite3.connect(path)
    for sql in statements:
        conn.execute(sql, args if "?" in sql else ())
    conn.commit()
    conn.close()
    if redigest:  # a forger who also recomputes the result digest
        import sqlite_utils

        db = sqlite_utils.Database(path)
        for (cell_id,) in db.execute("SELECT cell_id FROM cells").fetchall():
            db.execute("UPDATE cells SET result_digest = ? WHERE cell_id = ?",
                       [stored_result_digest(db, cell_id), cell_id])
        db.conn.commit()
        db.close()


def _state(cat: Catalog) -> dict[str, object]:
    counts = {t: cat._db.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
              for t in ("decks", "runs", "cells", "corner_metrics", "responses", "cv_curves")}
    return {**counts, "current": [(d.name, d.deck_hash, d.current) for d in cat.decks()]}


TEN_MB_NAME = "x" * 10_000_000

# id -> (SQL statements, bound arguments, recompute digests, words the problems must hold)
CASES: dict[str, tuple[tuple[str, ...], tuple[object, ...], bool, tuple[str, ...]]] = {
    "text in a metric": ((f"UPDATE corner_metrics SET cap_fF = 'lots' WHERE rowid = {FIRST_METRIC_ROW}",),
                         (), False, ("cap_fF", "not a number")),
    "blob in a metric": ((f"UPDATE corner_metrics SET esr_ohm = X'00ff' WHERE rowid = {FIRST_METRIC_ROW}",),
                         (), False, ("esr_ohm", "not a number")),
    "infinite metric": ((f"UPDATE corner_metrics SET esr_ohm = 9e999 WHERE rowid = {FIRST_METRIC_ROW}",),
                        (), True, ("esr_ohm", "not a finite number")),
    "empty metric without a flag": ((f"UPDATE corner_metrics SET leakage_nA = NULL, flags_json = '[]' "
                                     f"WHERE rowid = {FIRST_METRIC_ROW}",), (), True, ("leakage_nA", "no flag")),
    "flags not JSON": ((f"UPDATE corner_metrics SET flags_json = '{{not json' WHERE rowid = {FIRST_METRIC_ROW}",),
                       (), False, ("flags_json", "not valid JSON")),
    "flags not a list": ((f"UPDATE corner_metrics SET flags_json = '{{\"a\": 1}}' WHERE rowid = {FIRST_METRIC_ROW}",),
                         (), False, ("expected a list",)),
    "10 MB name": ((f"UPDATE cells SET name = ? WHERE cell_id = {FIRST_CELL}",), (TEN_MB_NAME,), False,
                   ("name",)),
    "terminal escapes in a name": ((f"UPDATE cells SET name = ? WHERE cell_id = {FIRST_CELL}",),
                                   ("ok\x1b[2J\x1b]0;pwned\x07\nrm -rf",), True, ("name",)),
    "deck with empty parameters": (("UPDATE decks SET params_json = '{}'",), (), False, ("not a valid deck",)),
    "deck hash forged for empty parameters": (("UPDATE decks SET params_json = '{}', deck_hash = ?",
                                               "UPDATE runs SET deck_hash = (SELECT deck_hash FROM decks)",
                                               "UPDATE cells SET deck_hash = (SELECT deck_hash FROM decks)"),
                                              (deck_hash({}),), False, ("not a valid deck",)),
    "deck parameters altered": (("UPDATE decks SET params_json = replace(params_json, '\"core_V\":1.2', "
                                 "'\"core_V\":1.3')",), (), False, ("not the hash of the stored parameters",)),
    "placement not allowed": ((f"UPDATE cells SET placement = 'sideways' WHERE cell_id = {FIRST_CELL}",),
                              (), True, ("placement", "open_region")),
    "rail changed": ((f"UPDATE cells SET rail = 'io' WHERE cell_id = {FIRST_CELL} AND oxide = 'core'",),
                     (), True, ("cell_hash",)),
    "rail with escapes": ((f"UPDATE cells SET rail = ? WHERE cell_id = {FIRST_CELL}",), ("core\x1b[2J",),
                          True, ("rail",)),
    "far-future timestamp": (("UPDATE decks SET current_since_utc = '2999-01-01T00:00:00.000000Z'",),
                             (), False, ("current_since_utc", "future")),
    "implausible density": ((f"UPDATE corner_metrics SET cap_density_fF_per_um2 = 1e6 "
                             f"WHERE rowid = {FIRST_METRIC_ROW}",), (), True, ("cap_density_fF_per_um2",
                                                                              "plausible range")),
    "density not cap over area": ((f"UPDATE corner_metrics SET cap_density_fF_per_um2 = 500 "
                                   f"WHERE rowid = {FIRST_METRIC_ROW}",), (), True,
                                  ("cap_density_fF_per_um2", "not cap_fF / area_um2")),
    "numbers altered, digest kept": ((f"UPDATE corner_metrics SET esr_ohm = esr_ohm * 1.01 "
                                      f"WHERE rowid = {FIRST_METRIC_ROW}",), (), False, ("result_digest",)),
    "cell hash forged": ((f"UPDATE cells SET cell_hash = 'eeeeeeeeeeeeeeee' WHERE cell_id = {FIRST_CELL}",),
                         (), True, ("cell_hash is not the hash",)),
    "area forged": ((f"UPDATE cells SET area_um2 = area_um2 * 3 WHERE cell_id = {FIRST_CELL}",), (), True,
                    ("area_um2", "layout rules")),
    "negative area": ((f"UPDATE cells SET area_um2 = -1 WHERE cell_id = {FIRST_CELL}",), (), True,
                      ("area_um2",)),
    "short impedance blob": (("UPDATE responses SET z_ohm = X'00' WHERE rowid = (SELECT MIN(rowid) FROM responses)",),
                             (), False, ("z_ohm", "bytes")),
    "circuit not a circuit": (("UPDATE responses SET circuit_json = '{\"elements\": 5}' "
                               "WHERE rowid = (SELECT MIN(rowid) FROM responses)",), (), False,
                              ("circuit_json",)),
    "run corners garbage": (("UPDATE runs SET corners_json = '[1, 2]'",), (), False, ("corner names",)),
    "geometry garbage": ((f"UPDATE cells SET geometry_json = '[]' WHERE cell_id = {FIRST_CELL}",), (), False,
                         ("expected a dict",)),
    "unknown topology": ((f"UPDATE cells SET topology = 'nmos_inv' WHERE cell_id = {FIRST_CELL}",), (), True,
                         ("topology",)),
}


@pytest.mark.parametrize("case", list(CASES))
def test_crafted_source_is_refused_naming_it(filled: Catalog, good_source: Path, case: str,
                                            tally: dict[str, object]) -> None:
    statements, args, redigest, words = CASES[case]
    _alter(good_source, *statements, args=args, redigest=redigest)
    before = _state(filled)
    with pytest.raises(CatalogError) as info:
        filled.merge_from(good_source)
    problems = info.value.problems
    assert problems and all(p.file == str(good_source) for p in problems)
    text = str(info.value)
    assert all(w in text for w in words), text
    assert "\x1b" not in text and "\x07" not in text and len(text) < 20_000
    assert _state(filled) == before
    crafted = tally.setdefault("crafted_catalogs", {"refused": 0})
    crafted["refused"] += 1  # type: ignore[index]


def test_cli_merge_of_a_crafted_source_exits_2_with_escaped_text(
    filled: Catalog, good_source: Path
) -> None:
    _alter(good_source, f"UPDATE cells SET family = ? WHERE cell_id = {FIRST_CELL}",
           args=("fam\x1b[31m\u202ebad\r",))
    filled.close()
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["merge", "--catalog", str(filled.path), str(good_source)])
    assert code == 2
    text = err.getvalue()
    assert str(good_source) in text and "Traceback" not in text
    assert not any(ch in text for ch in "\x1b\u202e\r")
    assert out.getvalue() == ""


def test_good_source_still_merges(filled: Catalog, good_source: Path) -> None:
    report = filled.merge_from(good_source)
    assert report.added == 8 and report.conflicts == []


def _live_wal_copy(tmp_path: Path) -> Path:
    """A catalog whose last batch sits in its write-ahead log only (a teammate's open file)."""
    live = tmp_path / "live.sqlite"
    with open_catalog(live) as cat:
        cat.store_run(make_run(deck_name="invented_m9z", n_cells=3, seed=2))
        cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        cat._db.execute("PRAGMA wal_autocheckpoint = 0")
        cat.store_run(make_run(deck_name="invented_q4w", n_cells=4, seed=3))
        copy = tmp_path / "copy.sqlite"
        shutil.copyfile(live, copy)
        shutil.copyfile(f"{live}-wal", f"{copy}-wal")
    assert Path(f"{copy}-wal").stat().st_size > 0
    return copy


def test_source_in_wal_mode_is_read_without_being_changed(filled: Catalog, tmp_path: Path) -> None:
    source = _live_wal_copy(tmp_path)
    data, mtime = source.read_bytes(), source.stat().st_mtime_ns
    wal = Path(f"{source}-wal").read_bytes()
    report = filled.merge_from(source)
    assert report.added == 7  # the batch still in the log was read too
    assert source.read_bytes() == data and source.stat().st_mtime_ns == mtime
    assert Path(f"{source}-wal").read_bytes() == wal  # not checkpointed


def test_damaged_source_names_the_source(filled: Catalog, good_source: Path) -> None:
    # scramble the pages of the cells table only: the file opens, its schema reads, the rows
    # do not - the point where the error used to be blamed on the destination
    conn = sqlite3.connect(good_source)
    page_size = conn.execute("PRAGMA page_size").fetchone()[0]
    roots = [r[0] for r in conn.execute(
        "SELECT rootpage FROM sqlite_master WHERE tbl_name IN ('cells', 'decks') AND rootpage > 1")]
    conn.close()
    data = bytearray(good_source.read_bytes())
    for root in roots:
        start = (root - 1) * page_size
        data[start : start + page_size] = bytes((i * 37) % 251 for i in range(page_size))
    good_source.write_bytes(bytes(data))
    before = _state(filled)
    with pytest.raises(CatalogError) as info:
        filled.merge_from(good_source)
    assert all(p.file == str(good_source) for p in info.value.problems), str(info.value)
    assert str(filled.path) not in str(info.value)
    assert _state(filled) == before


def test_merge_does_not_make_a_deck_current_by_itself(filled: Catalog, tmp_path: Path) -> None:
    run = make_run(deck_version=7, n_cells=3)  # same deck name, other parameters, stored later
    path = tmp_path / "newer.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(run)
    before = [(d.deck_hash, d.current) for d in filled.decks()]
    report = filled.merge_from(path)
    assert report.decks_not_current == [f"{run.deck_name} ({run.deck_hash[:12]})"]
    assert [(d.deck_hash, d.current) for d in filled.decks() if d.deck_hash != run.deck_hash] == before
    out = io.StringIO()
    filled.close()
    with contextlib.redirect_stdout(out):
        assert main(["merge", "--catalog", str(filled.path), str(path)]) == 0
    assert "not current" in out.getvalue() and "--make-current" in out.getvalue()
    with contextlib.redirect_stdout(out):
        assert main(["merge", "--catalog", str(filled.path), str(path), "--make-current"]) == 0
    assert "now current" in out.getvalue()
    with open_catalog(filled.path) as cat:
        assert [d.deck_hash for d in cat.decks() if d.current] == [run.deck_hash]


def test_json_report_lists_decks_left_not_current(filled: Catalog, good_source: Path) -> None:
    filled.close()
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["merge", "--catalog", str(filled.path), str(good_source), "--json"]) == 0
    report = json.loads(out.getvalue())
    assert report["decks_not_current"] and report["decks_made_current"] == []
