"""Outline of the well junction a cell reverse-biases: area and perimeter per variant (SI: m, m^2).

Rules (common practice, no source), from the resolved geometry and placement of
``topologies.geometry`` (W = cell width, H = cell height, h = row height, h_n = the core row's
n-well half, rows = height in rows):

==========================  =============================  ====================================
device(s)                   core_row                       open_region
==========================  =============================  ====================================
NMOS, PMOS, NMOS + PMOS     row n-well half on the power   PMOS: n-well W x H, perimeter
                            rail: W h_n rows; perimeter    2 (W + H); NMOS + PMOS: each row's
                            W rows (the n/p boundary)      n-well half W h/2, perimeter 2W + h
                                                           per row; NMOS: none (p-substrate)
n-well accumulation         none (its n-well is on the     none
                            ground rail, like the
                            substrate)
p-well accumulation         deep n-well tub W x H,         deep n-well tub W x H,
                            perimeter 2 (W + H)            perimeter 2 (W + H)
==========================  =============================  ====================================

In a core row the n-well half is there whatever the cell places on it (``geometry``: the other
half is left to its well), and it continues into the neighbours at the side edges and across the
power rail into the next row's n-well, so only the n/p boundary inside the cell is junction
perimeter. An open region has no neighbouring wells: each n-well ends inside the outline (an
upper estimate where abutting spacer cells merge their wells). The n-well sits on the cell's
rail, so that rail's voltage reverse-biases it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.constants import micro

#: Device arrangement of a cell holding both an NMOS and a PMOS (tied CMOS, cross-coupled pair).
BOTH_TYPES = "nmos+pmos"


def _junction(role: str, placement: str) -> str:
    """Junction kind ('' = none) a cell of this device arrangement and placement biases."""
    if role == "acc_p":
        return "deep_nwell"
    if role == "acc_n":
        return ""
    if placement == "core_row":
        return "nwell"              # the row's n-well half, on the power rail
    return "nwell" if role in ("pmos", BOTH_TYPES) else ""


def biased_wells(deck: Any, cells: Sequence[Any], geos: Sequence[Any],
                 roles: Sequence[str] | np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(kinds (n_v,), area (n_v, 1) m^2, perimeter (n_v, 1) m) of each cell's biased well junction.

    ``roles``: per variant the device role (``characterization.mos.ROLES``) of a one-device cell,
    or ``BOTH_TYPES`` for a cell holding an NMOS and a PMOS. Rules in the module docstring.
    """
    names = [str(r) for r in roles]
    placement = [str(g.placement) for g in geos]
    kinds = np.array([_junction(r, p) for r, p in zip(names, placement)])
    width = np.array([g.cell_width_um for g in geos]) * micro
    height = np.array([g.cell_height_um for g in geos]) * micro
    rows = np.array([c.height_rows for c in cells], dtype=float)
    row_h = deck.layout.row_height_um * micro
    h_n = deck.layout.nwell_half_um * micro
    core = np.array([p == "core_row" for p in placement])
    both = np.array([r == BOTH_TYPES for r in names])
    tub = kinds == "deep_nwell"
    area = np.select([kinds == "", tub, core, both], [0.0, width * height, width * h_n * rows, width * row_h / 2 * rows],
                     width * height)
    perimeter = np.select([kinds == "", tub, core, both],
                          [0.0, 2 * (width + height), width * rows, (2 * width + row_h) * rows], 2 * (width + height))
    return kinds, area[:, None], perimeter[:, None]
