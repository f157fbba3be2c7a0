"""The fill MILP as matrices: variable layout, scaled rows, one HiGHS run, the integer fill
read back and checked exactly (SI; see ``fill`` for the formulation)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np
from numpy.typing import NDArray
from scipy import sparse
from scipy.optimize import Bounds, LinearConstraint, milp

if TYPE_CHECKING:
    from celllab.planner.fill import FillProblem

__all__ = [
    "BUDGET_TOLERANCE",
    "Counts",
    "Model",
    "Raw",
    "Rows",
    "build_model",
    "excluding_subsets",
    "extract",
    "run_kinds",
    "run_model",
    "type_room",
    "violations",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Budgets and targets are met to this relative tolerance after rounding.
BUDGET_TOLERANCE = 1e-9


@dataclass(frozen=True)
class Counts:
    """An integer fill: gaps per pattern of each row class, slots per cell of each open
    class, copies per region and cell (in rows / in all gaps), relative target shortfalls."""

    patterns: list[IntArray]
    slots: list[IntArray]
    row_copies: IntArray
    copies: IntArray
    shortfall: FloatArray


@dataclass
class Rows:
    """Constraint rows gathered block by block (COO), each block remembered by name."""

    n_vars: int
    rows: list[int] = field(default_factory=list)
    cols: list[int] = field(default_factory=list)
    vals: list[float] = field(default_factory=list)
    lower: list[float] = field(default_factory=list)
    upper: list[float] = field(default_factory=list)
    scale: list[float] = field(default_factory=list)
    named: dict[str, int] = field(default_factory=dict)

    def add(self, name: str, cols: NDArray[np.int64], vals: FloatArray, lo: float,
            hi: float, scale: float = 1.0) -> int:
        """Add one row lo <= vals . v[cols] <= hi; ``scale`` is the factor the row in natural
        units was divided by."""
        row = len(self.lower)
        self.rows += [row] * len(cols)
        self.cols += np.asarray(cols).tolist()
        self.vals += np.asarray(vals, dtype=float).tolist()
        self.lower.append(lo)
        self.upper.append(hi)
        self.scale.append(scale)
        self.named[name] = row
        return row

    def matrix(self) -> sparse.csr_array:
        return sparse.csr_array((self.vals, (self.rows, self.cols)),
                                shape=(len(self.lower), self.n_vars))


@dataclass
class Model:
    """Variable layout and constraint rows of one solve."""

    problem: FillProblem
    usable: BoolArray
    x_start: IntArray                 # first x variable of each row class
    n_index: dict[tuple[int, int], int]
    s_index: dict[tuple[int, int], int]
    y_index: dict[int, int]
    short_index: dict[int, int]
    n_vars: int
    copies: sparse.csr_array          # (n_regions * n_cells, n_vars)
    upper: FloatArray
    integral: FloatArray
    rows: Rows
    objective: FloatArray
    objective_scale: float
    big_m: dict[str, float]


def type_room(p: FillProblem) -> FloatArray:
    """(n_regions, n_types) most cells of each type the region's row gaps can hold."""
    room = np.zeros((p.n_regions, p.n_types))
    for c in p.row_classes:
        if c.count > 0 and c.patterns.size:
            room[c.region] += c.count * c.patterns.max(axis=0)
    return room


#: A budget-row term whose largest contribution (coefficient x the variable's bound) is below
#: this fraction of the limit is left out of the row (its effect is far below the tolerance).
NEGLIGIBLE = 1e-14


def _row_terms(per: FloatArray, bound: FloatArray, limit: float) -> tuple[IntArray, float]:
    """Columns kept in a budget row and the factor the row is divided by.

    HiGHS drops matrix entries of magnitude <= 1e-9, so the row is divided by its largest
    coefficient, or, when that would leave the smallest below 1e-7, by less (the largest then
    up to 1e4), instead of by the limit."""
    keep = np.flatnonzero((per > 0) & (per * bound > NEGLIGIBLE * limit))
    if keep.size == 0:
        return keep, max(limit, np.finfo(float).tiny)
    lo, hi = float(per[keep].min()), float(per[keep].max())
    return keep, hi if lo >= 1e-7 * hi else max(hi / 1e4, lo / 1e-7)


