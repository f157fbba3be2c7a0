"""Characterization engine: deck + cells -> SI arrays -> physics -> ``CharacterizationRun``.

Cells are grouped by topology; each group is evaluated as arrays of shape (variant, corner) and
its equivalent circuits as one netlist whose values run over variant x corner, solved over
frequency in one call. Python loops run over topologies, corners and result records only.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, topologies
from celllab.cells.expand import resolve
from celllab.cells.schema import CellSpec
from celllab.characterization.cell_risk import CatalogRisk, catalog_figures
from celllab.characterization.esd_events import EsdEvent
from celllab.characterization.params import CornerSet
from celllab.characterization.risk_inputs import inputs_from_group
from celllab.deck.schema import AnalysisBand, Deck
from celllab.records import (
    METRICS,
    CellResult,
    CharacterizationRun,
    CornerFigures,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)
from celllab.units import from_si, to_si


def sweep_frequencies(band: AnalysisBand) -> np.ndarray:
    """The log-spaced sweep of a deck's analysis band (``[analysis]``), Hz, both ends included."""
    lo, hi = to_si(band.f_min_MHz, "MHz"), to_si(band.f_max_GHz, "GHz")
    return np.geomspace(lo, hi, max(2, int(round(np.log10(hi / lo) * band.points_per_decade)) + 1))


#: Sweep of a deck that states no band (the ``[analysis]`` defaults: 100 kHz .. 100 GHz).
FREQ_HZ = sweep_frequencies(AnalysisBand())

Progress = Callable[[str, int, int], None]


def characterize(deck: Deck, cells: Sequence[CellSpec], corners: Sequence[str] | None = None,
                 progress: Progress | None = None, sources: Sequence[str] = (),
                 esd: bool = True) -> CharacterizationRun:
    """Characterize every cell at every corner of ``deck`` (or the named ``corners``).

    ``esd``: also run the deck's ``[esd]`` HBM and CDM events on every cell's circuit and the
    broken-oxide DC analysis (transients: most of the run time); False leaves those columns
    empty.
    """
    corner_set = CornerSet.from_deck(deck, list(corners) if corners else None)
    geometries = [resolve(c, deck) for c in cells]
    with np.errstate(all="ignore"):  # out-of-range values become flagged empty metrics, not warnings
        return _characterize(deck, cells, corner_set, geometries, progress, sources, esd)


def _characterize(deck: Deck, cells: Sequence[CellSpec], corner_set: CornerSet, geometries: list[Any],
                  progress: Progress | None, sources: Sequence[str], esd: bool) -> CharacterizationRun:
    results: list[CellResult | None] = [None] * len(cells)
    groups: dict[str, list[int]] = {}
    for i, c in enumerate(cells):
        groups.setdefault(c.topology, []).append(i)
    done = 0
    freq = sweep_frequencies(deck.analysis)
    for topology, idx in groups.items():
        group_cells = [cells[i] for i in idx]
        group_geo = [geometries[i] for i in idx]
        out = topologies.evaluate(topology, deck, corner_set, group_cells, group_geo, freq)
        risk = _risk(deck, corner_set, topology, out, group_cells, group_geo) if esd else {}
        for k, i in enumerate(idx):
            results[i] = _record(cells[i], geometries[i], corner_set, out, k, freq, risk.get(k),
                                 esd_run=esd)
        done += len(idx)
        if progress:
            progress(f"{deck.name}: {topology}", done, len(cells))
    if progress and not cells:
        progress(deck.name, 0, 0)
    return CharacterizationRun(
        deck_name=deck.name, deck_hash=deck.content_hash, deck_params=deck.model_dump(mode="json"),
        model_version=MODEL_VERSION, corners=corner_set.names, cells=[r for r in results if r is not None],
        source_files=list(sources))


def _risk(deck: Deck, corners: CornerSet, topology: str, out: Any, cells: list[CellSpec],
          geos: list[Any]) -> dict[int, tuple[CatalogRisk, int]]:
    """ESD and broken-oxide figures of a group: variant index -> (figures, its index in them)."""
    events = (EsdEvent("hbm", deck.esd.hbm_V), EsdEvent("cdm", deck.esd.cdm_V))
    parts = out.parts if hasattr(out, "parts") else [(list(range(len(cells))), out)]
    found: dict[int, tuple[CatalogRisk, int]] = {}
    for local, part in parts:  # one per circuit structure
        inputs = inputs_from_group(deck, corners, topology, part, local, [cells[i] for i in local],
                                   [geos[i] for i in local])
        figures = catalog_figures(inputs, *events)
        found.update({i: (figures, k) for k, i in enumerate(local)})
    return found


