"""Reading the catalog: SQL builders (pure, text + parameters) and the calls that run them.

Every query starts from ``base_rows_sql``: one row per cell x corner with the columns of
``filters.FIELDS``. With ``corner="worst"`` / ``"best"`` each metric is aggregated over the
cell's corners first (worst / best as defined once in ``celllab.columns``), so a filter such as
``leakage_nA_per_nF <= 5`` then means "at the worst corner". The aggregates are computed when
results are written (table ``corner_extremes``, ``schema.fill_extremes``); SQL ``MIN``/``MAX``
skip empty values, so a metric missing at one corner is aggregated over the corners that have it.
By default only current results (current deck of each name, current result of each cell) are read.
"""

from __future__ import annotations

import contextlib
import json
import sqlite3
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from celllab.catalog.filters import FIELDS, compile_filter, quote_column, unknown_name_error
from celllab.catalog.schema import INDEXED_METRICS
from celllab.columns import (
    AGGREGATE_CORNERS,
    CELL_COLUMNS,
    CORNER_COLUMNS,
    METRIC_NAMES,
    best_first_descending,
)
from celllab.errors import CatalogError, FilterError, Problem, did_you_mean

#: Keys of every row ``run_query`` returns, in display order.
ROW_KEYS: tuple[str, ...] = (
    "name",
    "cell_hash",
    "deck",
    "deck_hash",
    "model_version",
    "family",
    "topology",
    "oxide",
    "corner",
    *CORNER_COLUMNS,
    *CELL_COLUMNS,
    *METRIC_NAMES,
    "flags",
)


@dataclass(frozen=True)
class DeckInfo:
    """One stored deck. ``n_cells`` counts its current cell results."""

    name: str
    deck_hash: str
    created_utc: str
    current: bool
    n_cells: int


def _scope_sql(
    cell: str, deck: str, deck_name: str | None, current_only: bool, params: list[object]
) -> str:
    conds = []
    if current_only:
        conds += [f"{cell}.current = 1", f"{deck}.current = 1"]
    if deck_name is not None:
        conds.append(f"({deck}.name = ? OR {deck}.deck_hash = ?)")
        params += [deck_name, deck_name]
    return " AND ".join(conds) or "1"


def base_rows_sql(
    corner: str | None = "worst",
    deck: str | None = None,
    current_only: bool = True,
    index: str | None = None,
) -> tuple[str, list[object]]:
    """SQL of the cell x corner rows (columns: ``cell_id``, ``flags_json`` and ``filters.FIELDS``).

    corner : a corner name, "worst", "best", or None for every corner.
    deck : a deck name or deck hash, None for all decks.
    index : name of an index of the metric table to drive the join from (``metric_index``):
        the rows are then read in that index's order, so an ORDER BY on its metric with a
        LIMIT stops early instead of sorting every row. Same rows either way.
    """
    params: list[object] = []
    cell_cols = ", ".join(f"c.{quote_column(k)} AS {quote_column(k)}" for k in CELL_COLUMNS)
    metric_cols = ", ".join(f"m.{quote_column(k)} AS {quote_column(k)}" for k in METRIC_NAMES)
    if corner in AGGREGATE_CORNERS:
        # precomputed per cell at store time (schema.fill_extremes, Column.sql_aggregate)
        source = "JOIN corner_extremes m ON m.cell_id = c.cell_id AND m.kind = ?"
        corner_cols = (
            "m.kind AS corner, NULL AS temperature_C, NULL AS supply_V, NULL AS flags_json"
        )
        params.append(corner)
        corner_cond = ""
    else:
        source = "JOIN corner_metrics m ON m.cell_id = c.cell_id"
        corner_cols = (
            "m.corner AS corner, m.temperature_C AS temperature_C, "
            "m.supply_V AS supply_V, m.flags_json AS flags_json"
        )
        corner_cond = "" if corner is None else " AND m.corner = ?"
    outer_scope = _scope_sql("c", "d", deck, current_only, params)
    if corner is not None and corner not in AGGREGATE_CORNERS:
        params.append(corner)
    sql = (
        f"SELECT c.cell_id AS cell_id, c.name AS name, c.cell_hash AS cell_hash, "
        f"d.name AS deck, d.deck_hash AS deck_hash, c.model_version AS model_version, "
        f"c.family AS family, c.topology AS topology, c.oxide AS oxide, {corner_cols}, "
        f"{cell_cols}, {metric_cols} "
        f"FROM {_from_clause(source, index)} "
        f"WHERE {outer_scope}{corner_cond}"
    )
    return sql, params


