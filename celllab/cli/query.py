"""Verbs that read (and merge) the catalog: ``rank``, ``pareto``, ``compare``, ``decks``, ``show``, ``merge``.

Each verb is a few lines over a ``Catalog`` method; the rendering helpers are pure (rows -> text).
Tables print one row per line with the column names (which carry their units) as headers;
``--json`` prints the same data as JSON (empty values and infinities as null).
"""

from __future__ import annotations

import argparse
import json
from collections.abc import Sequence
from typing import Any

from celllab import CAUTION_SHORT, DEFAULT_CATALOG
from celllab.cli.args import MAX_ROWS, whole_number
from celllab.cli.text import printable
from celllab.columns import (
    CELL_COLUMNS,
    COLUMNS,
    METRIC_BY_NAME,
    METRIC_NAMES,
    RANKED,
    unit_of,
)
from celllab.display import LOWER_BOUND, format_value, jsonable, mark_bounds, text_table

#: The line below a table that shows a lower bound.
BOUND_NOTE = f"{LOWER_BOUND}: a lower bound (no resonance or cutoff found up to the analysed band)"

#: Columns of ``rank`` and ``pareto`` tables unless --columns says otherwise.
DEFAULT_COLUMNS = (
    "name",
    "topology",
    "oxide",
    "cap_fF",
    "cap_density_fF_per_um2",
    "esr_ohm",
    "bandwidth_GHz",
    "leakage_nA_per_nF",
    "tddb_fit_per_mm2",
)


# --------------------------------------------------------------------------- rendering (pure)


def render_table(rows: Sequence[dict[str, Any]], columns: Sequence[str]) -> str:
    """Plain-text table: a header of column names, then one line per row (catalog numbers
    right-aligned, lower bounds as "≥value")."""
    numeric = {c for c in columns if c in COLUMNS and COLUMNS[c].kind != "text"}
    marked = [mark_bounds(r) for r in rows]
    text = text_table(marked, columns, numeric)
    if any(str(r.get(c)).startswith(LOWER_BOUND) for r in marked for c in columns):
        text += f"\n{BOUND_NOTE}"
    return text


def dump_json(value: Any) -> str:
    return json.dumps(jsonable(value), indent=2, allow_nan=False)


def _wrapped(prefix: str, items: Sequence[str], width: int) -> list[str]:
    import textwrap

    lines = []
    for item in items:
        lines += textwrap.wrap(item, width, initial_indent=f"{prefix}- ",
                               subsequent_indent=" " * (len(prefix) + 2))
    return lines


def _width() -> int:
    import shutil

    return max(60, min(shutil.get_terminal_size((100, 24)).columns, 120))


def render_compare(rows: Sequence[dict[str, Any]], width: int | None = None) -> str:
    """Side by side: one column per cell, one line per attribute and metric (with its unit);
    each cell's flags below the table, wrapped to ``width`` (the terminal's by default)."""
    keys = ["deck", "family", "topology", "oxide", "corner", *CELL_COLUMNS, *METRIC_NAMES]
    names = [str(r["name"]) for r in rows]
    labels = (
        names if len(set(names)) == len(names) else [f"{r['name']} ({r['deck']})" for r in rows]
    )
    marked = [mark_bounds(r) for r in rows]
    table = [
        {"column": k, "unit": unit_of(k), **{lab: r.get(k) for lab, r in zip(labels, marked)}}
        for k in keys
    ]
    numeric = {*labels}
    lines = [text_table(table, ["column", "unit", *labels], numeric)]
    width = width or _width()
    for label, row in zip(labels, rows):
        flags = list(row.get("flags") or [])
        lines += ["", f"flags of {label}:" if flags else f"flags of {label}: none"]
        if flags:
            lines += _wrapped("  ", flags, width)
    if any(str(v).startswith(LOWER_BOUND) for r in table for v in r.values()):
        lines += ["", BOUND_NOTE]
    return "\n".join(lines)


