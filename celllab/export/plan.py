"""Block-plan exports: the fill list for place-and-route scripts (CSV, JSON), the HTML plan
report, and the impedance the regions see (CSV, Touchstone v1.1).

=======================  ====================================  ===========================
file                     render                                 content
=======================  ====================================  ===========================
<block>_fill.csv         ``render_fill_csv(plan)``             one row per region x gap
                                                               class x cell: name, count
<block>_fill.json        ``render_fill_json(plan)``            the whole plan (``to_dict``)
<block>_plan.html        ``render_plan_html(plan)``            the report, for people, with
                                                               the supply network's section
with a ``[network]`` table (``celllab.export.network_report``):
<block>_z_<region>.csv   ``render_region_z_csv``               Z(f) at the region, per corner
<block>_<corner>.sNp     ``render_z_touchstone``               region Z-matrix, N-port
<block>_droop.csv        ``render_droop_csv``                  droop waveforms (when run)
without one (the lumped PDN):
<block>_z.csv            ``render_impedance_csv(plan)``        |Z_block|(f)
<block>_z.s1p            ``render_impedance_touchstone(plan)`` Z_block(f), one-port
=======================  ====================================  ===========================

``write_plan_files`` renders everything first and then writes each file atomically, so a
failure leaves no half-written file. Every file carries the caution.
"""

from __future__ import annotations

import html
import json
import os
import re
from pathlib import Path
from typing import Any

import numpy as np
from scipy.constants import femto, micro, milli, nano

from celllab import __version__
from celllab.export import CAUTION
from celllab.export.files import write_files_atomic
from celllab.planner.result import BlockPlan

__all__ = [
    "FILL_COLUMNS",
    "render_fill_csv",
    "render_fill_json",
    "render_impedance_csv",
    "render_impedance_touchstone",
    "render_plan_html",
    "write_plan_files",
]

#: Columns of the fill list, in order (units in the names).
FILL_COLUMNS: tuple[str, ...] = (
    "region", "gap_class", "role", "gap_kind", "height_rows", "slot_width_um",
    "slot_height_um", "cell", "count", "cell_width_sites", "cell_height_rows", "cap_fF",
    "useful_cap_fF", "leakage_nA", "total_cap_nF", "total_useful_cap_nF", "total_leakage_uA",
)
FILL_FORMAT = "celllab-fill-1"


def _csv_field(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, float):
        return repr(value) if np.isfinite(value) else ""
    text = str(value)
    return f'"{text}"' if any(c in text for c in ',"\n') else text


def _fill_rows(plan: BlockPlan) -> list[dict[str, Any]]:
    rows = []
    for region in plan.regions:
        per_cell = {c.name: c for c in region.cells}
        for cls in region.classes:
            for name, count in sorted(cls.cells.items()):
                c = per_cell[name]
                rows.append({
                    "region": region.name, "gap_class": cls.name, "role": cls.role,
                    "gap_kind": cls.kind, "height_rows": cls.height_rows,
                    "slot_width_um": cls.width_um, "slot_height_um": cls.height_um,
                    "cell": name, "count": count, "cell_width_sites": c.width_sites,
                    "cell_height_rows": c.height_rows, "cap_fF": c.cap / femto,
                    "useful_cap_fF": c.useful_cap / femto, "leakage_nA": c.leakage / nano,
                    "total_cap_nF": count * c.cap / nano,
                    "total_useful_cap_nF": count * c.useful_cap / nano,
                    "total_leakage_uA": count * c.leakage / micro,
                })
    return rows


def render_fill_csv(plan: BlockPlan) -> str:
    """The fill list as CSV: ``#`` header lines, then one row per region x gap class x cell
    (``FILL_COLUMNS``); round-trip numbers, ``\\r\\n`` line ends."""
    lines = [f"# celllab {__version__}: fill list of block {plan.block_name} (deck "
             f"{plan.deck}, corner {plan.corner}, goal {plan.goal})",
             "# per-copy figures: cap at the capacitance corner, useful cap = C_eff at the "
             "region's frequency, leakage at the leakiest corner",
             f"# CAUTION: estimate. {CAUTION}",
             ",".join(FILL_COLUMNS)]
    for row in _fill_rows(plan):
        lines.append(",".join(_csv_field(row[k]) for k in FILL_COLUMNS))
    return "\r\n".join(lines) + "\r\n"


def render_fill_json(plan: BlockPlan) -> str:
    """The whole plan (``BlockPlan.to_dict``) as JSON, with the fill list and the caution."""
    document = {"format": FILL_FORMAT, "generator": f"celllab {__version__}",
                "caution": CAUTION, "fill": _fill_rows(plan), "plan": plan.to_dict()}
    return json.dumps(_plain(document), indent=2, allow_nan=False) + "\n"


