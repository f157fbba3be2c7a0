"""Damping through the fill: the credit of a cell against the series R-C closed form, the fill
MILP with the credit against exhaustive enumeration, and a block whose worst resonance the
credit tames."""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.planner import load_block, plan_block
from celllab.planner.fill import FillProblem, RowClass, goal_value, solve_fill
from celllab.planner.fill_damping import damping_credit, fill_conductance
from celllab.planner.network import FillEntry
from celllab.planner.packing import row_patterns

from . import NETWORK, IdealCell, block_text, ideal_circuit, ideal_record, synthetic_catalog

FF = 1e-15


def test_credit_of_a_series_rc_cell_is_the_closed_form() -> None:
    # Source: docs/references.md [106]: g / w = C x / (1 + x^2), x = w R C; rel 1e-9
    cells = [IdealCell("a", 1000.0, esr_ohm=1000.0), IdealCell("b", 1000.0, esr_ohm=100.0),
             IdealCell("c", 500.0, esr_ohm=0.0)]
    records = [ideal_record(c) for c in cells]
    w = 1e9
    f0 = np.array([w / (2 * np.pi), 2 * w / (2 * np.pi)])
    credit = damping_credit(records, f0, ["typ_25C", "slow_125C"], weight=2.0)
    for r, (omega, corner_factor) in enumerate(((w, 1.0), (2 * w, 0.9))):  # slow: C x 0.9
        for k, cell in enumerate(cells):
            c = cell.cap_fF * FF * corner_factor
            x = omega * cell.esr_ohm * c
            assert credit[r, k] == pytest.approx(2.0 * c * x / (1 + x * x), rel=1e-9,
                                                 abs=1e-30)
    # the matched cell at 1e9 rad/s: x = 1, g = 5e-4 S, g / w = 0.5 pF (the check value)
    assert credit[0, 0] == pytest.approx(2.0 * 0.5e-12, rel=1e-12)
    assert credit[0, 2] == 0.0  # a lossless capacitor does not damp
    # no frequency, no credit; weight 0, no credit
    assert not damping_credit(records, np.array([np.nan]), ["typ_25C"], 1.0).any()
    assert not damping_credit(records, f0, ["typ_25C", "typ_25C"], 0.0).any()
    # the fill's conductance adds count x g (docs/references.md [106]); rel 1e-9
    entry = FillEntry("a", {"typ_25C": ideal_circuit(cells[0], 1.0)}, 300)
    assert fill_conductance([entry], w / (2 * np.pi), "typ_25C") == pytest.approx(
        300 * 5e-4, rel=1e-9)