def build_model(p: FillProblem, targets: FloatArray, mode: Literal["hard", "elastic"],
           phase: Literal["goal", "shortfall"], leak_limit: float, oxide_limit: float,
           target_scale: FloatArray) -> Model:
    n_r, n_i = p.n_regions, p.n_cells
    usable = p.usable()
    room = type_room(p)
    # x block
    sizes = np.array([c.patterns.shape[0] for c in p.row_classes], dtype=np.int64)
    x_start = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    k = int(x_start[-1])
    upper: list[float] = []
    for c in p.row_classes:
        upper += [float(c.count)] * c.patterns.shape[0]
    n_index: dict[tuple[int, int], int] = {}
    for r in range(n_r):
        for i in np.flatnonzero(usable[r] & (p.cell_type >= 0)).tolist():
            bound = room[r, p.cell_type[i]]
            if bound > 0:
                n_index[(r, i)] = k
                upper.append(float(bound))
                k += 1
    s_index: dict[tuple[int, int], int] = {}
    for o, c in enumerate(p.open_classes):
        if c.count <= 0:
            continue
        for i in np.flatnonzero(usable[c.region] & (c.copies >= 1)).tolist():
            s_index[(o, i)] = k
            upper.append(float(c.count))
            k += 1
    cells = sorted({i for _, i in n_index} | {i for _, i in s_index})
    y_index = {i: k + j for j, i in enumerate(cells)}
    k += len(cells)
    upper += [1.0] * len(cells)
    n_integer = k
    short_index: dict[int, int] = {}
    if mode == "elastic":
        for r in np.flatnonzero(targets > 0).tolist():
            short_index[r] = k
            upper.append(1.0)
            k += 1
    n_vars = k
    integral = np.zeros(n_vars)
    integral[:n_integer] = 1.0

    # copies_{r,i} as a sparse map from the variables
    c_rows, c_cols, c_vals = [], [], []
    for (r, i), col in n_index.items():
        c_rows.append(r * n_i + i)
        c_cols.append(col)
        c_vals.append(1.0)
    for (o, i), col in s_index.items():
        c_rows.append(p.open_classes[o].region * n_i + i)
        c_cols.append(col)
        c_vals.append(float(p.open_classes[o].copies[i]))
    copies = sparse.csr_array((c_vals, (c_rows, c_cols)), shape=(n_r * n_i, n_vars))

    rows = Rows(n_vars)
    for g, c in enumerate(p.row_classes):
        if c.count > 0:
            cols = np.arange(x_start[g], x_start[g + 1])
            rows.add(f"gaps:{g}", cols, np.full(cols.size, 1.0 / c.count), -np.inf, 1.0,
                     float(c.count))
    for o, c in enumerate(p.open_classes):
        cols = np.array([col for (oo, _), col in s_index.items() if oo == o], dtype=np.int64)
        if cols.size:
            rows.add(f"slots:{o}", cols, np.full(cols.size, 1.0 / c.count), -np.inf, 1.0,
                     float(c.count))
    for r in range(n_r):
        for t in np.flatnonzero(room[r] > 0).tolist():
            n_cols = [col for (rr, i), col in n_index.items() if rr == r and p.cell_type[i] == t]
            if not n_cols:
                continue
            x_cols, x_vals = [], []
            for g, c in enumerate(p.row_classes):
                if c.region == r and c.count > 0:
                    a = c.patterns[:, t]
                    nz = np.flatnonzero(a)
                    x_cols += (x_start[g] + nz).tolist()
                    x_vals += (-a[nz]).astype(float).tolist()
            scale = 1.0 / room[r, t]
            rows.add(f"room:{r}:{t}", np.array(n_cols + x_cols),
                     np.array([1.0] * len(n_cols) + x_vals) * scale, -np.inf, 0.0)
    big_m: dict[str, float] = {}
    for (r, i), col in n_index.items():  # n_{r,i} <= room_{r,t(i)} y_i
        m = float(room[r, p.cell_type[i]])
        big_m[f"link:{r}:{i}"] = m
        rows.add(f"link:{r}:{i}", np.array([col, y_index[i]]), np.array([1.0 / m, -1.0]),
                 -np.inf, 0.0)
    for (o, i), col in s_index.items():  # s_{o,i} <= N_o y_i
        m = float(p.open_classes[o].count)
        big_m[f"slot-link:{o}:{i}"] = m
        rows.add(f"slot-link:{o}:{i}", np.array([col, y_index[i]]), np.array([1.0 / m, -1.0]),
                 -np.inf, 0.0)
    if cells:
        rows.add("kinds", np.array(list(y_index.values())), np.ones(len(cells)), -np.inf,
                 float(p.max_kinds))
    leak_per = np.tile(p.leakage, n_r) @ copies
    area_per = np.tile(p.oxide_area, n_r) @ copies
    bound = np.array(upper)
    for name, per, limit in (("leakage", leak_per, leak_limit), ("oxide", area_per, oxide_limit)):
        most = float(per @ bound)  # the whole fill at every variable's bound
        if np.isfinite(limit) and most > limit:  # else the row cannot bind: left out
            nz, scale = _row_terms(per, bound, limit)
            rows.add(name, nz, per[nz] / scale, -np.inf, limit / scale, scale)
    cap_rows = []
    for r in range(n_r):
        block = np.zeros(n_r * n_i)
        block[r * n_i:(r + 1) * n_i] = p.useful_cap[r]
        cap_rows.append(block @ copies)
    for r in np.flatnonzero(targets > 0).tolist():
        nz, ts = _row_terms(cap_rows[r], bound[:len(cap_rows[r])], target_scale[r])
        cols, vals = nz, cap_rows[r][nz] / ts
        if r in short_index:  # C_r / T_r + shortfall_r >= 1
            cols = np.concatenate([cols, [short_index[r]]])
            vals = np.concatenate([vals, [targets[r] / ts]])
        rows.add(f"target:{r}", cols, vals, targets[r] / ts, np.inf, ts)

    if phase == "shortfall":
        objective = np.zeros(n_vars)
        for col in short_index.values():
            objective[col] = 1.0
        obj_scale = 1.0
    elif p.goal == "max_useful_cap":
        credit = p.credit()
        objective = -sum(p.weight[r] * cap_rows[r] for r in range(n_r))
        if np.any(credit > 0):  # the damping credit counts like capacitance
            for r in range(n_r):
                block = np.zeros(n_r * n_i)
                block[r * n_i:(r + 1) * n_i] = credit[r]
                objective = objective - p.weight[r] * (block @ copies)
        obj_scale = float(np.max(np.abs(objective), initial=0.0)) or 1.0
        objective = objective / obj_scale
    else:
        objective = leak_per.copy()
        obj_scale = float(np.max(np.abs(objective), initial=0.0)) or 1.0
        objective = objective / obj_scale
    return Model(p, usable, x_start, n_index, s_index, y_index, short_index, n_vars, copies,
                  np.array(upper), integral, rows, np.asarray(objective, dtype=float),
                  obj_scale, big_m)


