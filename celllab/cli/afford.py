"""``celllab afford``: how much thin-oxide decap a chip can afford over its mission, what one
broken oxide costs, and what a rail ESD zap does to each cell's oxide (``celllab.fill_risk``)."""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from celllab import CAUTION
from celllab.errors import CelllabError, Problem

#: Command-line options checked here -> (lowest, highest, what is allowed).
_RANGES: dict[str, tuple[float, float, str]] = {
    "years": (0.0, 100.0, "> 0 and <= 100 (years)"),
    "temp_C": (-55.0, 200.0, ">= -55 and <= 200 (degC)"),
    "supply_scale": (0.5, 1.5, ">= 0.5 and <= 1.5"),
    "target_ppm": (0.0, 1e6, "> 0 and <= 1e6 (ppm)"),
    "area_mm2": (0.0, 1e6, "> 0 mm^2"),
    "hbm_V": (0.0, 30000.0, "> 0 and <= 30000 (V)"),
    "cdm_V": (0.0, 5000.0, "> 0 and <= 5000 (V)"),
}


def _option_problems(args: argparse.Namespace) -> list[Problem]:
    problems = []
    for name, (lo, hi, allowed) in _RANGES.items():
        value = getattr(args, name)
        if value is None:
            continue
        strict_low = name != "temp_C" and name != "supply_scale"
        ok = math.isfinite(value) and (value > lo if strict_low else value >= lo) and value <= hi
        if not ok:
            problems.append(Problem("<command line>", "--" + name.replace("_", "-"),
                                    f"must be {allowed}", value))
    return problems


def _pick_cells(cells: list[Any], names: list[str], cell_files: list[str]) -> list[Any]:
    by_name = {c.name: c for c in cells}
    unknown = [n for n in names if n not in by_name]
    if unknown:
        shown = ", ".join(list(by_name)[:12]) + (" ..." if len(by_name) > 12 else "")
        raise CelllabError([Problem(", ".join(cell_files), "--cell", f"no such cell; cells: {shown}", n)
                            for n in unknown])
    return [by_name[n] for n in dict.fromkeys(names)]


def cmd_afford(args: argparse.Namespace) -> int:
    from celllab.characterization.esd_events import EsdEvent
    from celllab.characterization.params import CornerSet
    from celllab.cli.build import _load
    from celllab.fill_risk import esd_exposure, fill_oxide_risk

    problems = _option_problems(args)
    if problems:
        raise CelllabError(problems)
    ((deck, cells),) = _load([args.deck], args.cells)
    chosen = _pick_cells(cells, args.cell, args.cells)
    corners = [c.strip() for c in args.corners.split(",")] if args.corners else None
    CornerSet.from_deck(deck, corners)  # a located error for an unknown corner
    area = args.area_mm2 if args.area_mm2 is not None else 1.0
    fill: float | dict[str, float] = (area if len(chosen) == 1
                                      else {c.name: area / len(chosen) for c in chosen})
    try:
        risk = fill_oxide_risk(deck, chosen, fill, corners=corners, life_years=args.years,
                               temperature_C=args.temp_C, supply_scale=args.supply_scale,
                               target_ppm=args.target_ppm)
    except ValueError as exc:  # mission values the deck's rules refuse
        raise CelllabError.single("<command line>", "mission", str(exc)) from None
    j = risk.corners.index(risk.worst_corner)
    affordable = float(risk.affordable_footprint_mm2[j])
    esd_area = area if args.area_mm2 is not None else (affordable if math.isfinite(affordable) else 0.0)
    esd_fill: float | dict[str, float] = (esd_area if len(chosen) == 1
                                          else {c.name: esd_area / len(chosen) for c in chosen})
    events = [EsdEvent("hbm", args.hbm_V or deck.esd.hbm_V), EsdEvent("cdm", args.cdm_V or deck.esd.cdm_V)]
    esd = [] if args.no_esd else esd_exposure(deck, chosen, events=events, fill_mm2=esd_fill,
                                              corners=corners)
    if args.json:
        print(json.dumps(_as_json(risk, esd, args.area_mm2, esd_area), indent=2, allow_nan=False,
                         default=str))
        return 0
    if args.area_mm2 is None:
        print(f"affordable thin-oxide fill: {affordable:.4g} mm^2 of {', '.join(c.name for c in chosen)} "
              f"({risk.corner_label}; figures below for 1 mm^2)")
    print(risk.summary().replace("\n" + risk.caution, ""))
    if esd:
        print(f"ESD with {esd_area:.4g} mm^2 of this fill on the rail:")
        for cell in esd:
            print(cell.summary().replace("\n" + cell.caution, ""))
    print(CAUTION)
    return 0


