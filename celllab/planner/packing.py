"""Exact packing of cells into a block's gaps: which combinations of cell footprints fit
(integers: sites, rows, copies; open-slot outlines in um).

A *footprint type* is a (width_sites, height_rows) pair; catalog cells of one type are
interchangeable for packing, so patterns are built over types, never over cells.

In-row gaps (W sites wide, H rows high)
    A pattern is a count vector over the types: how many cells of each type one gap holds.
    H = 1: the multisets of widths with sum <= W. Only *maximal* ones are kept (the unused
    remainder is narrower than every type), generated directly: the types are taken widest
    first and the narrowest type always takes all the room that is left, so no pattern is
    compared with another. Any fill of a gap is, type by type, at most some maximal pattern,
    and the optimizer may leave slots of a pattern empty, so nothing is lost.

    H >= 2: cells of height exactly H stand side by side at one end (sliding cells along a
    row changes nothing), and the remaining width is cut into bands whose heights sum to H,
    each band packed by the same rule. For cell heights of 1 and 2 rows this is every
    packing of a 2-row gap; for 3 rows and more it leaves out packings in which cells of
    different heights interleave across bands. Dominated results are dropped by one sweep in
    order of decreasing area (each pattern checked against those kept).

Open slots (width x height in um, no row structure)
    One kind of cell per slot, as a grid of floor(W/w) x floor(H/h) copies (no rotation).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "MAX_PATTERNS",
    "PatternLimitError",
    "best_fill",
    "grid_copies",
    "row_patterns",
    "undominated_patterns",
]

IntArray = NDArray[np.int64]

#: Most patterns one gap geometry may have before the enumeration stops (a guard against a
#: candidate set with very many distinct widths and very wide gaps).
MAX_PATTERNS = 60_000
#: Relative slack when comparing um outlines (a cell exactly as wide as a slot fits).
_FIT_TOLERANCE = 1e-9


class PatternLimitError(ValueError):
    """More than ``MAX_PATTERNS`` patterns for one gap geometry."""


def _multisets(widths: IntArray, room: int) -> tuple[IntArray, IntArray]:
    """Every count vector c over ``widths`` with c . widths <= room, and the room left.

    Built one width at a time (vectorized over the partial vectors)."""
    counts = np.zeros((1, widths.size), dtype=np.int64)
    left = np.array([room], dtype=np.int64)
    for k, w in enumerate(widths.tolist()):
        reps = left // w + 1
        total = int(reps.sum())
        if total > MAX_PATTERNS * 4:
            raise PatternLimitError(f"more than {MAX_PATTERNS} patterns")
        rows = np.repeat(np.arange(left.size), reps)
        starts = np.cumsum(reps) - reps
        take = np.arange(total) - np.repeat(starts, reps)
        counts = counts[rows]
        counts[:, k] = take
        left = left[rows] - take * w
    return counts, left


def _maximal_row(widths: IntArray, room: int) -> IntArray:
    """Maximal count vectors over distinct ``widths`` (sum <= room, remainder < min width)."""
    if widths.size == 0 or room < widths.min():
        return np.zeros((1, widths.size), dtype=np.int64)
    order = np.argsort(-widths, kind="stable")
    wide, narrow = widths[order[:-1]], int(widths[order[-1]])
    counts, left = _multisets(wide, room)
    last = left // narrow
    full = np.concatenate([counts, last[:, None]], axis=1)
    out = np.empty_like(full)
    out[:, order] = full
    return out


def undominated_patterns(patterns: IntArray, areas: NDArray[np.float64] | None = None
                         ) -> IntArray:
    """Drop duplicates and patterns that another pattern equals or exceeds type by type.

    Sorted by decreasing area, a pattern can only be exceeded by one before it, so each is
    compared with the kept ones only (one vector comparison per pattern, no pair matrix)."""
    patterns = np.unique(np.asarray(patterns, dtype=np.int64), axis=0)
    weight = np.ones(patterns.shape[1]) if areas is None else np.asarray(areas, dtype=float)
    patterns = patterns[np.argsort(-(patterns @ weight), kind="stable")]
    kept = np.empty_like(patterns)
    n_kept = 0
    for row in patterns:
        if n_kept and np.any(np.all(kept[:n_kept] >= row, axis=1)):
            continue
        kept[n_kept] = row
        n_kept += 1
    return kept[:n_kept].copy()


def _band_splits(height: int) -> list[tuple[int, ...]]:
    """Ways to cut ``height`` rows into at least two bands (non-increasing band heights)."""
    out: list[tuple[int, ...]] = []

    def walk(left: int, largest: int, parts: tuple[int, ...]) -> None:
        if left == 0:
            if len(parts) >= 2:
                out.append(parts)
            return
        for h in range(min(left, largest), 0, -1):
            walk(left - h, h, (*parts, h))

    walk(height, height - 1, ())
    return out


@lru_cache(maxsize=4096)
def _patterns_cached(width: int, height: int, types: tuple[tuple[int, int], ...]) -> IntArray:
    n = len(types)
    widths = np.array([t[0] for t in types], dtype=np.int64)
    heights = np.array([t[1] for t in types], dtype=np.int64)
    if height == 1:
        sel = np.flatnonzero(heights == 1)
        out = np.zeros((1, n), dtype=np.int64)
        if sel.size:
            sub = _maximal_row(widths[sel], width)
            out = np.zeros((sub.shape[0], n), dtype=np.int64)
            out[:, sel] = sub
        return out
    tall = np.flatnonzero(heights == height)
    if tall.size:
        tall_counts, left = _multisets(widths[tall], width)
    else:
        tall_counts, left = np.zeros((1, 0), dtype=np.int64), np.array([width])
    lower = heights < height
    min_lower = int(widths[lower].min()) if np.any(lower) else width + 1
    pieces: list[IntArray] = []
    for room in np.unique(left).tolist():
        base = np.zeros((int(np.count_nonzero(left == room)), n), dtype=np.int64)
        base[:, tall] = tall_counts[left == room]
        if room < min_lower:
            pieces.append(base)
            continue
        bands = np.zeros((1, n), dtype=np.int64)
        for split in _band_splits(height):
            combo = np.zeros((1, n), dtype=np.int64)
            for band in split:
                sub = _patterns_cached(int(room), band, types)
                combo = np.unique((combo[:, None, :] + sub[None, :, :]).reshape(-1, n), axis=0)
                if combo.shape[0] > MAX_PATTERNS:
                    raise PatternLimitError(f"more than {MAX_PATTERNS} patterns")
            bands = np.concatenate([bands, combo])
        pieces.append((base[:, None, :] + bands[None, :, :]).reshape(-1, n))
        if sum(p.shape[0] for p in pieces) > MAX_PATTERNS * 4:
            raise PatternLimitError(f"more than {MAX_PATTERNS} patterns")
    return undominated_patterns(np.concatenate(pieces), (widths * heights).astype(float))


def row_patterns(gap_width_sites: int, gap_height_rows: int, type_widths: ArrayLike,
                 type_heights: ArrayLike) -> IntArray:
    """Patterns of one in-row gap: how many cells of each footprint type fit together.

    Parameters
    ----------
    gap_width_sites : int     gap width W, placement sites, >= 1
    gap_height_rows : int     gap height H, placement rows, >= 1
    type_widths : array_like  (n_types,) cell widths, sites, >= 1
    type_heights : array_like (n_types,) cell heights, rows, >= 1; (width, height) pairs distinct

    Returns
    -------
    ndarray   (n_patterns, n_types) int64 counts; the empty pattern alone when nothing fits.
              ``PatternLimitError`` beyond ``MAX_PATTERNS`` patterns.

    Notes
    -----
    The packing rule is in the module docstring: exact for one-row gaps and for two-row gaps
    with cells of one and two rows.
    """
    widths = np.asarray(type_widths, dtype=np.int64).reshape(-1)
    heights = np.asarray(type_heights, dtype=np.int64).reshape(-1)
    if widths.shape != heights.shape:
        raise ValueError("type_widths and type_heights must have the same length")
    if gap_width_sites < 1 or gap_height_rows < 1 or np.any(widths < 1) or np.any(heights < 1):
        raise ValueError("gap and cell sizes must be >= 1")
    types = tuple(zip(widths.tolist(), heights.tolist(), strict=True))
    if len(set(types)) != len(types):
        raise ValueError("footprint types must be distinct")
    fits = (widths <= gap_width_sites) & (heights <= gap_height_rows)
    out = np.zeros((1, widths.size), dtype=np.int64)
    if np.any(fits):
        sel = np.flatnonzero(fits)
        sub = _patterns_cached(int(gap_width_sites), int(gap_height_rows),
                               tuple(types[i] for i in sel))
        out = np.zeros((sub.shape[0], widths.size), dtype=np.int64)
        out[:, sel] = sub
    if out.shape[0] > MAX_PATTERNS:
        raise PatternLimitError(f"{out.shape[0]} patterns, more than {MAX_PATTERNS}")
    return out.copy()


def best_fill(patterns: ArrayLike, type_area: ArrayLike, allowed: ArrayLike) -> float:
    """Largest area one gap can hold using only the ``allowed`` types.

    Any packing with a subset of the types is, type by type, at most some pattern restricted
    to that subset (the patterns cover every packing), so the maximum over the patterns of
    their allowed part is the best fill with that subset.
    """
    p = np.asarray(patterns, dtype=float)
    weight = np.asarray(type_area, dtype=float) * np.asarray(allowed, dtype=bool)
    return float(np.max(p @ weight)) if p.size else 0.0


def grid_copies(slot_width_um: float, slot_height_um: float, cell_width_um: ArrayLike,
                cell_height_um: ArrayLike) -> IntArray:
    """Copies of each cell that fit one open slot as a grid: floor(W/w) floor(H/h), (n,).

    Parameters
    ----------
    slot_width_um, slot_height_um : float   slot outline, um, > 0
    cell_width_um, cell_height_um : array_like   (n,) cell outlines, um, > 0 (no rotation)
    """
    w = np.asarray(cell_width_um, dtype=float)
    h = np.asarray(cell_height_um, dtype=float)
    across = np.floor(slot_width_um / w * (1 + _FIT_TOLERANCE))
    down = np.floor(slot_height_um / h * (1 + _FIT_TOLERANCE))
    return (across * down).astype(np.int64)
