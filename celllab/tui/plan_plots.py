"""Plots of a block plan's supply network for the planning view: |Z| of one region per corner
with its target and resonances, droop in time per region, emission per clock harmonic.

Each function takes a ``BlockPlan`` and returns a ``PlotSpec`` in display units (MHz, mohm,
ns, mV, dBuV); a plan without a network analysis gives an empty plot that says why.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.constants import mega, milli, nano

from celllab.tui.widgets.plot import Marker, PlotSpec, Series

__all__ = ["droop_plot", "emission_plot", "impedance_plot"]

_NO_NETWORK = "no supply network analysed (the block file has no [network] table, or it was left out)"


def _figures(plan: Any) -> Any:
    network = getattr(plan, "network", None)
    return None if network is None else network.figures


def impedance_plot(plan: Any, region: int) -> PlotSpec:
    """|Z| at region ``region``'s node at every corner [mohm] against f [MHz], its target
    impedance as a flat line and its resonances (worst corner) as markers."""
    figures = _figures(plan)
    if figures is None:
        return PlotSpec(title="|Z| per region", empty_text=_NO_NETWORK)
    k = region % len(figures.region_names)
    rf = figures.regions[k]
    f_MHz = figures.freq / mega
    series = [Series(f_MHz, np.abs(figures.z[c, :, k, k]) / milli, corner)
              for c, corner in enumerate(figures.corners)][:3]
    if rf.check is not None and np.isfinite(rf.target) and rf.target > 0:
        series.append(Series(f_MHz, np.full_like(f_MHz, rf.target / milli), "target"))
    top = rf.top_peak
    markers = () if top is None else (Marker(top.frequency / mega, top.magnitude / milli,
                                             f"worst peak {top.frequency / mega:.4g} MHz "
                                             f"({top.corner})", glyph="▲"),)
    more = len(figures.corners) - 3
    title = f"|Z| at {figures.region_names[k]}" + (f" ({len(figures.corners)} corners, 3 shown)"
                                                     if more > 0 else "")
    return PlotSpec(title=title, x_label="f [MHz]", y_label="|Z| [mohm]", x_log=True,
                    y_log=True, series=tuple(series[:4]), markers=markers)


def droop_plot(plan: Any) -> PlotSpec:
    """Each region's droop [mV] against time [ns] at the corner of its largest droop (named in
    the legend)."""
    figures = _figures(plan)
    run = None if figures is None else figures.droop_run
    if run is None:
        return PlotSpec(title="droop in time",
                        empty_text=_NO_NETWORK if figures is None else
                        "droop in time not run (switch it on with d and plan again)")
    series = []
    for k, name in enumerate(run.regions[:4]):
        c = int(np.argmax(np.max(run.droop[:, :, k], axis=1)))
        series.append(Series(run.t / nano, run.droop[c, :, k] / milli,
                             f"{name} ({run.corners[c]})"))
    return PlotSpec(title="droop", x_label="t [ns]",
                    y_label="droop [mV]", series=tuple(series))


def emission_plot(plan: Any) -> PlotSpec:
    """Probe voltage [dBuV] per clock harmonic [MHz] at the loudest corner of each harmonic, for
    the plan and the networks it is compared with (no on-die decap, naive fill)."""
    figures = _figures(plan)
    if figures is None or not figures.emission:
        return PlotSpec(title="emission", empty_text=_NO_NETWORK if figures is None else
                        "no clock harmonics in the emission range")
    series = []
    for label, spectrum in list(figures.emission.items())[:4]:
        level = np.max(spectrum.level_dBuV(), axis=0)
        keep = np.isfinite(level)
        series.append(Series(spectrum.freq[keep] / mega, level[keep], label))
    return PlotSpec(title="emission, 1 ohm probe",
                    x_label="f [MHz]", y_label="level [dBuV]", x_log=True,
                    series=tuple(series))