def _risk_figures(risk: tuple[CatalogRisk, int] | None, n_corner: int, j: int) -> dict[str, float]:
    if risk is None:
        return {}
    fig, k = risk
    r = k * n_corner + j

    def above(ev: Any) -> float:  # empty, not zero, for a cell without gate oxide
        return float(ev.time_above_s[0, r]) if np.isfinite(ev.peak_oxide_V[0, r]) else float("nan")

    return dict(
        hbm_peak_oxide_V=float(np.abs(fig.hbm.peak_oxide_V[0, r])), hbm_time_above_s=above(fig.hbm),
        cdm_peak_oxide_V=float(np.abs(fig.cdm.peak_oxide_V[0, r])), cdm_time_above_s=above(fig.cdm),
        hbm_oxide_share=float(fig.hbm.shielding[0, r]), esd_series_helps=float(fig.series_helps[r]),
        fault_current_A=float(fig.fault_current_A[r]), fault_power_W=float(fig.fault_power_W[r]),
        fault_survives=float(fig.fault_survives[r]))


def _series_inductance(out: Any, k: int, j: int) -> float:
    """ESL: the circuit's rail-loop inductance element (the sweep often ends below the SRF)."""
    try:
        value = np.broadcast_to(out.netlist.element("l_loop").value, (out.n_variant * out.n_corner,))
    except KeyError:
        return float(out.summary["esl_H"][k, j])
    return float(value[k * out.n_corner + j])


def _finite(x: float) -> float:
    return float(x) if np.isfinite(x) else float("nan")


def _names(metric: str, flags: list[str]) -> bool:
    word = re.compile(rf"(?<![A-Za-z0-9_]){re.escape(metric)}(?![A-Za-z0-9_])")
    return any(word.search(f) for f in flags)


#: Columns only the ESD events and the broken-oxide figures fill (empty when they are not run).
ESD_EVENT_METRICS = ("hbm_oxide_peak_V", "hbm_over_vbd_ns", "hbm_margin_V", "cdm_oxide_peak_V",
                     "cdm_over_vbd_ns", "cdm_margin_V", "hbm_oxide_share_pct", "esd_series_helps",
                     "broken_oxide_mA", "broken_oxide_mW", "broken_oxide_ok")


def _empty_metric_flags(metrics: dict[str, float], flags: list[str]) -> list[str]:
    """A flag for the metrics that came out empty or infinite and no flag explains yet."""
    overflow = [k for k, v in metrics.items() if np.isinf(v) and not _names(k, flags)]
    missing = [k for k, v in metrics.items() if np.isnan(v) and not _names(k, flags)]
    out = []
    if overflow:
        out.append(f"out_of_range: {', '.join(overflow)} stored empty: the model overflows the float "
                   "range here (an input far outside the model's validity range)")
    if missing:
        out.append(f"no_value: {', '.join(missing)} stored empty: the model gives no number here "
                   "(an input outside the model's validity range)")
    return out


def _band_flags(out: Any, k: int, j: int, top_Hz: float) -> list[str]:
    """Flags of SRF and bandwidth values above the analysed band (computed) or bounds."""
    top = f"{from_si(top_Hz, 'GHz'):g} GHz"
    flags = []
    for name, label in (("srf", "self-resonance"), ("bandwidth", "usable bandwidth")):
        value = f"{from_si(float(out.summary[f'{name}_Hz'][k, j]), 'GHz'):.4g} GHz"
        if bool(out.summary[f"{name}_is_bound"][k, j]):
            flags.append(f"{name}_is_bound: no {label} in the equivalent circuit up to {value}, where the "
                         "lumped circuit stops describing the cell (a tenth of a wavelength) or the search ends; "
                         "the value is a lower bound, not a result")
        elif bool(out.summary[f"{name}_beyond_band"][k, j]):
            flags.append(f"{name}_beyond_band: {label} {value} lies above the analysed band (to {top}); "
                         "computed from the equivalent circuit, an extrapolation of the lumped model")
    return flags


