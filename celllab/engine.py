"""Characterization engine: deck + cells -> SI arrays -> physics -> ``CharacterizationRun``.

Cells are grouped by topology; each group is evaluated as arrays of shape (variant, corner) and
its equivalent circuits as one netlist whose values run over variant x corner, solved over
frequency in one call. Python loops run over topologies, corners and result records only.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, topologies
from celllab.cells.expand import resolve
from celllab.cells.schema import CellSpec
from celllab.characterization.params import CornerSet
from celllab.deck.schema import Deck
from celllab.records import (
    METRICS,
    CellResult,
    CharacterizationRun,
    CornerFigures,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)
from celllab.units import from_si

#: Frequency sweep of every response: 100 kHz .. 1 THz, 20 points per decade.
FREQ_HZ = np.logspace(5, 12, 141)

Progress = Callable[[str, int, int], None]


def characterize(deck: Deck, cells: Sequence[CellSpec], corners: Sequence[str] | None = None,
                 progress: Progress | None = None, sources: Sequence[str] = ()) -> CharacterizationRun:
    """Characterize every cell at every corner of ``deck`` (or the named ``corners``)."""
    corner_set = CornerSet.from_deck(deck, list(corners) if corners else None)
    geometries = [resolve(c, deck) for c in cells]
    results: list[CellResult | None] = [None] * len(cells)
    groups: dict[str, list[int]] = {}
    for i, c in enumerate(cells):
        groups.setdefault(c.topology, []).append(i)
    done = 0
    for topology, idx in groups.items():
        group_cells = [cells[i] for i in idx]
        group_geo = [geometries[i] for i in idx]
        out = topologies.evaluate(topology, deck, corner_set, group_cells, group_geo, FREQ_HZ)
        for k, i in enumerate(idx):
            results[i] = _record(cells[i], geometries[i], corner_set, out, k)
        done += len(idx)
        if progress:
            progress(f"{deck.name}: {topology}", done, len(cells))
    if progress and not cells:
        progress(deck.name, 0, 0)
    return CharacterizationRun(
        deck_name=deck.name, deck_hash=deck.content_hash, deck_params=deck.model_dump(mode="json"),
        model_version=MODEL_VERSION, corners=corner_set.names, cells=[r for r in results if r is not None],
        source_files=list(sources))


def _series_inductance(out: Any, k: int, j: int) -> float:
    """ESL: the circuit's rail-loop inductance element (the sweep often ends below the SRF)."""
    try:
        value = np.broadcast_to(out.netlist.element("l_loop").value, (out.n_variant * out.n_corner,))
    except KeyError:
        return float(out.summary["esl_H"][k, j])
    return float(value[k * out.n_corner + j])


def _finite(x: float) -> float:
    return float(x) if np.isfinite(x) else float("nan")


def _record(spec: CellSpec, geo: Any, corners: CornerSet, group: Any, index: int) -> CellResult:
    out, k = group.row(index)
    corner_results = []
    for j, cname in enumerate(corners.names):
        flags = list(out.flags[k][j])
        bw = float(out.summary["bandwidth_Hz"][k, j])
        if not np.isfinite(bw):
            flags.append("bandwidth_beyond_sweep: C_eff stays above C/sqrt(2) up to 1 THz; value is a lower bound")
            bw = float(FREQ_HZ[-1])
        srf = float(out.summary["srf_Hz"][k, j])
        if not np.isfinite(srf):
            flags.append("srf_beyond_sweep: no self-resonance below 1 THz; value is a lower bound")
            srf = float(FREQ_HZ[-1])
        figures = CornerFigures(
            area_um2=geo.area_um2, c_lf_F=float(out.summary["c_lf_F"][k, j]), cap_ox_F=float(out.cap_ox_F[k, j]),
            esr_lf_ohm=float(out.summary["esr_lf_ohm"][k, j]), esr_probe_ohm=float(out.summary["esr_at_ohm"][k, j, 0]),
            bandwidth_Hz=bw, esl_H=_series_inductance(out, k, j), srf_Hz=srf, tau_s=float(out.summary["tau_s"][k, j]),
            leakage_A=float(out.leakage_A[k, j]), e_ox_V_per_m=float(out.e_ox_V_per_m[k, j]),
            ttf_s=float(out.ttf_s[k, j]), vbd_pulse_V=float(out.vbd_pulse_V[k, j]))
        m = {metric.name: _finite(metric.compute(figures)) for metric in METRICS}  # type: ignore[misc]
        cv = None
        if out.cv_bias is not None:
            cv = CVCurve(bias_V=np.asarray(out.cv_bias[k, j], dtype=float), cap_F=np.asarray(out.cv_cap[k, j], dtype=float),
                         operating_bias_V=float(out.cv_operating_V[k, j]), operating_cap_F=float(out.cv_operating_F[k, j]))
        corner_results.append(CornerResult(
            corner=cname, temperature_C=float(from_si(corners.temperature_K[j], "degC")),
            supply_V=float(out.supply_V[k, j]), metrics=m,
            response=FrequencyResponse(freq_Hz=FREQ_HZ.copy(), z_ohm=out.z_ohm[k, j].copy()), cv=cv, flags=flags))
    geometry = {**spec.geometry, **{f"resolved_{key}": v for key, v in geo.as_dict().items() if key != "mom_layers"}}
    geometry["resolved_mom_layers"] = [layer.name for layer in geo.mom_layers]
    gate_area = geo.gate_area_um2 if geo.gate_area_um2 else geo.mom_plate_area_um2
    return CellResult(
        name=spec.name, cell_hash=spec.content_hash, family=spec.family, topology=spec.topology, oxide=spec.oxide,
        geometry=geometry, area_um2=geo.area_um2, width_sites=spec.width_sites, height_rows=spec.height_rows,
        gate_area_um2=gate_area, esd_safe=spec.esd_safe, corners=corner_results,
        netlist={cname: out.netlist_for(k, j) for j, cname in enumerate(corners.names)}, notes=list(out.notes),
        placement=spec.placement, rail=spec.rail)
