"""ESD and broken-oxide figures of every row (variant x corner) of a characterized group: what the
engine stores per cell and corner, and what the fill-level ESD question reports (SI: V, s, A, W).

`event_figures` runs each rail event on the group's own equivalent circuits
(`esd_events.simulate_event`) and keeps, per row, the worst oxide's figures; `catalog_figures`
adds the DC cost of one broken oxide (`oxide_risk.oxide_fault`) and says whether the cell's
series path keeps the event off its oxide.

Estimates for comparing cells, not ESD or reliability qualification: follow the foundry's ESD
and reliability rules, JS-001 / JS-002 testing, JEDEC qualification and licensed practice.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike

from celllab.characterization import esd_events, oxide_risk
from celllab.characterization.esd_events import EsdEvent
from celllab.characterization.risk_inputs import OxideRiskInputs
from celllab.physics.constants import FloatArray


@dataclass(frozen=True)
class EventFigures:
    """Figures of the worst oxide of each row under each event (arrays (n_event, rows)).

    peak_rail_V        signed rail peak, V
    peak_oxide_V       signed oxide peak of the row's worst oxide (NaN: no gate oxide), V
    time_above_s       time that oxide spends above the pulse breakdown voltage, s
    margin             V_BD,pulse / |peak V_ox| of the worst oxide (inf: no gate oxide)
    shielding          |peak V_ox| / |peak rail| of the worst oxide (NaN: no gate oxide)
    notes              per event, per row: does the cell's circuit keep the event off its oxide
    converged          (n_event, rows) every Newton iteration converged
    """

    events: tuple[EsdEvent, ...]
    peak_rail_V: FloatArray
    peak_oxide_V: FloatArray
    time_above_s: FloatArray
    margin: FloatArray
    shielding: FloatArray
    notes: list[list[str]]
    converged: np.ndarray


def _worst(res: esd_events.EventResult, values: FloatArray, empty: float) -> FloatArray:
    """Each row's value at its worst oxide (smallest margin); ``empty`` without gate oxide."""
    if not res.oxides:
        return np.full(res.rail_V.shape[0], empty)
    pick = np.argmin(res.margin, axis=1)[:, None]
    return np.asarray(np.take_along_axis(values, pick, axis=1)[:, 0], dtype=np.float64)


def event_figures(inputs: OxideRiskInputs, events: Sequence[EsdEvent],
                  extra_rail_F: ArrayLike = 0.0, resolution: str = "fine") -> EventFigures:
    """Simulate each event on every row of ``inputs``.

    Parameters
    ----------
    inputs : OxideRiskInputs   one circuit structure's rows
    events : sequence of EsdEvent
    extra_rail_F : array_like  capacitance added between the rails (a decap fill), F, per row
                               or scalar
    resolution : {"fine", "coarse"}   time grid (`esd_events.event_grid`)

    Notes
    -----
    Transient analysis (`esd_events.simulate_event`, TR-BDF2 modified nodal analysis) of the
    cell's equivalent circuit, the deck's rail clamp and the JS-001 HBM / CDM source networks.
    """
    prot = replace(inputs.protection, c_rail=np.asarray(inputs.protection.c_rail, dtype=float)
                   + np.asarray(extra_rail_F, dtype=float))
    runs, notes = [], []
    for ev in events:  # a handful of events, each over all rows at once
        res = esd_events.simulate_event(inputs.netlist, ev, prot, inputs.oxides, inputs.v_bd_pulse,
                                         channels=inputs.channels,
                                         extra_elements=inputs.extra_elements,
                                         nodeset=inputs.nodeset, resolution=resolution)
        text = esd_events.shielding_notes(res, inputs.series_rc, inputs.pair)
        if res.segments_capped:
            text = [n + f"; channel R*C far above the edge: {res.n_segments}-segment ladder, the "
                    "oxide next to the contacts may see more" for n in text]
        runs.append(res)
        notes.append(text)
    return EventFigures(
        events=tuple(events),
        peak_rail_V=np.stack([r.peak_rail_V for r in runs]),
        peak_oxide_V=np.stack([_worst(r, r.peak_oxide_V, np.nan) for r in runs]),
        time_above_s=np.stack([_worst(r, r.time_above_s, 0.0) for r in runs]),
        margin=np.stack([r.worst_margin for r in runs]),
        shielding=np.stack([r.shielding for r in runs]),
        notes=notes,
        converged=np.stack([r.converged for r in runs]),
    )


@dataclass(frozen=True)
class CatalogRisk:
    """Per-row figures the catalog stores (arrays (rows,); NaN for a cell without gate oxide).

    hbm, cdm             `EventFigures` of the two events (one event each)
    series_helps         HBM: the worst oxide sees less than `esd_events.SHIELDED_BELOW` of the
                         rail (the cell's own series path keeps the event off its oxide)
    fault_current_A      supply current when the cell's worst oxide breaks
    fault_power_W        supply power then
    fault_survives       that current is below the rail's fault current limit
    flags                per row: validity notes
    notes                per row: the HBM shielding sentence
    """

    hbm: EventFigures
    cdm: EventFigures
    series_helps: FloatArray
    fault_current_A: FloatArray
    fault_power_W: FloatArray
    fault_survives: FloatArray
    flags: list[list[str]]
    notes: list[str]


def catalog_figures(inputs: OxideRiskInputs, hbm: EsdEvent, cdm: EsdEvent,
                    resolution: str = "coarse") -> CatalogRisk:
    """HBM, CDM and broken-oxide figures of every row (see `CatalogRisk`); the events on the
    "coarse" grid by default (catalog-wide runs)."""
    if hbm.model != "hbm" or cdm.model != "cdm":
        raise ValueError(f"catalog_figures: give an HBM and a CDM event, got {hbm.label}, {cdm.label}")
    h = event_figures(inputs, [hbm], resolution=resolution)
    c = event_figures(inputs, [cdm], resolution=resolution)
    fault = oxide_risk.oxide_fault(inputs)
    n_rows = inputs.supply.size
    has_oxide = bool(inputs.oxides)
    share = h.shielding[0]
    helps = np.where(np.isfinite(share), (share < esd_events.SHIELDED_BELOW).astype(float), np.nan)
    power = (np.max(fault.supply_power_W, axis=1) if has_oxide else np.full(n_rows, np.nan))
    survives = np.where(np.isfinite(fault.worst_current_A), fault.survives.astype(float), np.nan)
    flags: list[list[str]] = [list(f) for f in inputs.flags] if inputs.flags else [[] for _ in range(n_rows)]
    for r in range(n_rows):
        if not (h.converged[0, r] and c.converged[0, r]):
            flags[r].append("esd_not_converged: a Newton iteration of an ESD transient did not "
                            "converge; ESD figures are rough")
        if has_oxide and not fault.converged[r]:
            flags[r].append("fault_not_converged: no DC solution with a broken oxide; fault "
                            "figures are empty")
    return CatalogRisk(hbm=h, cdm=c, series_helps=helps, fault_current_A=fault.worst_current_A,
                       fault_power_W=power, fault_survives=survives, flags=flags,
                       notes=list(h.notes[0]))