def _from_clause(source: str, index: str | None) -> str:
    """``cells c``, ``decks d`` and the metric table ``m`` of ``source`` ("JOIN <table> m ON ...").

    With ``index`` the metric table comes first, read through that index (CROSS JOIN keeps
    SQLite from reordering the loops), so rows arrive in index order.
    """
    if index is None:
        return f"cells c JOIN decks d ON d.deck_hash = c.deck_hash {source}"
    table, on = source.removeprefix("JOIN ").split(" m ON ", 1)
    return (
        f"{table} m INDEXED BY {index} CROSS JOIN cells c ON {on} "
        f"CROSS JOIN decks d ON d.deck_hash = c.deck_hash"
    )


def metric_index(corner: str | None, metric: str) -> str | None:
    """Name of the index that yields rows of ``corner`` in order of ``metric`` (None if none)."""
    if metric not in INDEXED_METRICS:
        return None
    if corner in AGGREGATE_CORNERS:
        return f"corner_extremes_by_{metric}"  # (kind, metric)
    if corner is None:
        return f"corner_metrics_by_{metric}"  # (metric)
    return f"corner_metrics_by_corner_{metric}"  # (corner, metric)


def check_order_column(column: str) -> str:
    if column not in FIELDS:
        raise unknown_name_error(column, 0, column, what="column to order by")
    return column


def ranked_query_sql(
    corner: str | None = "worst",
    deck: str | None = None,
    where: str = "",
    order_by: str = "cap_density_fF_per_um2",
    descending: bool | None = None,
    limit: int | None = None,
    offset: int = 0,
    current_only: bool = True,
) -> tuple[str, list[object]]:
    """SQL of the filtered, ordered, paged rows. Ties: name, deck, corner ascending, then the
    result stored first (a name kept with its history)."""
    check_order_column(order_by)
    if limit is not None and limit < 0 or offset < 0:
        raise FilterError([Problem("query", "limit/offset", "must be >= 0", (limit, offset))])
    base, params = base_rows_sql(corner, deck, current_only)
    cond, cond_params = compile_filter(where)
    desc = best_first_descending(order_by) if descending is None else descending
    sql = (
        f"SELECT * FROM ({base}) AS r WHERE {cond} "
        f"ORDER BY r.{quote_column(order_by)} {'DESC' if desc else 'ASC'} NULLS LAST, "
        f"r.name, r.deck, r.corner, r.cell_id LIMIT ? OFFSET ?"
    )
    return sql, [*params, *cond_params, -1 if limit is None else int(limit), int(offset)]


def count_query_sql(
    corner: str | None = "worst",
    deck: str | None = None,
    where: str = "",
    current_only: bool = True,
) -> tuple[str, list[object]]:
    base, params = base_rows_sql(corner, deck, current_only)
    cond, cond_params = compile_filter(where)
    return f"SELECT COUNT(*) FROM ({base}) AS r WHERE {cond}", [*params, *cond_params]


def metric_values_sql(
    metrics: list[str], corner: str | None = "worst", deck: str | None = None, where: str = ""
) -> tuple[str, list[object]]:
    """SQL of (cell_id, corner, *metrics) for the filtered rows: the narrow input of a Pareto front."""
    base, params = base_rows_sql(corner, deck)
    cond, cond_params = compile_filter(where)
    cols = ", ".join(f"r.{quote_column(m)}" for m in metrics)
    return f"SELECT r.cell_id, r.corner, {cols} FROM ({base}) AS r WHERE {cond}", [
        *params,
        *cond_params,
    ]


def keyed_rows_sql(
    keys: list[tuple[int, str]], corner: str | None = "worst", deck: str | None = None
) -> tuple[str, list[object]]:
    """SQL of the full rows for (cell_id, corner) pairs."""
    base, params = base_rows_sql(corner, deck)
    pairs = ", ".join("(?, ?)" for _ in keys)
    flat = [v for key in keys for v in key]
    ids = sorted({int(k[0]) for k in keys})
    marks = ", ".join("?" for _ in ids)
    # the cell_id list lets SQLite look the cells up by key; the pairs then pick the corners
    return (
        f"SELECT * FROM ({base}) AS r WHERE r.cell_id IN ({marks}) "
        f"AND (r.cell_id, r.corner) IN (VALUES {pairs})",
        [*params, *ids, *flat],
    )


def names_query_sql(
    names: list[str], corner: str | None = "worst", deck: str | None = None
) -> tuple[str, list[object]]:
    base, params = base_rows_sql(corner, deck)
    marks = ", ".join("?" for _ in names)
    return (
        f"SELECT * FROM ({base}) AS r WHERE r.name IN ({marks}) ORDER BY r.name, r.deck, r.corner",
        [*params, *names],
    )