def _plain(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


# --------------------------------------------------------------------------- HTML

_CSS = """
body { font-family: Georgia, 'DejaVu Serif', serif; margin: 1.5em 2em; color: #202a33;
       background: #fbfaf6; }
h1 { font-size: 1.4em; letter-spacing: 0.02em; }
h2 { font-size: 1.1em; margin-top: 1.8em; padding-left: 0.4em; border-left: 4px solid #5b7f6a; }
h3 { font-size: 1em; margin-bottom: 0.3em; }
table { border-collapse: collapse; margin: 0.4em 0 1em; font-size: 0.88em; }
th { text-align: left; font-weight: normal; color: #5b6670; border-bottom: 1px solid #9aa5ad;
     padding: 0.15em 0.8em 0.15em 0; }
td { padding: 0.15em 0.8em 0.15em 0; border-bottom: 1px dotted #d4d8db; }
td.n { text-align: right; font-variant-numeric: tabular-nums; }
.binding { color: #8a3b12; font-weight: bold; }
.caution { border: 1px solid #c9a227; background: #fff8df; padding: 0.6em 0.9em; }
.small { color: #5b6670; font-size: 0.85em; }
"""


def _e(value: Any) -> str:
    return html.escape(str(value))


def _num(value: Any, digits: int = 4) -> str:
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return "–"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    return f"{float(value):.{digits}g}"


def _cell(value: Any) -> str:
    if value is None or isinstance(value, (bool, np.bool_)):
        return f"<td>{_e(_num(value))}</td>"
    if isinstance(value, (int, float, np.integer, np.floating)):
        return f'<td class="n">{_num(value)}</td>'
    return f"<td>{_e(value)}</td>"


def _table(header: list[str], rows: list[list[Any]], classes: list[str] | None = None) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = []
    for k, row in enumerate(rows):
        cls = f' class="{classes[k]}"' if classes and classes[k] else ""
        body.append(f"<tr{cls}>{''.join(_cell(v) for v in row)}</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def render_plan_html(plan: BlockPlan) -> str:
    """The plan report as one self-contained HTML page (no scripts, no external files)."""
    d = plan.to_dict()
    t = d["totals"]
    parts = [f"<h1>Decap fill plan: block {_e(plan.block_name)}</h1>",
             f'<p class="small">deck {_e(plan.deck)} · corner {_e(plan.corner)} · supply '
             f"{plan.supply:g} V · goal {_e(plan.goal)} · {plan.n_candidates} candidate cells "
             f"· solver {'proven' if plan.optimal else 'not proven'} within "
             f"{d['mip_gap']:.2%} · celllab {_e(__version__)}</p>",
             f'<p class="caution"><b>Caution:</b> {_e(CAUTION)}</p>',
             "<h2>Totals</h2>",
             _table(["fill cap [nF]", "useful cap [nF]", "leakage [uA]", "leakage [uW]",
                     "thin-oxide area [um^2]", "oxide failures [ppm]", "filled / empty "
                     "area [um^2]"],
                    [[t["cap_nF"], t["useful_cap_nF"], t["leakage_uA"], t["leakage_uW"],
                      t["oxide_area_um2"], t["failure_ppm"],
                      f"{_num(t['filled_um2'])} / {_num(t['capacity_um2'])}"]]),
             "<h3>By gap role</h3>",
             _table(["role", "cap [nF]", "useful cap [nF]", "leakage [uA]", "leakage [uW]",
                     "filled [um^2]", "empty area [um^2]"],
                    [[role, v["cap_nF"], v["useful_cap_nF"], v["leakage_uA"], v["leakage_uW"],
                      v["filled_um2"], v["capacity_um2"]] for role, v in d["roles"].items()]),
             "<h2>Budgets and binding constraints</h2>",
             _table(["constraint", "corner policy", "used", "limit", "unit", "binds",
                     "shadow price", "gain if lifted", "note"],
                    [[b["name"], b["policy"], b["used"], b["limit"], b["unit"], b["binding"],
                      "–" if b["shadow_price"] is None else
                      f"{_num(b['shadow_price'])} {b['shadow_price_unit']}",
                      "–" if b["gain"] is None else f"{_num(b['gain'])} {b['gain_unit']}",
                      b["note"]] for b in d["budgets"]],
                    ["binding" if b["binding"] else "" for b in d["budgets"]]),
             "<h3>The fill at every corner</h3>",
             _table(["corner", "cap [nF]", "leakage [uA]"],
                    [[c["corner"], c["cap_nF"], c["leakage_uA"]] for c in d["corners"]])]
    for r in d["regions"]:
        parts.append(f"<h2>Region {_e(r['name'])}</h2>")
        flags = [f for f, on in (("ESD-safe cells only", r["esd_safe_only"]),
                                 ("quiet", r["quiet"])) if on]
        parts.append(
            f'<p class="small">frequency of interest {_num(r["frequency_MHz"])} MHz '
            f"({_e(r['frequency_source'])}); target {_num(r['target_nF'])} nF "
            f"({_e(r['target_source'])}); reached {_num(r['useful_cap_nF'])} nF useful, "
            f"{_num(r['cap_nF'])} nF low-frequency"
            + (f"; short by {_num(r['shortfall_nF'])} nF" if r["shortfall_nF"] else "")
            + (f"; {', '.join(flags)}" if flags else "") + "</p>")
        parts.append(_table(
            ["cell", "count", "in rows", "in open slots", "cap [fF]", "useful [fF]",
             "leakage [nA]", "total useful [nF]", "total leakage [uA]"],
            [[c["name"], c["count"], c["in_rows"], c["in_open"], c["cap_fF"],
              c["useful_cap_fF"], c["leakage_nA"], c["total_useful_cap_nF"],
              c["total_leakage_uA"]] for c in r["cells"]]))
        parts.append(_table(
            ["gap class", "role", "gaps", "filled", "cells", "useful [nF]", "leakage [uA]",
             "filled [um^2]", "lost: geometry", "restriction", "kinds", "left open",
             "left open because"],
            [[c["name"], c["role"], c["gaps"], c["filled_gaps"],
              ", ".join(f"{n} x {k}" for k, n in c["cells"].items()) or "–",
              c["useful_cap_nF"], c["leakage_uA"], c["filled_um2"], c["lost_geometry_um2"],
              c["lost_restricted_um2"], c["lost_kinds_um2"], c["left_open_um2"],
              "; ".join(c["left_open_because"]) or "–"] for c in r["classes"]]))
    pdn = d["pdn"]
    if plan.network is not None:
        parts += _network_parts(plan, d["network"])
    elif pdn and "f0_MHz" in pdn:
        parts.append("<h2>Lumped PDN of the whole block</h2>")
        parts.append(_table(
            ["die cap [nF]", "target |Z| [mohm]", "f0 [MHz]", "peak |Z| [mohm]",
             "first droop [mV]", "below target"],
            [[pdn["die_cap_nF"], pdn["target_impedance_mohm"], pdn["f0_MHz"],
              pdn["peak_z_mohm"], pdn["first_droop_mV"], pdn["below_target"]]]))
    if d["notes"]:
        parts.append("<h2>Notes</h2><ul>" + "".join(f"<li>{_e(n)}</li>" for n in d["notes"])
                     + "</ul>")
    body = "\n".join(parts)
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>Fill plan {_e(plan.block_name)}</title>\n<style>{_CSS}</style>\n"
            f"</head>\n<body>\n{body}\n</body>\n</html>\n")


def _network_parts(plan: BlockPlan, net: dict[str, Any]) -> list[str]:
    """The supply-network section: the network report's fragment (plots, tables, caution),
    then damping through the fill and the naive fill the emission is compared with."""
    from celllab.export.network_report import render_network_html

    assert plan.network is not None
    parts = ["<h2>What the fill does to the supply</h2>",
             render_network_html(plan.network.figures,
                                 f"Supply network of block {plan.block_name}")]
    fd = net["fill_damping"]
    if fd is not None:
        parts.append(f"<h3>Damping through the fill (weight {_num(fd['weight'])})</h3>")
        parts.append('<p class="small">The fill was solved again valuing each cell\'s damping '
                     "of its region's worst peak (conductance at the peak over 2&pi;f, times "
                     "the weight, counted like capacitance).</p>")
        parts.append(_table(
            ["region", "peak [MHz]", "corner", "|Z| before [mohm]", "|Z| now [mohm]",
             "fill conductance before [S]", "now [S]"],
            [[x["name"], x["f_MHz"], x["corner"] or "–", x["peak_before_mohm"],
              x["peak_after_mohm"], x["conductance_before_S"], x["conductance_after_S"]]
             for x in fd["regions"]]))
    if net["naive_fill"]:
        parts.append("<h3>The naive fill emission is compared with</h3>")
        parts.append('<p class="small">Every gap filled with the densest cell that fits it, '
                     "no budgets applied.</p>")
        parts.append(_table(
            ["region", "cells", "cap [nF]", "leakage [uA]", "thin-oxide area [um^2]"],
            [[n["region"], ", ".join(f"{k:,} x {c}" for c, k in n["cells"].items()) or "–",
              n["cap_nF"], n["leakage_uA"], n["oxide_area_um2"]]
             for n in net["naive_fill"]]))
    return parts


# --------------------------------------------------------------------------- impedance


def _header(plan: BlockPlan, mark: str) -> list[str]:
    return [
        f"{mark} celllab {__version__}: PDN impedance Z_block(f) of block {plan.block_name}",
        (f"{mark} deck {plan.deck}; corner {plan.corner}; supply {plan.supply:g} V; package "
         f"{plan.l_pkg / nano:g} nH, {plan.r_pkg / milli:g} mohm"),
        f"{mark} fill: " + (", ".join(f"{c.count} x {c.name}" for c in plan.cells) or "none")
        + f"; intrinsic decap {plan.intrinsic_capacitance / nano:.6g} nF",
        f"{mark} target impedance "
        + (f"{plan.pdn.target_impedance / milli:.6g} mohm" if plan.pdn else "n/a"),
        f"{mark} CAUTION: estimate. {CAUTION}",
    ]


def render_impedance_csv(plan: BlockPlan) -> str:
    """|Z_block|(f) as CSV: ``#`` header lines, then freq_Hz, z_mag_ohm, z_real_ohm,
    z_imag_ohm, z_phase_deg, z_target_ohm; round-trip numbers, ``\\r\\n`` line ends."""
    from celllab.export.csv import format_value

    freq, z = plan.sweep()
    assert plan.pdn is not None
    lines = _header(plan, "#")
    lines.append("freq_Hz,z_mag_ohm,z_real_ohm,z_imag_ohm,z_phase_deg,z_target_ohm")
    target = plan.pdn.target_impedance
    for fk, zk in zip(freq.tolist(), z.tolist(), strict=True):
        values = (fk, abs(zk), zk.real, zk.imag, float(np.degrees(np.angle(zk))), target)
        lines.append(",".join(format_value(v) for v in values))
    return "\r\n".join(lines) + "\r\n"


def render_impedance_touchstone(plan: BlockPlan, reference_ohm: float = 1.0) -> str:
    """Z_block(f) as a Touchstone v1.1 one-port Z file (``# Hz Z RI R <n>``).

    Version 1 Z data are normalized to R (Touchstone File Format Specification v1.1, IBIS
    Open Forum 2002, "Option Line"): the file holds Z / R; with R = 1 that is Z in ohm.
    """
    if not (reference_ohm > 0 and np.isfinite(reference_ohm)):
        raise ValueError(f"reference_ohm must be finite and > 0, got {reference_ohm!r}")
    freq, z = plan.sweep()
    r_text = format(reference_ohm, ".12g")
    lines = _header(plan, "!")
    lines += [f"! one-port Z, real/imaginary; data are Z / R with R = {r_text} ohm",
              f"# Hz Z RI R {r_text}"]
    for fk, zk in zip(freq.tolist(), (z / reference_ohm).tolist(), strict=True):
        lines.append(f"{fk:.11e} {zk.real:.11e} {zk.imag:.11e}")
    return "\n".join(lines) + "\n"


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_-]", "_", text)