def render_cell(cell: Any, deck: str) -> str:
    """Everything stored for one cell: identity, geometry, every metric per corner, flags."""
    lines = [
        f"{cell.name}  (deck {deck})",
        f"  family {cell.family}   topology {cell.topology}   oxide {cell.oxide}",
        f"  cell_hash {cell.cell_hash}",
    ]
    lines.append("  " + "   ".join(f"{c} {format_value(getattr(cell, c))}" for c in CELL_COLUMNS))
    from celllab.cells.expand import applicable_geometry

    given, derived = applicable_geometry(cell)
    if given:
        lines.append("  geometry: " + ", ".join(f"{k}={format_value(v)}" for k, v in given.items()))
    if derived:
        lines.append("  derived: " + ", ".join(f"{k}={format_value(v)}" for k, v in derived.items()))
    if cell.corners and len(cell.corners[0].response.freq_Hz):
        from celllab.units import from_si

        freq = cell.corners[0].response.freq_Hz
        lines.append(f"  analysed band {format_value(from_si(float(freq[0]), 'MHz'))} MHz to "
                     f"{format_value(from_si(float(freq[-1]), 'GHz'))} GHz; SRF and bandwidth above it are "
                     f"computed from the equivalent circuit (flagged), {LOWER_BOUND} marks a lower bound")
    if cell.notes:
        lines.append("  notes: " + "; ".join(cell.notes))
    corners = [c.corner for c in cell.corners]
    table = [
        {
            "metric": "temperature_C",
            "unit": unit_of("temperature_C"),
            **{c.corner: c.temperature_C for c in cell.corners},
        },
        {"metric": "supply_V", "unit": unit_of("supply_V"), **{c.corner: c.supply_V for c in cell.corners}},
    ]
    marked = {c.corner: mark_bounds(c.metrics) for c in cell.corners}
    table += [
        {
            "metric": m,
            "unit": METRIC_BY_NAME[m].unit,
            "better": METRIC_BY_NAME[m].better,
            **{c.corner: marked[c.corner].get(m) for c in cell.corners},
        }
        for m in METRIC_NAMES
        if any(c.metrics.get(m) == c.metrics.get(m) for c in cell.corners)  # applies somewhere
    ]
    lines += ["", text_table(table, ["metric", "unit", *corners, "better"], {*corners})]
    if any(str(v).startswith(LOWER_BOUND) for r in table for v in r.values()):
        lines.append(BOUND_NOTE)
    flagged = [(c.corner, c.flags) for c in cell.corners if c.flags]
    lines.append("")
    width = _width()
    for corner, flags in flagged:
        lines += [f"flags {corner}:"] + _wrapped("  ", flags, width)
    if not flagged:
        lines.append("flags: none")
    lines += ["", CAUTION_SHORT]  # ESD, wear-out and fault figures are estimates, not sign-off
    return "\n".join(lines)



def cell_to_dict(cell: Any, deck: str) -> dict[str, Any]:
    return {
        "name": cell.name,
        "deck": deck,
        "cell_hash": cell.cell_hash,
        "family": cell.family,
        "topology": cell.topology,
        "oxide": cell.oxide,
        "geometry": cell.geometry,
        **{c: getattr(cell, c) for c in CELL_COLUMNS},
        "notes": cell.notes,
        "corners": [
            {
                "corner": c.corner,
                "temperature_C": c.temperature_C,
                "supply_V": c.supply_V,
                "metrics": c.metrics,
                "flags": c.flags,
                "n_freq": len(c.response.freq_Hz),
            }
            for c in cell.corners
        ],
    }


# --------------------------------------------------------------------------- verbs


def _open(args: argparse.Namespace):  # type: ignore[no-untyped-def]
    from celllab.catalog import open_catalog

    return open_catalog(args.catalog, create=False)


def _corner(value: str) -> str | None:
    return None if value == "all" else value


def _columns(spec: str | None, extra: Sequence[str] = ()) -> list[str]:
    from celllab.catalog.filters import FIELDS, unknown_name_error

    if spec:
        cols = [c.strip() for c in spec.split(",") if c.strip()]
    else:
        cols = list(DEFAULT_COLUMNS)
        cols[3:3] = [c for c in extra if c not in cols]
    for c in cols:
        if c not in FIELDS and c not in ("flags", "cell_hash", "deck_hash", "model_version"):
            raise unknown_name_error(c, 0, c, what="column")
    return cols


def _with_context(cols: list[str], rows: Sequence[dict[str, Any]]) -> list[str]:
    """Add deck / corner columns when the rows span several of them."""
    out = list(cols)
    for key in ("corner", "deck"):
        if key not in out and len({r[key] for r in rows}) > 1:
            out.insert(1, key)
    return out


