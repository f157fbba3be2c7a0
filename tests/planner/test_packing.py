"""Row patterns and open-slot copies against brute-force enumeration written here."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.planner.packing import (
    MAX_PATTERNS,
    PatternLimitError,
    best_fill,
    grid_copies,
    row_patterns,
    undominated_patterns,
)


def brute_row(width: int, widths: tuple[int, ...]) -> set[tuple[int, ...]]:
    """Every count vector over ``widths`` with total width <= ``width`` that no further cell
    fits into (exhaustive over all count vectors)."""
    ranges = [range(width // w + 1) for w in widths]
    out = set()
    for counts in itertools.product(*ranges):
        used = sum(c * w for c, w in zip(counts, widths, strict=True))
        if used <= width and width - used < min(widths):
            out.add(counts)
    return out


WIDTH_SETS = [(4, 8, 16, 32), (3, 5, 7), (4, 6, 9, 16), (2, 3), (5,), (6, 10, 15)]


@pytest.mark.parametrize("widths", WIDTH_SETS)
def test_one_row_patterns_equal_brute_force_up_to_64_sites(widths: tuple[int, ...]) -> None:
    # Source: exhaustive enumeration of count vectors (written here); exact, every width 1-64
    heights = [1] * len(widths)
    for gap in range(1, 65):
        got = {tuple(p) for p in row_patterns(gap, 1, widths, heights).tolist()}
        expected = brute_row(gap, widths) if gap >= min(widths) else {(0,) * len(widths)}
        assert got == expected, gap


def packable_2d(width: int, rows: int, types: list[tuple[int, int]]) -> set[tuple[int, ...]]:
    """Count vectors of every packing of cells (w sites x h rows, no rotation) into a gap of
    ``rows`` x ``width`` (exhaustive placement on the grid, written here)."""
    found: set[tuple[int, ...]] = set()

    def walk(grid: np.ndarray, counts: list[int]) -> None:
        free = np.argwhere(~grid)
        found.add(tuple(counts))
        if free.size == 0:
            return
        # the first free cell (column-major) is either left empty or the corner of a cell
        col_major = free[np.lexsort((free[:, 0], free[:, 1]))]
        r, c = col_major[0]
        blocked = grid.copy()
        blocked[r, c] = True
        walk(blocked, counts)
        for k, (w, h) in enumerate(types):
            if r + h <= rows and c + w <= width and not grid[r:r + h, c:c + w].any():
                placed = grid.copy()
                placed[r:r + h, c:c + w] = True
                counts[k] += 1
                walk(placed, counts)
                counts[k] -= 1

    walk(np.zeros((rows, width), dtype=bool), [0] * len(types))
    return found


def maximal(vectors: set[tuple[int, ...]]) -> set[tuple[int, ...]]:
    arr = np.array(sorted(vectors))
    keep = set()
    for v in arr:
        bigger = np.all(arr >= v, axis=1) & np.any(arr > v, axis=1)
        if not bigger.any():
            keep.add(tuple(int(x) for x in v))
    return keep


@pytest.mark.parametrize("types", [
    [(4, 1), (6, 1), (8, 2), (4, 2)],
    [(3, 1), (5, 1), (4, 2)],
    [(2, 1), (3, 2)],
])
@pytest.mark.parametrize("width", [2, 5, 8, 11])
def test_two_row_patterns_equal_brute_force_placement(types: list[tuple[int, int]],
                                                      width: int) -> None:
    # Source: exhaustive placement of cells on the 2 x W grid (written here); exact. With
    # cells of one and two rows every packing of a 2-row gap is a pattern of the planner.
    w = [t[0] for t in types]
    h = [t[1] for t in types]
    got = {tuple(p) for p in row_patterns(width, 2, w, h).tolist()}
    assert got == maximal(packable_2d(width, 2, types))


def test_three_row_patterns_are_packable() -> None:
    # Source: exhaustive placement (written here). For 3 rows the band rule is a subset of all
    # packings: every pattern must be a real packing (the converse is not claimed)
    types = [(2, 1), (3, 2), (4, 3)]
    packable = packable_2d(7, 3, types)
    for p in row_patterns(7, 3, [t[0] for t in types], [t[1] for t in types]).tolist():
        assert tuple(p) in packable


def test_no_cell_fits_gives_the_empty_pattern() -> None:
    # Source: the definition (a gap narrower or lower than every cell holds nothing)
    assert row_patterns(3, 1, [4, 8], [1, 1]).tolist() == [[0, 0]]
    assert row_patterns(10, 1, [4], [2]).tolist() == [[0]]


def test_pattern_limit_is_an_error() -> None:
    # Source: the documented guard (many widths, a very wide gap)
    widths = list(range(3, 40))
    with pytest.raises(PatternLimitError):
        row_patterns(400, 1, widths, [1] * len(widths))
    assert MAX_PATTERNS >= 10_000


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(2, 12), min_size=1, max_size=4, unique=True),
       st.integers(1, 40))
def test_patterns_fit_and_are_maximal(widths: list[int], gap: int) -> None:
    # Source: the definition of a maximal packing (fits; no further cell fits); exact
    p = row_patterns(gap, 1, widths, [1] * len(widths))
    used = p @ np.array(widths)
    assert np.all(used <= gap)
    if gap >= min(widths):
        assert np.all(gap - used < min(widths))
    assert len({tuple(r) for r in p.tolist()}) == p.shape[0]


def test_best_fill_equals_brute_force_subset() -> None:
    # Source: exhaustive enumeration (written here): the best fill of a 29-site gap with only
    # the 4- and 9-site cells is max over 4a + 9b <= 29 = 29 (a = 5, b = 1)
    widths = (4, 6, 9, 16)
    p = row_patterns(29, 1, widths, [1] * 4)
    allowed = np.array([True, False, True, False])
    best = max(4 * a + 9 * b for a in range(8) for b in range(4) if 4 * a + 9 * b <= 29)
    assert best_fill(p, np.array(widths, dtype=float), allowed) == best == 29


def test_grid_copies() -> None:
    # Source: worked by hand: a 10 x 7.4 um slot holds floor(10/3.28) x floor(7.4/3.69) =
    # 3 x 2 copies of a 3.28 x 3.69 um cell; an exact fit counts; a wider cell none
    copies = grid_copies(10.0, 7.38, [3.28, 3.28 * 3, 12.0], [3.69, 3.69, 1.0])
    assert copies.tolist() == [6, 2, 0]


def test_undominated_patterns_drop_dominated_rows() -> None:
    # Source: the definition (a row exceeded or equalled type by type by another is dropped)
    p = np.array([[1, 0], [2, 0], [2, 0], [0, 1], [1, 1]])
    assert sorted(map(tuple, undominated_patterns(p).tolist())) == [(1, 1), (2, 0)]
