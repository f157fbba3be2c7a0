"""Which corner each planning figure is taken at: the planner's corner choices, named, in one
place.

Fill figures
------------
Every figure a fill budget or target is checked against is taken at the corner where that
figure is *worst* (least favourable). "Worst" is not defined here: it is the column
registry's (``celllab.columns``: ``Column.corner_index`` / ``Column.over_corners`` with
``"worst"``, from the metric's ``better`` direction: the smallest value of a higher-is-better
metric, the largest of a lower-is-better one). That is the same definition the catalog's
``corner="worst"`` aggregate uses, so a figure read from that aggregate and a figure computed
here from per-corner data agree.

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

Supply-network figures
----------------------
The supply network is evaluated at every stored corner the fill's cells share, and each
reported figure is taken at its own worst corner (``NETWORK_FIGURES``): a larger |Z|, droop,
ringing Q, settling time or emission level is always the worse one, so the worst corner is
the one with the largest value, named beside the figure. Two figures of one region may come
from different corners.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from celllab.columns import Column
from celllab.records import METRIC_BY_NAME

__all__ = [
    "CAPACITANCE",
    "LEAKAGE_BUDGET",
    "NETWORK_FIGURES",
    "PDN_RESPONSE",
    "POLICIES",
    "USEFUL_CAPACITANCE",
    "WORST",
    "CornerPolicy",
    "FigurePolicy",
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
    def column(self) -> Column:
        """The metric's entry in the column registry (its ``better`` direction)."""
        return METRIC_BY_NAME[self.metric]

    @property
    def worst_is_largest(self) -> bool:
        """True when the metric is better lower (its worst corner has the largest value)."""
        return self.column.takes_max(WORST)

    def worst_index(self, values: ArrayLike, axis: int = -1) -> np.ndarray:
        """Index of the worst corner along ``axis`` (missing values, NaN, are never chosen
        unless every corner is missing): ``Column.corner_index(values, "worst")``."""
        return self.column.corner_index(values, WORST, axis)

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


@dataclass(frozen=True)
class FigurePolicy:
    """The supply network's corner rule: each figure at its own worst corner, where a larger
    value is always the worse one (|Z|, droop, Q, settling time, emission level).

    name : str   label used in reports;  rule : str   the rule in words
    """

    name: str
    rule: str

    def worst_index(self, values: ArrayLike, axis: int = 0) -> np.ndarray:
        """Index of the worst (largest) corner along ``axis``; NaN never chosen unless every
        corner is NaN (then the first)."""
        v = np.asarray(values, dtype=float)
        return np.asarray(np.argmax(np.where(np.isnan(v), -np.inf, v), axis=axis))

    def worst(self, values: ArrayLike, corners: tuple[str, ...] | list[str]
              ) -> tuple[float, str]:
        """(value, corner) of the worst finite entry of a (n_corner,) array; (nan, "-")
        when none is finite."""
        v = np.asarray(values, dtype=float)
        if not np.any(np.isfinite(v)):
            return float("nan"), "-"
        k = int(self.worst_index(np.where(np.isfinite(v), v, np.nan)))
        return float(v[k]), corners[k]


NETWORK_FIGURES = FigurePolicy(
    "supply network",
    "each figure at its own worst corner (named beside it): highest |Z| for resonances and "
    "the target check, largest droop, highest ringing Q, longest settling, loudest emission")
