"""``plan_block``: from a block file and a catalog to a fill per region and gap class, its
budgets and binding constraints, the block's lumped PDN figures and, when the block file has
a ``[network]`` table, what the fill does to the supply (SI inside).

Steps: catalog checks and candidates (``candidates``); each region's frequency of interest
and target (``sizing``); useful capacitance of every candidate at every region's frequency;
patterns of every in-row gap width and grid copies of every open slot (``packing``); the
budgets (``wearout`` turns a failure target into an area); the MILP (``fill``), solved once
more with a damping credit when the block asks for damping through the fill
(``fill_damping``); what bound it (``binding``); the results (``result``); the lumped PDN from
the chosen cells' stored Z(f) (``impedance``); the supply network with the fill, the naive
densest-cell fill for comparison, its figures at every corner (``supply``, ``naive``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray
from scipy.constants import Julian_year, giga, micro, milli, nano, zero_Celsius

from celllab import DEFAULT_CATALOG
from celllab.errors import PlanError, Problem
from celllab.physics import pdn
from celllab.planner import corners as policy
from celllab.planner.binding import Binding, explain_fill
from celllab.planner.block import BlockFile, load_block
from celllab.planner.candidates import (
    Candidate,
    CatalogContext,
    check_catalog,
    load_candidates,
    useful_capacitance,
)
from celllab.planner.fill import (
    FillProblem,
    FillSolution,
    FillTimeout,
    OpenClass,
    RowClass,
    solve_fill,
)
from celllab.planner.fill_damping import damping_credit, fill_conductance, peak_to_damp
from celllab.planner.impedance import die_network, pdn_figures
from celllab.planner.naive import densest_fill
from celllab.planner.network import FillEntry
from celllab.planner.network_figures import evaluate_network
from celllab.planner.packing import PatternLimitError, best_fill, grid_copies, row_patterns
from celllab.planner.result import (
    BlockPlan,
    BudgetCheck,
    CellUse,
    ChosenCell,
    ClassFill,
    CornerTotals,
    RegionFill,
    WidthFill,
)
from celllab.planner.sizing import RegionNeed, region_need
from celllab.planner.supply import (
    FULL_ANALYSIS,
    FillDamping,
    NetworkOptions,
    Samples,
    analyse_supply,
    block_network,
    cell_entries,
    network_goals,
    read_waveforms,
)
from celllab.planner.wearout import MissionPhase, affordable_oxide_area, oxide_failure_fraction

if TYPE_CHECKING:
    from celllab.catalog import Catalog

__all__ = [
    "BlockPlan",
    "CellUse",
    "ChosenCell",
    "ClassFill",
    "NetworkOptions",
    "PreparedFill",
    "RegionFill",
    "plan_block",
    "plan_file",
    "prepare_fill",
]

#: Cells whose characterization supply differs from the block's by more than this get a note.
SUPPLY_NOTE_FRACTION = 0.10
Progress = Callable[[str], None]


class _Layout:
    """Footprint types, gap classes and their patterns, built once per plan."""

    def __init__(self, block: BlockFile, cells: list[Candidate], usable: NDArray[np.bool_],
                 site_area: float) -> None:
        self.site_area = site_area
        row_ok = np.array(["row" in c.placement for c in cells])
        self.types = sorted({(c.width_sites, c.height_rows)
                             for c, ok in zip(cells, row_ok, strict=True) if ok})
        index = {t: k for k, t in enumerate(self.types)}
        self.cell_type = np.array([index[(c.width_sites, c.height_rows)] if ok else -1
                                   for c, ok in zip(cells, row_ok, strict=True)], dtype=np.int64)
        self.type_w = np.array([t[0] for t in self.types], dtype=np.int64)
        self.type_h = np.array([t[1] for t in self.types], dtype=np.int64)
        self.type_sites = (self.type_w * self.type_h).astype(float)
        n_r = len(block.region)
        self.region_types = np.zeros((n_r, len(self.types)), dtype=bool)
        for r in range(n_r):
            on = self.cell_type[usable[r] & (self.cell_type >= 0)]
            self.region_types[r, on] = True
        self.row_classes: list[RowClass] = []
        self.row_source: list[tuple[int, int, int]] = []   # (region, table, width index)
        self.all_patterns: list[NDArray[np.int64]] = []
        self.open_classes: list[OpenClass] = []
        self.open_source: list[tuple[int, int]] = []
        problems: list[Problem] = []
        open_ok = np.array(["open" in c.placement for c in cells])
        w_um = np.array([c.width_um for c in cells])
        h_um = np.array([c.height_um for c in cells])
        for r, region in enumerate(block.region):
            for j, gaps in enumerate(region.row_gaps):
                for k, (width, count) in enumerate(zip(gaps.width_sites, gaps.count,
                                                       strict=True)):
                    try:
                        every = self._patterns(width, gaps.height_rows, None)
                        mine = self._patterns(width, gaps.height_rows, self.region_types[r])
                    except PatternLimitError as exc:
                        problems.append(block.problem(
                            f"region[{r}].row_gaps[{j}].width_sites", f"{exc} for one gap "
                            f"width: narrow [candidates] where to fewer distinct cell widths",
                            width))
                        continue
                    self.row_classes.append(RowClass(r, int(count), mine))
                    self.all_patterns.append(every)
                    self.row_source.append((r, j, k))
            for j, slots in enumerate(region.open_slots):
                copies = grid_copies(slots.width_um, slots.height_um, w_um, h_um) * open_ok
                self.open_classes.append(OpenClass(r, slots.count, copies))
                self.open_source.append((r, j))
        if problems:
            raise PlanError(problems)

    def _patterns(self, width: int, height: int, mask: NDArray[np.bool_] | None
                  ) -> NDArray[np.int64]:
        out = np.zeros((1, len(self.types)), dtype=np.int64)
        sel = np.arange(len(self.types)) if mask is None else np.flatnonzero(mask)
        if sel.size:
            sub = row_patterns(width, height, self.type_w[sel], self.type_h[sel])
            out = np.zeros((sub.shape[0], len(self.types)), dtype=np.int64)
            out[:, sel] = sub
        return out


def _mission(block: BlockFile, supply: float) -> list[MissionPhase]:
    w = block.budgets.wearout
    if w is None:
        return []
    return [MissionPhase(duration=p.years * Julian_year,
                         temperature=p.temperature_C + zero_Celsius,
                         voltage=p.supply_V if p.supply_V is not None else supply)
            for p in w.mission]


def _oxide_limit(block: BlockFile, ctx: CatalogContext, mission: list[MissionPhase]
                 ) -> tuple[float, str]:
    """Thin-oxide area limit, m^2, and where it comes from."""
    b = block.budgets
    limits: list[tuple[float, str]] = []
    if b.thin_oxide_area_mm2 is not None:
        limits.append((b.thin_oxide_area_mm2 * milli**2, "thin_oxide_area_mm2"))
    if b.wearout is not None:
        area = affordable_oxide_area(ctx.deck, ctx.thin_oxide, mission, b.wearout.failure_ppm * micro)
        limits.append((area, f"{b.wearout.failure_ppm:g} ppm over the mission"))
    if not limits:
        return float("inf"), ""
    return min(limits, key=lambda x: x[0])


def _check_frequencies(block: BlockFile, needs: list[RegionNeed],
                       useful: NDArray[np.float64]) -> None:
    problems = []
    for r, (region, need) in enumerate(zip(block.region, needs, strict=True)):
        if np.all(np.isnan(useful[r])):
            field = (f"region[{r}].frequency_MHz" if region.frequency_MHz is not None
                     else f"region[{r}]")
            problems.append(block.problem(
                field, f"frequency of interest {need.frequency / 1e6:.4g} MHz "
                f"({need.frequency_source}) lies outside the stored Z(f) sweeps of the "
                "candidate cells", region.frequency_MHz if region.frequency_MHz else region.name))
    if problems:
        raise PlanError(problems)


@dataclass(frozen=True)
class PreparedFill:
    """Everything ``plan_block`` hands the optimizer, and what it needs to report on it."""

    ctx: CatalogContext
    cells: list[Candidate]
    excluded: dict[str, int]
    needs: list[RegionNeed]
    useful_corner: list[list[str]]
    layout: _Layout
    problem: FillProblem
    mission: list[MissionPhase]
    oxide_limit: float
    oxide_source: str


def prepare_fill(block: BlockFile, catalog: Catalog, progress: Progress | None = None
                 ) -> PreparedFill:
    """The fill problem of a block: candidates, region needs, patterns, budgets (no solve).

    Raises ``PlanError`` (located in the block file) for an unknown deck or corner, a bad
    filter, no usable candidate, or a frequency of interest outside the stored sweeps.
    """
    say = progress or (lambda _text: None)
    say("reading the catalog")
    ctx = check_catalog(block, catalog)
    cells, excluded = load_candidates(block, catalog, ctx)
    b = block.block
    needs = [region_need(r, ctx.supply, b.clock_GHz * giga, b.ripple_fraction)
             for r in block.region]
    say("useful capacitance at each region's frequency")
    useful = np.zeros((len(needs), len(cells)))
    useful_corner: list[list[str]] = []
    for r, need in enumerate(needs):
        values, used_corner = useful_capacitance(cells, need.frequency, ctx)
        useful[r] = values
        useful_corner.append(used_corner)
    _check_frequencies(block, needs, useful)
    useful = np.nan_to_num(useful, nan=0.0)
    esd = np.array([c.esd_safe for c in cells])
    allowed = np.ones(useful.shape, dtype=bool)
    for r, region in enumerate(block.region):
        if region.esd_safe_only:
            allowed[r] = esd
    site_area = ctx.deck.layout.site_width_um * ctx.deck.layout.row_height_um * micro**2
    say("packing patterns")
    layout = _Layout(block, cells, allowed & (useful > 0), site_area)
    mission = _mission(block, ctx.supply)
    oxide_limit, oxide_source = _oxide_limit(block, ctx, mission)
    budgets = block.budgets
    problem = FillProblem(
        useful_cap=useful, allowed=allowed,
        weight=np.array([r.weight for r in block.region]),
        target=np.array([n.target for n in needs]), cell_type=layout.cell_type,
        leakage=np.array([c.leakage for c in cells]),
        oxide_area=np.array([c.oxide_area for c in cells]),
        row_classes=layout.row_classes, open_classes=layout.open_classes,
        leakage_budget=(budgets.leakage_uA * micro if budgets.leakage_uA is not None
                        else float("inf")),
        oxide_budget=oxide_limit, max_kinds=budgets.max_kinds, goal=block.objective.goal)
    return PreparedFill(ctx, cells, excluded, needs, useful_corner, layout, problem, mission,
                        oxide_limit, oxide_source)


def network_corners(ctx: CatalogContext) -> tuple[str, ...]:
    """Corners the supply network is evaluated at: every stored corner, or the block's named
    corner (a what-if)."""
    return tuple(ctx.corners) if ctx.corner == policy.WORST else (ctx.corner,)


def _solution_fills(block: BlockFile, prep: PreparedFill, copies: NDArray[np.int64]
                    ) -> dict[str, list[FillEntry]]:
    """Region name -> the fill entries of a solution's copies."""
    return {region.name: cell_entries([(prep.cells[i], int(copies[r, i]))
                                       for i in np.flatnonzero(copies[r]).tolist()])
            for r, region in enumerate(block.region)}


