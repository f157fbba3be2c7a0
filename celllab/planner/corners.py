"""Which corner each planning figure is taken at: the planner's corner choices, named, in one
place.

Every figure a fill budget or target is checked against is taken at the corner where that
figure is *worst* (least favourable), with "worst" defined per metric by the direction in
which the metric is better (``records.METRIC_BY_NAME[...].better``: the smallest value of a
higher-is-better metric, the largest of a lower-is-better one). That is the same definition
the catalog's ``corner="worst"`` aggregate uses, so a figure read from that aggregate and a
figure computed here from per-corner data agree.

==========================  ===============  ===================================================
policy                      follows metric   picks, per cell
==========================  ===============  ===================================================
``LEAKAGE_BUDGET``          leakage_nA       the largest leakage (the hot / leaky corner)
``CAPACITANCE``             cap_fF           the smallest low-frequency capacitance (slow)
``USEFUL_CAPACITANCE``      cap_fF           the smallest C_eff at the region's frequency
``PDN_RESPONSE``            cap_fF           the corner with the smallest cap_fF; its stored Z(f)
                                             stands for the cell in the block's lumped PDN
==========================  ===============  ===================================================

A block file may instead name one corner (``[candidates] corner = "typ_25C"``); every figure
is then taken at that corner (a what-if, not a budget check).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from celllab.records import METRIC_BY_NAME

__all__ = [
    "CAPACITANCE",
    "LEAKAGE_BUDGET",
    "PDN_RESPONSE",
    "POLICIES",
    "USEFUL_CAPACITANCE",
    "WORST",
    "CornerPolicy",
]

#: The block-file value meaning "each figure at its own worst corner".
WORST = "worst"


@dataclass(frozen=True)
class CornerPolicy:
    """A named rule: the corner at which one planning figure is taken.

    name : str     label used in reports
    metric : str   catalog metric whose better direction defines "worst"
    purpose : str  what the figure is used for
    """

    name: str
    metric: str
    purpose: str

    @property
    def worst_is_largest(self) -> bool:
        """True when the metric is better lower (its worst corner has the largest value)."""
        return METRIC_BY_NAME[self.metric].better == "lower"

    def worst_index(self, values: ArrayLike, axis: int = -1) -> np.ndarray:
        """Index of the worst corner along ``axis`` (missing values, NaN, are never chosen
        unless every corner is missing)."""
        v = np.asarray(values, dtype=float)
        if self.worst_is_largest:
            return np.asarray(np.argmax(np.where(np.isnan(v), -np.inf, v), axis=axis))
        return np.asarray(np.argmin(np.where(np.isnan(v), np.inf, v), axis=axis))

    def worst(self, values: ArrayLike, axis: int = -1) -> np.ndarray:
        """The worst value along ``axis``."""
        v = np.asarray(values, dtype=float)
        idx = np.expand_dims(self.worst_index(v, axis), axis)
        return np.take_along_axis(v, idx, axis=axis).squeeze(axis)


LEAKAGE_BUDGET = CornerPolicy(
    "leakage budget", "leakage_nA", "fill leakage against the block's leakage budget")
CAPACITANCE = CornerPolicy(
    "capacitance", "cap_fF", "low-frequency capacitance reported per region and gap class")
USEFUL_CAPACITANCE = CornerPolicy(
    "useful capacitance", "cap_fF",
    "C_eff at the region's frequency of interest: the objective and the region targets")
PDN_RESPONSE = CornerPolicy(
    "PDN response", "cap_fF", "stored Z(f) of each chosen cell in the block's lumped PDN")

POLICIES: tuple[CornerPolicy, ...] = (LEAKAGE_BUDGET, CAPACITANCE, USEFUL_CAPACITANCE,
                                      PDN_RESPONSE)