def plan_file_names(block_name: str) -> list[str]:
    """The files ``write_plan_files`` writes for a block of this name whatever its network
    (the per-region and per-corner network files are checked when they are written)."""
    return [f"{block_name}_{part}" for part in ("fill.csv", "fill.json", "plan.html")]


def write_plan_files(plan: BlockPlan, folder: str | os.PathLike[str], force: bool = False) -> list[Path]:
    """Write the fill list (CSV, JSON), the HTML report and the impedance the regions see
    into ``folder`` (created): with a supply network, Z(f) per region (CSV), the region
    Z-matrix per corner (Touchstone N-port) and the droop waveforms (CSV); without one, the
    lumped PDN impedance (CSV, Touchstone one-port) when the block has capacitance. Every
    file rendered and every target checked before any is written, each written atomically
    (``export.files.write_files_atomic``: an existing file is replaced only with ``force``).
    Returns the paths written."""
    name = plan.block_name
    texts = {f"{name}_fill.csv": render_fill_csv(plan),
             f"{name}_fill.json": render_fill_json(plan),
             f"{name}_plan.html": render_plan_html(plan)}
    if plan.network is not None:
        from celllab.export.network_report import (
            render_droop_csv,
            render_region_z_csv,
            render_z_touchstone,
        )

        figures = plan.network.figures
        for region in figures.region_names:
            texts[f"{name}_z_{_safe(region)}.csv"] = render_region_z_csv(figures, region)
        ports = len(figures.region_names)
        for corner in figures.corners:
            texts[f"{name}_{_safe(corner)}.s{ports}p"] = render_z_touchstone(figures, corner)
        if figures.droop_run is not None:
            texts[f"{name}_droop.csv"] = render_droop_csv(figures)
    elif plan.pdn is not None and plan.die is not None:
        texts[f"{name}_z.csv"] = render_impedance_csv(plan)
        texts[f"{name}_z.s1p"] = render_impedance_touchstone(plan)
    return write_files_atomic(folder, texts, force=force)
