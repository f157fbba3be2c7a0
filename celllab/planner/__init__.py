"""Block planning: fill a block's empty sites with catalog decap cells and report its PDN.

    block = load_block("process_decks/blocks/lumen130_dsp.toml")
    plan = plan_block(block, open_catalog("db/celllab.sqlite"))
    plan.to_dict()                      # display units (nF, mohm, MHz, uA) for scripts
    render_impedance_touchstone(plan)   # |Z_block(f)| as a Touchstone v1.1 one-port

Steps: candidates from ``Catalog.query`` (the block's filter, corner, fit and ESD checks);
integer counts from ``fill.choose_fill``; die capacitance = fill + intrinsic decap of the
non-switching logic; Z_block(f) from each chosen cell's stored Z(f) (``impedance``).
The plan itself is in SI; ``to_dict`` converts for people.
"""

from __future__ import annotations

import difflib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray
from scipy.constants import giga, micro, milli, nano

from celllab.errors import CelllabError, PlanError, Problem
from celllab.physics import pdn
from celllab.planner.block import BlockFile, load_block, parse_block
from celllab.planner.fill import FillChoice, choose_fill
from celllab.planner.impedance import (
    DieNetwork,
    PdnFigures,
    corner_for_plan,
    die_network,
    pdn_figures,
)

if TYPE_CHECKING:
    from celllab.catalog import Catalog

__all__ = [
    "BlockFile",
    "BlockPlan",
    "ChosenCell",
    "load_block",
    "parse_block",
    "plan_block",
    "render_impedance_csv",
    "render_impedance_touchstone",
    "write_plan_files",
]

#: Droop fraction of the charge-sharing rule of thumb (C_dec = 9 C_sw).
RULE_DROOP_FRACTION = 0.10
#: Cells whose characterization supply differs from the block's by more than this get a note.
SUPPLY_NOTE_FRACTION = 0.10
FEMTO = 1e-15


@dataclass(frozen=True)
class ChosenCell:
    """One kind of cell in the fill (SI). ``z_corner`` is the corner whose Z(f) was used."""

    name: str
    topology: str
    oxide: str
    count: int
    width_sites: int
    height_rows: int
    cap: float
    leakage: float
    esr: float
    bandwidth: float
    z_corner: str

    @property
    def sites(self) -> int:
        return self.count * self.width_sites * self.height_rows