def _damp_through_fill(block: BlockFile, prep: PreparedFill, solution: FillSolution,
                       samples: dict[str, Samples], say: Progress
                       ) -> tuple[PreparedFill, FillSolution, FillDamping]:
    """Solve again with each cell's damping of its region's worst resonance as a credit
    (``fill_damping``): the resonance of the fill already solved, one iteration."""
    assert block.network is not None
    weight = block.network.fill_damping_weight
    corners = network_corners(prep.ctx)
    say("damping through the fill: the fill's resonances")
    before = _solution_fills(block, prep, solution.copies)
    network = block_network(block, prep.needs, prep.ctx.supply, before, samples, corners)
    figures = evaluate_network(network, network_goals(
        block, NetworkOptions(droop=False, entrance=False, naive=False)))
    f0, corner, peak = peak_to_damp(figures)
    credit = damping_credit([c.record for c in prep.cells], f0, corner, weight)
    problem = prep.problem.replace(damping=credit)
    say("damping through the fill: solving again")
    obj = block.objective
    damped = solve_fill(problem, obj.mip_rel_gap, obj.time_limit_s)
    after = _solution_fills(block, prep, damped.copies)
    names = tuple(r.name for r in block.region)
    g_before = np.array([fill_conductance(before[n], f, c)
                         for n, f, c in zip(names, f0, corner, strict=True)])
    g_after = np.array([fill_conductance(after[n], f, c)
                        for n, f, c in zip(names, f0, corner, strict=True)])
    info = FillDamping(weight, names, f0, tuple(corner), peak, g_before, g_after)
    return replace(prep, problem=problem), damped, info


