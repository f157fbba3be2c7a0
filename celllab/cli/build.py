"""Verbs that read decks and cells: ``check``, ``build``, ``demo``."""

from __future__ import annotations

import argparse
import json

from celllab import CAUTION, DEFAULT_CATALOG
from celllab.cli.args import MAX_ROWS, whole_number
from celllab.errors import CelllabError, Problem


def _progress_printer(enabled: bool):  # type: ignore[no-untyped-def]
    """A ``progress(stage, done, total)`` callback: a rich progress bar on a terminal, one line
    per finished deck in a log, nothing when disabled."""
    if not enabled:
        return None
    from celllab.cli.progress import progress_callback

    return progress_callback("characterizing", "characterized")


def _load(deck_paths: list[str], cell_paths: list[str]):  # type: ignore[no-untyped-def]
    """Load decks and cells; every problem of every file is collected before raising."""
    from celllab.cells import load_cells
    from celllab.cells.expand import VariantRegistry
    from celllab.deck import load_deck

    problems: list[Problem] = []
    decks = []
    for p in deck_paths:
        try:
            decks.append(load_deck(p))
        except CelllabError as exc:
            problems.extend(exc.problems)
    pairs = []
    if decks or not deck_paths:
        for deck in decks or [None]:
            cells = []
            seen = VariantRegistry()  # a variant repeated in another file is refused, as build would
            for c in cell_paths:
                try:
                    cells.extend(load_cells(c, deck, seen=seen))
                except CelllabError as exc:
                    problems.extend(exc.problems)
            pairs.append((deck, cells))
    if problems:
        # keep only distinct problems (one cell file checked against several decks)
        seen, unique = set(), []
        for pr in problems:
            if str(pr) not in seen:
                seen.add(str(pr))
                unique.append(pr)
        raise CelllabError(unique)
    return pairs


def cmd_check(args: argparse.Namespace) -> int:
    pairs = _load(args.deck, args.cells or [])
    for deck, cells in pairs:
        label = deck.name if deck is not None else "(no deck)"
        extra = f", {len(deck.corners)} corners" if deck is not None else ""
        print(f"{label}: deck OK{extra}; {len(cells)} cell variants OK")
    return 0


def cmd_build(args: argparse.Namespace) -> int:
    from celllab.catalog import open_catalog
    from celllab.characterization.params import CornerSet
    from celllab.engine import characterize_parts

    pairs = _load(args.deck, args.cells)
    corners = [c.strip() for c in args.corners.split(",")] if args.corners else None
    for deck, _ in pairs:  # every input is checked before the catalog file is touched
        CornerSet.from_deck(deck, corners)
    from celllab import MODEL_VERSION

    reports = []
    # closed before returning, so the write-ahead log is folded into the file now and not
    # whenever the connection happens to be collected
    with open_catalog(args.catalog) as catalog:
        for deck, cells in pairs:
            # cells already stored for this deck version and model version are not computed again
            stored = catalog.stored_cells(deck.content_hash, MODEL_VERSION, with_esd=not args.no_esd)
            todo = [c for c in cells if (c.content_hash, c.name) not in stored]
            # a part of the cells at a time, each stored before the next is computed (memory stays
            # that of one part); one transaction and one run record for the whole deck
            parts = characterize_parts(deck, todo, corners=corners, sources=[*args.deck, *args.cells],
                                       progress=_progress_printer(not args.quiet and not args.json),
                                       esd=not args.no_esd)
            report = catalog.store_runs(parts)
            reports.append((deck.name, len(cells), len(cells) - len(todo), report))
    if args.json:
        print(json.dumps([{"deck": d, "cells": n, "run_id": r.run_id, "inserted": r.inserted,
                           "unchanged": r.unchanged + skipped, "superseded": r.superseded,
                           "completed": r.completed}
                          for d, n, skipped, r in reports]))
    else:
        for d, n, skipped, r in reports:
            print(f"{d}: {n} cells -> {args.catalog}: {build_summary(r, skipped)}")
        print(CAUTION)
    return 0


