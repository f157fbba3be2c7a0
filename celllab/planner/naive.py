"""The naive fill a plan is compared with: every gap filled with the densest cell that fits
it, as many copies as fit, no budget applied (SI: F, A, m^2).

For each gap (an in-row gap of one width and height, or an open slot) the naive fill takes
the one cell that puts the most low-frequency capacitance into it (capacitance at the
``CAPACITANCE`` policy corner times the copies that fit: floor(w / w_cell) x
floor(h / h_cell) in a row gap, a grid in an open slot, ``packing.grid_copies``), among the
cells the region may take (an ESD-safe-only region keeps its restriction: a fill nobody could
tape out is no comparison). Leakage, oxide area and the kind limit are not applied: this is
"fill everything with the densest cell", and the report says what it would leak.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from celllab.planner.block import BlockFile
from celllab.planner.candidates import Candidate
from celllab.planner.packing import grid_copies

__all__ = ["NaiveFill", "densest_fill"]


@dataclass(frozen=True)
class NaiveFill:
    """One region's naive fill: (cell, copies) per kind used, in first-use order. SI."""

    region: str
    cells: list[tuple[Candidate, int]] = field(default_factory=list)

    @property
    def count(self) -> int:
        return sum(n for _, n in self.cells)

    @property
    def cap(self) -> float:
        return float(sum(n * c.cap for c, n in self.cells))

    @property
    def leakage(self) -> float:
        return float(sum(n * c.leakage for c, n in self.cells))

    @property
    def oxide_area(self) -> float:
        return float(sum(n * c.oxide_area for c, n in self.cells))


def densest_fill(block: BlockFile, cells: list[Candidate], allowed: NDArray[np.bool_]
                 ) -> list[NaiveFill]:
    """Each region of ``block`` filled gap by gap with the densest allowed cell, in region
    order.

    Parameters
    ----------
    block : BlockFile               the regions and their gaps
    cells : list of Candidate       the candidate cells
    allowed : (n_regions, n_cells)  which cells each region may take (ESD-safe-only)
    """
    cap = np.array([c.cap for c in cells])
    w_sites = np.array([c.width_sites for c in cells])
    h_rows = np.array([c.height_rows for c in cells])
    in_rows = np.array(["row" in c.placement for c in cells])
    in_open = np.array(["open" in c.placement for c in cells])
    w_um = np.array([c.width_um for c in cells])
    h_um = np.array([c.height_um for c in cells])
    out = []
    for r, region in enumerate(block.region):
        # (copies per gap of every cell, gaps) for each gap of the region
        gaps: list[tuple[np.ndarray, int]] = []
        for g in region.row_gaps:
            fits = allowed[r] & in_rows & (h_rows <= g.height_rows)
            stacked = np.where(fits, g.height_rows // h_rows, 0)
            gaps += [(stacked * (width // w_sites), n)
                     for width, n in zip(g.width_sites, g.count, strict=True)]
        gaps += [(grid_copies(s.width_um, s.height_um, w_um, h_um) * (allowed[r] & in_open),
                  s.count) for s in region.open_slots]
        counts: dict[int, int] = {}
        for copies, n in gaps:
            if n > 0 and np.any(copies > 0):
                k = int(np.argmax(copies * cap))
                counts[k] = counts.get(k, 0) + n * int(copies[k])
        out.append(NaiveFill(region.name, [(cells[k], n) for k, n in counts.items()]))
    return out