def _finite(x: float) -> float | None:
    return float(x) if math.isfinite(float(x)) else None


def _as_json(risk: Any, esd: list[Any], area: float | None, esd_area: float) -> dict[str, Any]:
    m = risk.mission
    return {
        "mission": {"life_s": m.life_s, "temperature_K": m.temperature_K, "supply_scale": m.supply_scale,
                    "target_ppm": m.target_fraction * 1e6},
        "footprint_mm2": risk.footprint_mm2 if area is not None else None,
        "corners": risk.corners, "worst_corner": risk.worst_corner,
        "failure_ppm": [_finite(v) for v in risk.failure_ppm],
        "fit": [_finite(v) for v in risk.fit],
        "affordable_footprint_mm2": [_finite(v) for v in risk.affordable_footprint_mm2],
        "broken_oxide": {c.cell: {"current_mA": [_finite(v) for v in c.fault_current_mA],
                                  "limit_mA": [_finite(v) for v in c.fault_limit_mA],
                                  "survives": [bool(v) for v in c.fault_survives]} for c in risk.cells},
        "esd_fill_mm2": esd_area,
        "esd": {c.cell: {ev: {"peak_oxide_V": [_finite(v) for v in c.peak_oxide_V[e]],
                              "time_above_ns": [_finite(v) for v in c.time_above_ns[e]],
                              "margin": [_finite(v) for v in c.margin[e]],
                              "survives": [bool(v) for v in c.survives[e]],
                              "notes": c.notes[e]} for e, ev in enumerate(c.events)} for c in esd},
        "caution": CAUTION,
    }


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "afford", help="oxide wear-out of a decap fill over a mission, broken-oxide cost, ESD zap",
        description="How much thin-oxide decap can a chip afford? For the chosen cells of a cell file "
        "under a deck: the fill's cumulative oxide failure fraction and FIT over the mission (Weibull "
        "TDDB with area scaling, the deck's voltage law and Arrhenius temperature), the largest fill "
        "within the failure target, the supply current if one oxide breaks, and each cell's oxide "
        "voltage under an HBM and a CDM rail event with that fill on the rail (transient of the cell's "
        "own circuit). Mission values default to the deck's [mission] table.",
        epilog="example: celllab afford --deck process_decks/lumen130.toml --cells "
        "process_decks/cells/lumen130_cells.toml --cell lm_ncap-w16-h1-f2 --area-mm2 0.3 --years 10 "
        "--temp-C 125 --hbm-V 2000.  " + CAUTION)
    p.add_argument("--deck", required=True, metavar="FILE", help="process deck (TOML)")
    p.add_argument("--cells", action="append", required=True, metavar="FILE", help="cell file (TOML); repeatable")
    p.add_argument("--cell", action="append", required=True, metavar="NAME",
                   help="cell variant of the fill; repeat for a mix (the area is split evenly)")
    p.add_argument("--area-mm2", type=float, metavar="MM2",
                   help="footprint of the fill, mm^2 (default: report the affordable area)")
    p.add_argument("--years", type=float, metavar="Y", help="mission life (default: deck [mission])")
    p.add_argument("--temp-C", dest="temp_C", type=float, metavar="T",
                   help="junction temperature over the life, degC (default: deck [mission])")
    p.add_argument("--supply-scale", type=float, metavar="X",
                   help="supply over the life / nominal (default: deck [mission], else the largest corner)")
    p.add_argument("--target-ppm", type=float, metavar="PPM",
                   help="allowed cumulative oxide failures over the life (default: deck [mission])")
    p.add_argument("--hbm-V", dest="hbm_V", type=float, metavar="V",
                   help="HBM precharge of the zap (default: deck [esd] hbm_V)")
    p.add_argument("--cdm-V", dest="cdm_V", type=float, metavar="V",
                   help="CDM charge voltage (default: deck [esd] cdm_V)")
    p.add_argument("--corners", metavar="A,B", help="only these corners (default: all the deck defines)")
    p.add_argument("--no-esd", action="store_true", help="skip the ESD transients (wear-out and fault only)")
    p.add_argument("--json", action="store_true", help="print the answer as JSON")
    p.set_defaults(func=cmd_afford)