def cmd_rank(args: argparse.Namespace) -> int:
    descending = True if args.desc else False if args.asc else None
    limit = None if args.limit == 0 else args.limit
    with _open(args) as cat:
        corner = _corner(args.corner)
        rows = cat.query(
            deck=args.deck,
            corner=corner,
            where=args.where,
            order_by=args.by,
            descending=descending,
            limit=limit,
            offset=args.offset,
        )
        total = cat.count(deck=args.deck, corner=corner, where=args.where)
    cols = _with_context(_columns(args.columns, [args.by]), rows)
    if args.json:
        print(dump_json([{c: r.get(c) for c in cols} if args.columns else r for r in rows]))
        return 0
    print(render_table(rows, cols))
    first = args.offset + 1 if rows else 0
    print(
        f"\nrows {first}-{args.offset + len(rows)} of {total} (corner {args.corner}, "
        f"by {args.by}). {CAUTION_SHORT}"
    )
    return 0


def cmd_pareto(args: argparse.Namespace) -> int:
    metrics = [m.strip() for m in args.metrics.split(",")]
    with _open(args) as cat:
        rows = cat.pareto(metrics, deck=args.deck, corner=_corner(args.corner), where=args.where)
    cols = _with_context(_columns(args.columns, metrics), rows)
    if args.json:
        print(dump_json([{c: r.get(c) for c in cols} if args.columns else r for r in rows]))
        return 0
    print(render_table(rows, cols))
    directions = ", ".join(f"{m} {RANKED[m].better}" for m in metrics)
    print(
        f"\n{len(rows)} non-dominated rows ({directions} is better; corner {args.corner}). {CAUTION_SHORT}"
    )
    return 0


def cmd_compare(args: argparse.Namespace) -> int:
    with _open(args) as cat:
        rows = cat.compare(args.names, deck=args.deck, corner=_corner(args.corner))
    if args.json:
        print(dump_json(rows))
    else:
        print(render_compare(rows))
    return 0


def cmd_decks(args: argparse.Namespace) -> int:
    with _open(args) as cat:
        decks = cat.decks()
        corner_lists = {d.deck_hash: cat.corners(d.deck_hash) if d.current else [] for d in decks}
    rows = [
        {
            "name": d.name,
            "deck_hash": d.deck_hash,
            "created_utc": d.created_utc,
            "current": d.current,
            "n_cells": d.n_cells,
            "corners": corner_lists[d.deck_hash],
        }
        for d in decks
    ]
    if args.json:
        print(dump_json(rows))
        return 0
    for r in rows:
        r["deck_hash"] = r["deck_hash"][:12]
    print(render_table(rows, ["name", "deck_hash", "created_utc", "current", "n_cells", "corners"]))
    return 0


def cmd_show(args: argparse.Namespace) -> int:
    with _open(args) as cat:
        cell = cat.cell(args.name, deck=args.deck)
        deck = cat.compare([args.name], deck=args.deck)[0]["deck"]
    if args.json:
        print(dump_json(cell_to_dict(cell, deck)))
    else:
        print(render_cell(cell, deck))
    return 0


def cmd_merge(args: argparse.Namespace) -> int:
    from celllab.catalog import open_catalog

    with open_catalog(args.catalog) as cat:
        report = cat.merge_from(args.file, make_current=args.make_current)
    if args.json:
        print(
            dump_json(
                {
                    "added": report.added,
                    "identical": report.identical,
                    "decks_added": report.decks_added,
                    "runs_added": report.runs_added,
                    "decks_not_current": report.decks_not_current,
                    "decks_made_current": report.decks_made_current,
                    "conflicts": report.conflicts,
                }
            )
        )
    else:
        print(
            printable(
                f"merged {args.file} into {args.catalog}: {report.added} results added "
                f"({report.decks_added} decks, {report.runs_added} runs), {report.identical} "
                f"identical, {len(report.conflicts)} conflicts"
            )
        )
        for line in report.decks_made_current:
            print(printable(f"  now current (--make-current): deck {line}"))
        if report.decks_not_current:
            print(
                printable(
                    f"  not current: deck {', '.join(report.decks_not_current)} - stored, but "
                    "queries show a deck only while it is current; a merge makes no deck "
                    "current unless given --make-current"
                )
            )
        for line in report.conflicts:
            print(printable(f"  conflict: {line}"))
    return 1 if report.conflicts else 0


# --------------------------------------------------------------------------- registration


