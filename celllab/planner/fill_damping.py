"""Damping through the fill itself: a credit in the fill objective for cells whose loss damps
the region's worst resonance (SI: F, S, Hz).

At a parallel resonance f0 the peak is |Z|max ~ 1 / G, G the conductance in parallel with the
tank there, and the fill's share of it is linear in the counts, G_fill = sum_i n_i g_i with
g_i = Re(1 / Z_i(f0)) (`damping.resonance_conductance`). The fill objective
(``fill.FillProblem.damping``) counts each copy's

    D_{r,i} = w g_i / (2 pi f0_r)   (F),

i.e. w times its capacitance times its damping score g / (2 pi f0 C)
(`damping.damping_score`; x / (1 + x^2) <= 1/2 for a series ESR-C cell, x = 2 pi f0 ESR C, so
a matched cell, x = 1, counts (1 + w / 2) times its capacitance and a lossless one just its
capacitance). w is the block file's ``[network] fill_damping_weight``.

f0 moves with the fill (f0 ~ 1 / sqrt(L C)), so the credit is taken at the resonance of the fill
solved without it: the highest |Z| peak inside each region's band, at that peak's worst corner
(`network_figures.RegionFigures.top_peak`); the fill is then solved once more with the credit
(one iteration). A region with no peak in its band gets no credit.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from celllab.planner.damping import resonance_conductance
from celllab.planner.network import FillEntry
from celllab.planner.network_figures import NetworkFigures
from celllab.records import CellResult

__all__ = ["damping_credit", "fill_conductance", "peak_to_damp"]

FloatArray = NDArray[np.float64]


def peak_to_damp(figures: NetworkFigures) -> tuple[FloatArray, list[str], FloatArray]:
    """Per region: (f0 Hz, corner, |Z| ohm) of its highest in-band peak; nan, "-", nan where
    it has none."""
    f0 = np.full(len(figures.regions), np.nan)
    mag = np.full(len(figures.regions), np.nan)
    corners = ["-"] * len(figures.regions)
    for k, reg in enumerate(figures.regions):
        if reg.top_peak is not None:
            f0[k], corners[k], mag[k] = (reg.top_peak.frequency, reg.top_peak.corner,
                                         reg.top_peak.magnitude)
    return f0, corners, mag


def damping_credit(records: Sequence[CellResult], f0: FloatArray, corners: Sequence[str],
                   weight: float) -> FloatArray:
    """(n_regions, n_cells) credit per copy, F: w Re(1 / Z_i(f0_r)) / (2 pi f0_r), each cell's
    stored circuit at region r's corner; 0 where f0_r is nan or a cell has no circuit there.

    Parameters
    ----------
    records : the candidate cells' stored records (per-corner ``netlist``)
    f0 : (n_regions,) Hz;  corners : (n_regions,) corner names;  weight : w >= 0
    """
    out = np.zeros((len(f0), len(records)))
    if weight <= 0:
        return out
    for r, (f, corner) in enumerate(zip(f0, corners, strict=True)):
        if not np.isfinite(f):
            continue
        have = [i for i, rec in enumerate(records) if rec.netlist and corner in rec.netlist]
        if not have:
            continue
        g = resonance_conductance([records[i].netlist[corner] for i in have], float(f))
        out[r, have] = weight * np.maximum(g, 0.0) / (2.0 * np.pi * f)
    return out


def fill_conductance(entries: Sequence[FillEntry], f0: float, corner: str) -> float:
    """The fill's conductance at f0, sum_i n_i Re(1 / Z_i(f0)) at ``corner``, S (nan without
    a frequency)."""
    if not np.isfinite(f0):
        return float("nan")
    if not entries:
        return 0.0
    g = resonance_conductance([e.circuits[corner] for e in entries], f0)
    return float(np.dot([e.count for e in entries], g))