def plan_block(block: BlockFile, catalog: Catalog, *, explain: bool = True,
               progress: Progress | None = None,
               network: NetworkOptions | None = FULL_ANALYSIS) -> BlockPlan:
    """Fill the block's gaps from the catalog and report the fill, its budgets, the PDN and,
    with a ``[network]`` table, what the fill does to the supply.

    Parameters
    ----------
    block : BlockFile       a loaded block file (``load_block``)
    catalog : Catalog       an open catalog holding the block's deck
    explain : bool          re-solve with the kind limit and each ESD-safe-only restriction
                            lifted to say what they cost (more solves)
    progress : callable     called with a short stage text before each step
    network : NetworkOptions or None   what to compute about the supply network (None: no
                            network analysis, and no damping through the fill)

    Raises ``PlanError`` (located in the block file) for an unknown deck or corner, a bad
    filter, no usable candidate, a frequency of interest outside the stored sweeps, no fill
    found within the time limit, or a waveform file that cannot be read.
    """
    say = progress or (lambda _text: None)
    prep = prepare_fill(block, catalog, progress)
    obj = block.objective
    analyse = block.network is not None and network is not None
    samples = read_waveforms(block) if analyse else {}
    damping: FillDamping | None = None
    say("solving the fill")
    try:
        solution = solve_fill(prep.problem, obj.mip_rel_gap, obj.time_limit_s)
        if (analyse and network is not None and network.fill_damping
                and block.network is not None and block.network.fill_damping_weight > 0):
            prep, solution, damping = _damp_through_fill(block, prep, solution, samples, say)
        say("finding the binding constraints")
        esd = np.array([c.esd_safe for c in prep.cells])
        useful = prep.problem.useful_cap
        unrestricted = {r: np.ones(len(prep.cells), dtype=bool)
                        for r, region in enumerate(block.region)
                        if region.esd_safe_only and np.any((useful[r] > 0) & ~esd)}
        bindings = explain_fill(prep.problem, solution, unrestricted, obj.mip_rel_gap,
                                obj.time_limit_s, resolve=explain)
    except FillTimeout:
        raise PlanError([block.problem(
            "objective.time_limit_s", "the solver found no fill within the time limit: "
            "raise it, or loosen mip_rel_gap", obj.time_limit_s)]) from None
    say("lumped PDN")
    plan = _assemble(block, prep, solution, bindings, lumped_notes=not analyse)
    if analyse and network is not None:
        fills = {r.name: cell_entries([(c, c.count) for c in r.cells]) for r in plan.regions}
        naive = (densest_fill(block, prep.cells, prep.problem.allowed) if network.naive
                 else [])
        plan = replace(plan, network=analyse_supply(
            block, prep.needs, prep.ctx.supply, fills, network_corners(prep.ctx), naive,
            network, damping, samples, progress))
    return plan