@dataclass(frozen=True)
class Raw:
    """One HiGHS run: the model, the values found (None: none), status, message, gap, and
    HiGHS's proven bound on the minimized objective in natural units (-inf: none)."""

    model: Model
    values: FloatArray | None
    status: int
    message: str
    mip_gap: float
    dual_bound: float = -np.inf

    @property
    def objective(self) -> float:
        """The run's objective in natural units (minimized: -sum w C, A, or the shortfall)."""
        assert self.values is not None
        return float(self.model.objective @ self.values) * self.model.objective_scale


def run_model(model: Model, mip_rel_gap: float, time_limit: float, relax: bool = False,
              fixed_kinds: BoolArray | None = None,
              kind_bounds: dict[int, tuple[float, float]] | None = None,
              kinds_only: bool = False) -> Raw:
    """One HiGHS run of ``model`` (the LP relaxation when ``relax``). ``fixed_kinds`` fixes
    every y_i; ``kind_bounds`` bounds chosen y_i (cell -> (lower, upper)). ``kinds_only``
    keeps only the y_i integer (the kind relaxation: counts continuous, a relaxation of the
    fill MILP, so its proven bound bounds every fill)."""
    lower = np.zeros(model.n_vars)
    upper = model.upper.copy()
    if fixed_kinds is not None:
        for i, col in model.y_index.items():
            lower[col] = upper[col] = float(fixed_kinds[i])
    for i, (lo, hi) in (kind_bounds or {}).items():
        if i in model.y_index:
            lower[model.y_index[i]], upper[model.y_index[i]] = lo, hi
    integrality = np.zeros(model.n_vars) if relax else model.integral
    if kinds_only and not relax:
        integrality = np.zeros(model.n_vars)
        integrality[list(model.y_index.values())] = 1.0
    constraints = []
    if model.rows.lower:
        constraints.append(LinearConstraint(model.rows.matrix(), np.array(model.rows.lower),
                                            np.array(model.rows.upper)))
    options: dict[str, float | bool] = {"time_limit": max(time_limit, 1e-3)}
    if not relax:
        options["mip_rel_gap"] = mip_rel_gap
    result = milp(model.objective, integrality=integrality, bounds=Bounds(lower, upper),
                  constraints=constraints, options=options)
    gap = float(getattr(result, "mip_gap", 0.0) or 0.0)
    if relax:
        dual = (float(model.objective @ result.x) * model.objective_scale
                if result.x is not None and result.status == 0 else -np.inf)
    else:
        raw_dual = getattr(result, "mip_dual_bound", None)
        dual = (float(raw_dual) * model.objective_scale
                if raw_dual is not None and np.isfinite(raw_dual) else -np.inf)
    return Raw(model, result.x, int(result.status), str(result.message), gap, dual)