def _common(p: argparse.ArgumentParser, deck: bool = True, corner: bool = True) -> None:
    p.add_argument(
        "--catalog",
        default=str(DEFAULT_CATALOG),
        metavar="PATH",
        help="catalog file (default: %(default)s)",
    )
    if deck:
        p.add_argument("--deck", metavar="NAME", help="only this deck (name or deck hash)")
    if corner:
        p.add_argument(
            "--corner",
            default="worst",
            metavar="CORNER",
            help="a corner name, 'worst' / 'best' (each metric at its least / most "
            "favourable corner) or 'all' (a row per corner); default: %(default)s",
        )


def _filtered(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--where",
        default="",
        metavar="EXPR",
        help='filter, e.g. "leakage_nA_per_nF <= 5 and esd_safe" (see below)',
    )
    p.add_argument("--columns", metavar="A,B", help="columns to print (default: a useful set)")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")


def describe_language() -> str:
    """The filter language's help (loads the topology registry, so only when help is shown)."""
    from celllab.catalog.filters import describe_language as describe

    return describe()


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    raw = argparse.RawDescriptionHelpFormatter
    metric_list = ", ".join(f"{m.name} [{m.unit}]" for m in METRIC_BY_NAME.values()).replace("%", "%%")

    p = sub.add_parser(
        "rank",
        help="list catalog cells filtered and ranked by a metric",
        formatter_class=raw,
        epilog=describe_language,
        description="Filter the current catalog results and rank them by a metric "
        "or cell column, best first unless --asc/--desc says otherwise.",
    )
    _common(p)
    _filtered(p)
    p.add_argument(
        "--by",
        default="cap_density_fF_per_um2",
        metavar="COLUMN",
        help="metric or cell column to rank by (default: %(default)s)",
    )
    order = p.add_mutually_exclusive_group()
    order.add_argument("--asc", action="store_true", help="smallest first")
    order.add_argument("--desc", action="store_true", help="largest first")
    p.add_argument(
        "--limit",
        type=whole_number(0, MAX_ROWS),
        default=20,
        help="rows to print, 0 for all (default: %(default)s)",
    )
    p.add_argument(
        "--offset", type=whole_number(0, MAX_ROWS), default=0, help="rows to skip first (paging)"
    )
    p.set_defaults(func=cmd_rank)

    p = sub.add_parser(
        "pareto",
        help="cells no other cell beats in every chosen metric",
        formatter_class=raw,
        epilog=describe_language,
        description="Pareto front over 2 or 3 metrics: the rows that no other row "
        "matches or beats in all of them (direction of each from its 'better').",
    )
    _common(p)
    _filtered(p)
    p.add_argument(
        "--metrics",
        required=True,
        metavar="A,B[,C]",
        help=f"2 or 3 metrics, comma-separated; any of: {metric_list}",
    )
    p.set_defaults(func=cmd_pareto)

    p = sub.add_parser(
        "compare",
        help="several cells side by side",
        description="Print the named cells side by side: identity, cell columns, "
        "every metric (at --corner) and flags.",
    )
    _common(p)
    p.add_argument("names", nargs="+", metavar="NAME", help="cell names")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser(
        "decks",
        help="decks stored in the catalog, current and superseded",
        description="List every stored deck: name, content hash, when it was "
        "stored, whether it is current, how many current cells and its corners.",
    )
    _common(p, deck=False, corner=False)
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.set_defaults(func=cmd_decks)

    p = sub.add_parser(
        "show",
        help="everything stored for one cell",
        description="Print one cell's identity, geometry, every metric at every "
        "corner (with units and which direction is better) and its flags.",
    )
    _common(p, corner=False)
    p.add_argument("name", metavar="NAME", help="cell name")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=cmd_show)

    p = sub.add_parser(
        "merge",
        help="import another catalog file (by content hash)",
        description="Import decks, runs and results of another catalog file in one "
        "transaction. Identical results are skipped; conflicting ones (same deck, "
        "cell and model version with other numbers, or a cell name with another "
        "hash under the same deck) are listed and not imported. Every row of the other "
        "file is checked as a fresh run is (hashes recomputed); a file that fails is refused "
        "whole, naming it. The other file is read only, never changed. Imported decks stay "
        "not current unless --make-current is given. Exit status 1 when there were conflicts.",
    )
    _common(p, deck=False, corner=False)
    p.add_argument("file", metavar="FILE", help="catalog file to import from")
    p.add_argument(
        "--make-current",
        action="store_true",
        help="per deck name, make current the deck made current most recently in either "
        "catalog (without it no deck's current state changes)",
    )
    p.add_argument("--json", action="store_true", help="print a JSON report")
    p.set_defaults(func=cmd_merge)
