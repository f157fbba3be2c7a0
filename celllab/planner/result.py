"""What a block plan holds (SI: F, A, W, V, m^2, Hz, ohm, s) and its plain-data form in
display units (``BlockPlan.to_dict``).

Where a region's fill lives (for tools that attach it to a supply-network model)::

    for region in plan.regions:
        for cell in region.cells:          # CellUse: one kind of cell in this region
            cell.name, cell.cell_hash, cell.count
            cell.record.corner(c).response  # stored Z(f) at corner c (FrequencyResponse)
            cell.record.netlist[c]           # stored equivalent circuit at corner c
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray
from scipy.constants import femto, giga, mega, micro, milli, nano, pico

from celllab.physics import pdn
from celllab.planner.corners import NETWORK_FIGURES, POLICIES
from celllab.planner.impedance import DieNetwork, PdnFigures
from celllab.planner.sizing import RegionNeed
from celllab.records import CellResult

if TYPE_CHECKING:
    from celllab.planner.supply import SupplyAnalysis

__all__ = [
    "RULE_DROOP_FRACTION",
    "BlockPlan",
    "BudgetCheck",
    "CellUse",
    "ChosenCell",
    "ClassFill",
    "CornerTotals",
    "RegionFill",
    "WidthFill",
]

#: Droop fraction of the charge-sharing rule of thumb (C_dec = 9 C_sw).
RULE_DROOP_FRACTION = 0.10
_UM2 = micro**2


@dataclass(frozen=True)
class CellUse:
    """One kind of cell in one region (per-copy figures in SI).

    count = in_rows + in_open copies; cap at the capacitance policy corner, useful_cap
    (C_eff at the region's frequency) at ``useful_corner``, leakage at the leakage policy
    corner; ``z_corner`` is the corner whose stored Z(f) stands for it in the lumped PDN;
    ``record`` is the stored cell (every corner's Z(f), metrics and netlist).
    """

    name: str
    cell_hash: str
    topology: str
    oxide: str
    esd_safe: bool
    width_sites: int
    height_rows: int
    width_um: float
    height_um: float
    count: int
    in_rows: int
    in_open: int
    cap: float
    useful_cap: float
    useful_corner: str
    leakage: float
    oxide_area: float
    z_corner: str
    record: CellResult = field(repr=False, compare=False)


@dataclass(frozen=True)
class ChosenCell:
    """One kind of cell in the whole fill, as the lumped PDN uses it (SI)."""

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
    bandwidth_is_bound: bool = False     # the bandwidth is only a lower bound (catalog flag)


@dataclass(frozen=True)
class WidthFill:
    """One width of an in-row gap class: its gaps and how they are packed.

    patterns : (gaps, {"WxH": cells of that footprint per gap}) for each pattern in use
    cells : cell name -> copies placed in gaps of this width
    """

    width_sites: int
    gaps: int
    filled_gaps: int
    patterns: list[tuple[int, dict[str, int]]]
    cells: dict[str, int]


@dataclass(frozen=True)
class ClassFill:
    """One gap class of a region and what went into it (areas in m^2).

    The class's area splits into: filled; lost to geometry (no candidate fits the remainder);
    lost to the region's restriction (ESD-safe-only, or cells with no useful capacitance at
    its frequency); lost to the kind limit (the chosen kinds pack worse than the allowed
    ones); left open by the budgets or the goal (``left_open_because``).
    """

    region: str
    name: str
    role: str
    kind: str                     # "row" or "open"
    height_rows: int | None
    width_um: float | None
    height_um: float | None
    gaps: int
    filled_gaps: int
    cells: dict[str, int]
    cap: float
    useful_cap: float
    leakage: float
    oxide_area: float
    capacity: float
    filled: float
    lost_geometry: float
    lost_restricted: float
    lost_kinds: float
    left_open: float
    left_open_because: list[str]
    space_price: float | None
    widths: list[WidthFill] = field(default_factory=list)


@dataclass(frozen=True)
class RegionFill:
    """One region: its need, its cells and its gap classes (SI)."""

    name: str
    esd_safe_only: bool
    quiet: bool
    weight: float
    need: RegionNeed
    cells: list[CellUse]
    classes: list[ClassFill]
    shortfall: float
    failure_fraction: float | None

    @property
    def cap(self) -> float:
        return float(sum(c.count * c.cap for c in self.cells))

    @property
    def useful_cap(self) -> float:
        return float(sum(c.count * c.useful_cap for c in self.cells))

    @property
    def leakage(self) -> float:
        return float(sum(c.count * c.leakage for c in self.cells))

    @property
    def oxide_area(self) -> float:
        return float(sum(c.count * c.oxide_area for c in self.cells))

    def counts(self) -> dict[str, int]:
        """Cell name -> copies in this region."""
        return {c.name: c.count for c in self.cells}


@dataclass(frozen=True)
class BudgetCheck:
    """One budget or target of the fill: used against its limit at its policy's corner.

    unit : display unit of ``used``/``limit`` (values are SI; ``to_dict`` converts)
    shadow_price : goal improvement per unit of the limit (LP dual at fixed kinds), SI
    gain : improvement found by re-solving with the limit lifted, SI (``gain_in``)
    """

    name: str
    policy: str
    used: float
    limit: float | None
    binding: bool
    shadow_price: float | None = None
    gain: float | None = None
    gain_in: str = "goal"
    note: str = ""


@dataclass(frozen=True)
class CornerTotals:
    """The chosen fill evaluated at one stored corner (SI)."""

    corner: str
    cap: float
    leakage: float


@dataclass(frozen=True)
class BlockPlan:
    """A planned block (SI). ``to_dict`` gives display units.

    ``network`` is what the fill does to the supply network (`planner.supply.SupplyAnalysis`),
    None without a ``[network]`` table (or when not asked for).
    """

    block_name: str
    deck: str
    corner: str
    supply: float
    goal: str
    n_candidates: int
    excluded: dict[str, int]
    regions: list[RegionFill]
    budgets: list[BudgetCheck]
    corner_totals: list[CornerTotals]
    cells: list[ChosenCell]
    optimal: bool
    mip_gap: float
    solve_seconds: float
    oxide_limit: float
    failure_fraction: float | None
    fill_capacitance: float
    intrinsic_capacitance: float
    switched_capacitance: float
    l_pkg: float
    r_pkg: float
    current_step: float
    ripple_fraction: float
    die: DieNetwork | None
    pdn: PdnFigures | None
    notes: list[str] = field(default_factory=list)
    network: SupplyAnalysis | None = None

    def region(self, name: str) -> RegionFill:
        for r in self.regions:
            if r.name == name:
                return r
        raise KeyError(name)

    @property
    def classes(self) -> list[ClassFill]:
        return [c for r in self.regions for c in r.classes]

    @property
    def useful_cap(self) -> float:
        return float(sum(r.useful_cap for r in self.regions))

    @property
    def leakage(self) -> float:
        return float(sum(r.leakage for r in self.regions))

    @property
    def oxide_area(self) -> float:
        return float(sum(r.oxide_area for r in self.regions))

    @property
    def die_capacitance(self) -> float:
        return self.fill_capacitance + self.intrinsic_capacitance

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

    def role_totals(self) -> dict[str, dict[str, float]]:
        """Per gap-class role (corner, spacer, filler, other): cap, useful cap, leakage (SI)."""
        out: dict[str, dict[str, float]] = {}
        for c in self.classes:
            t = out.setdefault(c.role, {"cap": 0.0, "useful_cap": 0.0, "leakage": 0.0,
                                        "filled": 0.0, "capacity": 0.0})
            t["cap"] += c.cap
            t["useful_cap"] += c.useful_cap
            t["leakage"] += c.leakage
            t["filled"] += c.filled
            t["capacity"] += c.capacity
        return out

    def sweep(self) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
        """(freq_Hz, Z_block_ohm) on the stored frequencies of the chosen cells."""
        if self.die is None:
            raise ValueError("the block has no capacitance: no PDN sweep")
        return self.die.freq, self.die.block_impedance(self.die.freq, self.l_pkg, self.r_pkg)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-able plan in display units (unit in every key); undefined numbers are
        None."""
        return _finite_or_none(_summary(self))


def _finite_or_none(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _finite_or_none(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite_or_none(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def _opt(value: float | None, unit: float) -> float | None:
    return None if value is None else value / unit


def _cell_dict(c: CellUse) -> dict[str, Any]:
    return {
        "name": c.name, "cell_hash": c.cell_hash, "topology": c.topology, "oxide": c.oxide,
        "esd_safe": c.esd_safe, "width_sites": c.width_sites, "height_rows": c.height_rows,
        "width_um": c.width_um, "height_um": c.height_um, "count": c.count,
        "in_rows": c.in_rows, "in_open": c.in_open, "cap_fF": c.cap / femto,
        "useful_cap_fF": c.useful_cap / femto, "useful_corner": c.useful_corner,
        "leakage_nA": c.leakage / nano, "oxide_area_um2": c.oxide_area / _UM2,
        "z_corner": c.z_corner, "total_cap_nF": c.count * c.cap / nano,
        "total_useful_cap_nF": c.count * c.useful_cap / nano,
        "total_leakage_uA": c.count * c.leakage / micro,
    }


def _class_dict(c: ClassFill) -> dict[str, Any]:
    out: dict[str, Any] = {
        "name": c.name, "role": c.role, "kind": c.kind, "gaps": c.gaps,
        "filled_gaps": c.filled_gaps, "cells": dict(c.cells), "cap_nF": c.cap / nano,
        "useful_cap_nF": c.useful_cap / nano, "leakage_uA": c.leakage / micro,
        "oxide_area_um2": c.oxide_area / _UM2, "capacity_um2": c.capacity / _UM2,
        "filled_um2": c.filled / _UM2, "lost_geometry_um2": c.lost_geometry / _UM2,
        "lost_restricted_um2": c.lost_restricted / _UM2, "lost_kinds_um2": c.lost_kinds / _UM2,
        "left_open_um2": c.left_open / _UM2, "left_open_because": list(c.left_open_because),
        "space_price_fF_per_gap": _opt(c.space_price, femto),
    }
    if c.kind == "row":
        out["height_rows"] = c.height_rows
        out["widths"] = [
            {"width_sites": w.width_sites, "gaps": w.gaps, "filled_gaps": w.filled_gaps,
             "cells": dict(w.cells),
             "patterns": [{"gaps": n, "footprints": dict(slots)} for n, slots in w.patterns]}
            for w in c.widths]
    else:
        out["width_um"], out["height_um"] = c.width_um, c.height_um
    return out


def _region_dict(r: RegionFill, supply: float) -> dict[str, Any]:
    n = r.need
    return {
        "name": r.name, "esd_safe_only": r.esd_safe_only, "quiet": r.quiet,
        "weight": r.weight, "frequency_MHz": n.frequency / mega,
        "frequency_source": n.frequency_source, "charge_pC": n.charge / pico,
        "droop_mV": n.droop / milli, "charge_need_nF": n.charge_need / nano,
        "intrinsic_nF": n.intrinsic / nano, "impedance_need_nF": n.impedance_need / nano,
        "target_nF": n.target / nano, "target_source": n.target_source,
        "cap_nF": r.cap / nano, "useful_cap_nF": r.useful_cap / nano,
        "shortfall_nF": r.shortfall / nano, "leakage_uA": r.leakage / micro,
        "leakage_uW": r.leakage * supply / micro, "oxide_area_um2": r.oxide_area / _UM2,
        "failure_ppm": _opt(r.failure_fraction, micro),
        "cells": [_cell_dict(c) for c in r.cells],
        "classes": [_class_dict(c) for c in r.classes],
    }


#: Display unit of each budget's used/limit values and the SI factor dividing them.
BUDGET_UNITS: dict[str, tuple[str, float]] = {
    "leakage": ("uA", micro),
    "thin-oxide gate area": ("um2", _UM2),
    "distinct kinds": ("kinds", 1.0),
    "space": ("gaps", 1.0),
}


#: A budget unit as "per one" of it reads ("nF per gap", not "nF per gaps").
_ONE = {"kinds": "kind", "gaps": "gap"}


def _budget_dict(b: BudgetCheck, goal: str) -> dict[str, Any]:
    unit, factor = BUDGET_UNITS.get(b.name.split(":")[0], ("nF", nano))
    goal_unit, goal_factor = ("nF", nano) if goal == "max_useful_cap" else ("uA", micro)
    if b.gain_in == "shortfall":  # the plan falls short of a target: what a unit more closes
        goal_unit, goal_factor = "nF of shortfall closed", nano
    price = None if b.shadow_price is None else b.shadow_price * factor / goal_factor
    return {
        "name": b.name, "policy": b.policy, "unit": unit, "used": b.used / factor,
        "limit": _opt(b.limit, factor), "binding": bool(b.binding),
        "shadow_price": price, "shadow_price_unit": f"{goal_unit} per {_ONE.get(unit, unit)}",
        "gain": _opt(b.gain, goal_factor), "gain_unit": goal_unit, "note": b.note,
    }


def _summary(plan: BlockPlan) -> dict[str, Any]:
    roles = {role: {"cap_nF": t["cap"] / nano, "useful_cap_nF": t["useful_cap"] / nano,
                    "leakage_uA": t["leakage"] / micro,
                    "leakage_uW": t["leakage"] * plan.supply / micro,
                    "filled_um2": t["filled"] / _UM2, "capacity_um2": t["capacity"] / _UM2}
             for role, t in plan.role_totals().items()}
    out: dict[str, Any] = {
        "block": plan.block_name, "deck": plan.deck, "corner": plan.corner,
        "supply_V": plan.supply, "goal": plan.goal, "candidates": plan.n_candidates,
        "excluded": dict(plan.excluded), "optimal": plan.optimal, "mip_gap": plan.mip_gap,
        "solve_s": plan.solve_seconds,
        "policies": [{"name": p.name, "metric": p.metric, "purpose": p.purpose}
                     for p in POLICIES]
        + [{"name": NETWORK_FIGURES.name, "metric": None, "purpose": NETWORK_FIGURES.rule}],
        "regions": [_region_dict(r, plan.supply) for r in plan.regions],
        "roles": roles,
        "totals": {
            "cap_nF": plan.fill_capacitance / nano, "useful_cap_nF": plan.useful_cap / nano,
            "leakage_uA": plan.leakage / micro, "leakage_uW": plan.leakage * plan.supply / micro,
            "oxide_area_um2": plan.oxide_area / _UM2,
            "oxide_limit_um2": plan.oxide_limit / _UM2,
            "failure_ppm": _opt(plan.failure_fraction, micro),
            "capacity_um2": sum(c.capacity for c in plan.classes) / _UM2,
            "filled_um2": sum(c.filled for c in plan.classes) / _UM2,
        },
        "budgets": [_budget_dict(b, plan.goal) for b in plan.budgets],
        "corners": [{"corner": t.corner, "cap_nF": t.cap / nano, "leakage_uA": t.leakage / micro}
                    for t in plan.corner_totals],
        "cells": [
            {"name": c.name, "topology": c.topology, "oxide": c.oxide, "count": c.count,
             "width_sites": c.width_sites, "height_rows": c.height_rows,
             "cap_fF": c.cap / femto, "total_cap_nF": c.count * c.cap / nano,
             "leakage_nA": c.leakage / nano, "total_leakage_uA": c.count * c.leakage / micro,
             "esr_ohm": c.esr, "bandwidth_GHz": c.bandwidth / giga,
             "bandwidth_is_bound": c.bandwidth_is_bound, "z_corner": c.z_corner}
            for c in plan.cells],
        "pdn": _pdn_dict(plan),
        "network": None,
        "notes": list(plan.notes),
    }
    if plan.network is not None:
        from celllab.planner.network_summary import network_dict

        out["network"] = network_dict(plan.network)
    return out


def _pdn_dict(plan: BlockPlan) -> dict[str, Any] | None:
    p = plan.pdn
    base = {
        "fill_cap_nF": plan.fill_capacitance / nano,
        "intrinsic_cap_nF": plan.intrinsic_capacitance / nano,
        "die_cap_nF": plan.die_capacitance / nano,
        "switched_cap_nF": plan.switched_capacitance / nano,
        "charge_sharing_need_nF": plan.charge_sharing_need / nano,
        "rule_of_thumb_need_nF": plan.rule_of_thumb_need / nano,
        "package_inductance_nH": plan.l_pkg / nano,
        "package_resistance_mohm": plan.r_pkg / milli,
    }
    if p is None or plan.die is None:
        return base
    return base | {
        "target_impedance_mohm": p.target_impedance / milli,
        "f0_MHz": p.f0 / mega,
        "z0_mohm": p.z0 / milli,
        "peak_z_mohm": p.peak_impedance / milli,
        "peak_f_MHz": p.peak_frequency / mega,
        "peak_z_tank_mohm": p.peak_impedance_tank / milli,
        "peak_f_tank_MHz": p.peak_frequency_tank / mega,
        "die_esr_at_f0_mohm": p.die_esr / milli,
        "die_c_eff_at_peak_nF": p.die_c_eff_at_peak / nano,
        "first_droop_mV": p.droop / milli,
        "first_droop_time_ns": p.droop_time / nano,
        "worst_z_over_target": p.worst_ratio,
        "worst_f_MHz": p.worst_frequency / mega,
        "below_target": p.below_target,
        "sweep_MHz": [plan.die.f_min / mega, plan.die.f_max / mega],
    }
