"""The naive fill a plan is compared with: every gap of each region filled with the densest
cell, as many copies as fit, no budget applied (SI: F, A, m^2).

"Densest" is the highest low-frequency capacitance per footprint area (capacitance at the
``CAPACITANCE`` policy corner), among the single-row cells the region may take (an
ESD-safe-only region keeps its restriction: a fill nobody could tape out is no comparison).
Each in-row gap of w sites and h rows takes floor(w / w_cell) x floor(h / h_cell) copies;
each open slot a grid of it (``packing.grid_copies``). Leakage, oxide area and the kind limit
are not applied: this is what filling "everything with the densest cell" gives, and the
report says what it would leak.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from celllab.planner.block import BlockFile
from celllab.planner.candidates import Candidate
from celllab.planner.packing import grid_copies

__all__ = ["NaiveFill", "densest_fill"]


@dataclass(frozen=True)
class NaiveFill:
    """One region filled with one cell (None: no cell may go there). SI per region."""

    region: str
    cell: Candidate | None
    count: int

    @property
    def cap(self) -> float:
        return 0.0 if self.cell is None else self.count * self.cell.cap

    @property
    def leakage(self) -> float:
        return 0.0 if self.cell is None else self.count * self.cell.leakage

    @property
    def oxide_area(self) -> float:
        return 0.0 if self.cell is None else self.count * self.cell.oxide_area


def _densest(cells: list[Candidate], allowed: NDArray[np.bool_]) -> int | None:
    density = np.array([c.cap / (c.width_um * c.height_um) for c in cells])
    single = np.array([c.height_rows == 1 and "row" in c.placement for c in cells])
    for mask in (allowed & single, allowed):
        if mask.any():
            return int(np.argmax(np.where(mask, density, -np.inf)))
    return None


def densest_fill(block: BlockFile, cells: list[Candidate], allowed: NDArray[np.bool_]
                 ) -> list[NaiveFill]:
    """Each region of ``block`` filled with its densest allowed cell, in region order.

    Parameters
    ----------
    block : BlockFile               the regions and their gaps
    cells : list of Candidate       the candidate cells
    allowed : (n_regions, n_cells)  which cells each region may take (ESD-safe-only)
    """
    out = []
    for r, region in enumerate(block.region):
        k = _densest(cells, allowed[r])
        if k is None:
            out.append(NaiveFill(region.name, None, 0))
            continue
        c = cells[k]
        count = 0
        if "row" in c.placement:
            for gaps in region.row_gaps:
                stacked = gaps.height_rows // c.height_rows
                for width, n in zip(gaps.width_sites, gaps.count, strict=True):
                    count += n * (width // c.width_sites) * stacked
        if "open" in c.placement:
            for slots in region.open_slots:
                count += slots.count * int(grid_copies(slots.width_um, slots.height_um,
                                                       [c.width_um], [c.height_um])[0])
        out.append(NaiveFill(region.name, c, count))
    return out
