"""Choosing the kinds of cell for a large fill: an LP-guided search (SI).

With many gap classes and candidates and a kind limit K that binds, branch and bound on the
full MILP proves optimality slowly: the LP relaxation may use a little of many cells. The
search below picks K cells from LP relaxations, then the fill of those K cells is solved
exactly; the LP relaxation of the full model bounds every fill, so the result carries a
certified gap (``fill.solve_fill`` reports it and falls back to the full MILP while the gap is
above the requested one and time remains).

1. Dive: solve the LP relaxation, fix the cell with the largest fractional y_i to 1, repeat
   until K - 1 cells are fixed (or the LP needs no more than K).
2. Last kind: try each cell the LPs used for the remaining place (LP value of the set).
3. Swaps: exchange one chosen cell for one the first LP used while that improves the LP value
   and time remains.
"""

from __future__ import annotations

import time

import numpy as np

from celllab.planner.fill_model import Model, Raw, run_model

__all__ = ["choose_kinds"]

_TOL = 1e-7


def _used(raw: Raw) -> dict[int, float]:
    assert raw.values is not None
    return {i: float(raw.values[col]) for i, col in raw.model.y_index.items()}


def _set_value(model: Model, cells: set[int], deadline: float) -> float:
    """LP value (natural units, minimized) with exactly ``cells`` available; inf if
    infeasible."""
    bounds = {i: ((0.0, 1.0) if i in cells else (0.0, 0.0)) for i in model.y_index}
    raw = run_model(model, 0.0, deadline - time.perf_counter(), relax=True,
                    kind_bounds=bounds)
    return raw.objective if raw.values is not None else float("inf")


def choose_kinds(model: Model, first: Raw, deadline: float) -> tuple[set[int], float]:
    """At most ``max_kinds`` cells for the fill and their LP value (natural units, minimized).

    ``first`` is the LP relaxation of ``model`` (feasible); the search stops at ``deadline``
    (``time.perf_counter`` seconds) with the best set found so far.
    """
    k = model.problem.max_kinds
    y = _used(first)
    support = {i for i, v in y.items() if v > _TOL}
    if len(support) <= k:
        return support, first.objective
    fixed: set[int] = set()
    seen = set(support)
    raw = first
    while time.perf_counter() < deadline:
        fixed |= {i for i, v in y.items() if v > 1 - _TOL}
        frac = {i: v for i, v in y.items() if _TOL < v < 1 - _TOL and i not in fixed}
        if len(fixed) >= k - 1 or not frac:
            break
        fixed.add(max(frac, key=lambda i: frac[i]))
        raw = run_model(model, 0.0, deadline - time.perf_counter(), relax=True,
                        kind_bounds={i: (1.0, 1.0) for i in fixed})
        if raw.values is None:
            break
        y = _used(raw)
        seen |= {i for i, v in y.items() if v > _TOL}
    fixed = set(sorted(fixed, key=lambda i: -y.get(i, 0.0))[:k - 1]) if len(fixed) >= k else fixed
    best: tuple[float, set[int]] = (float("inf"), set(support))
    for c in sorted(seen - fixed, key=lambda i: -y.get(i, 0.0)):
        if time.perf_counter() >= deadline and np.isfinite(best[0]):
            break
        cells = fixed | {c}
        value = _set_value(model, cells, deadline)
        if value < best[0]:
            best = (value, cells)
    improved = True
    while improved and time.perf_counter() < deadline:
        improved = False
        for out in sorted(best[1]):
            for inn in sorted(support - best[1]):
                if time.perf_counter() >= deadline:
                    return best[1], best[0]
                cells = (best[1] - {out}) | {inn}
                value = _set_value(model, cells, deadline)
                if value < best[0] - _TOL * abs(best[0]):
                    best = (value, cells)
                    improved = True
                    break
            if improved:
                break
    return best[1], best[0]