@dataclass(frozen=True)
class BlockPlan:
    """A planned block (SI: F, A, V, Hz, ohm, s). ``to_dict`` gives display units."""

    block_name: str
    deck: str
    corner: str
    supply: float
    empty_sites: int
    row_sites: int
    n_candidates: int
    excluded: dict[str, int]
    cells: list[ChosenCell]
    optimal: bool
    fill_capacitance: float
    intrinsic_capacitance: float
    switched_capacitance: float
    leakage: float
    leakage_budget: float
    l_pkg: float
    r_pkg: float
    current_step: float
    ripple_fraction: float
    die: DieNetwork
    pdn: PdnFigures
    notes: list[str] = field(default_factory=list)

    @property
    def die_capacitance(self) -> float:
        return self.fill_capacitance + self.intrinsic_capacitance

    @property
    def sites_used(self) -> int:
        return sum(c.sites for c in self.cells)

    @property
    def charge_sharing_need(self) -> float:
        """C_dec for the block's ripple by charge sharing, C_sw (1 - x) / x, F."""
        return float(pdn.decap_for_charge_sharing(self.switched_capacitance,
                                                  self.ripple_fraction))

    @property
    def rule_of_thumb_need(self) -> float:
        """9 C_sw: charge sharing at 10 % droop (Dally & Poulton 1998), F."""
        return float(pdn.decap_for_charge_sharing(self.switched_capacitance,
                                                  RULE_DROOP_FRACTION))

    @property
    def leakage_per_nF(self) -> float:
        """Fill leakage per nF of fill capacitance, nA/nF (nan without fill)."""
        if self.fill_capacitance <= 0:
            return float("nan")
        return (self.leakage / nano) / (self.fill_capacitance / nano)

    def sweep(self) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
        """(freq_Hz, Z_block_ohm) on the stored frequencies of the chosen cells."""
        return self.die.freq, self.die.block_impedance(self.die.freq, self.l_pkg, self.r_pkg)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-able summary in display units (units in every key); an undefined
        number (no fill: leakage per nF) is None."""
        return _finite_or_none(self._summary())

    def _summary(self) -> dict[str, Any]:
        p = self.pdn
        return {
            "block": self.block_name,
            "deck": self.deck,
            "corner": self.corner,
            "supply_V": self.supply,
            "candidates": self.n_candidates,
            "excluded": dict(self.excluded),
            "optimal": self.optimal,
            "cells": [
                {
                    "name": c.name, "topology": c.topology, "oxide": c.oxide, "count": c.count,
                    "width_sites": c.width_sites, "height_rows": c.height_rows,
                    "sites": c.sites, "cap_fF": c.cap / FEMTO,
                    "total_cap_nF": c.count * c.cap / nano, "leakage_nA": c.leakage / nano,
                    "total_leakage_uA": c.count * c.leakage / micro, "esr_ohm": c.esr,
                    "bandwidth_GHz": c.bandwidth / giga, "z_corner": c.z_corner,
                }
                for c in self.cells
            ],
            "sites_used": self.sites_used,
            "empty_sites": self.empty_sites,
            "fill_cap_nF": self.fill_capacitance / nano,
            "intrinsic_cap_nF": self.intrinsic_capacitance / nano,
            "die_cap_nF": self.die_capacitance / nano,
            "switched_cap_nF": self.switched_capacitance / nano,
            "charge_sharing_need_nF": self.charge_sharing_need / nano,
            "rule_of_thumb_need_nF": self.rule_of_thumb_need / nano,
            "leakage_uA": self.leakage / micro,
            "leakage_budget_uA": self.leakage_budget / micro,
            "leakage_nA_per_nF": self.leakage_per_nF,
            "package_inductance_nH": self.l_pkg / nano,
            "package_resistance_mohm": self.r_pkg / milli,
            "target_impedance_mohm": p.target_impedance / milli,
            "f0_MHz": p.f0 / 1e6,
            "z0_mohm": p.z0 / milli,
            "peak_z_mohm": p.peak_impedance / milli,
            "peak_f_MHz": p.peak_frequency / 1e6,
            "peak_z_tank_mohm": p.peak_impedance_tank / milli,
            "peak_f_tank_MHz": p.peak_frequency_tank / 1e6,
            "die_esr_at_f0_mohm": p.die_esr / milli,
            "die_c_eff_at_peak_nF": p.die_c_eff_at_peak / nano,
            "first_droop_mV": p.droop / milli,
            "first_droop_time_ns": p.droop_time / nano,
            "worst_z_over_target": p.worst_ratio,
            "worst_f_MHz": p.worst_frequency / 1e6,
            "below_target": p.below_target,
            "sweep_MHz": [self.die.f_min / 1e6, self.die.f_max / 1e6],
            "notes": list(self.notes),
        }


def _finite_or_none(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _finite_or_none(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_finite_or_none(v) for v in value]
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


# --------------------------------------------------------------------------- catalog side


def _check_catalog(block: BlockFile, catalog: Catalog) -> tuple[float, str]:
    """Deck, corner and supply against the catalog: (supply_V, corner) or PlanError."""
    b, f = block.block, block.fill
    decks = [d.name for d in catalog.decks() if d.current]
    if b.deck not in decks:
        guess = difflib.get_close_matches(b.deck, decks, n=1)
        msg = "no such deck in the catalog; allowed: " + (", ".join(decks) or "(catalog empty)")
        raise PlanError([block.problem("block.deck", msg + (f". Did you mean {guess[0]!r}?"
                                                               if guess else ""), b.deck)])
    problems: list[Problem] = []
    corners = ["worst", *catalog.corners(b.deck)]
    if f.corner not in corners:
        guess = difflib.get_close_matches(f.corner, corners, n=1)
        problems.append(block.problem(
            "fill.corner", "not a corner of deck " + b.deck + "; allowed: " + ", ".join(corners)
            + (f". Did you mean {guess[0]!r}?" if guess else ""), f.corner))
    supply = b.supply_V
    if supply is None:
        params = catalog.deck_params(b.deck)
        supply = (params.get("supplies") or {}).get("core_V")
        if not isinstance(supply, (int, float)) or not supply > 0:
            problems.append(block.problem(
                "block.supply_V", f"required: deck {b.deck} stores no core supply", has_value=False))
    if problems:
        raise PlanError(problems)
    assert supply is not None
    return float(supply), f.corner


def _candidates(block: BlockFile, catalog: Catalog, corner: str
                ) -> tuple[list[dict[str, Any]], dict[str, int]]:
    """Rows that may fill the block, and how many rows each check excluded."""
    b, f = block.block, block.fill
    try:
        rows = catalog.query(deck=b.deck, corner=corner, where=f.where, limit=None)
    except CelllabError as exc:
        raise PlanError([block.problem("fill.where", p.message or str(p), f.where)
                         for p in exc.problems]) from None
    excluded = {"wider than a row": 0, "not esd_safe": 0, "no usable cap_fF or leakage_nA": 0}
    kept = []
    for row in rows:
        cap, leak = row.get("cap_fF"), row.get("leakage_nA")
        if not (isinstance(cap, (int, float)) and np.isfinite(cap) and cap > 0
                and isinstance(leak, (int, float)) and np.isfinite(leak) and leak >= 0):
            excluded["no usable cap_fF or leakage_nA"] += 1
        elif int(row["width_sites"]) > b.row_sites:
            excluded["wider than a row"] += 1
        elif f.require_esd_safe and not row.get("esd_safe"):
            excluded["not esd_safe"] += 1
        else:
            kept.append(row)
    if not kept:
        why = "; ".join(f"{n} {k}" for k, n in excluded.items() if n)
        raise PlanError([block.problem(
            "fill.where", f"no cell of deck {b.deck} can fill the block ({len(rows)} match the "
            "filter" + (f"; excluded: {why}" if why else "") + ")", f.where)])
    return kept, {k: n for k, n in excluded.items() if n}


def plan_block(block: BlockFile, catalog: Catalog) -> BlockPlan:
    """Fill the block's empty sites from the catalog and compute its PDN figures.

    Raises ``PlanError`` (located in the block file) for an unknown deck or corner, a bad
    filter, no usable candidate, or a die with no capacitance at all.
    """
    b, f = block.block, block.fill
    supply, corner = _check_catalog(block, catalog)
    rows, excluded = _candidates(block, catalog, corner)
    cap = np.array([r["cap_fF"] for r in rows], dtype=float) * FEMTO
    leak = np.array([r["leakage_nA"] for r in rows], dtype=float) * nano
    sites = np.array([int(r["width_sites"]) * int(r["height_rows"]) for r in rows])
    budget = b.leakage_budget_uA * micro
    choice: FillChoice = choose_fill(cap, sites, leak, b.empty_sites, budget, f.max_kinds)

    chosen: list[ChosenCell] = []
    responses = []
    notes: list[str] = []
    for i in np.flatnonzero(choice.counts):
        row = rows[int(i)]
        record = catalog.cell(row["name"], deck=b.deck)
        result = corner_for_plan(record, corner)
        responses.append(result.response)
        chosen.append(ChosenCell(
            name=row["name"], topology=row["topology"], oxide=row["oxide"],
            count=int(choice.counts[i]), width_sites=int(row["width_sites"]),
            height_rows=int(row["height_rows"]), cap=float(cap[i]), leakage=float(leak[i]),
            esr=float(row.get("esr_ohm") or np.nan),
            bandwidth=float(row.get("bandwidth_GHz") or np.nan) * giga, z_corner=result.corner))
        if abs(result.supply_V - supply) > SUPPLY_NOTE_FRACTION * supply:
            notes.append(f"{row['name']} was characterized at {result.supply_V:g} V, the block "
                         f"runs at {supply:g} V: its cap and leakage are at that supply")

    clock = b.clock_GHz * giga
    switched = float(pdn.switched_capacitance(b.switching_power_W, supply, clock))
    intrinsic = float(pdn.intrinsic_decap(b.switching_power_W, supply, clock, b.activity))
    if choice.capacitance + intrinsic <= 0:
        raise PlanError([block.problem(
            "block.leakage_budget_uA", "no cell fits the site and leakage budgets and "
            "activity = 1 leaves no intrinsic decap: the die has no capacitance",
            b.leakage_budget_uA)])
    die = die_network(responses, [c.count for c in chosen], intrinsic)
    l_pkg, r_pkg = b.package_inductance_nH * nano, b.package_resistance_mohm * milli
    figures = pdn_figures(die, choice.capacitance + intrinsic, l_pkg, r_pkg, supply,
                          b.ripple_fraction, b.current_step_A)

    for c in chosen:
        if np.isfinite(c.bandwidth) and c.bandwidth < figures.f0:
            notes.append(f"{c.name}: bandwidth {c.bandwidth / 1e6:.3g} MHz is below the "
                         f"package resonance {figures.f0 / 1e6:.3g} MHz, so it decouples "
                         "less there than its cap_fF says (the swept |Z| includes this)")
    if intrinsic > 0:
        notes.append("the intrinsic decap is an ideal capacitor (its series resistance through "
                     "the logic is not modelled), so the peak |Z| leans pessimistic")
    if not choice.optimal:
        notes.append("the fill optimizer hit its time limit: the fill is the best found, "
                     "not proven optimal")
    notes.append("|Z| below the target at every swept frequency does not bound the "
                 "worst-case supply noise when Z(f) has peaks (use the full profile)")
    return BlockPlan(
        block_name=b.name, deck=b.deck, corner=corner, supply=supply,
        empty_sites=b.empty_sites, row_sites=b.row_sites, n_candidates=len(rows),
        excluded=excluded, cells=chosen, optimal=choice.optimal,
        fill_capacitance=choice.capacitance, intrinsic_capacitance=intrinsic,
        switched_capacitance=switched, leakage=choice.leakage, leakage_budget=budget,
        l_pkg=l_pkg, r_pkg=r_pkg, current_step=b.current_step_A,
        ripple_fraction=b.ripple_fraction, die=die, pdn=figures, notes=notes)


# --------------------------------------------------------------------------- files


def _header(plan: BlockPlan, mark: str) -> list[str]:
    from celllab import __version__
    from celllab.export import CAUTION

    return [
        f"{mark} celllab {__version__}: PDN impedance Z_block(f) of block {plan.block_name}",
        (f"{mark} deck {plan.deck}; corner {plan.corner}; supply {plan.supply:g} V; package "
        f"{plan.l_pkg / nano:g} nH, {plan.r_pkg / milli:g} mohm"),
        f"{mark} fill: " + (", ".join(f"{c.count} x {c.name}" for c in plan.cells) or "none")
        + f"; intrinsic decap {plan.intrinsic_capacitance / nano:.6g} nF",
        f"{mark} target impedance {plan.pdn.target_impedance / milli:.6g} mohm",
        f"{mark} CAUTION: estimate. {CAUTION}",
    ]


def render_impedance_csv(plan: BlockPlan) -> str:
    """|Z_block|(f) as CSV: ``#`` header lines, then freq_Hz, z_mag_ohm, z_real_ohm,
    z_imag_ohm, z_phase_deg, z_target_ohm; round-trip numbers, ``\\r\\n`` line ends."""
    from celllab.export.csv import format_value

    freq, z = plan.sweep()
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


def write_plan_files(plan: BlockPlan, folder: str | os.PathLike[str]) -> list[Path]:
    """Write ``<block>_z.csv`` and ``<block>_z.s1p`` into ``folder`` (created) atomically."""
    from celllab.export import atomic_write_text

    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    return [atomic_write_text(out / f"{plan.block_name}_z.csv", render_impedance_csv(plan)),
            atomic_write_text(out / f"{plan.block_name}_z.s1p",
                              render_impedance_touchstone(plan))]
