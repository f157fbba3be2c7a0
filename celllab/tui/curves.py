"""Plot specs of cell records: C-V, |Z|(f), ESR(f) and C_eff(f), for one cell or several.

Shared by the cell view, the what-if editor and the comparison view. Each function takes
(label, cell) pairs and the corners to show; with one cell every corner is a curve, with several
cells every cell is a curve at one corner. Values are shown in display units (fF, Ω, Hz).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from celllab.columns import is_lower_bound
from celllab.display import LOWER_BOUND, format_number
from celllab.records import CellResult
from celllab.tui.widgets.plot import Level, Marker, PlotSpec, Series
from celllab.units import from_si, to_si

#: At most this many curves in one plot (the plot widget's distinct colours).
MAX_CURVES = 5

Pairs = Sequence[tuple[str, CellResult]]


def _label(label: str, corner: str, several_corners: bool) -> str:
    if label and several_corners:
        return f"{label} {corner}"
    return label or corner


def _chosen(cell: CellResult, corners: Sequence[str] | None) -> list[Any]:
    if corners is None:
        return list(cell.corners)
    picked = [c for c in cell.corners if c.corner in corners]
    return picked or list(cell.corners[:1])


def _many_corners(cells: Pairs, corners: Sequence[str] | None) -> bool:
    return any(len(_chosen(cell, corners)) > 1 for _, cell in cells)


def cv_plot(cells: Pairs, corners: Sequence[str] | None = None) -> PlotSpec:
    """C-V curves with each operating point marked (every corner of one cell, or a corner per
    cell)."""
    series, markers = [], []
    many = _many_corners(cells, corners)
    for label, cell in cells:
        for c in _chosen(cell, corners):
            if c.cv is None:
                continue
            cap_fF = from_si(float(c.cv.operating_cap_F), "fF")
            series.append(Series(np.asarray(c.cv.bias_V), from_si(np.asarray(c.cv.cap_F), "fF"),
                                 _label(label, c.corner, many)))
            markers.append(Marker(float(c.cv.operating_bias_V), cap_fF, "operating point"))
    title = "C-V"
    if len(markers) == 1:
        m = markers[0]
        title = f"C-V · operating point {format_number(m.x)} V, {format_number(m.y)} fF"
    return PlotSpec(title=title, x_label="V_gb [V]", y_label="C [fF]",
                    series=tuple(series[:MAX_CURVES]), markers=tuple(markers[:MAX_CURVES]),
                    empty_text="no C-V curve: this cell has no MOS gate (plates only), its "
                               "capacitance does not depend on bias")


def impedance_plot(cells: Pairs, corners: Sequence[str] | None = None,
                   target_ohm: float | None = None) -> PlotSpec:
    """|Z|(f) on log-log axes with each SRF marked, and the target |Z| when one is known."""
    series, markers = [], []
    many = _many_corners(cells, corners)
    for label, cell in cells:
        for c in _chosen(cell, corners):
            f = np.asarray(c.response.freq_Hz)
            z = np.abs(np.asarray(c.response.z_ohm))
            series.append(Series(f, z, _label(label, c.corner, many)))
            srf = c.metrics.get("srf_GHz")
            srf_Hz = to_si(srf, "GHz") if srf is not None else math.nan
            if math.isfinite(srf_Hz) and f.size and f[0] <= srf_Hz <= f[-1]:
                at = float(np.interp(srf_Hz, f, z))
                if is_lower_bound(c, "srf_GHz"):
                    markers.append(Marker(srf_Hz, at, f"SRF {LOWER_BOUND} here (bound)", glyph="▶"))
                else:
                    markers.append(Marker(srf_Hz, at, "self-resonance"))
    levels = ()
    if target_ohm is not None and target_ohm > 0:
        levels = (Level(target_ohm, f"target {format_number(target_ohm)} Ω"),)
    return PlotSpec(title="|Z|(f)", x_label="f [Hz]", y_label="|Z| [Ω]", x_log=True, y_log=True,
                    series=tuple(series[:MAX_CURVES]), markers=tuple(markers[:MAX_CURVES]),
                    levels=levels)


def esr_plot(cells: Pairs, corners: Sequence[str] | None = None) -> PlotSpec:
    """ESR(f) = Re Z(f) on log-log axes: the loss a decap adds at each frequency."""
    series = []
    many = _many_corners(cells, corners)
    for label, cell in cells:
        for c in _chosen(cell, corners):
            f = np.asarray(c.response.freq_Hz)
            series.append(Series(f, np.real(np.asarray(c.response.z_ohm)),
                                 _label(label, c.corner, many)))
    return PlotSpec(title="ESR(f) = Re Z", x_label="f [Hz]", y_label="ESR [Ω]", x_log=True,
                    y_log=True, series=tuple(series[:MAX_CURVES]))


def ceff_plot(cells: Pairs, corners: Sequence[str] | None = None) -> PlotSpec:
    """Effective capacitance C_eff(f) = -1/(w Im Z) on log axes (positive part), bandwidth marked."""
    series, markers = [], []
    many = _many_corners(cells, corners)
    for label, cell in cells:
        for c in _chosen(cell, corners):
            f = np.asarray(c.response.freq_Hz)
            with np.errstate(divide="ignore", invalid="ignore"):
                ceff = from_si(c.response.c_eff_F(), "fF")
            series.append(Series(f, np.where(ceff > 0, ceff, np.nan),
                                 _label(label, c.corner, many)))
            bw = c.metrics.get("bandwidth_GHz")
            cap = c.metrics.get("cap_fF")
            bw_Hz = to_si(bw, "GHz") if bw is not None else math.nan
            if cap is not None and math.isfinite(bw_Hz) and f.size and f[0] <= bw_Hz <= f[-1]:
                if is_lower_bound(c, "bandwidth_GHz"):
                    markers.append(Marker(bw_Hz, float(np.interp(bw_Hz, f, ceff)),
                                          f"bandwidth {LOWER_BOUND} here (bound)", glyph="▶"))
                else:
                    markers.append(Marker(bw_Hz, cap / math.sqrt(2), "bandwidth (C/√2)"))
    return PlotSpec(title="C_eff(f)", x_label="f [Hz]", y_label="C_eff [fF]", x_log=True,
                    y_log=True, series=tuple(series[:MAX_CURVES]),
                    markers=tuple(markers[:MAX_CURVES]))