def run_kinds(model: Model, mip_rel_gap: float, time_limit: float,
              start: set[int] | None = None) -> Raw:
    """The kind relaxation of ``model`` (only the y_i integer, counts continuous; a relaxation
    of the fill MILP, so its proven bound bounds every fill) by HiGHS through ``highspy``,
    which takes a starting choice of kinds: ``start`` (cells used; HiGHS fixes those y_i and
    solves the LP for the rest, so a start whose kinds are LP-feasible is an incumbent from
    the outset and prunes the search)."""
    import highspy

    a = model.rows.matrix().tocsr()
    a.sort_indices()
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = model.n_vars, a.shape[0]
    lp.col_cost_ = model.objective
    lp.col_lower_ = np.zeros(model.n_vars)
    lp.col_upper_ = model.upper
    lp.row_lower_ = np.array(model.rows.lower, dtype=float)
    lp.row_upper_ = np.array(model.rows.upper, dtype=float)
    lp.a_matrix_.format_ = highspy.MatrixFormat.kRowwise
    lp.a_matrix_.num_col_, lp.a_matrix_.num_row_ = model.n_vars, a.shape[0]
    lp.a_matrix_.start_ = a.indptr.astype(np.int32)
    lp.a_matrix_.index_ = a.indices.astype(np.int32)
    lp.a_matrix_.value_ = a.data.astype(float)
    kinds = np.zeros(model.n_vars, dtype=bool)
    kinds[list(model.y_index.values())] = True
    lp.integrality_ = [highspy.HighsVarType.kInteger if k else highspy.HighsVarType.kContinuous
                       for k in kinds.tolist()]
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("time_limit", float(max(time_limit, 1e-3)))
    h.setOptionValue("mip_rel_gap", float(mip_rel_gap))
    h.setOptionValue("threads", 1)
    h.passModel(lp)
    if start is not None and model.y_index:
        cols = np.array(list(model.y_index.values()), dtype=np.int32)
        vals = np.array([1.0 if i in start else 0.0 for i in model.y_index])
        h.setSolution(int(cols.size), cols, vals)
    h.run()
    status = h.getModelStatus()
    info = h.getInfo()
    ms = highspy.HighsModelStatus
    code = {ms.kOptimal: 0, ms.kInfeasible: 2, ms.kTimeLimit: 1}.get(status, 4)
    values = None
    if info.primal_solution_status == 2:  # kSolutionStatusFeasible
        values = np.asarray(h.getSolution().col_value, dtype=float)
    dual = info.mip_dual_bound
    dual = float(dual) * model.objective_scale if np.isfinite(dual) else -np.inf
    if code == 2:
        dual = np.inf
    gap = float(info.mip_gap) if np.isfinite(info.mip_gap) else np.inf
    return Raw(model, values, code, h.modelStatusToString(status), gap, dual)


