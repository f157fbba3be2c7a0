"""Characterization engine: deck + cells -> SI arrays -> physics -> ``CharacterizationRun``.

Cells are grouped by topology; each group is evaluated as arrays of shape (variant, corner) and
its equivalent circuits as one netlist whose values run over variant x corner, solved over
frequency in one call. Python loops run over topologies, corners and result records only.
"""

from __future__ import annotations

import copy
import dataclasses
import math
from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, topologies
from celllab.cells.expand import resolve
from celllab.cells.schema import CellSpec
from celllab.characterization.cell_risk import CatalogRisk, catalog_figures
from celllab.characterization.esd_events import EsdEvent
from celllab.characterization.params import CornerSet
from celllab.characterization.risk_inputs import inputs_from_group
from celllab.collector import collector_paused
from celllab.deck.schema import AnalysisBand, Deck
from celllab.records import (
    ESD_NOT_RUN,
    METRIC_NAMES,
    METRICS,
    CellResult,
    CharacterizationRun,
    CornerCircuits,
    CornerFigures,
    CornerResult,
    CVCurve,
    FrequencyResponse,
    flag_names_metric,
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
    with collector_paused():  # millions of small objects, no cycles (celllab.collector)
        geometries = [resolve(c, deck) for c in cells]
        with np.errstate(all="ignore"):  # out-of-range values become flagged empty metrics, not warnings
            return _characterize(deck, cells, corner_set, geometries, progress, sources, esd)


def part_size(esd: bool) -> int:
    """Cells characterized at a time by `characterize_parts`: about 0.5 GB of working memory on
    the demo decks (measured peak resident memory: ~430 MiB for 250 variants with the ESD
    transients, ~300 MiB for 2 000 without; see DEVELOPERS.md "Performance")."""
    return 250 if esd else 2000


def characterize_parts(deck: Deck, cells: Sequence[CellSpec], corners: Sequence[str] | None = None,
                       progress: Progress | None = None, sources: Sequence[str] = (),
                       esd: bool = True, size: int | None = None) -> Iterator[CharacterizationRun]:
    """`characterize` a part of ``cells`` at a time (``size`` cells, default `part_size`), in
    order: memory stays that of one part however many cells there are. Each cell's result is
    that of one `characterize` call over all of them (cells are computed on their own values;
    grouping only batches them), except that a band search (SRF, bandwidth) stops when every
    row of its batch has converged, so such a value may differ within the search's tolerance.
    Progress counts over all the cells. No cells: one empty part."""
    step = size or part_size(esd)
    if step < 1:
        raise ValueError(f"size = {size} -> must be >= 1")
    total = len(cells)
    for start in range(0, max(total, 1), step):
        shifted: Progress | None = None
        if progress is not None and total:
            def shifted(stage: str, done: int, _n: int, offset: int = start) -> None:
                progress(stage, offset + done, total)
        elif progress is not None:
            shifted = progress
        yield characterize(deck, cells[start:start + step], corners, shifted, sources, esd)


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
        parts = out.parts if hasattr(out, "parts") else [(range(len(idx)), out)]
        for local, part in parts:  # one per circuit structure
            built = _records([group_cells[i] for i in local], [group_geo[i] for i in local], corner_set,
                             part, freq, [risk.get(i) for i in local], esd)
            for i, record in zip(local, built):
                results[idx[i]] = record
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


#: Columns only the ESD events and the broken-oxide figures fill (empty when they are not run).
ESD_EVENT_METRICS = ("hbm_oxide_peak_V", "hbm_over_vbd_ns", "hbm_margin_V", "cdm_oxide_peak_V",
                     "cdm_over_vbd_ns", "cdm_margin_V", "hbm_oxide_share_pct", "esd_series_helps",
                     "broken_oxide_mA", "broken_oxide_mW", "broken_oxide_ok")


def _empty_metric_flags(metrics: dict[str, float], flags: list[str]) -> list[str]:
    """A flag for the metrics that came out empty or infinite and no flag explains yet."""
    overflow = [k for k, v in metrics.items() if math.isinf(v) and not flag_names_metric(k, flags)]
    missing = [k for k, v in metrics.items() if math.isnan(v) and not flag_names_metric(k, flags)]
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


def _esd_not_run_flag(skipped: Sequence[str]) -> str:
    return (f"{ESD_NOT_RUN}: {', '.join(skipped)} stored empty: built without the deck's ESD events "
            "(build --no-esd, characterize(esd=False))")


def _hbm_note(spec: CellSpec, corners: CornerSet, note: str) -> str:
    return f"HBM {spec.name} at {corners.names[0]}: " + note


def _geometry(spec: CellSpec, geo: Any) -> dict[str, Any]:
    """The stored geometry: the cell's fields, then every resolved value (``resolved_*``; MOM
    layers by name)."""
    geometry = {**spec.geometry, **{f"resolved_{name}": _copied(getattr(geo, name)) for name in _fields(type(geo))}}
    geometry["resolved_mom_layers"] = [layer.name for layer in geo.mom_layers]
    return geometry


_FIELDS: dict[type, tuple[str, ...]] = {}


def _fields(cls: type) -> tuple[str, ...]:
    """A resolved geometry's stored fields (all but the MOM layers), in declaration order."""
    if cls not in _FIELDS:
        _FIELDS[cls] = tuple(f.name for f in dataclasses.fields(cls) if f.name != "mom_layers")
    return _FIELDS[cls]


def _copied(value: Any) -> Any:
    """``value`` as ``dataclasses.asdict`` copies it (an immutable scalar is itself)."""
    return value if type(value) in (float, int, str, bool, type(None)) else copy.deepcopy(value)


def _gate_area(geo: Any) -> float:
    return geo.gate_area_um2 if geo.gate_area_um2 else geo.mom_plate_area_um2


# ----------------------------------------------------------------------------- bulk records
# ``_records`` builds the records of a whole circuit-structure part at once: every figure and
# metric as an (n_variant, n_corner) array, flags only where a mask says one is due, circuits on
# demand (``records.CornerCircuits``). Same values as building each variant from scalars, corner
# by corner (the reference path in ``tests/test_engine_bulk.py``).


def _part_figures(part: Any, geos: Sequence[Any], risks: Sequence[tuple[CatalogRisk, int] | None],
                  n_corner: int) -> CornerFigures:
    """The figures of every variant x corner of one part, each an (n_variant, n_corner) array."""
    n_v = part.n_variant
    s = part.summary
    try:
        esl = np.broadcast_to(part.netlist.element("l_loop").value, (n_v * n_corner,)).reshape(n_v, n_corner)
    except KeyError:
        esl = s["esl_H"]

    def f(a: Any) -> np.ndarray:
        return np.asarray(a, dtype=float)

    # CornerFigures holds floats per cell-corner, or arrays of a whole part as here
    values: dict[str, Any] = dict(
        area_um2=np.array([g.area_um2 for g in geos], dtype=float)[:, None], c_lf_F=f(s["c_lf_F"]),
        cap_ox_F=f(part.cap_ox_F), esr_lf_ohm=f(s["esr_lf_ohm"]), esr_probe_ohm=f(s["esr_at_ohm"][..., 0]),
        bandwidth_Hz=f(s["bandwidth_Hz"]), bandwidth_is_bound=np.asarray(s["bandwidth_is_bound"], dtype=bool),
        esl_H=f(esl), srf_Hz=f(s["srf_Hz"]), srf_is_bound=np.asarray(s["srf_is_bound"], dtype=bool),
        tau_s=f(s["tau_s"]), gate_leakage_A=f(part.gate_leakage_A), junction_leakage_A=f(part.junction_leakage_A),
        e_ox_V_per_m=f(part.e_ox_V_per_m), tddb_rate_per_s_m2=f(part.tddb_rate_per_s_m2),
        vbd_pulse_V=f(part.vbd_pulse_V), **_part_risk_figures(risks, n_v, n_corner))
    return CornerFigures(**values)


def _part_risk_figures(risks: Sequence[tuple[CatalogRisk, int] | None], n_v: int,
                       n_corner: int) -> dict[str, np.ndarray]:
    """``_risk_figures`` of every variant x corner as (n_variant, n_corner) arrays (NaN where
    the variant has none)."""
    if all(r is None for r in risks):
        return {}
    out = {name: np.full((n_v, n_corner), np.nan) for name in _RISK_FIELDS}
    by_figures: dict[int, tuple[CatalogRisk, list[int], list[int]]] = {}  # one per circuit structure
    for at, risk in enumerate(risks):
        if risk is not None:
            _, positions, ks = by_figures.setdefault(id(risk[0]), (risk[0], [], []))
            positions.append(at)
            ks.append(risk[1])
    for fig, positions, ks in by_figures.values():
        cols = np.asarray(ks)[:, None] * n_corner + np.arange(n_corner)
        pos = np.asarray(positions)

        def above(ev: Any, rows: np.ndarray = cols) -> np.ndarray:  # empty, not zero, without gate oxide
            return np.where(np.isfinite(ev.peak_oxide_V[0, rows]), ev.time_above_s[0, rows], np.nan)

        values = dict(
            hbm_peak_oxide_V=np.abs(fig.hbm.peak_oxide_V[0, cols]), hbm_time_above_s=above(fig.hbm),
            cdm_peak_oxide_V=np.abs(fig.cdm.peak_oxide_V[0, cols]), cdm_time_above_s=above(fig.cdm),
            hbm_oxide_share=fig.hbm.shielding[0, cols], esd_series_helps=np.asarray(fig.series_helps)[cols],
            fault_current_A=np.asarray(fig.fault_current_A)[cols], fault_power_W=np.asarray(fig.fault_power_W)[cols],
            fault_survives=np.asarray(fig.fault_survives)[cols])
        for name, v in values.items():
            out[name][pos] = v
    return out


#: The CornerFigures fields ``_risk_figures`` fills.
_RISK_FIELDS = ("hbm_peak_oxide_V", "hbm_time_above_s", "cdm_peak_oxide_V", "cdm_time_above_s", "hbm_oxide_share",
                "esd_series_helps", "fault_current_A", "fault_power_W", "fault_survives")


def _part_band_flags(part: Any, top_Hz: float) -> dict[tuple[int, int], list[str]]:
    """``_band_flags`` of the variant x corner entries that have any, keyed (variant, corner)."""
    s = part.summary
    due = np.zeros((part.n_variant, part.n_corner), dtype=bool)
    for name in ("srf", "bandwidth"):
        due |= np.asarray(s[f"{name}_is_bound"], dtype=bool) | np.asarray(s[f"{name}_beyond_band"], dtype=bool)
    return {(int(k), int(j)): _band_flags(part, int(k), int(j), top_Hz) for k, j in np.argwhere(due)}


def _records(cells: Sequence[CellSpec], geos: Sequence[Any], corners: CornerSet, part: Any, freq: np.ndarray,
             risks: Sequence[tuple[CatalogRisk, int] | None], esd_run: bool) -> list[CellResult]:
    """The records of every variant of one part (one circuit structure), in its variant order."""
    names = corners.names
    n_c = len(names)
    figures = _part_figures(part, geos, risks, n_c)
    raw = np.stack([np.broadcast_to(np.asarray(metric.compute(figures), dtype=float),  # type: ignore[misc]
                                    (part.n_variant, n_c)) for metric in METRICS], axis=-1)
    metric_rows = np.where(np.isfinite(raw), raw, np.nan).tolist()   # (n_v, n_c, n_metric) floats
    nan, inf = np.isnan(raw), np.isinf(raw)
    esd_columns = [METRIC_NAMES.index(name) for name in ESD_EVENT_METRICS if name in METRIC_NAMES]
    skipped = (nan[..., esd_columns] if not esd_run and esd_columns
               else np.zeros((part.n_variant, n_c, 0), dtype=bool))
    # metrics left empty and not yet explained: the skipped event columns are, by their flag
    unexplained = nan | inf
    if skipped.shape[-1]:
        unexplained[..., esd_columns] &= ~skipped
    empty = unexplained.any(axis=-1)
    band = _part_band_flags(part, float(freq[-1]))
    temperature = [float(from_si(t, "degC")) for t in corners.temperature_K]
    supply = np.asarray(part.supply_V, dtype=float).tolist()
    has_cv = part.cv_bias is not None
    if has_cv:
        cv_op_V = np.asarray(part.cv_operating_V, dtype=float).tolist()
        cv_op_F = np.asarray(part.cv_operating_F, dtype=float).tolist()
    esd_names = [METRIC_NAMES[k] for k in esd_columns]
    results = []
    for k, (spec, geo, risk) in enumerate(zip(cells, geos, risks)):
        corner_results = []
        for j, cname in enumerate(names):
            flags = list(part.flags[k][j])
            flags += band.get((k, j), ())
            if risk is not None:
                flags += [f for f in risk[0].flags[risk[1] * n_c + j] if f not in flags]
            if skipped.shape[-1] and skipped[k, j].any():
                flags.append(_esd_not_run_flag([n for n, s in zip(esd_names, skipped[k, j]) if s]))
            if empty[k, j]:
                flags += _empty_metric_flags({METRIC_NAMES[m]: float(raw[k, j, m])
                                              for m in np.flatnonzero(unexplained[k, j])}, flags)
            cv = None
            if has_cv:
                cv = CVCurve(bias_V=np.asarray(part.cv_bias[k, j], dtype=float),
                             cap_F=np.asarray(part.cv_cap[k, j], dtype=float),
                             operating_bias_V=cv_op_V[k][j], operating_cap_F=cv_op_F[k][j])
            corner_results.append(CornerResult(
                corner=cname, temperature_C=temperature[j], supply_V=supply[k][j],
                metrics=dict(zip(METRIC_NAMES, metric_rows[k][j])),
                response=FrequencyResponse(freq_Hz=freq.copy(), z_ohm=part.z_ohm[k, j].copy()), cv=cv,
                flags=flags))
        notes = list(part.notes)
        if risk is not None and risk[0].notes[risk[1] * n_c] != "no gate oxide":
            notes.append(_hbm_note(spec, corners, risk[0].notes[risk[1] * n_c]))
        results.append(CellResult(
            name=spec.name, cell_hash=spec.content_hash, family=spec.family, topology=spec.topology,
            oxide=spec.oxide, geometry=_geometry(spec, geo), area_um2=geo.area_um2, width_sites=spec.width_sites,
            height_rows=spec.height_rows, gate_area_um2=_gate_area(geo), esd_safe=spec.esd_safe,
            corners=corner_results, netlist=CornerCircuits(names, part.netlist_for, k), notes=notes,
            placement=spec.placement, rail=spec.rail))
    return results