def _enumerate(widths: tuple[int, ...], gaps: dict[int, int]) -> np.ndarray:
    """Every fill of the gaps: (n_fills, n_cells) copies (exhaustive, written here)."""
    per_width = {}
    for w in gaps:
        ranges = [range(w // c + 1) for c in widths]
        per_width[w] = [np.array(v) for v in itertools.product(*ranges)
                        if sum(n * c for n, c in zip(v, widths, strict=True)) <= w]
    options = []
    for w, n in gaps.items():
        combos = itertools.combinations_with_replacement(range(len(per_width[w])), n)
        options.append(np.unique(np.array([np.sum([per_width[w][k] for k in combo], axis=0)
                                           for combo in combos]), axis=0))
    fills = options[0]
    for more in options[1:]:
        fills = (fills[:, None, :] + more[None, :, :]).reshape(-1, len(widths))
    return fills


@pytest.mark.parametrize("seed", range(6))
def test_milp_with_a_damping_credit_equals_enumeration(seed: int) -> None:
    # Source: exhaustive enumeration of every fill of two 6-site gaps and one 5-site gap with
    # three cells, under a leakage budget and a two-kind limit; exact objective, rel 1e-9
    rng = np.random.default_rng(seed)
    widths = (2, 3, 4)
    cap = rng.uniform(50, 200, 3) * FF
    credit = rng.uniform(0, 150, 3) * FF * rng.integers(0, 2, 3)
    leak = rng.uniform(0, 2, 3) * 1e-9
    budget = float(rng.uniform(3, 8)) * 1e-9
    types = sorted(set(widths))
    p = FillProblem(
        useful_cap=cap[None, :], allowed=np.ones((1, 3), dtype=bool), weight=np.ones(1),
        target=np.zeros(1), cell_type=np.array([types.index(w) for w in widths]),
        leakage=leak, oxide_area=np.zeros(3),
        row_classes=[RowClass(0, 2, row_patterns(6, 1, types, [1, 1, 1])),
                     RowClass(0, 1, row_patterns(5, 1, types, [1, 1, 1]))],
        open_classes=[], leakage_budget=budget, max_kinds=2, damping=credit[None, :])
    fills = _enumerate(widths, {6: 2, 5: 1})
    ok = (fills @ leak <= budget) & ((fills > 0).sum(axis=1) <= 2)
    best = float(np.max(fills[ok] @ (cap + credit)))
    solution = solve_fill(p, mip_rel_gap=1e-9)
    assert goal_value(p, solution.copies) == pytest.approx(best, rel=1e-9)
    assert float(solution.copies[0] @ leak) <= budget * (1 + 1e-9)
    # without the credit the objective is the capacitance alone (the same enumeration)
    plain = solve_fill(p.replace(damping=None), mip_rel_gap=1e-9)
    assert goal_value(p.replace(damping=None), plain.copies) == pytest.approx(
        float(np.max(fills[ok] @ cap)), rel=1e-9)


# ------------------------------------------------------------------ a block it should tame

#: 1 nH package, 10 mohm: a stiff cell (1 pF, 0.1 ohm) and a lossy one (0.9 pF) whose ESR
#: matches the resonance of a fill of the stiff one at the slow corner (C x 0.9):
#: f0 = 1 / (2 pi sqrt(1 nH x 0.9 nF)) = 167.8 MHz, ESR = 1 / (2 pi f0 x 0.81 pF).
F0_SLOW = 1 / (2 * np.pi * np.sqrt(1e-9 * 0.9e-9))
CELLS = [IdealCell("stiff", 1000.0, esr_ohm=0.1, width_sites=4),
         IdealCell("lossy", 900.0, esr_ohm=1 / (2 * np.pi * F0_SLOW * 0.81e-12), width_sites=4)]


@pytest.fixture(scope="module")
def catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    return synthetic_catalog(tmp_path_factory.mktemp("damp") / "c.sqlite", CELLS)


def _plan(tmp_path: Path, catalog: Catalog, weight: float):  # type: ignore[no-untyped-def]
    region = [{"name": "core", "frequency_MHz": 10.0, "peak_current_mA": 100.0,
               "rise_time_ps": 100.0,
               "row_gaps": [{"name": "fill", "width_sites": [4], "count": [1000]}]}]
    path = tmp_path / f"b{weight}.toml"
    path.write_text(block_text(region=region, budgets__leakage_uA=None,
                               network=dict(NETWORK, fill_damping_weight=weight)))
    return plan_block(load_block(path), catalog, explain=False)


def test_damping_through_the_fill_lowers_the_worst_peak(tmp_path: Path,
                                                        catalog: Catalog) -> None:
    plain = _plan(tmp_path, catalog, 0.0)
    damped = _plan(tmp_path, catalog, 1.0)
    assert plain.region("core").counts() == {"stiff": 1000}  # the most capacitance
    assert plain.network is not None and damped.network is not None
    assert plain.network.fill_damping is None
    before = plain.network.figures.regions[0].top_peak
    # Source: docs/references.md [101]: peak ~ L / (C (R_L + R_C)) = 1 nH / (0.9 nF x
    # (10 + 0.1) mohm) = 110 ohm at the slow corner (the least capacitance); 2 %
    assert before is not None and before.corner == "slow_125C"
    assert before.magnitude == pytest.approx(1e-9 / (0.9e-9 * 10.1e-3), rel=0.02)
    assert before.frequency == pytest.approx(F0_SLOW, rel=0.01)
    # with the credit the matched cell wins (0.9 pF + 0.45 pF credit > 1 pF) and the peak
    # falls to the order of Z0 = 1 ohm (docs/references.md [101], matched damping)
    assert damped.region("core").counts() == {"lossy": 1000}
    after = damped.network.figures.regions[0].top_peak
    assert after is None or after.magnitude < 0.05 * before.magnitude
    fd = damped.network.fill_damping
    assert fd is not None and fd.weight == 1.0
    assert fd.corner[0] == "slow_125C" and fd.frequency[0] == pytest.approx(F0_SLOW, rel=0.01)
    assert fd.peak_before[0] == pytest.approx(before.magnitude, rel=1e-9)
    assert fd.conductance_after[0] > 100 * fd.conductance_before[0]
    d = damped.to_dict()["network"]["fill_damping"]
    assert d["weight"] == 1.0 and d["regions"][0]["name"] == "core"