def _record(spec: CellSpec, geo: Any, corners: CornerSet, group: Any, index: int, freq: np.ndarray,
            risk: tuple[CatalogRisk, int] | None = None, esd_run: bool = True) -> CellResult:
    out, k = group.row(index)
    corner_results = []
    notes = list(out.notes)
    for j, cname in enumerate(corners.names):
        flags = list(out.flags[k][j]) + _band_flags(out, k, j, float(freq[-1]))
        if risk is not None:
            flags += [f for f in risk[0].flags[risk[1] * len(corners.names) + j] if f not in flags]
        bw = float(out.summary["bandwidth_Hz"][k, j])
        srf = float(out.summary["srf_Hz"][k, j])
        figures = CornerFigures(
            area_um2=geo.area_um2, c_lf_F=float(out.summary["c_lf_F"][k, j]), cap_ox_F=float(out.cap_ox_F[k, j]),
            esr_lf_ohm=float(out.summary["esr_lf_ohm"][k, j]), esr_probe_ohm=float(out.summary["esr_at_ohm"][k, j, 0]),
            bandwidth_Hz=bw, bandwidth_is_bound=bool(out.summary["bandwidth_is_bound"][k, j]),
            esl_H=_series_inductance(out, k, j), srf_Hz=srf, srf_is_bound=bool(out.summary["srf_is_bound"][k, j]),
            tau_s=float(out.summary["tau_s"][k, j]),
            gate_leakage_A=float(out.gate_leakage_A[k, j]), junction_leakage_A=float(out.junction_leakage_A[k, j]),
            e_ox_V_per_m=float(out.e_ox_V_per_m[k, j]), tddb_rate_per_s_m2=float(out.tddb_rate_per_s_m2[k, j]),
            vbd_pulse_V=float(out.vbd_pulse_V[k, j]),
            **_risk_figures(risk, len(corners.names), j))
        m = {metric.name: float(metric.compute(figures)) for metric in METRICS}  # type: ignore[misc]
        if not esd_run:  # say why the event columns are empty, before the generic flag does
            skipped = [name for name in ESD_EVENT_METRICS if np.isnan(m.get(name, 0.0))]
            if skipped:
                flags.append(f"esd_not_run: {', '.join(skipped)} stored empty: built without the "
                             "deck's ESD events (build --no-esd, characterize(esd=False))")
        flags += _empty_metric_flags(m, flags)
        m = {key: _finite(v) for key, v in m.items()}
        cv = None
        if out.cv_bias is not None:
            cv = CVCurve(bias_V=np.asarray(out.cv_bias[k, j], dtype=float), cap_F=np.asarray(out.cv_cap[k, j], dtype=float),
                         operating_bias_V=float(out.cv_operating_V[k, j]), operating_cap_F=float(out.cv_operating_F[k, j]))
        corner_results.append(CornerResult(
            corner=cname, temperature_C=float(from_si(corners.temperature_K[j], "degC")),
            supply_V=float(out.supply_V[k, j]), metrics=m,
            response=FrequencyResponse(freq_Hz=freq.copy(), z_ohm=out.z_ohm[k, j].copy()), cv=cv, flags=flags))
    if risk is not None and risk[0].notes[risk[1] * len(corners.names)] != "no gate oxide":
        notes.append(f"HBM {spec.name} at {corners.names[0]}: " + risk[0].notes[risk[1] * len(corners.names)])
    geometry = {**spec.geometry, **{f"resolved_{key}": v for key, v in geo.as_dict().items() if key != "mom_layers"}}
    geometry["resolved_mom_layers"] = [layer.name for layer in geo.mom_layers]
    gate_area = geo.gate_area_um2 if geo.gate_area_um2 else geo.mom_plate_area_um2
    return CellResult(
        name=spec.name, cell_hash=spec.content_hash, family=spec.family, topology=spec.topology, oxide=spec.oxide,
        geometry=geometry, area_um2=geo.area_um2, width_sites=spec.width_sites, height_rows=spec.height_rows,
        gate_area_um2=gate_area, esd_safe=spec.esd_safe, corners=corner_results,
        netlist={cname: out.netlist_for(k, j) for j, cname in enumerate(corners.names)}, notes=notes,
        placement=spec.placement, rail=spec.rail)