# --------------------------------------------------------------------------- running


def _suggest(value: str, choices: list[str]) -> str:
    return did_you_mean(value, choices, n=3, cutoff=0.5)


def check_deck(db: sqlite_utils.Database, deck: str | None) -> None:
    """CatalogError when ``deck`` is neither a stored deck name nor a deck hash."""
    if deck is None:
        return
    if db.execute(
        "SELECT 1 FROM decks WHERE name = ? OR deck_hash = ? LIMIT 1", [deck, deck]
    ).fetchone():
        return
    names = [r[0] for r in db.execute("SELECT DISTINCT name FROM decks ORDER BY name")]
    raise CatalogError.single(
        "catalog",
        "deck",
        f"no such deck{_suggest(deck, names)} (decks: {', '.join(names) or 'none stored'})",
        deck,
    )


def corners(db: sqlite_utils.Database, deck: str | None = None) -> list[str]:
    """Corner names of the runs holding current results (of one deck), in the order stored."""
    params: list[object] = []
    scope = _scope_sql("c", "d", deck, True, params)
    # EXISTS per run (through the run index) stops at a run's first current cell
    rows = db.execute(
        f"SELECT r.corners_json FROM runs r WHERE EXISTS (SELECT 1 FROM cells c INDEXED BY cells_by_run "
        f"JOIN decks d ON d.deck_hash = c.deck_hash WHERE c.run_id = r.run_id AND {scope}) "
        f"ORDER BY r.run_id",
        params,
    )
    return list(dict.fromkeys(name for (text,) in rows for name in json.loads(text)))


def check_corner(db: sqlite_utils.Database, corner: str | None, deck: str | None) -> None:
    if corner is None or corner in AGGREGATE_CORNERS:
        return
    known = corners(db, deck)
    if corner not in known:
        raise CatalogError.single(
            "catalog",
            "corner",
            f"no such corner{_suggest(corner, known)}; corners: "
            f"{', '.join([*known, *AGGREGATE_CORNERS])}",
            corner,
        )


def _fill_aggregate_flags(
    db: sqlite_utils.Database, rows: list[tuple[dict[str, Any], int]]
) -> None:
    """Worst/best rows carry the union of the flags of the cell's corners."""
    ids = sorted({cell_id for _, cell_id in rows})
    flags: dict[int, set[str]] = {i: set() for i in ids}
    for start in range(0, len(ids), 500):
        chunk = ids[start : start + 500]
        marks = ", ".join("?" for _ in chunk)
        for cell_id, text in db.execute(
            f"SELECT cell_id, flags_json FROM corner_metrics WHERE cell_id IN ({marks}) "
            f"AND flags_json != '[]'",
            chunk,
        ):
            flags[cell_id].update(json.loads(text))
    for row, cell_id in rows:
        row["flags"] = sorted(flags[cell_id])


_SHAPED_KEYS = tuple(k for k in ROW_KEYS if k != "flags")


def _rows_sql(inner: str) -> str:
    """Select the row columns in ``ROW_KEYS`` order (plus cell_id, flags_json) from ``inner``."""
    cols = ", ".join(f"q.{quote_column(k)}" if k in FIELDS else f"q.{k}" for k in _SHAPED_KEYS)
    return f"SELECT {cols}, q.cell_id, q.flags_json FROM ({inner}) AS q"


def fetch_rows(db: sqlite_utils.Database, sql: str, params: list[object]) -> list[dict[str, Any]]:
    """Run a row query and shape its rows (``ROW_KEYS``; esd_safe bool, flags a list)."""
    n = len(_SHAPED_KEYS)
    raw = db.execute(_rows_sql(sql), params).fetchall()
    out = []
    aggregated: list[tuple[dict[str, Any], int]] = []
    for r in raw:
        row = dict(zip(_SHAPED_KEYS, r[:n]))
        if row["esd_safe"] is not None:
            row["esd_safe"] = bool(row["esd_safe"])
        flags_json = r[n + 1]
        if flags_json is None:
            aggregated.append((row, r[n]))
            row["flags"] = []
        else:
            row["flags"] = [] if flags_json == "[]" else json.loads(flags_json)
        out.append(row)
    if aggregated:
        _fill_aggregate_flags(db, aggregated)
    return out


#: Words of SQLite's messages when a statement exceeds one of its limits.
_SQLITE_LIMIT_WORDS = ("too many", "too large", "too big", "stack overflow", "too complex")


