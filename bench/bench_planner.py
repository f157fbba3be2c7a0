"""Fill optimizer speed: 200 gap classes x 50 candidate cells, as one block plan would pose it.

The problem is synthetic (invented cells and gaps, seeded): 4 regions (one ESD-safe-only),
150 in-row filler widths of 1 and 2 rows, 50 open slots (corners, spacers), 50 cells of six
widths and two heights, a binding leakage budget, a thin-oxide limit, at most 5 kinds and a
useful-capacitance target in two regions.

Reference in the same run: the LP relaxation of the same model (no integrality, no kind
choice). Reported: pattern generation, the LP reference, the MILP (best of 3), and the ratio.
Target: the MILP within 2 s on a 2-core machine.
Run:  .venv/bin/python bench/bench_planner.py   (prints a table; not a test)
"""

from __future__ import annotations

import time

import numpy as np

from celllab.planner.fill import FillProblem, OpenClass, RowClass, relaxation_seconds, solve_fill
from celllab.planner.packing import grid_copies, row_patterns

N_CELLS = 50
WIDTHS = (4, 8, 12, 16, 24, 32)
SITE_UM, ROW_UM = 0.2, 1.6


def problem(seed: int = 7) -> tuple[FillProblem, float]:
    """The benchmark problem and the seconds spent generating its patterns."""
    rng = np.random.default_rng(seed)
    width = rng.choice(WIDTHS, N_CELLS)
    height = np.where(rng.random(N_CELLS) < 0.2, 2, 1)
    types = sorted(set(zip(width.tolist(), height.tolist(), strict=True)))
    index = {t: k for k, t in enumerate(types)}
    cell_type = np.array([index[(w, h)] for w, h in zip(width, height, strict=True)])
    tw = np.array([t[0] for t in types])
    th = np.array([t[1] for t in types])
    area_um2 = width * SITE_UM * height * ROW_UM
    thin = rng.random(N_CELLS) < 0.7
    density = np.where(thin, rng.uniform(8, 14, N_CELLS), rng.uniform(1.5, 4, N_CELLS))  # fF/um2
    cap = density * area_um2 * 1e-15
    leakage = np.where(thin, rng.uniform(1, 5, N_CELLS) * cap / 1e-12 * 1e-9, 0.0)
    oxide = np.where(thin, 0.6 * area_um2 * 1e-12, 0.0)
    esd = rng.random(N_CELLS) < 0.35
    freq = np.array([0.3e9, 0.8e9, 0.1e9, 0.2e9])
    bandwidth = rng.uniform(0.2e9, 3e9, N_CELLS)
    useful = cap[None, :] / np.sqrt(1 + (freq[:, None] / bandwidth[None, :]) ** 2)
    allowed = np.ones((4, N_CELLS), dtype=bool)
    allowed[3] = esd
    t0 = time.perf_counter()
    rows: list[RowClass] = []
    plan = [(0, 1, np.arange(4, 64)), (1, 1, np.arange(5, 65)), (2, 2, np.arange(8, 38, 2)),
            (3, 1, np.arange(4, 34, 2))]
    for region, rows_high, widths in plan:
        for w in widths.tolist():
            rows.append(RowClass(region, int(rng.integers(5, 3000)),
                                 row_patterns(w, rows_high, tw, th)))
    seconds = time.perf_counter() - t0
    opens = []
    for k in range(200 - len(rows)):
        region = (2, 3)[k % 2]
        w_um, h_um = float(rng.uniform(4, 60)), float(rng.uniform(10, 60))
        copies = grid_copies(w_um, h_um, width * SITE_UM, height * ROW_UM)
        opens.append(OpenClass(region, int(rng.integers(1, 40)), copies))
    fill = FillProblem(useful_cap=useful, allowed=allowed, weight=np.ones(4),
                       target=np.array([0.0, 2e-9, 0.0, 0.05e-9]), cell_type=cell_type,
                       leakage=leakage, oxide_area=oxide, row_classes=rows, open_classes=opens,
                       max_kinds=5)
    unlimited = solve_fill(fill)
    leak = float(np.sum(unlimited.copies @ leakage))
    area = float(np.sum(unlimited.copies @ oxide))
    return fill.replace(leakage_budget=0.5 * leak, oxide_budget=0.8 * area), seconds


def main() -> None:
    fill, pattern_s = problem()
    n_patterns = sum(c.patterns.shape[0] for c in fill.row_classes)
    print(f"gap classes: {len(fill.row_classes)} in-row + {len(fill.open_classes)} open = "
          f"{len(fill.row_classes) + len(fill.open_classes)}; cells: {fill.n_cells}; "
          f"footprint types: {fill.n_types}; patterns: {n_patterns}")
    lp = min(relaxation_seconds(fill) for _ in range(3))
    runs = []
    for _ in range(3):
        solution = solve_fill(fill)
        runs.append(solution.solve_seconds)
    milp_s = min(runs)
    kinds = int(np.count_nonzero(solution.used))
    print(f"{'step':<34} {'seconds':>9} {'x LP reference':>15}")
    print(f"{'pattern generation':<34} {pattern_s:>9.3f} {pattern_s / lp:>15.1f}")
    print(f"{'LP relaxation (reference)':<34} {lp:>9.3f} {1.0:>15.1f}")
    print(f"{'MILP, best of 3':<34} {milp_s:>9.3f} {milp_s / lp:>15.1f}")
    print(f"MILP runs: {', '.join(f'{s:.3f}' for s in runs)} s; optimal: {solution.optimal}; "
          f"gap {solution.mip_gap:.2e}; kinds used {kinds} of {fill.max_kinds}; "
          f"target 2 g {'met' if solution.shortfall.max() == 0 else 'short'}")
    print(f"within the 2 s goal: {'yes' if milp_s <= 2.0 else 'NO'}")


if __name__ == "__main__":
    main()
