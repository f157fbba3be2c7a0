"""Which constraints bound a fill, and what relaxing each would buy (SI).

Two measures, both stated in the goal's own unit (F of weighted useful capacitance for
``max_useful_cap``, A of leakage saved for ``min_leakage``):

* shadow price: the dual value of the constraint in the LP relaxation of the fill with the
  kind choice fixed at the integer solution's (``scipy.optimize.linprog``, HiGHS): the
  improvement per unit of relaxation (per A of leakage budget, per m^2 of oxide area, per F
  of target, per extra gap of a class). An LP figure: a guide to what binds, not a promise
  for the integer fill.
* gain: the improvement found by solving the MILP again with the limit lifted (one more
  distinct kind; an ESD-safe-only region opened to every cell). Used for the discrete limits,
  which have no dual.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from scipy import sparse
from scipy.optimize import linprog

from celllab.planner.fill import FillProblem, FillSolution, FillTimeout, goal_value, solve_fill
from celllab.planner.fill_model import Model, build_model

__all__ = ["Binding", "explain_fill"]

Kind = Literal["leakage", "oxide", "kinds", "target", "gaps", "slots", "esd"]
#: Shadow prices below this fraction of the goal per unit of the limit count as zero.
_ZERO = 1e-9


@dataclass(frozen=True)
class Binding:
    """One constraint of the fill.

    kind : what it limits; index : region (target, esd) or gap-class index (gaps: row class,
    slots: open class), -1 for block-wide limits
    used, limit : SI (A, m^2, kinds, F, gaps)
    binding : the constraint holds the fill back (shadow price or gain > 0)
    shadow_price : goal units per unit of the limit (LP at fixed kinds); None where not computed
    gain : improvement when lifted (MILP re-solve); None where not re-solved. In goal units,
           or, when lifting the limit lowers the regions' target shortfall, that reduction in F
    gain_in : "goal" or "shortfall": the unit of ``gain`` and ``shadow_price`` (a shortfall
              price is F of shortfall removed per unit of the limit)
    """

    kind: Kind
    index: int
    used: float
    limit: float
    binding: bool
    shadow_price: float | None
    gain: float | None
    gain_in: Literal["goal", "shortfall"] = "goal"


def _lp_prices(model: Model, kinds: NDArray[np.bool_]) -> dict[str, float]:
    """Improvement of the goal per unit of each named row's bound (natural units)."""
    rows = model.rows
    if not rows.lower:
        return {}
    a = rows.matrix()
    lower, upper = np.array(rows.lower), np.array(rows.upper)
    up = np.isfinite(upper)
    lo = np.isfinite(lower)
    a_ub = sparse.vstack([a[up], -a[lo]]).tocsr()
    b_ub = np.concatenate([upper[up], -lower[lo]])
    bounds = np.column_stack([np.zeros(model.n_vars), model.upper])
    for i, col in model.y_index.items():
        bounds[col] = float(kinds[i])
    res = linprog(model.objective, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
    if res.status != 0:
        return {}
    marginals = np.asarray(res.ineqlin.marginals)
    per_row = np.zeros(len(rows.lower))
    per_row[np.flatnonzero(up)] += -marginals[:int(up.sum())]
    per_row[np.flatnonzero(lo)] += -marginals[int(up.sum()):]
    scale = np.array(rows.scale)
    return {name: float(per_row[row] * model.objective_scale / scale[row])
            for name, row in rows.named.items()}


def explain_fill(problem: FillProblem, solution: FillSolution,
                 unrestricted: dict[int, NDArray[np.bool_]] | None = None,
                 mip_rel_gap: float = 1e-4, time_limit: float = 60.0,
                 resolve: bool = True) -> list[Binding]:
    """The constraints of ``problem`` at ``solution``: used, limit, shadow price, gain.

    Parameters
    ----------
    problem, solution : the solved fill
    unrestricted : region -> (n_cells,) cells that region could take without its
                   ESD-safe-only restriction (re-solved with it lifted)
    mip_rel_gap, time_limit : for the re-solves
    resolve : False skips the MILP re-solves (gains are then None)

    When a region target is not reached, the shadow prices are those of the shortfall (F of
    total shortfall removed per unit of the limit), since that is what the limits hold back.
    """
    p, s = problem, solution
    short = bool(np.any(s.shortfall > 0))
    if short:
        # targets not reached: what holds the shortfall back (prices in F of shortfall)
        targets = np.asarray(p.target, dtype=float)
        model = build_model(p, targets, "elastic", "shortfall", p.leakage_budget,
                            p.oxide_budget, np.where(targets > 0, targets, 1.0))
        # objective: total shortfall in F, scaled to order one for the solver's tolerances
        top = float(targets.max())
        for r, col in model.short_index.items():
            model.objective[col] = targets[r] / top
        model.objective_scale = top
        base = float(s.shortfall.sum())
    else:
        targets = np.asarray(s.lowered_targets if s.lowered_targets.size else p.target, float)
        model = build_model(p, targets, "hard", "goal", p.leakage_budget, p.oxide_budget,
                            np.where(targets > 0, targets, 1.0))
        base = goal_value(p, s.copies)
    prices = _lp_prices(model, s.used)
    sign = 1.0 if p.goal == "max_useful_cap" else -1.0
    tol = _ZERO * max(abs(base), np.finfo(float).tiny)

    def price(name: str) -> float | None:
        return prices.get(name)

    def binds(value: float | None, gain: float | None = None) -> bool:
        return bool((value is not None and value > tol) or (gain is not None and gain > tol))


    unit: Literal["goal", "shortfall"] = "shortfall" if short else "goal"
    out: list[Binding] = []
    leak = float(np.sum(s.copies @ p.leakage))
    if np.isfinite(p.leakage_budget):
        sp_ = price("leakage")
        out.append(Binding("leakage", -1, leak, p.leakage_budget,
                           binds(sp_ and sp_ * p.leakage_budget), sp_, None, unit))
    area = float(np.sum(s.copies @ p.oxide_area))
    if np.isfinite(p.oxide_budget):
        sp_ = price("oxide")
        out.append(Binding("oxide", -1, area, p.oxide_budget,
                           binds(sp_ and sp_ * p.oxide_budget), sp_, None, unit))
    n_kinds = int(np.count_nonzero(s.used))
    usable_cells = int(np.count_nonzero(p.usable().any(axis=0)))
    gain = None
    if resolve and n_kinds >= p.max_kinds and p.max_kinds < usable_cells:
        more = _resolve(p.replace(max_kinds=p.max_kinds + 1), mip_rel_gap, time_limit)
        gain, kind_unit = _improvement(p, s, more, sign) if more else (None, "goal")
        out.append(Binding("kinds", -1, float(n_kinds), float(p.max_kinds), binds(None, gain),
                           None, gain, kind_unit))
    else:
        out.append(Binding("kinds", -1, float(n_kinds), float(p.max_kinds), False, None, None))
    reached = np.sum(s.copies * p.useful_cap, axis=1)
    for r in np.flatnonzero(p.target > 0).tolist():
        sp_ = price(f"target:{r}")
        out.append(Binding("target", r, float(reached[r]), float(p.target[r]),
                           bool(binds(sp_ and sp_ * p.target[r]) or s.shortfall[r] > 0), sp_,
                           None, unit))
    for r, cells in (unrestricted or {}).items():
        gain, esd_unit = None, "goal"
        if resolve:
            allowed = p.allowed.copy()
            allowed[r] = cells
            opened = _resolve(p.replace(allowed=allowed), mip_rel_gap, time_limit)
            gain, esd_unit = _improvement(p, s, opened, sign) if opened else (None, "goal")
        out.append(Binding("esd", r, 0.0, 0.0, binds(None, gain), None, gain, esd_unit))
    for g, c in enumerate(p.row_classes):
        sp_ = price(f"gaps:{g}")
        out.append(Binding("gaps", g, float(s.pattern_counts[g].sum()), float(c.count),
                           binds(sp_), sp_, None, unit))
    for o, c in enumerate(p.open_classes):
        sp_ = price(f"slots:{o}")
        out.append(Binding("slots", o, float(s.slot_counts[o].sum()), float(c.count),
                           binds(sp_), sp_, None, unit))
    return out


def _resolve(p: FillProblem, mip_rel_gap: float, time_limit: float) -> FillSolution | None:
    """The fill with one limit lifted, or None when the time ran out first."""
    try:
        return solve_fill(p, mip_rel_gap, time_limit)
    except FillTimeout:
        return None


def _improvement(p: FillProblem, before: FillSolution, after: FillSolution,
                 sign: float) -> tuple[float, Literal["goal", "shortfall"]]:
    """Improvement of ``after`` over ``before``: less target shortfall first (F), else the
    goal."""
    less_short = float(before.shortfall.sum() - after.shortfall.sum())
    if less_short > 1e-9 * max(float(before.shortfall.sum()), np.finfo(float).tiny):
        return less_short, "shortfall"
    return max(sign * (goal_value(p, after.copies) - goal_value(p, before.copies)), 0.0), "goal"
