"""The supply-network part of the ``plan`` report as text tables: per region its resonances,
the target check over its band, the damping trade, droop in time and damping through the
fill; then the emission change per band and the naive fill it is compared with. Reads the
``network`` part of ``BlockPlan.to_dict()`` (display units), prints nothing else."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

Table = Callable[[str, list[str], list[list[Any]], set[int]], Any]


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


def _at(item: dict[str, Any] | None, digits: int = 4) -> str:
    """``{"value", "corner"}`` as "value (corner)"."""
    if not item or item.get("value") is None:
        return "–"
    return f"{_n(item['value'], digits)} ({item['corner']})"


def _check_line(r: dict[str, Any]) -> str:
    lo, hi = r["band_MHz"]
    head = f"Region {r['name']}"
    c = r["check"]
    if c is None:
        return (f"{head}: no switching current of its own, no target; its |Z| over "
                f"{_n(lo)}-{_n(hi)} MHz (the block's fastest edge)")
    verdict = "meets it" if c["passes"] else "EXCEEDS it"
    over = ", ".join(f"{_n(a)}-{_n(b)} MHz" for a, b in c["over_target_MHz"])
    return (f"{head}: target |Z| {_n(r['target_mohm'])} mohm up to {_n(hi)} MHz: worst "
            f"{_n(c['worst_z_over_target'])} x target at {_n(c['at_MHz'])} MHz "
            f"({c['corner']}): {verdict}" + (f" (over the target {over})" if over else ""))


def _trade_rows(r: dict[str, Any]) -> list[list[Any]]:
    """(figure, as planned, with entrance resistors) rows of one region."""
    e = r["entrance"]
    d, a = r["droop"] or {}, r["droop_with_entrance_resistors"] or {}
    rows: list[list[Any]] = []
    if e is not None:
        rows += [["entrance resistor [mohm]", _n(e["resistance_before_mohm"]),
                  _n(e["resistance_mohm"])],
                 ["worst in-band |Z| [mohm]", _at(e["peak_before_mohm"]),
                  _at(e["peak_after_mohm"])]]
    for key, label in (("first_droop_mV", "first droop [mV]"),
                       ("first_droop_time_ns", "  at [ns after the edge]"),
                       ("worst_droop_mV", "worst droop [mV]"),
                       ("overshoot_mV", "overshoot [mV]"),
                       ("ringing_MHz", "ringing [MHz]"), ("ringing_q", "ringing Q"),
                       ("settling_ns", "settling to 2 % [ns]"),
                       ("settled_droop_mV", "settled droop [mV]")):
        if key in d:
            value = _at(d[key])
            if key == "settling_ns" and d[key]["value"] is None:
                value = "beyond the run"
            after = _at(a.get(key)) if a else "–"
            if key == "settling_ns" and a and a[key]["value"] is None:
                after = "beyond the run"
            rows.append([label, value, after])
    if e is not None:
        rows += [[f"DC IR drop [mV] (limit {_n(e['ir_drop_limit_mV'])})",
                  _n(r["dc_drop_mV"]), _n(e["ir_drop_after_mV"])],
                 ["power lost in the resistor [mW]", "0",
                  f"{_n(e['dc_power_mW'])} DC + {_n(e['harmonic_power_mW'])} at the "
                  "clock harmonics"]]
    return rows


def render_network(net: dict[str, Any], console: Any, table: Table) -> None:
    """Print the ``network`` part of a plan summary with ``table(title, columns, rows,
    numeric_columns)``."""
    console.print()
    console.print(f"Supply network at corners {', '.join(net['corners'])}; {net['policy']}",
                  soft_wrap=True, markup=False)
    skipped = [name for name, on in (("droop in time", net["computed"]["droop"]),
                                     ("entrance resistors", net["computed"]
                                      ["entrance_resistors"]))
               if not on]
    if skipped:
        console.print("not computed: " + ", ".join(skipped), soft_wrap=True)
    for r in net["regions"]:
        console.print()
        console.print(_check_line(r), soft_wrap=True, markup=False)
        console.print(table(
            "resonances at the region node",
            ["kind", "f MHz", "|Z| mohm", "Q", "Q from", "worst corner"],
            [[t["kind"], t["f_MHz"], t["z_mohm"], t["q"], t["q_from"], t["corner"]]
             for t in r["resonances"]] or [["(none)", "", "", "", "", ""]], {1, 2, 3}))
        rows = _trade_rows(r)
        if rows:
            stim = f" ({r['stimulus']} stimulus)" if r["stimulus"] else (
                " (the others' currents)")
            console.print(table(
                f"damping trade and droop in time{stim}, each at its worst corner",
                ["figure", "as planned", "with entrance resistors"], rows, set()))
        for t in r["transfer"]:
            console.print(f"  transfer |Z| from {t['from']}: {_n(t['z_mohm'])} mohm at "
                          f"{_n(t['at_MHz'])} MHz ({t['corner']})", soft_wrap=True,
                          markup=False)
        cd = r["cell_damping"]
        if cd["cells"] and r["top_peak"] is not None:
            best = max(cd["cells"], key=lambda c: c["score"] or 0.0)
            need = cd["conductance_needed_S"]
            fill_g = sum(c["conductance_S"] or 0.0 for c in cd["cells"])
            console.print(
                f"  fill damping at the {_n(r['top_peak']['f_MHz'])} MHz peak: "
                f"{_n(fill_g)} S from the fill" + (f", {_n(need)} S needed for the target"
                                                    if need is not None else "")
                + f"; best cell {best['cell']} (x = 2 pi f ESR C = {_n(best['match_x'], 3)}, "
                "1 is matched)", soft_wrap=True, markup=False)
    fd = net["fill_damping"]
    if fd is not None:
        console.print()
        console.print(table(
            f"damping through the fill (weight {_n(fd['weight'])}): the fill solved again "
            "valuing each cell's damping of its region's worst peak",
            ["region", "peak MHz", "corner", "|Z| before mohm", "|Z| now mohm",
             "fill G before S", "fill G now S"],
            [[x["name"], x["f_MHz"], x["corner"] or "–", x["peak_before_mohm"],
              x["peak_after_mohm"], x["conductance_before_S"], x["conductance_after_S"]]
             for x in fd["regions"]], {1, 3, 4, 5, 6}))
    em = net["emission"]
    if em["bands"]:
        labels = list(em["bands"][0]["level_dBuV"])
        others = [n for n in labels if n != "plan"]
        console.print()
        console.print(table(
            f"conducted emission across a {_n(em['probe_ohm'])} ohm probe in the ground "
            "return: the loudest clock harmonic per band, each at its loudest corner",
            ["band"] + [f"{n} dBuV" for n in labels] + [f"plan vs {n} dB" for n in others],
            [[b["band"]] + [b["level_dBuV"][n] for n in labels]
             + [None if b["change_dB"][n] is None else -b["change_dB"][n] for n in others]
             for b in em["bands"]],
            set(range(1, 1 + len(labels) + len(others)))))
    for n in net["naive_fill"]:
        cells = ", ".join(f"{k:,} x {c}" for c, k in n["cells"].items()) or "nothing fits"
        console.print(f"  naive fill of {n['region']} (every gap with the densest cell that "
                      f"fits, no budgets): {cells}: {_n(n['cap_nF'])} nF, "
                      f"{_n(n['leakage_uA'])} uA", soft_wrap=True, markup=False)
    for note in net["notes"]:
        console.print(f"note: {note}", soft_wrap=True, markup=False)