def excluding_subsets(model: Model, cells: set[int]) -> Model:
    """``model`` with one more row, sum_{i not in cells} y_i >= 1: every fill whose kinds are
    all among ``cells`` is cut off, every other fill kept (a bound of this model bounds the
    fills that use a cell outside ``cells``)."""
    from copy import deepcopy

    out = deepcopy(model.rows)
    others = np.array([col for i, col in model.y_index.items() if i not in cells],
                      dtype=np.int64)
    out.add("outside-kinds", others, np.ones(others.size), 1.0, np.inf)
    from dataclasses import replace

    return replace(model, rows=out)


def _counts(model: Model, v: FloatArray, short: FloatArray) -> Counts:
    p = model.problem
    patterns = [v[model.x_start[g]:model.x_start[g + 1]].astype(np.int64)
                for g in range(len(p.row_classes))]
    slots = [np.zeros(p.n_cells, dtype=np.int64) for _ in p.open_classes]
    for (o, i), col in model.s_index.items():
        slots[o][i] = int(v[col])
    row_copies = np.zeros((p.n_regions, p.n_cells), dtype=np.int64)
    for (r, i), col in model.n_index.items():
        row_copies[r, i] = int(v[col])
    copies = row_copies.copy()
    for o, c in enumerate(p.open_classes):
        copies[c.region] += slots[o] * c.copies
    return Counts(patterns, slots, row_copies, copies, short)


def _shortfall(model: Model, values: FloatArray) -> FloatArray:
    short = np.zeros(model.problem.n_regions)
    for r, col in model.short_index.items():
        short[r] = values[col]
    return short


def extract(raw: Raw) -> Counts:
    """The integer fill of a MILP run (values rounded to the nearest integer)."""
    assert raw.values is not None
    v = np.clip(np.round(raw.values), 0, raw.model.upper)
    return _counts(raw.model, v, _shortfall(raw.model, raw.values))


def round_down(raw: Raw) -> Counts:
    """An integer fill from an LP run: every count rounded down, then the row copies of each
    region and footprint type cut to the room the rounded patterns leave (the copies worth
    least per unit go first). Rounding down keeps every <= row (gaps, slots, leakage, oxide,
    kinds); the targets are checked afterwards by ``violations``."""
    assert raw.values is not None
    m, p = raw.model, raw.model.problem
    v = np.clip(np.floor(raw.values + 1e-9), 0, m.upper)
    counts = _counts(m, v, _shortfall(m, raw.values))
    room = np.zeros((p.n_regions, p.n_types), dtype=np.int64)
    for g, c in enumerate(p.row_classes):
        room[c.region] += counts.patterns[g] @ c.patterns
    worth = p.worth() * p.weight[:, None]
    for (r, i), col in sorted(m.n_index.items(), key=lambda kv: worth[kv[0]]):
        t = p.cell_type[i]
        mine = [j for (rr, j) in m.n_index if rr == r and p.cell_type[j] == t]
        excess = int(counts.row_copies[r, mine].sum()) - int(room[r, t])
        if excess > 0:
            cut = min(excess, int(v[col]))
            v[col] -= cut
            counts = _counts(m, v, counts.shortfall)
    return counts