def build_summary(report, skipped: int) -> str:  # type: ignore[no-untyped-def]
    """What a build did, in words: new results, results already stored, results replaced."""
    unchanged = report.unchanged + skipped
    new = f"{report.inserted} new" + (f" ({report.completed} of them with the ESD events an earlier "
                                      "--no-esd build left out)" if report.completed else "")
    parts = [new, f"{unchanged} already stored"]
    if report.superseded:
        if report.inserted:
            parts.append(f"{report.superseded} earlier results replaced (kept as history)")
        else:  # nothing new: an earlier version of this deck became current again
            parts.append(f"this deck version is current again; {report.superseded} results of "
                         "the other version kept as history")
    run = f"run {report.run_id}" if report.inserted or report.superseded else "nothing to store"
    return f"{', '.join(parts)} ({run})"


def cmd_demo(args: argparse.Namespace) -> int:
    from celllab.demo import build_demo_catalog

    path = build_demo_catalog(args.catalog, progress=_progress_printer(not args.quiet), esd=not args.no_esd)
    if not args.no_ui:
        try:
            from celllab.tui.app import run_app
        except ImportError:
            pass
        else:
            return int(run_app(catalog_path=path) or 0)
    from celllab.catalog import open_catalog

    with open_catalog(path) as catalog:
        rows = catalog.query(corner="worst", order_by="cap_density_fF_per_um2", limit=args.limit)
    cols = ["name", "deck", "topology", "cap_fF", "cap_density_fF_per_um2", "esr_ohm", "bandwidth_GHz",
            "leakage_nA_per_nF"]
    from celllab.cli.query import render_table

    print(f"Densest demo cells (each metric at its worst corner) in {path}:")
    print(render_table(rows, cols))
    print(CAUTION)
    return 0


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]

    p = sub.add_parser("check", help="validate decks and cell files without writing anything",
                       description="Validate process decks and cell files; print one line per problem.")
    p.add_argument("--deck", action="append", default=[], metavar="FILE", help="process deck (TOML); repeatable")
    p.add_argument("--cells", action="append", default=[], metavar="FILE", help="cell file (TOML); repeatable")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("build", help="characterize cells under a deck and store them in a catalog",
                       description="Characterize every cell variant at every corner of the deck and store "
                       "the results in one transaction. Unchanged deck + cell pairs are skipped. Cells are computed and "
                       "written a part at a time (250 with the ESD events, 2 000 without), so memory stays that of one "
                       "part however many variants the cell files expand to.")
    p.add_argument("--deck", action="append", required=True, metavar="FILE", help="process deck (TOML); repeatable")
    p.add_argument("--cells", action="append", required=True, metavar="FILE", help="cell file (TOML); repeatable")
    p.add_argument("--catalog", default=str(DEFAULT_CATALOG), metavar="PATH", help="catalog file (default: %(default)s)")
    p.add_argument("--corners", metavar="A,B", help="only these corners (default: all the deck defines)")
    p.add_argument("--no-esd", action="store_true", help="leave the HBM/CDM and broken-oxide columns empty "
                   "(skips their transients, most of the run time)")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_build)

    p = sub.add_parser("demo", help="build the invented demo catalog and open the terminal UI",
                       description="Characterize the invented demo decks in process_decks/ into a catalog, "
                       "then open the terminal UI (or print the densest cells with --no-ui).")
    p.add_argument("--catalog", default=str(DEFAULT_CATALOG), metavar="PATH", help="catalog file (default: %(default)s)")
    p.add_argument("--no-ui", action="store_true", help="print a ranked table instead of opening the UI")
    p.add_argument("--limit", type=whole_number(0, MAX_ROWS), default=15,
                   help="rows to print with --no-ui (default: %(default)s)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--no-esd", action="store_true", help="leave the HBM/CDM and broken-oxide columns empty "
                   "(skips their transients, most of the run time)")
    p.set_defaults(func=cmd_demo)