@contextlib.contextmanager
def filter_limits(where: str) -> Iterator[None]:
    """Report SQLite refusing a filtered statement for its size as a problem of the filter
    (the parser's own limits normally refuse such a filter first)."""
    try:
        yield
    except sqlite3.OperationalError as exc:
        if not where or not any(w in str(exc).lower() for w in _SQLITE_LIMIT_WORDS):
            raise
        shown = where if len(where) <= 80 else where[:77] + "..."
        raise FilterError(
            [Problem("filter", "", f"too large for SQLite to run ({exc}); use fewer conditions "
                     "or values", shown)]
        ) from None


def run_query(
    db: sqlite_utils.Database,
    deck: str | None = None,
    corner: str | None = "worst",
    where: str = "",
    order_by: str = "cap_density_fF_per_um2",
    descending: bool | None = None,
    limit: int | None = None,
    offset: int = 0,
    current_only: bool = True,
) -> list[dict[str, Any]]:
    sql, params = ranked_query_sql(
        corner, deck, where, order_by, descending, limit, offset, current_only
    )
    check_deck(db, deck)
    check_corner(db, corner, deck)
    with filter_limits(where):
        if limit:
            early = _early_stop_sql(
                db, corner, deck, where, order_by, descending, limit, offset, current_only
            )
            if early is not None:
                sql, params = early
        return fetch_rows(db, sql, params)


def _has_index(db: sqlite_utils.Database, name: str) -> bool:
    return bool(
        db.execute(
            "SELECT 1 FROM sqlite_master WHERE type = 'index' AND name = ?", [name]
        ).fetchone()
    )


def _early_stop_sql(
    db: sqlite_utils.Database,
    corner: str | None,
    deck: str | None,
    where: str,
    order_by: str,
    descending: bool | None,
    limit: int,
    offset: int,
    current_only: bool,
) -> tuple[str, list[object]] | None:
    """The ranked query, narrowed so that SQLite reads only the first rows of a metric index.

    Step 1 walks the index of ``order_by`` in ranking order, applying scope and filter, and
    stops at the (offset + limit)-th non-empty value t. Every row of the requested page then
    has a value at least as good as t, and no empty value is on it (empty values rank last),
    so the full query restricted to values as good as t (ties included) gives the same page
    with the same tie-breaks. None (use the plain query) when the metric has no index or
    fewer than offset + limit rows have a value.
    """
    index = metric_index(corner, order_by)
    if index is None or not _has_index(db, index):
        return None
    desc = best_first_descending(order_by) if descending is None else descending
    base, params = base_rows_sql(corner, deck, current_only, index=index)
    cond, cond_params = compile_filter(where)
    col = f"r.{quote_column(order_by)}"
    row = db.execute(
        f"SELECT {col} FROM ({base}) AS r WHERE ({cond}) AND {col} IS NOT NULL "
        f"ORDER BY {col} {'DESC' if desc else 'ASC'} LIMIT 1 OFFSET ?",
        [*params, *cond_params, int(offset) + int(limit) - 1],
    ).fetchone()
    if row is None:
        return None
    sql = (
        f"SELECT * FROM ({base}) AS r WHERE ({cond}) AND {col} {'>=' if desc else '<='} ? "
        f"ORDER BY {col} {'DESC' if desc else 'ASC'} NULLS LAST, "
        f"r.name, r.deck, r.corner, r.cell_id LIMIT ? OFFSET ?"
    )
    return sql, [*params, *cond_params, row[0], int(limit), int(offset)]


def run_count(
    db: sqlite_utils.Database,
    deck: str | None = None,
    corner: str | None = "worst",
    where: str = "",
    current_only: bool = True,
) -> int:
    sql, params = count_query_sql(corner, deck, where, current_only)
    check_deck(db, deck)
    check_corner(db, corner, deck)
    with filter_limits(where):
        return int(db.execute(sql, params).fetchone()[0])


def current_names(db: sqlite_utils.Database, deck: str | None = None) -> list[str]:
    params: list[object] = []
    scope = _scope_sql("c", "d", deck, True, params)
    return [
        r[0]
        for r in db.execute(
            f"SELECT DISTINCT c.name FROM cells c JOIN decks d ON d.deck_hash = c.deck_hash "
            f"WHERE {scope} ORDER BY c.name",
            params,
        )
    ]