def plan_file(block: str | Path | BlockFile, catalog: str | Path = DEFAULT_CATALOG, *,
              explain: bool = True, network: NetworkOptions | None = FULL_ANALYSIS
              ) -> BlockPlan:
    """``plan_block`` from paths: load the block file, open the catalog (read only), plan.

    The public ``celllab.plan``; ``PlanError``/``CatalogError`` on bad input.
    """
    from celllab.catalog import open_catalog

    loaded = block if isinstance(block, BlockFile) else load_block(block)
    with open_catalog(catalog, create=False) as opened:
        return plan_block(loaded, opened, explain=explain, network=network)


# --------------------------------------------------------------------------- results


def _distribute(layout: _Layout, solution: FillSolution, region: int
                ) -> dict[int, tuple[list[tuple[int, NDArray[np.int64]]], NDArray[np.int64]]]:
    """The region's row copies gap by gap: row class -> (arrangements, copies per cell).

    The solver says how many gaps of each class take each pattern and how many cells of
    each footprint type the region places in rows; here the cells are laid into those gaps
    class by class, so a pattern whose slots are not all used becomes the truncated pattern
    actually laid (``arrangements``: (gaps, cells of each type per gap), empty gaps left out).
    Cells of one type are interchangeable, so they are assigned in name order."""
    demand = np.zeros(len(layout.types), dtype=np.int64)
    for i in np.flatnonzero(layout.cell_type >= 0).tolist():
        demand[layout.cell_type[i]] += solution.row_copies[region, i]
    queues = {t: [[i, int(solution.row_copies[region, i])]
                  for i in np.flatnonzero(layout.cell_type == t).tolist()
                  if solution.row_copies[region, i] > 0] for t in range(len(layout.types))}
    out: dict[int, tuple[list[tuple[int, NDArray[np.int64]]], NDArray[np.int64]]] = {}
    n_cells = solution.copies.shape[1]
    for g, c in enumerate(layout.row_classes):
        if c.region != region:
            continue
        laid: dict[tuple[int, ...], int] = {}
        for p, gaps in enumerate(solution.pattern_counts[g].tolist()):
            a = np.minimum(solution.row_patterns[g][p], demand)
            while gaps > 0 and np.any(a > 0):
                nz = a > 0
                k = min(gaps, int(np.min(demand[nz] // a[nz])))
                if k == 0:
                    k, a = 1, np.minimum(a, demand)
                laid[tuple(a.tolist())] = laid.get(tuple(a.tolist()), 0) + k
                demand -= k * a
                gaps -= k
                a = np.minimum(a, demand)
        copies = np.zeros(n_cells, dtype=np.int64)
        for key, gaps in laid.items():
            for t, per_gap in enumerate(key):
                need = per_gap * gaps
                while need > 0:
                    head = queues[t][0]
                    take = min(need, head[1])
                    copies[head[0]] += take
                    head[1] -= take
                    need -= take
                    if head[1] == 0:
                        queues[t].pop(0)
        out[g] = ([(n, np.array(key)) for key, n in laid.items()], copies)
    return out


def _why_open(block: BlockFile, bindings: list[Binding], solution: FillSolution,
              region: int) -> list[str]:
    """Why area a region could fill stays empty: the limits that bind, or the goal."""
    reasons = [{"leakage": "leakage budget", "oxide": "thin-oxide budget",
                "kinds": "max_kinds"}[b.kind]
               for b in bindings if b.binding and b.kind in ("leakage", "oxide", "kinds")]
    met = solution.shortfall[region] <= 0
    if block.objective.goal == "min_leakage" and met:
        reasons.append("goal min_leakage: the region's target is met, more fill only adds "
                       "leakage")
    return reasons or ["no gain for the goal"]


def _class_fills(block: BlockFile, layout: _Layout, cells: list[Candidate],
                 problem: FillProblem, solution: FillSolution, bindings: list[Binding],
                 region: int, useful: NDArray[np.float64]) -> list[ClassFill]:
    names = [c.name for c in cells]
    cap = np.array([c.cap for c in cells])
    leak = np.array([c.leakage for c in cells])
    area_ox = np.array([c.oxide_area for c in cells])
    cell_area = np.array([c.width_um * c.height_um for c in cells]) * micro**2
    chosen = solution.used
    usable = problem.usable()[region]
    chosen_types = np.zeros(len(layout.types), dtype=bool)
    on = layout.cell_type[chosen & usable & (layout.cell_type >= 0)]
    chosen_types[on] = True
    why = _why_open(block, bindings, solution, region)
    price = {(b.kind, b.index): b.shadow_price for b in bindings}
    per_class = _distribute(layout, solution, region)
    out: list[ClassFill] = []
    spec = block.region[region]
    every = np.ones(len(layout.types), dtype=bool)
    for j, gaps in enumerate(spec.row_gaps):
        members = [g for g, src in enumerate(layout.row_source) if src[:2] == (region, j)]
        copies = np.zeros(len(cells), dtype=np.int64)
        widths: list[WidthFill] = []
        totals = dict.fromkeys(("cap", "geo", "restricted", "kinds", "filled"), 0.0)
        prices = []
        for g in members:
            c = layout.row_classes[g]
            w = gaps.width_sites[layout.row_source[g][2]]
            arrangements, mine = per_class[g]
            copies += mine
            gap_sites = float(w * gaps.height_rows)
            best_all = best_fill(layout.all_patterns[g], layout.type_sites, every)
            best_allowed = best_fill(layout.all_patterns[g], layout.type_sites,
                                     layout.region_types[region])
            best_chosen = best_fill(layout.all_patterns[g], layout.type_sites,
                                    layout.region_types[region] & chosen_types)
            totals["cap"] += c.count * gap_sites
            totals["geo"] += c.count * (gap_sites - best_all)
            totals["restricted"] += c.count * (best_all - best_allowed)
            totals["kinds"] += c.count * (best_allowed - best_chosen)
            sites = float(sum(mine[i] * layout.type_sites[layout.cell_type[i]]
                              for i in np.flatnonzero(mine)))
            totals["filled"] += sites
            patterns = [(n, {f"{layout.types[t][0]}x{layout.types[t][1]}": int(a[t])
                             for t in np.flatnonzero(a)}) for n, a in arrangements]
            widths.append(WidthFill(int(w), c.count, sum(n for n, _ in arrangements),
                                    patterns,
                                    {names[i]: int(mine[i]) for i in np.flatnonzero(mine)}))
            if price.get(("gaps", g)) is not None:
                prices.append(float(price[("gaps", g)]))  # type: ignore[arg-type]
        capacity = totals["cap"] * layout.site_area
        filled = totals["filled"] * layout.site_area
        lost = [totals[k] * layout.site_area for k in ("geo", "restricted", "kinds")]
        left = max(capacity - filled - sum(lost), 0.0)
        out.append(ClassFill(
            region=spec.name, name=gaps.name, role=gaps.role, kind="row",
            height_rows=gaps.height_rows, width_um=None, height_um=None,
            gaps=int(sum(gaps.count)), filled_gaps=sum(wf.filled_gaps for wf in widths),
            cells={names[i]: int(copies[i]) for i in np.flatnonzero(copies)},
            cap=float(copies @ cap), useful_cap=float(copies @ useful[region]),
            leakage=float(copies @ leak), oxide_area=float(copies @ area_ox),
            capacity=capacity, filled=filled, lost_geometry=lost[0], lost_restricted=lost[1],
            lost_kinds=lost[2], left_open=left,
            left_open_because=why if left > 1e-6 * capacity else [],
            space_price=max(prices) if prices else None, widths=widths))
    for j, slots in enumerate(spec.open_slots):
        o = layout.open_source.index((region, j))
        c = layout.open_classes[o]
        used_slots = solution.slot_counts[o]
        copies = used_slots * c.copies
        per_slot = c.copies * cell_area
        slot_area = slots.width_um * slots.height_um * micro**2
        best_all = float(per_slot.max(initial=0.0))
        best_allowed = float((per_slot * usable).max(initial=0.0))
        best_chosen = float((per_slot * (usable & chosen)).max(initial=0.0))
        capacity = c.count * slot_area
        filled = float(copies @ cell_area)
        lost = [c.count * (slot_area - best_all), c.count * (best_all - best_allowed),
                c.count * (best_allowed - best_chosen)]
        left = max(capacity - filled - sum(lost), 0.0)
        out.append(ClassFill(
            region=spec.name, name=slots.name, role=slots.role, kind="open", height_rows=None,
            width_um=slots.width_um, height_um=slots.height_um, gaps=c.count,
            filled_gaps=int(used_slots.sum()),
            cells={names[i]: int(copies[i]) for i in np.flatnonzero(copies)},
            cap=float(copies @ cap), useful_cap=float(copies @ useful[region]),
            leakage=float(copies @ leak), oxide_area=float(copies @ area_ox),
            capacity=capacity, filled=filled, lost_geometry=lost[0], lost_restricted=lost[1],
            lost_kinds=lost[2], left_open=left,
            left_open_because=why if left > 1e-6 * capacity else [],
            space_price=price.get(("slots", o))))
    return out


def _budget_checks(block: BlockFile, cells_problem: FillProblem, solution: FillSolution,
                   bindings: list[Binding], oxide_source: str, failure: float | None,
                   gap_area: float = float("inf")) -> list[BudgetCheck]:
    """The budgets and constraints as the report shows them; ``gap_area``: the block's whole
    gap area, m^2 (gate area cannot exceed it, so a larger oxide limit cannot bind)."""
    names = [r.name for r in block.region]
    out: list[BudgetCheck] = []
    for b in bindings:
        if b.kind == "leakage":
            out.append(BudgetCheck("leakage", policy.LEAKAGE_BUDGET.name, b.used, b.limit,
                                   b.binding, b.shadow_price, gain_in=b.gain_in,
                                   note="each cell at its leakiest corner"))
        elif b.kind == "oxide":
            note = f"limit from {oxide_source}"
            if b.limit is not None and b.limit > gap_area:
                note += (f" ({b.limit / gap_area:.3g}x the block's whole gap area: it cannot "
                         "bind in this block)")
            if failure is not None:
                note += f"; fill failure fraction {failure / micro:.3g} ppm"
            out.append(BudgetCheck("thin-oxide gate area", "geometry (corner independent)",
                                   b.used, b.limit, b.binding, b.shadow_price,
                                   gain_in=b.gain_in, note=note))
        elif b.kind == "kinds":
            out.append(BudgetCheck("distinct kinds", "-", b.used, b.limit, b.binding,
                                   None, b.gain, b.gain_in,
                                   note="" if b.gain is not None else "not re-solved"))
        elif b.kind == "target":
            short = float(solution.shortfall[b.index])
            out.append(BudgetCheck(
                f"target: {names[b.index]}", policy.USEFUL_CAPACITANCE.name, b.used,
                float(cells_problem.target[b.index]), b.binding, b.shadow_price,
                gain_in=b.gain_in,
                note=(f"short by {short / nano:.4g} nF" if short > 0 else "met")))
        elif b.kind == "esd":
            out.append(BudgetCheck(f"ESD-safe-only: {names[b.index]}", "-", 0.0, None,
                                   b.binding, None, b.gain, b.gain_in,
                                   note="gain if the region took every cell"))
    for r, name in enumerate(names):
        mine = [b for b in bindings
                if (b.kind == "gaps" and cells_problem.row_classes[b.index].region == r)
                or (b.kind == "slots" and cells_problem.open_classes[b.index].region == r)]
        if mine:
            priced = [b.shadow_price for b in mine if b.shadow_price is not None]
            out.append(BudgetCheck(
                f"space: {name}", "-", float(sum(b.used for b in mine)),
                float(sum(b.limit for b in mine)), any(b.binding for b in mine),
                max(priced) if priced else None, gain_in=mine[0].gain_in,
                note="gaps and slots of the region; price: most valuable extra gap"))
    return out


def _assemble(block: BlockFile, prep: PreparedFill, solution: FillSolution,
              bindings: list[Binding], lumped_notes: bool = True) -> BlockPlan:
    """The plan's results; ``lumped_notes`` adds the notes on the lumped PDN figures (left
    out when the supply network stands in for them)."""
    ctx, cells, problem, layout = prep.ctx, prep.cells, prep.problem, prep.layout
    needs, useful_corner, mission = prep.needs, prep.useful_corner, prep.mission
    oxide_limit, oxide_source, excluded = prep.oxide_limit, prep.oxide_source, prep.excluded
    b = block.block
    supply = ctx.supply
    oxide = ctx.thin_oxide if mission else None
    useful = problem.useful_cap
    regions: list[RegionFill] = []
    for r, spec in enumerate(block.region):
        uses = []
        for i in np.flatnonzero(solution.copies[r]).tolist():
            c = cells[i]
            uses.append(CellUse(
                name=c.name, cell_hash=c.cell_hash, topology=c.topology, oxide=c.oxide,
                esd_safe=c.esd_safe, width_sites=c.width_sites, height_rows=c.height_rows,
                width_um=c.width_um, height_um=c.height_um,
                count=int(solution.copies[r, i]), in_rows=int(solution.row_copies[r, i]),
                in_open=int(solution.copies[r, i] - solution.row_copies[r, i]), cap=c.cap,
                useful_cap=float(useful[r, i]), useful_corner=useful_corner[r][i],
                leakage=c.leakage, oxide_area=c.oxide_area, z_corner=c.pdn_corner,
                record=c.record))
        area = float(sum(u.count * u.oxide_area for u in uses))
        regions.append(RegionFill(
            name=spec.name, esd_safe_only=spec.esd_safe_only, quiet=spec.quiet,
            weight=spec.weight, need=needs[r], cells=uses,
            classes=_class_fills(block, layout, cells, problem, solution, bindings, r, useful),
            shortfall=float(solution.shortfall[r]),
            failure_fraction=(oxide_failure_fraction(ctx.deck, oxide, mission, area)
                              if oxide is not None else None)))
    total = solution.copies.sum(axis=0)
    total_area = float(total @ problem.oxide_area)
    failure = oxide_failure_fraction(ctx.deck, oxide, mission, total_area) if oxide is not None else None
    gap_area = sum(cf.capacity for region in regions for cf in region.classes)
    budgets = _budget_checks(block, problem, solution, bindings, oxide_source, failure, gap_area)
    corner_totals = [CornerTotals(name, float(np.nansum(total * [c.corner_cap[k] for c in cells])),
                                  float(np.nansum(total * [c.corner_leakage[k] for c in cells])))
                     for k, name in enumerate(ctx.corners)]
    chosen = [ChosenCell(name=c.name, topology=c.topology, oxide=c.oxide, count=int(total[i]),
                         width_sites=c.width_sites, height_rows=c.height_rows, cap=c.cap,
                         leakage=c.leakage, esr=c.esr, bandwidth=c.bandwidth,
                         z_corner=c.pdn_corner, bandwidth_is_bound=c.bandwidth_is_bound)
              for i, c in enumerate(cells) if total[i] > 0]
    notes: list[str] = []
    for i in np.flatnonzero(total).tolist():
        c = cells[i]
        supply_c = c.record.corner(c.pdn_corner).supply_V
        if abs(supply_c - supply) > SUPPLY_NOTE_FRACTION * supply:
            notes.append(f"{c.name} was characterized at {supply_c:g} V, the block runs at "
                         f"{supply:g} V: its cap and leakage are at that supply")

    fill_cap = float(total @ np.array([c.cap for c in cells]))
    clock = b.clock_GHz * giga
    switched = float(pdn.switched_capacitance(b.switching_power_W, supply, clock))
    intrinsic = float(pdn.intrinsic_decap(b.switching_power_W, supply, clock, b.activity))
    l_pkg, r_pkg = b.package_inductance_nH * nano, b.package_resistance_mohm * milli
    die = figures = None
    if fill_cap + intrinsic > 0:
        responses = [cells[i].record.corner(cells[i].pdn_corner).response
                     for i in np.flatnonzero(total).tolist()]
        die = die_network(responses, total[total > 0], intrinsic)
        figures = pdn_figures(die, fill_cap + intrinsic, l_pkg, r_pkg, supply,
                              b.ripple_fraction, b.current_step_A)
        for c in chosen if lumped_notes else []:
            # a bandwidth stored only as a lower bound below f0 says nothing about f0
            if np.isfinite(c.bandwidth) and c.bandwidth < figures.f0 and not c.bandwidth_is_bound:
                notes.append(f"{c.name}: bandwidth {c.bandwidth / 1e6:.3g} MHz is below the "
                             f"package resonance {figures.f0 / 1e6:.3g} MHz, so it decouples "
                             "less there than its cap_fF says (the swept |Z| includes this)")
        if intrinsic > 0 and lumped_notes:
            notes.append("the intrinsic decap is an ideal capacitor (its series resistance "
                         "through the logic is not modelled), so the peak |Z| leans "
                         "pessimistic")
        if lumped_notes:
            notes.append("|Z| below the target at every swept frequency does not bound the "
                         "worst-case supply noise when Z(f) has peaks (use the full profile)")
    elif lumped_notes:
        notes.append("no fill and activity = 1 (no intrinsic decap): the die has no "
                     "capacitance, so there are no PDN figures")
    for r in regions:
        if r.shortfall > 0:
            notes.append(f"region {r.name}: target {r.need.target / nano:.4g} nF not reached "
                         f"within the budgets (short by {r.shortfall / nano:.4g} nF)")
    if any(g.height_rows >= 3 for s in block.region for g in s.row_gaps):
        notes.append("gaps of 3 rows or more are packed in bands (cells of different heights "
                     "do not interleave across bands)")
    if not solution.optimal:
        notes.append("the solver stopped at its time limit: the fill is the best found, not "
                     "proven optimal")
    if oxide is None:
        notes.append("no [budgets.wearout] mission: oxide failure fractions are not computed")
    return BlockPlan(
        block_name=b.name, deck=b.deck, corner=ctx.corner, supply=supply,
        goal=block.objective.goal, n_candidates=len(cells), excluded=excluded,
        regions=regions, budgets=budgets, corner_totals=corner_totals, cells=chosen,
        optimal=solution.optimal, mip_gap=solution.mip_gap,
        solve_seconds=solution.solve_seconds, oxide_limit=oxide_limit,
        failure_fraction=failure, fill_capacitance=fill_cap, intrinsic_capacitance=intrinsic,
        switched_capacitance=switched, l_pkg=l_pkg, r_pkg=r_pkg,
        current_step=b.current_step_A, ripple_fraction=b.ripple_fraction, die=die,
        pdn=figures, notes=notes)
