"""The ``plan`` verb: fill a block with catalog decaps and report its power-delivery impedance.

    celllab plan process_decks/blocks/lumen130_dsp.toml --catalog db/celllab.sqlite
    celllab plan BLOCK.toml --json
    celllab plan BLOCK.toml --out plans/     # also writes <block>_z.csv and <block>_z.s1p
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from celllab import CAUTION, DEFAULT_CATALOG
from celllab.display import text_table


def _num(value: float, digits: int = 4) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    return f"{value:.{digits}g}"


def render_report(summary: dict[str, Any]) -> str:
    """The text report of ``BlockPlan.to_dict()``: cell table, totals, PDN figures, caution."""
    s = summary
    lines = [(f"Block {s['block']} on deck {s['deck']} (corner {s['corner']}, supply "
             f"{_num(s['supply_V'])} V): {s['candidates']} candidate cells")]
    if s["excluded"]:
        lines.append("  excluded: " + ", ".join(f"{n} {why}" for why, n in s["excluded"].items()))
    lines.append("")
    if s["cells"]:
        cols = ["name", "topology", "count", "sites", "cap_fF", "total_cap_nF", "leakage_nA",
                "total_leakage_uA", "bandwidth_GHz", "z_corner"]
        lines.append(text_table(s["cells"], cols))
    else:
        lines.append("No cell fits the site and leakage budgets: the die has only its "
                     "intrinsic decap.")
    verdict = "yes" if s["below_target"] else "NO"
    need_ok = "meets" if s["die_cap_nF"] >= s["charge_sharing_need_nF"] else "BELOW"
    rows = [
        ("sites used / empty", (f"{s['sites_used']} / {s['empty_sites']} "
         f"({100 * s['sites_used'] / s['empty_sites']:.1f} %)")),
        ("fill capacitance [nF]", _num(s["fill_cap_nF"])),
        ("intrinsic decap, non-switching logic [nF]", _num(s["intrinsic_cap_nF"])),
        ("die capacitance [nF]", _num(s["die_cap_nF"])),
        ("switched capacitance P/(V^2 f) [nF]", _num(s["switched_cap_nF"])),
        ("charge-sharing need at the ripple [nF]", (f"{_num(s['charge_sharing_need_nF'])} "
         f"(die {need_ok}); rule of thumb 9 C_sw = {_num(s['rule_of_thumb_need_nF'])}")),
        ("fill leakage / budget [uA]", (f"{_num(s['leakage_uA'])} / "
         f"{_num(s['leakage_budget_uA'])}")),
        ("fill leakage per nF [nA/nF]", _num(s["leakage_nA_per_nF"])),
        ("target impedance [mohm]", _num(s["target_impedance_mohm"])),
        ("package resonance f0 [MHz]", _num(s["f0_MHz"])),
        ("characteristic impedance Z0 = sqrt(L/C) [mohm]", _num(s["z0_mohm"])),
        ("peak |Z| swept [mohm] at [MHz]", (f"{_num(s['peak_z_mohm'])} at "
         f"{_num(s['peak_f_MHz'])}")),
        ("peak |Z| lumped tank [mohm] at [MHz]", (f"{_num(s['peak_z_tank_mohm'])} at "
         f"{_num(s['peak_f_tank_MHz'])}")),
        ("die ESR at f0 [mohm]", _num(s["die_esr_at_f0_mohm"])),
        ("first droop, undamped [mV] at [ns]", (f"{_num(s['first_droop_mV'])} at "
         f"{_num(s['first_droop_time_ns'])}")),
        ("|Z| below target over the sweep", (f"{verdict} (worst |Z|/target "
         f"{_num(s['worst_z_over_target'])} at {_num(s['worst_f_MHz'])} MHz)")),
    ]
    width = max(len(k) for k, _ in rows)
    lines.append("")
    lines += [f"{k.ljust(width)}  {v}" for k, v in rows]
    if not s["optimal"]:
        lines.append("(fill not proven optimal: solver time limit)")
    lines.append("")
    lines += [f"note: {n}" for n in s["notes"]]
    lines.append(CAUTION)
    return "\n".join(lines)


def cmd_plan(args: argparse.Namespace) -> int:
    from celllab.catalog import open_catalog
    from celllab.planner import load_block, plan_block, write_plan_files

    block = load_block(args.block)
    from celllab.cli.progress import working

    with open_catalog(args.catalog, create=False) as catalog, working(f"planning {args.block}…"):
        plan = plan_block(block, catalog)
    summary = plan.to_dict()
    if args.out:
        written = write_plan_files(plan, args.out)
        summary["files"] = [str(p) for p in written]
        print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    if args.json:
        summary["caution"] = CAUTION
        print(json.dumps(summary, indent=2, allow_nan=False, default=_json_default))
    else:
        print(render_report(summary))
    return 0


def _json_default(value: Any) -> Any:
    raise TypeError(f"not JSON-able: {value!r}")


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "plan", help="fill a block's empty sites with decaps and report its PDN impedance",
        description="Choose integer counts of catalog decap cells that maximize the block's "
        "capacitance within its free sites, leakage budget and kind limit, then report the "
        "die capacitance, target impedance, package resonance, peak |Z|, first droop and "
        "whether |Z| stays below the target. The block file (TOML) has a [block] table "
        "(name, deck, empty_sites, row_sites, supply_V, switching_power_W, clock_GHz, "
        "activity, current_step_A, ripple_fraction, package_inductance_nH, "
        "package_resistance_mohm, leakage_budget_uA) and a [fill] table (where, corner, "
        "max_kinds, require_esd_safe).")
    p.add_argument("block", metavar="BLOCKFILE", help="block file (TOML)")
    p.add_argument("--catalog", default=str(DEFAULT_CATALOG), metavar="PATH",
                   help="catalog file (default: %(default)s)")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--out", metavar="DIR",
                   help="also write <block>_z.csv (|Z|(f)) and <block>_z.s1p (Touchstone "
                   "v1.1 one-port) into DIR")
    p.set_defaults(func=cmd_plan)