def _missing_names_error(
    db: sqlite_utils.Database, missing: list[str], deck: str | None
) -> CatalogError:
    known = current_names(db, deck)
    where = f" under deck {deck}" if deck else ""
    return CatalogError(
        [
            Problem(
                "catalog", "name", f"no current cell of that name{where}{_suggest(n, known)}", n
            )
            for n in missing
        ]
    )


def compare(
    db: sqlite_utils.Database,
    names: list[str],
    deck: str | None = None,
    corner: str | None = "worst",
) -> list[dict[str, Any]]:
    """Rows of the named cells in the given order (one per deck holding the name)."""
    check_deck(db, deck)
    check_corner(db, corner, deck)
    if not names:
        return []
    sql, params = names_query_sql(list(dict.fromkeys(names)), corner, deck)
    rows = fetch_rows(db, sql, params)
    found = {r["name"] for r in rows}
    if missing := [n for n in dict.fromkeys(names) if n not in found]:
        raise _missing_names_error(db, missing, deck)
    order = {n: i for i, n in enumerate(dict.fromkeys(names))}
    return sorted(rows, key=lambda r: order[r["name"]])


def _current_cells(
    db: sqlite_utils.Database, deck: str | None, columns: str, condition: str, values: list[object]
) -> list[tuple[Any, ...]]:
    """``columns`` of the current cells (of the current deck ``deck``) meeting ``condition``."""
    params: list[object] = []
    scope = _scope_sql("c", "d", deck, True, params)
    return db.execute(
        f"SELECT {columns} FROM cells c JOIN decks d ON d.deck_hash = c.deck_hash "
        f"WHERE {scope} AND {condition}",
        [*params, *values],
    ).fetchall()


def name_taken(db: sqlite_utils.Database, name: str, deck: str) -> bool:
    """Whether a current cell called ``name`` exists under the current deck ``deck`` (name or hash)."""
    return bool(_current_cells(db, deck, "1", "c.name = ? LIMIT 1", [name]))


def identical_cell(db: sqlite_utils.Database, cell_hash: str, deck: str) -> str | None:
    """Name of a current cell of deck ``deck`` with this content hash (same definition), if any."""
    rows = _current_cells(db, deck, "c.name", "c.cell_hash = ? ORDER BY c.name LIMIT 1", [cell_hash])
    return str(rows[0][0]) if rows else None


def find_cell_id(db: sqlite_utils.Database, name: str, deck: str | None = None) -> int:
    """cell_id of the current result of ``name`` (in ``deck``); CatalogError if absent or ambiguous."""
    check_deck(db, deck)
    rows = _current_cells(db, deck, "c.cell_id, d.name", "c.name = ?", [name])
    if not rows:
        raise _missing_names_error(db, [name], deck)
    if len(rows) > 1:
        raise CatalogError.single(
            "catalog",
            "name",
            "stored under several decks ("
            + ", ".join(sorted(r[1] for r in rows))
            + "); choose one with deck=",
            name,
        )
    return int(rows[0][0])


def list_decks(db: sqlite_utils.Database) -> list[DeckInfo]:
    """Every stored deck (history included), by name then age, with its current cell count."""
    rows = db.execute(
        "SELECT d.name, d.deck_hash, d.created_utc, d.current, "
        "(SELECT COUNT(*) FROM cells c WHERE c.deck_hash = d.deck_hash AND c.current = 1) "
        "FROM decks d ORDER BY d.name, d.created_utc"
    ).fetchall()
    return [DeckInfo(r[0], r[1], r[2], bool(r[3]), int(r[4])) for r in rows]


def deck_params(db: sqlite_utils.Database, deck: str) -> dict[str, Any]:
    """Full parameters of the current deck named ``deck`` (or of the deck with that hash)."""
    check_deck(db, deck)
    row = db.execute(
        "SELECT params_json, deck_hash FROM decks WHERE (name = ? AND current = 1) OR deck_hash = ? "
        "ORDER BY current DESC LIMIT 1",
        [deck, deck],
    ).fetchone()
    if row is None:
        raise CatalogError.single(
            "catalog",
            "deck",
            "no current deck of that name (only superseded ones; give a deck hash)",
            deck,
        )
    params = dict(json.loads(row[0]))
    corners = params.get("corners")
    if isinstance(corners, dict):
        # the stored text sorts every key; the deck's own corner order (typical first) is the
        # order its runs list them in
        order = dict.fromkeys(name for (text,) in db.execute(
            "SELECT corners_json FROM runs WHERE deck_hash = ? ORDER BY run_id", [row[1]])
            for name in json.loads(text) if name in corners)
        params["corners"] = {name: corners[name] for name in [*order, *corners] if name in corners}
    return params
