"""Choosing the fill: integer counts of decap cells per gap class and region, as a mixed-integer
linear program solved by ``scipy.optimize.milp`` (HiGHS) (SI: F, A, m^2; counts are integers).

Data: regions r, cells i, footprint types t (width x height; ``packing``), in-row gap classes
g of region r(g) with N_g gaps and patterns p (a_{p,t} cells of type t per gap), open-slot
classes o of region r(o) with N_o slots holding k_{o,i} copies of cell i each (one kind per
slot). Per cell: leakage I_i (at the leakage corner), thin-oxide gate area A_i; per region
and cell: useful capacitance C_{r,i} (C_eff at the region's frequency of interest).

Variables (all integer except the shortfalls)::

    x_{g,p} in [0, N_g]     gaps of class g packed with pattern p
    n_{r,i} in [0, U_ri]    copies of cell i in the row gaps of region r
    s_{o,i} in [0, N_o]     slots of class o filled with cell i
    y_i in {0, 1}           cell i is used somewhere
    copies_{r,i} = n_{r,i} + sum_{o in r} k_{o,i} s_{o,i}

Constraints::

    sum_p x_{g,p} <= N_g                                 (gaps of each class)
    sum_i s_{o,i} <= N_o                                 (slots of each class)
    sum_{i of type t} n_{r,i} <= sum_{g in r, p} a_{p,t} x_{g,p}   (room of type t in r)
    n_{r,i} <= R_{r,t(i)} y_i,  s_{o,i} <= N_o y_i       (big M from exact bounds: R_{r,t} is
                                                          the most cells of type t the row
                                                          gaps of region r hold)
    sum_i y_i <= K                                       (distinct kinds)
    sum_{r,i} I_i copies_{r,i} <= I_max                  (leakage at the leakage corner)
    sum_{r,i} A_i copies_{r,i} <= A_max                  (thin-oxide gate area)
    sum_i C_{r,i} copies_{r,i} >= T_r                    (region targets)
    copies_{r,i} = 0 for cells a region may not take (ESD-safe-only regions, no fit)

Objective: ``max_useful_cap`` maximizes sum_r w_r sum_i (C_{r,i} + D_{r,i}) copies_{r,i},
D_{r,i} >= 0 an optional damping credit (F per copy: the cell's damping of region r's worst
resonance, ``fill_damping``; 0 without it); ``min_leakage`` minimizes sum I_i copies_{r,i}
(targets must then be met). When the targets
cannot all be met within the budgets, a first solve minimizes the total relative shortfall
sum_r (T_r - C_r)^+ / T_r; the targets are then lowered to what that solve reached and the
chosen objective is solved under them (the shortfall is reported).

Dominated cells are dropped first, which keeps the optimum: if cell j has the same footprint
as cell i (same type in the rows, the same copies in every open slot), may go wherever i may,
gives at least i's useful capacitance and damping credit in every region and leaks and wears
no more, then
replacing every copy of i by a copy of j keeps every constraint (no more kinds, leakage or
oxide area, no less capacitance toward any target) and does not worsen either goal. Of
identical cells the first is kept. Found by one sorted sweep per footprint
(``undominated_cells``).

Rows are scaled (HiGHS checks rows to an absolute tolerance and ignores tiny coefficients):
gap, slot and link rows by their counts, budget and target rows by their largest coefficient
(``fill_model``). The rounded solution is re-checked exactly and, if a rounded count
overshoots a budget (possible only within the tolerance), re-solved with that budget
tightened.

Solving: a model of at most ``DIRECT_LIMIT`` variables, or one whose kind limit cannot bind,
goes to HiGHS branch and bound as it is. A larger one first gets its LP relaxation (a bound
on every fill), then its kind relaxation: the same model with only the y_i integer (counts
continuous), by HiGHS through ``highspy`` (``fill_model.run_kinds``) with the incumbent's kinds
(or the K kinds the LP uses most) as its start, for at most ``_KIND_RELAX_SHARE`` of the time
left. It is a relaxation of the fill MILP, so its proven bound bounds every fill, and it is far
tighter than the LP (the LP lets a cell at y = 0.1 give a tenth of its room, the kind
relaxation does not). Its kinds (or, if it ends without any, those of the LP-guided search of
``kinds``) make the restricted fill (patterns projected onto their footprints), rounded from
its LP (rounded down, a target the rounding just missed topped up) and, while that is further
than the requested gap from the bound, solved by HiGHS. With that exact run done, the kind
relaxation with the row sum_{i not in S} y_i >= 1 bounds every fill using a cell outside the
chosen S; the lower of it and the exact run's bound bounds every fill. While the certified gap
is above the requested one and at least ``_FULL_RUN_LPS`` LP times remain, the full model goes
to HiGHS as well and the better fill is kept.

A fill found is never dropped for lack of time: the least-shortfall solve starts from the
empty fill, the goal solve under the lowered targets from the least-shortfall fill (the
targets are lowered to exactly what it reached, so it meets them), and a HiGHS run that ends
without a fill leaves the best one found so far. ``FillTimeout`` is raised only when the
targets are reachable (the LP says so) and no fill meeting them was found in time. The
least-shortfall solve gets at most ``SHORTFALL_SHARE`` of the time, the goal solve the rest.
``FillSolution.mip_gap`` is the certified gap (with lowered targets, the larger of the two
solves' gaps, each relative to its own LP or branch-and-bound bound).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from celllab.planner.fill_model import (
    BUDGET_TOLERANCE,
    Counts,
    build_model,
    excluding_subsets,
    extract,
    round_down,
    run_kinds,
    run_model,
    top_up,
    violations,
)
from celllab.planner.kinds import choose_kinds
from celllab.planner.packing import undominated_patterns

__all__ = [
    "BUDGET_TOLERANCE",
    "FillProblem",
    "FillSolution",
    "OpenClass",
    "RowClass",
    "DIRECT_LIMIT",
    "SHORTFALL_SHARE",
    "FillTimeout",
    "goal_value",
    "relaxation_seconds",
    "solve_fill",
    "undominated_cells",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
Goal = Literal["max_useful_cap", "min_leakage"]

#: Models with more variables than this, and a kind limit that can bind, choose their kinds by
#: the LP-guided search of ``kinds`` before the exact solve; smaller ones go to HiGHS directly.
DIRECT_LIMIT = 2500
#: A further HiGHS run is started only with at least this much of the time limit left, s.
_MIN_RUN_S = 0.1
#: Share of the time left that the LP-guided kind search may take (when the kind relaxation
#: ends without a choice of kinds).
_KIND_SHARE = 0.3
#: Share of the time left that the kind relaxation (y_i integer, counts continuous) may take.
_KIND_RELAX_SHARE = 0.85
#: The same share when no fill is known yet (the restricted solve must still find one).
_KIND_RELAX_SHARE_NO_FILL = 0.35
#: The kind relaxation stops at this fraction of the requested gap (the counts' rounding and
#: the integer patterns take the rest).
_KIND_RELAX_GAP = 0.5
#: The full model goes to HiGHS only with at least this many LP solve times left: its root
#: work (presolve, cuts, heuristics) does not stop at the time limit (the bench's main case
#: ran up to 1.7 s past a 0.8 s limit with LP solves of 0.05-0.1 s; measured, no source).
_FULL_RUN_LPS = 25
#: Where the targets cannot all be met, the least-shortfall solve gets at most this share of
#: the time left; the goal solve under the reached targets gets the rest.
SHORTFALL_SHARE = 0.5


@dataclass(frozen=True)
class RowClass:
    """In-row gaps of one width and height in one region: ``count`` gaps; ``patterns``
    (n_patterns, n_types) cells of each footprint type one gap holds."""

    region: int
    count: int
    patterns: IntArray


@dataclass(frozen=True)
class OpenClass:
    """Open slots of one outline in one region: ``count`` slots; ``copies`` (n_cells,) copies
    of each cell one slot holds (0: does not fit)."""

    region: int
    count: int
    copies: IntArray


@dataclass(frozen=True)
class FillProblem:
    """Everything the optimizer needs, in SI.

    useful_cap : (n_regions, n_cells) F     C_eff of one copy at the region's frequency
    allowed : (n_regions, n_cells) bool     the region may take the cell (ESD, placement)
    weight : (n_regions,)                   objective weight of each region
    target : (n_regions,) F                 useful capacitance each region must reach (0: none)
    cell_type : (n_cells,) int              footprint type index for row gaps, -1: none
    leakage : (n_cells,) A                  per copy, at the leakage corner
    oxide_area : (n_cells,) m^2             thin-oxide gate area per copy
    row_classes, open_classes               the gap classes
    leakage_budget, oxide_budget            A, m^2 (inf: no limit)
    max_kinds : int                         distinct cells, >= 1
    goal : "max_useful_cap" | "min_leakage"
    damping : (n_regions, n_cells) F or None   damping credit of one copy in the
                                            max_useful_cap objective (None: none)
    """

    useful_cap: FloatArray
    allowed: BoolArray
    weight: FloatArray
    target: FloatArray
    cell_type: IntArray
    leakage: FloatArray
    oxide_area: FloatArray
    row_classes: list[RowClass]
    open_classes: list[OpenClass]
    leakage_budget: float = float("inf")
    oxide_budget: float = float("inf")
    max_kinds: int = 3
    goal: Goal = "max_useful_cap"
    damping: FloatArray | None = None

    @property
    def n_regions(self) -> int:
        return int(self.useful_cap.shape[0])

    @property
    def n_cells(self) -> int:
        return int(self.useful_cap.shape[1])

    @property
    def n_types(self) -> int:
        shapes = [c.patterns.shape[1] for c in self.row_classes]
        return max([int(self.cell_type.max(initial=-1)) + 1, *shapes])

    def usable(self) -> BoolArray:
        """(n_regions, n_cells): allowed and worth placing (C_eff > 0 at the region)."""
        return np.asarray(self.allowed & (self.useful_cap > 0))

    def credit(self) -> FloatArray:
        """(n_regions, n_cells) damping credit per copy, F (zeros without one)."""
        if self.damping is None:
            return np.zeros_like(self.useful_cap)
        return np.asarray(self.damping, dtype=float)

    def worth(self) -> FloatArray:
        """(n_regions, n_cells) what one copy adds to the max_useful_cap objective before the
        region weight: useful capacitance plus damping credit, F."""
        return np.asarray(self.useful_cap + self.credit())

    def replace(self, **changes: object) -> FillProblem:
        from dataclasses import replace

        return replace(self, **changes)  # type: ignore[arg-type]


@dataclass(frozen=True)
class FillSolution:
    """Integer fill and what it adds up to (SI).

    pattern_counts : per row class, (n_patterns,) gaps packed with each pattern of
                     ``row_patterns`` (the class's patterns, or their projection onto the
                     chosen kinds' footprints when the kinds were searched first)
    slot_counts : per open class, (n_cells,) slots filled with each cell
    row_copies, copies : (n_regions, n_cells) copies in row gaps / in all gaps
    shortfall : (n_regions,) F target not reached (0 where met or no target)
    optimal : proven optimal within ``mip_gap``; ``status`` the solver's message
    """

    pattern_counts: list[IntArray]
    slot_counts: list[IntArray]
    row_copies: IntArray
    copies: IntArray
    shortfall: FloatArray
    optimal: bool
    status: str
    mip_gap: float
    solve_seconds: float
    lowered_targets: FloatArray = field(default_factory=lambda: np.zeros(0))
    row_patterns: list[IntArray] = field(default_factory=list)

    @property
    def used(self) -> BoolArray:
        return np.asarray(self.copies.sum(axis=0) > 0)


def undominated_cells(p: FillProblem) -> BoolArray:
    """(n_cells,) mask of cells that no other cell of the same footprint dominates (see the
    module docstring). Compared only within groups of one footprint.

    One sweep per group in the order (leakage, oxide area, -total C, -total credit,
    -regions allowed, index): a cell that dominates another comes before it in this order
    (componentwise no worse means no worse sums; on equal sums the figures are equal and the
    index decides), and dominance is transitive, so each cell is compared only with the cells
    kept before it (time n x kept, memory kept x regions, no n x n matrix)."""
    usable = p.usable()
    copies = (np.stack([c.copies for c in p.open_classes], axis=0) if p.open_classes
              else np.zeros((0, p.n_cells), dtype=np.int64))
    keep = usable.any(axis=0)
    groups: dict[tuple[int, ...], list[int]] = {}
    for i in np.flatnonzero(keep).tolist():
        groups.setdefault((int(p.cell_type[i]), *copies[:, i].tolist()), []).append(i)
    cap = np.where(usable, p.useful_cap, 0.0)
    damp = np.where(usable, p.credit(), 0.0)
    # per cell, figures where larger is better: allowed, C and credit per region, -leak, -area
    better_up = np.concatenate([usable.astype(float), cap, damp, -p.leakage[None, :],
                                -p.oxide_area[None, :]], axis=0).T
    for members in groups.values():
        if len(members) < 2:
            continue
        m = np.array(members)
        order = np.lexsort((m, -usable[:, m].sum(axis=0), -damp[:, m].sum(axis=0),
                            -cap[:, m].sum(axis=0), p.oxide_area[m], p.leakage[m]))
        kept = np.empty((m.size, better_up.shape[1]))
        n_kept = 0
        for i in m[order].tolist():
            if np.any(np.all(kept[:n_kept] >= better_up[i], axis=1)):
                keep[i] = False
            else:
                kept[n_kept] = better_up[i]
                n_kept += 1
    return np.asarray(keep)


class FillTimeout(RuntimeError):
    """The time limit passed before any fill meeting the constraints was found."""


def _restrict(p: FillProblem, cells: set[int]) -> FillProblem:
    """The problem with only ``cells`` available; patterns projected onto their footprints
    (duplicates and dominated projections dropped)."""
    mask = np.zeros(p.n_cells, dtype=bool)
    mask[sorted(cells)] = True
    types = np.zeros(p.n_types, dtype=bool)
    types[p.cell_type[mask & (p.cell_type >= 0)]] = True
    rows = [RowClass(c.region, c.count,
                     undominated_patterns(c.patterns * types[None, :c.patterns.shape[1]]))
            for c in p.row_classes]
    return p.replace(allowed=p.allowed & mask[None, :], row_classes=rows)


@dataclass(frozen=True)
class _Found:
    problem: FillProblem
    counts: Counts
    value: float          # natural units, minimized
    bound: float          # a lower bound on the value of every fill (natural units)
    status: int
    message: str

    @property
    def gap(self) -> float:
        return max(self.value - self.bound, 0.0) / max(abs(self.value), np.finfo(float).tiny)


def _natural(p: FillProblem, counts: Counts, phase: str) -> float:
    """The minimized figure of a fill in natural units: -sum w C (F), the leakage (A), or
    the total relative target shortfall."""
    if phase == "shortfall":
        reached = np.sum(counts.copies * p.useful_cap, axis=1)
        short = np.where(p.target > 0, np.maximum(p.target - reached, 0.0), 0.0)
        return float(np.sum(short / np.where(p.target > 0, p.target, 1.0)))
    return -goal_value(p, counts.copies) if p.goal == "max_useful_cap" else goal_value(
        p, counts.copies)


def _exact(p: FillProblem, targets: FloatArray, mode: Literal["hard", "elastic"],
           phase: Literal["goal", "shortfall"], mip_rel_gap: float, deadline: float
           ) -> _Found | None:
    """HiGHS on the whole model; rounding re-checked, budgets tightened on an overshoot.
    None when infeasible."""
    leak_limit, oxide_limit = p.leakage_budget, p.oxide_budget
    target_levels = targets.copy()
    scale = np.where(targets > 0, targets, 1.0)
    for _ in range(4):
        model = build_model(p, target_levels, mode, phase, leak_limit, oxide_limit, scale)
        raw = run_model(model, mip_rel_gap, deadline - time.perf_counter())
        if raw.values is None:
            if raw.status == 2:
                return None
            if raw.status == 1:
                raise FillTimeout(raw.message)
            raise RuntimeError(f"fill optimization failed: {raw.message}")
        counts = extract(raw)
        bad = violations(p, counts, _checked_targets(targets, target_levels, counts, mode))
        if not bad:
            value = _natural(p, counts, phase)
            bound = value - raw.mip_gap * abs(value) if raw.status == 0 else (
                value - max(raw.mip_gap, 0.0) * abs(value))
            return _Found(p, counts, value, bound, raw.status, raw.message)
        if "leakage" in bad:
            leak_limit = p.leakage_budget * (1 - 2 * bad["leakage"] - BUDGET_TOLERANCE)
        if "oxide" in bad:
            oxide_limit = p.oxide_budget * (1 - 2 * bad["oxide"] - BUDGET_TOLERANCE)
        if "target" in bad:
            target_levels = target_levels * (1 + 1e-7)
        if set(bad) - {"leakage", "oxide", "target"}:
            raise RuntimeError(f"fill optimization returned an infeasible rounding: {bad}")
    raise RuntimeError("fill optimization could not meet the budgets after rounding")


def _checked_targets(targets: FloatArray, levels: FloatArray, counts: Counts,
                     mode: str) -> FloatArray:
    """Targets a fill must meet exactly: none in the elastic (shortfall) solve."""
    if mode == "elastic":
        return np.zeros_like(levels)
    return levels


def _empty(p: FillProblem) -> Counts:
    """The fill that places nothing (meets every budget; the elastic solve's first fill)."""
    zero = np.zeros((p.n_regions, p.n_cells), dtype=np.int64)
    return Counts([np.zeros(c.patterns.shape[0], dtype=np.int64) for c in p.row_classes],
                  [np.zeros(p.n_cells, dtype=np.int64) for _ in p.open_classes], zero,
                  zero.copy(), np.zeros(p.n_regions))


def _kept(p: FillProblem, incumbent: _Found | None, targets: FloatArray,
          mode: Literal["hard", "elastic"], phase: Literal["goal", "shortfall"],
          bound: float) -> _Found | None:
    """A fill handed in from an earlier solve, valued for this one (None when it does not
    meet this solve's targets and budgets)."""
    if incumbent is None:
        return None
    checked = _checked_targets(targets, targets, incumbent.counts, mode)
    if violations(incumbent.problem, incumbent.counts, checked):
        return None
    return _Found(incumbent.problem, incumbent.counts,
                  _natural(p, incumbent.counts, phase), bound, 0, incumbent.message)


def _better(found: _Found | None, other: _Found | None) -> _Found | None:
    """The fill of lower value (the first on a tie); None only when both are."""
    if other is None or (found is not None and found.value <= other.value):
        return found
    return other


def _with_bound(found: _Found, bound: float) -> _Found:
    return _Found(found.problem, found.counts, found.value, max(found.bound, bound),
                  found.status, found.message)


def _solve_goal(p: FillProblem, targets: FloatArray, mode: Literal["hard", "elastic"],
                phase: Literal["goal", "shortfall"], mip_rel_gap: float, deadline: float,
                incumbent: _Found | None = None) -> _Found | None:
    """One solve by the strategy of the module docstring. None when infeasible.

    ``incumbent`` is a fill already known (from an earlier phase); it is kept whenever no
    better one is found in time, so a solve that has one never ends in ``FillTimeout``."""
    scale = np.where(targets > 0, targets, 1.0)
    model = build_model(p, targets, mode, phase, p.leakage_budget, p.oxide_budget, scale)
    usable_cells = int(np.count_nonzero(p.usable().any(axis=0)))
    if model.n_vars <= DIRECT_LIMIT or usable_cells <= p.max_kinds:
        try:
            return _exact(p, targets, mode, phase, mip_rel_gap, deadline)
        except FillTimeout:
            relaxed = run_model(model, 0.0, max(deadline - time.perf_counter(), _MIN_RUN_S),
                                relax=True)
            bound = relaxed.objective if relaxed.values is not None else -np.inf
            kept = _kept(p, incumbent, targets, mode, phase, bound)
            if kept is None:
                raise
            return kept
    lp_start = time.perf_counter()
    # the bound comes first, even past the deadline (one LP: a fraction of any limit)
    first = run_model(model, 0.0, max(deadline - lp_start, _MIN_RUN_S), relax=True)
    lp_seconds = time.perf_counter() - lp_start
    if first.values is None:
        if first.status == 2:
            return None
        return _exact(p, targets, mode, phase, mip_rel_gap, deadline)
    bound = first.objective
    found = _kept(p, incumbent, targets, mode, phase, bound)
    # the kind relaxation: y_i integer, counts continuous; its proven bound bounds every fill
    left = max(deadline - time.perf_counter(), 0.0)
    lp_y = {i: float(first.values[col]) for i, col in model.y_index.items()}
    start = (set(np.flatnonzero(found.counts.copies.sum(axis=0) > 0).tolist())
             if found is not None else set())
    if not start:  # no incumbent kinds: the K kinds the LP uses most
        start = set(sorted(lp_y, key=lambda i: -lp_y[i])[:p.max_kinds])
    # without a fill yet, the restricted solve after it needs time of its own to find one
    share = _KIND_RELAX_SHARE if found is not None else _KIND_RELAX_SHARE_NO_FILL
    kinds_run = run_kinds(model, mip_rel_gap * _KIND_RELAX_GAP, max(share * left, _MIN_RUN_S), start)
    if kinds_run.status == 2 and found is None:
        return None  # no choice of kinds is feasible even with fractional counts
    bound = max(bound, kinds_run.dual_bound)
    if kinds_run.values is not None:
        cells = {i for i, col in model.y_index.items() if kinds_run.values[col] > 0.5}
    else:
        left = max(deadline - time.perf_counter(), 0.0)
        cells, _ = choose_kinds(model, first, time.perf_counter() + _KIND_SHARE * left)
    if len(cells) > p.max_kinds or not cells:  # no K kinds found: the incumbent's kinds
        if found is not None:
            cells = set(np.flatnonzero(found.counts.copies.sum(axis=0) > 0).tolist())
        else:
            y = {i: float(first.values[col]) for i, col in model.y_index.items()}
            cells = set(sorted(y, key=lambda i: -y[i])[:p.max_kinds])
    sub = _restrict(p, cells)
    sub_model = build_model(sub, targets, mode, phase, p.leakage_budget, p.oxide_budget, scale)
    relaxed = run_model(sub_model, 0.0, max(deadline - time.perf_counter(), _MIN_RUN_S),
                        relax=True)
    sub_bound = relaxed.objective if relaxed.values is not None else bound
    if relaxed.values is not None:
        counts = round_down(relaxed)
        if np.any(targets > 0):
            counts = top_up(sub, counts, targets)
        if not violations(sub, counts, _checked_targets(targets, targets, counts, mode)):
            found = _better(found, _Found(sub, counts, _natural(p, counts, phase), bound, 0,
                                          "kinds from the kind relaxation, LP rounded down"))

    def worth_a_run(best_possible: float, lps: float) -> bool:
        """Another HiGHS run may pay: no fill yet, or one that could still gain more than
        the gap, with time left for at least ``lps`` LP solves."""
        if found is None:
            return True
        gain = (found.value - best_possible) / max(abs(found.value), np.finfo(float).tiny)
        left = deadline - time.perf_counter()
        return gain > mip_rel_gap and left > max(_MIN_RUN_S, lps * lp_seconds)

    exact = None
    if relaxed.values is not None and worth_a_run(max(sub_bound, bound), 3):
        try:
            exact = _exact(sub, targets, mode, phase, mip_rel_gap, deadline)
        except FillTimeout:
            exact = None
        if exact is not None:
            found = _better(found, _Found(sub, exact.counts, exact.value, bound, exact.status,
                                          "kinds from the kind relaxation; " + exact.message))
    # fills of those kinds are bounded by the exact run; every other choice of kinds by the
    # kind relaxation without them: the lower of the two bounds every fill
    if (exact is not None and kinds_run.values is not None and found is not None
            and worth_a_run(bound, 3)):
        others = run_kinds(excluding_subsets(model, cells), mip_rel_gap * _KIND_RELAX_GAP,
                           max(deadline - time.perf_counter(), _MIN_RUN_S))
        other_bound = np.inf if others.status == 2 else others.dual_bound
        bound = max(bound, min(exact.bound, other_bound))
    if found is not None:
        found = _with_bound(found, bound)
    if worth_a_run(bound, _FULL_RUN_LPS):
        try:
            full = _exact(p, targets, mode, phase, mip_rel_gap, deadline)
        except FillTimeout:
            if found is None:
                raise
            full = None
        if full is not None:
            found = _better(found, full)
            assert found is not None
            found = _with_bound(found, full.bound)
    if found is None:  # the LP is feasible, so a fill exists: the time ran out first
        raise FillTimeout("no fill found within the time limit")
    return found


def solve_fill(problem: FillProblem, mip_rel_gap: float = 5e-3,
               time_limit: float = 60.0) -> FillSolution:
    """Solve the fill MILP (see the module docstring).

    Parameters
    ----------
    problem : FillProblem
    mip_rel_gap : float   relative gap to the best bound at which the search stops
    time_limit : float    seconds for the whole solve (each phase gets what is left; where
                          the targets cannot all be met, the least-shortfall solve gets at
                          most ``SHORTFALL_SHARE`` of it)

    Returns
    -------
    FillSolution   integer counts meeting every budget; where the region targets cannot all
                   be met, ``shortfall`` says by how much (the fill is then the least-shortfall
                   one found, best by the goal among those); ``mip_gap`` is the larger of the
                   two solves' certified gaps; ``optimal`` when it is within ``mip_rel_gap``

    Raises
    ------
    FillTimeout   only when the time ran out before any fill meeting the hard targets was
                  found (never once the targets are known to be out of reach: the
                  least-shortfall fill is kept then)
    """
    t0 = time.perf_counter()
    deadline = t0 + time_limit
    keep = undominated_cells(problem)
    p = problem.replace(allowed=problem.allowed & keep[None, :])
    targets = np.asarray(p.target, dtype=float)
    lowered = targets.copy()
    found = _solve_goal(p, targets, "hard", "goal", mip_rel_gap, deadline)
    gap = found.gap if found is not None else 0.0
    if found is None:  # the targets cannot all be met: least relative shortfall first
        nothing = _empty(p)
        empty = _Found(p, nothing, _natural(p, nothing, "shortfall"), 0.0, 0, "nothing placed")
        share = time.perf_counter() + SHORTFALL_SHARE * max(deadline - time.perf_counter(), 0)
        first = _solve_goal(p, targets, "elastic", "shortfall", mip_rel_gap, share,
                            incumbent=empty)
        assert first is not None  # the empty fill is always feasible here
        reached = np.sum(first.counts.copies * p.useful_cap, axis=1)
        # the goal solve keeps what this fill reached, so the fill itself meets it
        lowered = np.minimum(targets, reached)
        found = _solve_goal(p, lowered, "hard", "goal", mip_rel_gap, deadline,
                            incumbent=first)
        if found is None:  # numerically at the edge: keep the least-shortfall fill
            found = first
        gap = max(first.gap, found.gap)
    counts = found.counts
    reached = np.sum(counts.copies * p.useful_cap, axis=1)
    shortfall = np.where(reached < targets * (1 - 1e-6), targets - reached, 0.0)
    return FillSolution(
        pattern_counts=counts.patterns, slot_counts=counts.slots, row_copies=counts.row_copies,
        copies=counts.copies, shortfall=shortfall, optimal=gap <= mip_rel_gap * (1 + 1e-9),
        status=found.message, mip_gap=gap, solve_seconds=time.perf_counter() - t0,
        lowered_targets=lowered, row_patterns=[c.patterns for c in found.problem.row_classes])


def goal_value(problem: FillProblem, copies: IntArray) -> float:
    """The goal's figure of a fill: sum_r w_r (C_r + D_r) (F: useful capacitance plus any
    damping credit) or the total leakage (A)."""
    if problem.goal == "max_useful_cap":
        return float(np.sum(problem.weight * np.sum(copies * problem.worth(), axis=1)))
    return float(np.sum(copies @ problem.leakage))


def relaxation_seconds(problem: FillProblem, time_limit: float = 60.0) -> float:
    """Time to build and solve the LP relaxation of the whole fill model, s: the benchmark's
    reference."""
    targets = np.asarray(problem.target, dtype=float)
    t0 = time.perf_counter()
    model = build_model(problem, targets, "hard", "goal", problem.leakage_budget,
                        problem.oxide_budget, np.where(targets > 0, targets, 1.0))
    run_model(model, 0.0, time_limit, relax=True)
    return time.perf_counter() - t0
