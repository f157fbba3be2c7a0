"""The ``plan`` verb: fill a block's gaps region by region with catalog decaps and report the
fill, its budgets, the constraints that bound it and the block's lumped PDN figures.

    celllab plan process_decks/blocks/lumen130_dsp.toml --catalog db/celllab.sqlite
    celllab plan BLOCK.toml --json
    celllab plan BLOCK.toml --out plans/    # fill list CSV/JSON, HTML report, Z(f) CSV/s1p
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from celllab import CAUTION, DEFAULT_CATALOG

_WIDTH = 132


def _n(value: Any, digits: int = 4) -> str:
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if 1e4 <= abs(value) < 1e12:
        return f"{value:,.0f}"
    return f"{value:.{digits}g}"


def _pct(part: float | None, whole: float | None) -> str:
    if part is None or not whole:
        return "–"
    return f"{100 * part / whole:.1f}"


def _table(title: str, columns: list[str], rows: list[list[Any]], numeric: set[int]) -> Any:
    """A rich table; every cell is plain text (no markup: units such as [nF] stay as typed)."""
    from rich import box
    from rich.table import Table
    from rich.text import Text

    table = Table(title=Text(title), title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)
    for k, column in enumerate(columns):
        # names and numbers never wrap; free text (notes, reasons) takes what is left
        table.add_column(Text(column), justify="right" if k in numeric else "left",
                         no_wrap=k < 2 or k in numeric)
    for row in rows:
        table.add_row(*[Text(v if isinstance(v, str) else _n(v)) for v in row])
    return table


def render_report(summary: dict[str, Any], console: Any) -> None:
    """Print ``BlockPlan.to_dict()`` as tables: regions, gap classes, roles, budgets, corners,
    PDN figures, notes and the caution."""
    s = summary
    excluded = ", ".join(f"{n} {why}" for why, n in s["excluded"].items())
    console.print(f"Block {s['block']} on deck {s['deck']}: corner {s['corner']}"
                  + (" (each figure at its own worst corner)" if s["corner"] == "worst" else "")
                  + f", supply {_n(s['supply_V'])} V, goal {s['goal']}; {s['candidates']} "
                  f"candidate cells" + (f" (excluded: {excluded})" if excluded else ""),
                  soft_wrap=True)
    console.print(f"solver: {'proven' if s['optimal'] else 'NOT proven'} within "
                  f"{s['mip_gap']:.2%} of the best bound in {s['solve_s']:.2f} s",
                  soft_wrap=True)
    for r in s["regions"]:
        flags = [f for f, on in (("ESD-safe cells only", r["esd_safe_only"]),
                                 ("quiet", r["quiet"])) if on]
        head = (f"Region {r['name']}" + (f" ({', '.join(flags)})" if flags else "")
                + f": useful cap at {_n(r['frequency_MHz'])} MHz ({r['frequency_source']}) "
                f"{_n(r['useful_cap_nF'])} nF of target {_n(r['target_nF'])} nF "
                f"({r['target_source']})"
                + (f", SHORT by {_n(r['shortfall_nF'])} nF" if r["shortfall_nF"] else ""))
        console.print()
        console.print(head, soft_wrap=True)
        console.print(_table(
            "cells", ["cell", "count", "in rows", "in open", "cap fF", "useful fF",
                      "leak nA", "useful nF", "leak uA"],
            [[c["name"], c["count"], c["in_rows"], c["in_open"], c["cap_fF"],
              c["useful_cap_fF"], c["leakage_nA"], c["total_useful_cap_nF"],
              c["total_leakage_uA"]] for c in r["cells"]] or [["(none)"] + [""] * 8],
            set(range(1, 9))))
        console.print(_table(
            "gap classes: where each class's area went [%]",
            ["class", "role", "gaps", "filled", "useful nF", "area um^2", "filled", "geom",
             "restr", "kinds", "open", "left open because"],
            [[c["name"], c["role"], c["gaps"], c["filled_gaps"], c["useful_cap_nF"],
              c["capacity_um2"], _pct(c["filled_um2"], c["capacity_um2"]),
              _pct(c["lost_geometry_um2"], c["capacity_um2"]),
              _pct(c["lost_restricted_um2"], c["capacity_um2"]),
              _pct(c["lost_kinds_um2"], c["capacity_um2"]),
              _pct(c["left_open_um2"], c["capacity_um2"]),
              "; ".join(c["left_open_because"]) or "–"] for c in r["classes"]],
            set(range(2, 11))))
        console.print(_table(
            "fill list", ["class", "cell", "count"],
            [[c["name"], cell, n] for c in r["classes"] for cell, n in c["cells"].items()]
            or [["(empty)", "", ""]], {2}))
    console.print()
    t = s["totals"]
    console.print(_table(
        "fill by gap role", ["role", "cap nF", "useful nF", "leak uA", "leak uW"],
        [[role, v["cap_nF"], v["useful_cap_nF"], v["leakage_uA"], v["leakage_uW"]]
         for role, v in s["roles"].items()]
        + [["total", t["cap_nF"], t["useful_cap_nF"], t["leakage_uA"], t["leakage_uW"]]],
        {1, 2, 3, 4}))
    budgets = s["budgets"]
    console.print(_table(
        "budgets and binding constraints",
        ["constraint", "corner policy", "used", "limit", "unit", "binds", "shadow price",
         "gain if lifted"],
        [[b["name"], b["policy"], "–" if b["limit"] is None else b["used"], b["limit"],
          b["unit"] if b["limit"] is not None else "", "BINDS" if b["binding"] else "no",
          "–" if b["shadow_price"] is None else f"{_n(b['shadow_price'])} "
          f"{b['shadow_price_unit']}",
          "–" if b["gain"] is None else f"{_n(b['gain'])} {b['gain_unit']}"]
         for b in budgets], {2, 3}))
    for b in budgets:
        if b["note"]:
            console.print(f"  {b['name']}: {b['note']}", soft_wrap=True, markup=False)
    console.print(_table("the fill at every stored corner", ["corner", "cap nF", "leak uA"],
                         [[c["corner"], c["cap_nF"], c["leakage_uA"]] for c in s["corners"]],
                         {1, 2}))
    pdn = s["pdn"]
    if pdn and "f0_MHz" in pdn:
        rows = [
            ("die capacitance (fill + intrinsic) [nF]", f"{_n(pdn['die_cap_nF'])} = "
             f"{_n(pdn['fill_cap_nF'])} + {_n(pdn['intrinsic_cap_nF'])}"),
            ("charge-sharing need at the ripple [nF]", _n(pdn["charge_sharing_need_nF"])),
            ("target impedance [mohm]", _n(pdn["target_impedance_mohm"])),
            ("package resonance f0 [MHz]", _n(pdn["f0_MHz"])),
            ("peak |Z| swept [mohm] at [MHz]", f"{_n(pdn['peak_z_mohm'])} at "
             f"{_n(pdn['peak_f_MHz'])}"),
            ("first droop, undamped [mV]", _n(pdn["first_droop_mV"])),
            ("|Z| below target over the sweep", "yes" if pdn["below_target"] else "NO"),
        ]
        console.print(_table("lumped PDN of the block", ["figure", "value"],
                             [list(r) for r in rows], set()))
    for note in s["notes"]:
        console.print(f"note: {note}", soft_wrap=True)
    console.print(CAUTION, soft_wrap=True, markup=False)


def cmd_plan(args: argparse.Namespace) -> int:
    from rich.console import Console

    from celllab.catalog import open_catalog
    from celllab.export.plan import write_plan_files
    from celllab.planner import load_block, plan_block

    block = load_block(args.block)
    from celllab.cli.progress import working

    with open_catalog(args.catalog, create=False) as catalog, working("planning") as say:
        plan = plan_block(block, catalog, explain=not args.no_explain, progress=say)
    summary = plan.to_dict()
    if args.out:
        written = write_plan_files(plan, args.out)
        summary["files"] = [str(p) for p in written]
        print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    if args.json:
        summary["caution"] = CAUTION
        print(json.dumps(summary, indent=2, allow_nan=False))
    else:
        console = Console(width=None if sys.stdout.isatty() else _WIDTH, highlight=False)
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
        "what stays empty and why, the budgets and which of them bind, and the block's "
        "lumped PDN figures. The block file (TOML) has tables [block], [candidates] (where, "
        "corner), [budgets] (leakage_uA, max_kinds, thin_oxide_area_mm2, [budgets.wearout]), "
        "[objective] (goal, mip_rel_gap, time_limit_s), [[region]] with "
        "[[region.row_gaps]] and [[region.open_slots]], and an optional [network] table "
        "kept for the supply-network model. See README, 'Planning a block'.",
        epilog="Estimates from analytic models, not sign-off: defer to the foundry's rules, "
        "qualified models, reliability and ESD qualification and licensed practice.")
    p.add_argument("block", metavar="BLOCKFILE", help="block file (TOML)")
    p.add_argument("--catalog", default=str(DEFAULT_CATALOG), metavar="PATH",
                   help="catalog file (default: %(default)s)")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--out", metavar="DIR",
                   help="also write <block>_fill.csv and <block>_fill.json (fill list for "
                   "place-and-route scripts), <block>_plan.html, and <block>_z.csv / "
                   "<block>_z.s1p (block impedance) into DIR")
    p.add_argument("--no-explain", action="store_true",
                   help="skip the re-solves that price the kind limit and ESD-safe-only "
                   "regions (faster; shadow prices are still given)")
    p.set_defaults(func=cmd_plan)
