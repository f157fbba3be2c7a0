"""Choosing the fill: integer counts of decap cells that maximize capacitance in a block
(SI: F, A; sites are counts).

The problem (a bounded integer knapsack with two resources and a cardinality limit)::

    maximize   sum_i n_i C_i
    subject to sum_i n_i s_i <= S          (placement sites; s_i = width_sites x height_rows)
               sum_i n_i I_i <= I_budget   (leakage current)
               #{i : n_i > 0} <= K         (distinct cell kinds)
               n_i >= 0 integer

is solved as a mixed-integer linear program with ``scipy.optimize.milp`` (HiGHS branch and
bound): one binary y_i per kind, linked by n_i <= U_i y_i with U_i = floor(S / s_i) (the most
copies of kind i the sites allow, a valid "big M"), and sum y_i <= K.

Dominated candidates are dropped first, which keeps the optimum: if cell a needs no more sites
and no more leakage than cell b and gives at least its capacitance, replacing every copy of b
by a copy of a keeps the fill feasible (no more sites, leakage or kinds) and loses no
capacitance, so some optimum uses no b. Of identical cells the first is kept.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import Bounds, LinearConstraint, milp

__all__ = ["LEAKAGE_TOLERANCE", "FillChoice", "choose_fill", "undominated"]

#: The leakage budget is met to this relative tolerance (HiGHS checks rows to ~1e-7; the
#: solution is re-checked here and the budget tightened if a rounded count overshoots it).
LEAKAGE_TOLERANCE = 1e-9
_TIME_LIMIT_S = 60.0


@dataclass(frozen=True)
class FillChoice:
    """Counts of each candidate and what they add up to.

    counts : (n_candidates,) int      copies of each candidate cell
    capacitance : float               sum n_i C_i, F
    sites : int                       sum n_i s_i, placement sites
    leakage : float                   sum n_i I_i, A
    optimal : bool                    False when the solver stopped at its time limit with
                                      the best fill found so far
    """

    counts: NDArray[np.int64]
    capacitance: float
    sites: int
    leakage: float
    optimal: bool


def undominated(capacitance: ArrayLike, sites: ArrayLike, leakage: ArrayLike) -> NDArray[np.bool_]:
    """Mask of candidates no other candidate dominates (fewer or equal sites and leakage, at
    least the capacitance, better in one of them or an identical earlier one), (n,)."""
    cap = np.asarray(capacitance, dtype=float).reshape(-1)
    size = np.asarray(sites, dtype=float).reshape(-1)
    leak = np.asarray(leakage, dtype=float).reshape(-1)
    at_least = ((size[:, None] <= size[None, :]) & (leak[:, None] <= leak[None, :])
                & (cap[:, None] >= cap[None, :]))
    better = ((size[:, None] < size[None, :]) | (leak[:, None] < leak[None, :])
              | (cap[:, None] > cap[None, :]))
    earlier = np.arange(cap.size)[:, None] < np.arange(cap.size)[None, :]
    dominated = (at_least & (better | earlier)).any(axis=0)
    return np.asarray(~dominated)


def _totals(counts: NDArray[np.int64], cap: NDArray[np.float64], sites: NDArray[np.int64],
            leak: NDArray[np.float64], optimal: bool) -> FillChoice:
    return FillChoice(counts, float(counts @ cap), int(counts @ sites), float(counts @ leak),
                      optimal)


def choose_fill(
    capacitance: ArrayLike,
    sites: ArrayLike,
    leakage: ArrayLike,
    site_budget: int,
    leakage_budget: float,
    max_kinds: int,
    mip_rel_gap: float = 1e-9,
) -> FillChoice:
    """Integer counts n_i maximizing sum n_i C_i under the site, leakage and kind limits.

    Parameters
    ----------
    capacitance : array_like   (n,) capacitance per cell, F, >= 0
    sites : array_like         (n,) placement sites per cell (width x height), int >= 1
    leakage : array_like       (n,) leakage current per cell, A, >= 0
    site_budget : int          free sites S, >= 0
    leakage_budget : float     leakage allowed, A, >= 0
    max_kinds : int            at most this many candidates with n_i > 0, >= 1
    mip_rel_gap : float        relative optimality gap at which branch and bound stops

    Returns
    -------
    FillChoice   counts, totals, and whether optimality was proven

    Notes
    -----
    Exact up to ``mip_rel_gap`` and to the leakage row's feasibility tolerance: a fill whose
    leakage lies within about 1e-7 of the budget may be passed over; the returned fill always
    meets the budget to ``LEAKAGE_TOLERANCE``. Candidates with C_i = 0 are never chosen.
    """
    cap = np.asarray(capacitance, dtype=float).reshape(-1)
    size = np.asarray(sites).reshape(-1)
    leak = np.asarray(leakage, dtype=float).reshape(-1)
    n = cap.size
    if size.shape != (n,) or leak.shape != (n,):
        raise ValueError("capacitance, sites and leakage must have the same length")
    if not (np.all(np.isfinite(cap)) and np.all(cap >= 0) and np.all(np.isfinite(leak))
            and np.all(leak >= 0)):
        raise ValueError("capacitance and leakage must be finite and >= 0")
    if np.any(size < 1) or np.any(size != np.round(size)):
        raise ValueError("sites must be integers >= 1")
    if site_budget < 0 or not leakage_budget >= 0 or max_kinds < 1:
        raise ValueError("budgets must be >= 0 and max_kinds >= 1")
    size = size.astype(np.int64)
    upper = np.where(cap > 0, site_budget // size, 0)
    # a kind leaking more than the whole budget per copy cannot be used at all
    upper = np.where(leak * (1 - LEAKAGE_TOLERANCE) > leakage_budget, 0, upper)
    zeros = np.zeros(n, dtype=np.int64)
    if n == 0 or not np.any(upper > 0):
        return _totals(zeros, cap, size, leak, True)
    keep = np.flatnonzero(undominated(cap, size, leak) & (upper > 0))
    sub = _solve(cap[keep], size[keep], leak[keep], upper[keep], site_budget, leakage_budget,
                 max_kinds, mip_rel_gap)
    counts = zeros.copy()
    counts[keep] = sub.counts
    return _totals(counts, cap, size, leak, sub.optimal)


def _solve(cap: NDArray[np.float64], size: NDArray[np.int64], leak: NDArray[np.float64],
           upper: NDArray[np.int64], site_budget: int, leakage_budget: float, max_kinds: int,
           mip_rel_gap: float) -> FillChoice:
    """The MILP over candidates that can all be used (upper > 0).

    Every row is scaled to order one (HiGHS checks rows to an absolute tolerance; unscaled
    rows with large U_i also trip its postsolve): sites / S <= 1, leakage / scale <= limit,
    n_i / U_i - y_i <= 0. The rounded solution is checked exactly; one that overshoots a
    budget (possible only within the tolerance) is re-solved with that budget tightened, and
    one with too many kinds is re-solved with the linking rows in counts.
    """
    n = cap.size
    # x = [n_0 .. n_{n-1}, y_0 .. y_{n-1}]; objective scaled to order one
    objective = np.concatenate([-cap / cap.max(), np.zeros(n)])
    leak_scale = max(leakage_budget, float(leak.max()), np.finfo(float).tiny)
    kinds = LinearConstraint(np.concatenate([np.zeros(n), np.ones(n)])[None, :], -np.inf,
                             float(max_kinds))
    scaled_link = True
    bounds = Bounds(np.zeros(2 * n), np.concatenate([upper.astype(float), np.ones(n)]))
    integrality = np.ones(2 * n)
    site_limit, leak_limit = 1.0, leakage_budget / leak_scale
    for _ in range(4):
        budgets = [
            LinearConstraint(np.concatenate([size / site_budget, np.zeros(n)])[None, :],
                             -np.inf, site_limit),
            LinearConstraint(np.concatenate([leak / leak_scale, np.zeros(n)])[None, :],
                             -np.inf, leak_limit),
        ]
        link = (np.hstack([np.diag(1.0 / upper), -np.eye(n)]) if scaled_link
                else np.hstack([np.eye(n), -np.diag(upper.astype(float))]))
        result = milp(objective, integrality=integrality, bounds=bounds,
                      constraints=[kinds, LinearConstraint(link, -np.inf, 0.0), *budgets],
                      options={"mip_rel_gap": mip_rel_gap, "time_limit": _TIME_LIMIT_S})
        if result.x is None:  # the empty fill is always feasible: a solver failure
            raise RuntimeError(f"fill optimization failed: {result.message}")
        counts = np.clip(np.round(result.x[:n]).astype(np.int64), 0, upper)
        used_sites, used_leak = int(counts @ size), float(counts @ leak)
        leak_ok = used_leak <= leakage_budget * (1 + LEAKAGE_TOLERANCE)
        if used_sites <= site_budget and leak_ok and np.count_nonzero(counts) <= max_kinds:
            return _totals(counts, cap, size, leak, bool(result.status == 0))
        if np.count_nonzero(counts) > max_kinds:  # a copy slipped past a scaled link row
            scaled_link = False
        if used_sites > site_budget:
            site_limit -= (used_sites - site_budget + 0.5) / site_budget
        if not leak_ok:
            leak_limit = max(leak_limit - 2 * (used_leak - leakage_budget) / leak_scale
                             - LEAKAGE_TOLERANCE, 0.0)
    raise RuntimeError("fill optimization could not meet the budgets after rounding")
