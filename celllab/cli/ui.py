"""The ``ui`` verb: open the terminal UI on a catalog, with optional deck files."""

from __future__ import annotations

import argparse

from celllab import DEFAULT_CATALOG
from celllab.cli.args import positive_number


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    parser = subparsers.add_parser(
        "ui",
        help="browse the catalog, look at cells, try what-ifs (terminal UI)",
        description="Open the terminal UI: catalog table, cell views with plots, what-if "
        "editor, ranking with a Pareto scatter, deck view, block planning (fill, budgets, "
        "supply network). Press ? inside for every key.",
    )
    parser.add_argument("--catalog", metavar="PATH", default=None,
                        help=f"catalog file (default {DEFAULT_CATALOG}; created when missing)")
    parser.add_argument("--deck", metavar="PATH", nargs="+", action="extend", default=[],
                        help="process deck file(s) for the deck view and what-ifs; a deck that "
                        "does not validate is shown with its problems")
    parser.add_argument("--z-target-ohm", type=positive_number(1e9), metavar="OHM", default=None,
                        help="target impedance drawn on every |Z|(f) plot (t sets it inside)")
    parser.add_argument("--block", metavar="PATH", nargs="+", action="extend", default=[],
                        help="block file(s) offered by the planning view (4), besides "
                        "./process_decks/blocks/*.toml")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from celllab.tui.app import run_app

    return run_app(args.catalog, list(args.deck), list(args.block), z_target_ohm=args.z_target_ohm)
