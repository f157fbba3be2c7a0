"""The plan report as text tables (rich): per region the cells, gap classes and fill list; the
fill by gap role, the budgets and which of them bind, the fill at every corner; then the
supply network (``export.plan_network_text``) or the lumped PDN figures, the notes and the
caution. Reads ``BlockPlan.to_dict()`` (display units); used by the ``plan`` verb and the
terminal UI's planning view, so both show the same."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from celllab import CAUTION

__all__ = ["render_report"]


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


#: Width a free-text column (notes, reasons) may be squeezed to before a table is split.
_TEXT_MIN = 16


@dataclass(frozen=True)
class _Tables:
    """A table that fits the width it is printed at: when its columns do not fit side by side
    it is printed as several tables, each repeating the first column (the row's name), so no
    number is ever cut short."""

    title: str
    columns: list[str]
    rows: list[list[str]]
    numeric: set[int]

    def _natural(self, k: int) -> int:
        widest = max([len(self.columns[k])] + [len(r[k]) for r in self.rows])
        if k >= 2 and k not in self.numeric:  # free text wraps
            widest = min(widest, _TEXT_MIN)
        return widest + 3  # a cell of padding each side and the column separator

    def groups(self, width: int) -> list[list[int]]:
        """Column indices of each printed part (the first column in every part)."""
        parts: list[list[int]] = [[0]]
        used = self._natural(0)
        for k in range(1, len(self.columns)):
            need = self._natural(k)
            if used + need > width and len(parts[-1]) > 1:
                parts.append([0])
                used = self._natural(0)
            parts[-1].append(k)
            used += need
        return parts

    def __rich_console__(self, console: Any, options: Any) -> Any:
        from rich import box
        from rich.table import Table
        from rich.text import Text

        parts = self.groups(options.max_width)
        for p, part in enumerate(parts):
            title = self.title if p == 0 else f"{self.title} (continued)"
            table = Table(title=Text(title), title_justify="left", box=box.SIMPLE_HEAD,
                          pad_edge=False)
            for k in part:
                # names and numbers never wrap; free text (notes, reasons) takes what is left
                table.add_column(Text(self.columns[k]),
                                 justify="right" if k in self.numeric else "left",
                                 no_wrap=k < 2 or k in self.numeric)
            for row in self.rows:
                table.add_row(*[Text(row[k]) for k in part])
            yield table


def _table(title: str, columns: list[str], rows: list[list[Any]], numeric: set[int]) -> Any:
    """A rich table (split to fit the width when needed); every cell is plain text (no
    markup: units such as [nF] stay as typed)."""
    text = [[v if isinstance(v, str) else _n(v) for v in row] for row in rows]
    return _Tables(title, list(columns), text, set(numeric))


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
    if s.get("network") is not None:
        from celllab.export.plan_network_text import render_network

        render_network(s["network"], console, _table)
    elif pdn and "f0_MHz" in pdn:
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
        console.print(_table("lumped PDN of the block (one package L, one die C; a [network] "
                             "table gives the supply network instead)", ["figure", "value"],
                             [list(r) for r in rows], set()))
    for note in s["notes"]:
        console.print(f"note: {note}", soft_wrap=True)
    console.print(CAUTION, soft_wrap=True, markup=False)
