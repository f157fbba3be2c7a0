"""The fill optimizer against exhaustive enumeration, worked examples and its invariants."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.planner.fill import LEAKAGE_TOLERANCE, choose_fill, undominated

FF, NA = 1e-15, 1e-9


def brute_force(cap: np.ndarray, sites: np.ndarray, leak: np.ndarray, site_budget: int,
                leak_budget: float, max_kinds: int) -> float:
    """Largest sum n_i C_i over every integer count vector meeting the limits (exhaustive)."""
    ranges = [np.arange(site_budget // s + 1) for s in sites]
    counts = np.array(list(itertools.product(*ranges)), dtype=float)  # (n_vectors, n_cells)
    ok = ((counts @ sites <= site_budget) & (counts @ leak <= leak_budget)
          & ((counts > 0).sum(axis=1) <= max_kinds))
    return float((counts[ok] @ cap).max())


@st.composite
def fill_problems(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray, np.ndarray, int, float, int]:
    n = draw(st.integers(1, 4))
    cap = np.array(draw(st.lists(st.floats(0.5, 500.0), min_size=n, max_size=n))) * FF
    sites = np.array(draw(st.lists(st.integers(1, 6), min_size=n, max_size=n)))
    # leakage in quarter-nA steps: sums are exact in binary floating point, so "within the
    # budget" means the same thing to the solver and to the enumeration
    leak = np.array(draw(st.lists(st.integers(0, 40), min_size=n, max_size=n))) * 0.25 * NA
    site_budget = draw(st.integers(0, 14))
    leak_budget = draw(st.integers(0, 200)) * 0.25 * NA
    max_kinds = draw(st.integers(1, 3))
    return cap, sites, leak, site_budget, leak_budget, max_kinds


@settings(max_examples=80, deadline=None)
@given(fill_problems())
def test_optimum_equals_brute_force(problem: tuple) -> None:
    # Source: exhaustive enumeration of every count vector (written here); rel 1e-9
    cap, sites, leak, site_budget, leak_budget, max_kinds = problem
    choice = choose_fill(cap, sites, leak, site_budget, leak_budget, max_kinds)
    best = brute_force(cap, sites, leak, site_budget, leak_budget, max_kinds)
    assert choice.capacitance == pytest.approx(best, rel=1e-9, abs=0)
    assert choice.optimal


@settings(max_examples=60, deadline=None)
@given(fill_problems())
def test_fill_meets_every_limit(problem: tuple) -> None:
    # Source: the problem statement (feasibility of the returned counts), exact
    cap, sites, leak, site_budget, leak_budget, max_kinds = problem
    choice = choose_fill(cap, sites, leak, site_budget, leak_budget, max_kinds)
    assert choice.counts.dtype.kind == "i" and np.all(choice.counts >= 0)
    assert int(choice.counts @ sites) == choice.sites <= site_budget
    assert choice.leakage <= leak_budget * (1 + LEAKAGE_TOLERANCE)
    assert np.count_nonzero(choice.counts) <= max_kinds
    assert choice.capacitance == pytest.approx(float(choice.counts @ cap), rel=1e-12, abs=0)


def test_worked_example_beats_density_greedy() -> None:
    # Source: worked by hand (common practice, no source). A: 3 sites, 10 fF; B: 2 sites,
    # 6 fF; 7 sites. Greedy by density (A first) gives 2A = 20 fF; 1A + 2B = 22 fF fills all.
    cap, sites, leak = np.array([10.0, 6.0]) * FF, np.array([3, 2]), np.zeros(2)
    choice = choose_fill(cap, sites, leak, 7, 0.0, 2)
    assert choice.counts.tolist() == [1, 2]
    assert choice.capacitance == pytest.approx(22 * FF, rel=1e-12, abs=0)
    single = choose_fill(cap, sites, leak, 7, 0.0, 1)
    assert single.counts.tolist() == [2, 0]  # one kind: 2A = 20 fF beats 3B = 18 fF


def test_leakage_budget_trades_density_for_low_leakage() -> None:
    # Source: worked by hand. Thin oxide: 1 site, 10 fF, 5 nA; thick oxide: 1 site, 4 fF,
    # 0 nA; 100 sites, 100 nA -> 20 thin + 80 thick = 520 fF (all thin would leak 500 nA).
    cap, sites, leak = np.array([10.0, 4.0]) * FF, np.array([1, 1]), np.array([5.0, 0.0]) * NA
    choice = choose_fill(cap, sites, leak, 100, 100 * NA, 2)
    assert choice.counts.tolist() == [20, 80]
    assert choice.leakage == pytest.approx(100 * NA, rel=1e-12, abs=0)


@pytest.mark.parametrize(
    ("site_budget", "leak_budget_nA", "expected"),
    [(0, 100.0, [0, 0]), (10, 0.0, [0, 0]), (10, 3.0, [0, 0]), (1, 100.0, [1, 0])],
)
def test_empty_or_tiny_budgets(site_budget: int, leak_budget_nA: float, expected: list) -> None:
    # Source: the problem statement: no sites, no leakage, or cells leaking more than the budget
    cap, sites, leak = np.array([10.0, 4.0]) * FF, np.array([1, 2]), np.array([5.0, 4.0]) * NA
    choice = choose_fill(cap, sites, leak, site_budget, leak_budget_nA * NA, 2)
    assert choice.counts.tolist() == expected


def test_large_block_stays_integral_and_within_budget() -> None:
    # Source: the problem statement; a block with a million sites (counts near 1e5)
    rng = np.random.default_rng(3)
    n = 30
    cap = rng.uniform(20, 400, n) * FF
    sites = rng.integers(4, 64, n)
    leak = rng.uniform(0.0, 2.0, n) * NA
    choice = choose_fill(cap, sites, leak, 1_000_000, 20_000 * NA, 3)
    assert choice.sites <= 1_000_000 and choice.leakage <= 20_000 * NA * (1 + LEAKAGE_TOLERANCE)
    assert 1 <= np.count_nonzero(choice.counts) <= 3
    # the LP bound (best density alone, fractional) caps what any fill can reach
    assert choice.capacitance <= float(np.max(cap / sites)) * 1_000_000 * (1 + 1e-12)


def test_undominated_drops_only_dominated_cells() -> None:
    # Source: definition of dominance (no more sites, no more leakage, at least the cap)
    cap = np.array([10.0, 9.0, 10.0, 12.0, 10.0])
    sites = np.array([2, 2, 3, 2, 2])
    leak = np.array([1.0, 1.0, 1.0, 5.0, 1.0])
    # 1 (less cap) and 2 (more sites) are dominated by 0; 4 duplicates 0; 3 leaks more
    assert undominated(cap, sites, leak).tolist() == [True, False, False, True, False]


@pytest.mark.parametrize(
    "bad",
    [
        {"capacitance": [-1e-15]},
        {"sites": [0]},
        {"sites": [1.5]},
        {"leakage": [float("nan")]},
        {"max_kinds": 0},
        {"site_budget": -1},
    ],
)
def test_rejects_invalid_input(bad: dict) -> None:
    args = {"capacitance": [1e-15], "sites": [1], "leakage": [0.0], "site_budget": 4,
                "leakage_budget": 1e-6, "max_kinds": 1}
    args.update(bad)
    with pytest.raises(ValueError):
        choose_fill(**args)
