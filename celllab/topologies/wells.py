"""Outline of the well junction a cell reverse-biases: area and perimeter per variant (SI: m, m^2).

Rules (common practice, no source), from the resolved geometry of ``topologies.geometry``:

* A single-device cell whose device sits in a biased n-well (``pmos``) has that n-well under
  the whole outline: area = width x height. Along a row the well continues into the neighbours
  on the left and right, so only the top and bottom edges are junction perimeter: 2 x width.
* An isolated p-well cell (``acc_p``) sits in its own deep n-well tub under the whole outline:
  area = width x height, perimeter = 2 (width + height).
* The cross-coupled pair holds its PMOS in an n-well over half of each row: area =
  width x height / 2; the n-well/p-well boundary runs once per row: perimeter = width x rows
  (the edge at the rail meets the mirrored row's n-well).
* Roles with no biased junction (``characterization.junctions.WELL_JUNCTION``) get zeros.

These outlines follow the cells' present placement (one device per row, or the pair's halves); a
cell that leaves part of a core row to the other well type carries that well too and would add it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.constants import micro

from celllab.characterization.junctions import WELL_JUNCTION


def single_device_wells(geos: Sequence[Any], roles: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(kinds (n_v,), area (n_v, 1) m^2, perimeter (n_v, 1) m) for one device per row."""
    kinds = np.array([WELL_JUNCTION[str(r)] for r in roles])
    width = np.array([g.cell_width_um for g in geos]) * micro
    height = np.array([g.cell_height_um for g in geos]) * micro
    area = np.where(kinds == "", 0.0, width * height)
    perimeter = np.select([kinds == "nwell", kinds == "deep_nwell"], [2.0 * width, 2.0 * (width + height)], 0.0)
    return kinds, area[:, None], perimeter[:, None]


def pair_wells(cells: Sequence[Any], geos: Sequence[Any]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(kinds, area m^2, perimeter m) of the cross-coupled pair's PMOS n-well halves."""
    width = np.array([g.cell_width_um for g in geos]) * micro
    height = np.array([g.cell_height_um for g in geos]) * micro
    rows = np.array([c.height_rows for c in cells], dtype=float)
    return np.full(len(geos), "nwell"), (width * height / 2.0)[:, None], (width * rows)[:, None]