def violations(p: FillProblem, counts: Counts, targets: FloatArray) -> dict[str, float]:
    """Exact check of an integer fill: name -> relative excess (empty when feasible)."""
    out: dict[str, float] = {}
    tol = BUDGET_TOLERANCE
    for g, c in enumerate(p.row_classes):
        if counts.patterns[g].sum() > c.count:
            out[f"gaps:{g}"] = 1.0
    for o, c in enumerate(p.open_classes):
        if counts.slots[o].sum() > c.count:
            out[f"slots:{o}"] = 1.0
    room = np.zeros((p.n_regions, p.n_types), dtype=np.int64)
    for g, c in enumerate(p.row_classes):
        room[c.region] += counts.patterns[g] @ c.patterns
    placed = np.zeros_like(room)
    for i in np.flatnonzero(p.cell_type >= 0).tolist():
        placed[:, p.cell_type[i]] += counts.row_copies[:, i]
    if np.any(placed > room):
        out["room"] = 1.0
    copies = counts.copies
    if np.any(copies[~p.usable()] > 0):
        out["allowed"] = 1.0
    if np.count_nonzero(copies.sum(axis=0)) > p.max_kinds:
        out["kinds"] = 1.0
    leak = float(np.sum(copies @ p.leakage))
    if leak > p.leakage_budget * (1 + tol):
        out["leakage"] = (leak - p.leakage_budget) / max(p.leakage_budget, np.finfo(float).tiny)
    area = float(np.sum(copies @ p.oxide_area))
    if area > p.oxide_budget * (1 + tol):
        out["oxide"] = (area - p.oxide_budget) / max(p.oxide_budget, np.finfo(float).tiny)
    reached = np.sum(copies * p.useful_cap, axis=1)
    if np.any(reached < targets * (1 - tol)):
        out["target"] = 1.0
    return out


def top_up(p: FillProblem, counts: Counts, targets: FloatArray) -> Counts:
    """Add copies of the cells already used to regions still short of their target, where
    room, gaps, slots and budgets are left (greedy, best useful capacitance first). Mends a
    rounded-down LP fill that fell just below a target; never adds a kind."""
    patterns = [a.copy() for a in counts.patterns]
    slots = [a.copy() for a in counts.slots]
    row_copies = counts.row_copies.copy()
    copies = counts.copies.copy()
    used = copies.sum(axis=0) > 0
    usable = p.usable() & used[None, :]
    leak_left = p.leakage_budget - float(np.sum(copies @ p.leakage))
    area_left = p.oxide_budget - float(np.sum(copies @ p.oxide_area))

    def affordable(i: int, n: int) -> int:
        """Copies of cell i (at most n) the budgets still allow."""
        out = n
        if p.leakage[i] > 0:
            out = min(out, int(max(leak_left, 0.0) // p.leakage[i]))
        if p.oxide_area[i] > 0:
            out = min(out, int(max(area_left, 0.0) // p.oxide_area[i]))
        return max(out, 0)

    def add(r: int, i: int, n: int) -> None:
        nonlocal leak_left, area_left
        copies[r, i] += n
        leak_left -= n * p.leakage[i]
        area_left -= n * p.oxide_area[i]

    for r in np.flatnonzero(targets > 0).tolist():
        order = [i for i in np.argsort(-p.useful_cap[r]).tolist() if usable[r, i]]
        for i in order:
            short = targets[r] * (1 + BUDGET_TOLERANCE) - float(copies[r] @ p.useful_cap[r])
            if short <= 0:
                break
            need = int(np.ceil(short / p.useful_cap[r, i]))
            t = int(p.cell_type[i])
            if t >= 0:  # room already laid, then one more gap per step
                room = sum(int(patterns[g] @ c.patterns[:, t]) for g, c in
                           enumerate(p.row_classes) if c.region == r)
                placed = sum(int(row_copies[r, j]) for j in np.flatnonzero(p.cell_type == t))
                n = affordable(i, min(need, room - placed))
                row_copies[r, i] += n
                add(r, i, n)
                need -= n
                for g, c in enumerate(p.row_classes):
                    while need > 0 and c.region == r and patterns[g].sum() < c.count:
                        best = int(np.argmax(c.patterns[:, t]))
                        per_gap = int(c.patterns[best, t])
                        n = affordable(i, min(need, per_gap))
                        if n == 0:
                            break
                        patterns[g][best] += 1
                        row_copies[r, i] += n
                        add(r, i, n)
                        need -= n
            for o, c in enumerate(p.open_classes):
                while need > 0 and c.region == r and c.copies[i] > 0 and slots[o].sum() < c.count:
                    if affordable(i, int(c.copies[i])) < c.copies[i]:
                        break
                    slots[o][i] += 1
                    add(r, i, int(c.copies[i]))
                    need -= int(c.copies[i])
    return Counts(patterns, slots, row_copies, copies, counts.shortfall)
