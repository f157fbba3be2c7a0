"""The ``plan`` verb: fill a block's gaps region by region with catalog decaps and report the
fill, its budgets, the constraints that bound it and what the fill does to the supply (the
block's ``[network]``: resonances, target check, damping trade, droop in time, emission).

    celllab plan process_decks/blocks/lumen130_dsp.toml --catalog db/celllab.sqlite
    celllab plan BLOCK.toml --json
    celllab plan BLOCK.toml --out plans/    # fill list, HTML report, Z(f) CSV/Touchstone
    celllab plan BLOCK.toml --no-droop      # skip the slow parts: --no-damping, --no-network
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from typing import Any

from celllab import CAUTION, DEFAULT_CATALOG
from celllab.cli.text import printable

_WIDTH = 132


def network_options(args: argparse.Namespace) -> Any:
    """The supply-network analysis the flags ask for (None: none)."""
    from celllab.planner.supply import NetworkOptions

    if args.no_network:
        return None
    return NetworkOptions(droop=not args.no_droop, entrance=False if args.no_damping else None,
                          fill_damping=not args.no_damping)


def cmd_plan(args: argparse.Namespace) -> int:
    from rich.console import Console

    from celllab.catalog import open_catalog
    from celllab.export.files import check_files
    from celllab.export.plan import plan_file_names, write_plan_files
    from celllab.export.plan_text import render_report
    from celllab.planner import load_block, plan_block

    block = load_block(args.block)
    if args.out:  # refuse an unusable --out before the solve, not after it
        check_files(args.out, plan_file_names(block.block.name), args.force)
    from celllab.cli.progress import working

    with open_catalog(args.catalog, create=False) as catalog, working("planning") as say:
        plan = plan_block(block, catalog, explain=not args.no_explain, progress=say,
                          network=network_options(args))
    summary = plan.to_dict()
    if args.out:
        written = write_plan_files(plan, args.out, force=args.force)
        summary["files"] = [str(p) for p in written]
        print("wrote " + ", ".join(printable(p) for p in written), file=sys.stderr)
    if args.json:
        summary["caution"] = CAUTION
        print(json.dumps(summary, indent=2, allow_nan=False))
    else:
        # a terminal (or COLUMNS) sets the width; a pipe or file gets _WIDTH columns
        wide = sys.stdout.isatty() or "COLUMNS" in os.environ
        console = Console(width=None if wide else _WIDTH, highlight=False)
        render_report(summary, console)
    return 0


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "plan", help="fill a block's gaps region by region with decaps within its budgets",
        description="Choose integer counts of catalog decap cells for every gap class of "
        "every region of a block (in-row filler gaps by width, open slots such as corner "
        "cells and pad-ring spacers) that maximize the useful capacitance at each region's "
        "frequency, or meet each region's target at the least leakage, within the leakage "
        "budget (at the leakiest corner), the thin-oxide area budget (direct, or from a "
        "failure target over a mission), ESD-safe-only regions and a limit on distinct "
        "kinds. Prints per region and gap class the cells, counts, capacitance, leakage and "
        "what stays empty and why, the budgets and which of them bind, and, when the block "
        "file has a [network] table, what the fill does to the supply at every corner, each "
        "figure at its own worst corner: per region every resonance (f, |Z|, Q), the target "
        "check over its band, the damping trade (entrance resistors: peak |Z|, droop, IR "
        "drop, power lost), droop in time (first droop, ringing, settling) and the emission "
        "change per band against no on-die decap and a naive densest-cell fill (1 ohm probe, "
        "dBuV); without one, the block's lumped PDN figures. The block file (TOML) has "
        "tables [block], [candidates] (where, corner), [budgets] (leakage_uA, max_kinds, "
        "thin_oxide_area_mm2, [budgets.wearout], esd_survive, broken_oxide_ok), [objective] (goal, mip_rel_gap, "
        "time_limit_s), [[region]] with [[region.row_gaps]] and [[region.open_slots]], and "
        "an optional [network] (board, off-chip decap, [network.regions.NAME] paths, links, "
        "size_entrance_resistors, fill_damping_weight). See README, 'Planning a block'.",
        epilog="Estimates from analytic models, not sign-off: defer to the foundry's rules, "
        "qualified models, reliability and ESD qualification and licensed practice.")
    p.add_argument("block", metavar="BLOCKFILE", help="block file (TOML)")
    p.add_argument("--catalog", default=str(DEFAULT_CATALOG), metavar="PATH",
                   help="catalog file (default: %(default)s)")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--out", metavar="DIR",
                   help="also write <block>_fill.csv and <block>_fill.json (fill list for "
                   "place-and-route scripts) and <block>_plan.html into DIR; with a "
                   "[network]: <block>_z_<region>.csv (|Z| per region and corner), "
                   "<block>_<corner>.sNp (region Z-matrix, Touchstone) and "
                   "<block>_droop.csv; without: <block>_z.csv / <block>_z.s1p (lumped PDN)")
    p.add_argument("--force", action="store_true",
                   help="with --out: replace existing files (never links, pipes or read-only files)")
    p.add_argument("--no-explain", action="store_true",
                   help="skip the re-solves that price the kind limit and ESD-safe-only "
                   "regions (faster; shadow prices are still given)")
    p.add_argument("--no-droop", action="store_true",
                   help="skip the droop runs in time (the slowest part of the network "
                   "analysis); impedance, resonances, damping and emission are still given")
    p.add_argument("--no-damping", action="store_true",
                   help="skip sizing entrance resistors and damping through the fill, even "
                   "when the block file asks for them")
    p.add_argument("--no-network", action="store_true",
                   help="skip the supply-network analysis (the lumped PDN figures are "
                   "printed instead)")
    p.set_defaults(func=cmd_plan)
