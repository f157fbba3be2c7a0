"""The engine's bulk record path (``engine._records``, what ``characterize`` runs) against its
reference path (``_record`` below, one variant and one corner at a time from scalars).

No outside source applies: these are equivalence checks between two ways of computing the same
values (the values themselves are checked against outside sources in ``tests/test_engine.py``).
Every stored value must agree exactly.
"""

from __future__ import annotations

import dataclasses
import math
import pickle
import re
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab import engine, topologies
from celllab.cells import CellSpec, load_cells, resolve
from celllab.characterization.params import CornerSet
from celllab.deck import load_deck
from celllab.records import (
    METRICS,
    CellResult,
    CornerCircuits,
    CornerFigures,
    CornerResult,
    CVCurve,
    FrequencyResponse,
    flag_names_metric,
    netlist_to_dict,
)
from celllab.units import from_si

DECK = "process_decks/lumen130.toml"
CELLS = "process_decks/cells/lumen130_cells.toml"


# --- the reference path: one variant, one corner at a time, from scalars -----------------------

def _risk_figures(risk: tuple[Any, int] | None, n_corner: int, j: int) -> dict[str, float]:
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




def _record(spec: CellSpec, geo: Any, corners: CornerSet, group: Any, index: int, freq: np.ndarray,
            risk: tuple[Any, int] | None = None, esd_run: bool = True) -> CellResult:
    """The record of one variant, built corner by corner from scalars: the reference for what
    ``engine._records`` (what ``characterize`` runs) builds in bulk."""
    out, k = group.row(index)
    corner_results = []
    notes = list(out.notes)
    for j, cname in enumerate(corners.names):
        flags = list(out.flags[k][j]) + engine._band_flags(out, k, j, float(freq[-1]))
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
            skipped = [name for name in engine.ESD_EVENT_METRICS if np.isnan(m.get(name, 0.0))]
            if skipped:
                flags.append(engine._esd_not_run_flag(skipped))
        flags += engine._empty_metric_flags(m, flags)
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
        notes.append(engine._hbm_note(spec, corners, risk[0].notes[risk[1] * len(corners.names)]))
    return CellResult(
        name=spec.name, cell_hash=spec.content_hash, family=spec.family, topology=spec.topology, oxide=spec.oxide,
        geometry=engine._geometry(spec, geo), area_um2=geo.area_um2, width_sites=spec.width_sites,
        height_rows=spec.height_rows, gate_area_um2=engine._gate_area(geo), esd_safe=spec.esd_safe, corners=corner_results,
        netlist={cname: out.netlist_for(k, j) for j, cname in enumerate(corners.names)}, notes=notes,
        placement=spec.placement, rail=spec.rail)


def _reference(deck, cells, esd):
    """Every cell's record through ``_record`` (the per-variant scalar path)."""
    corners = CornerSet.from_deck(deck, None)
    geos = [resolve(c, deck) for c in cells]
    freq = engine.sweep_frequencies(deck.analysis)
    out = {}
    with np.errstate(all="ignore"):
        groups: dict[str, list[int]] = {}
        for i, c in enumerate(cells):
            groups.setdefault(c.topology, []).append(i)
        for topology, idx in groups.items():
            g_cells, g_geos = [cells[i] for i in idx], [geos[i] for i in idx]
            group = topologies.evaluate(topology, deck, corners, g_cells, g_geos, freq)
            risk = engine._risk(deck, corners, topology, group, g_cells, g_geos) if esd else {}
            for k, i in enumerate(idx):
                out[cells[i].name] = _record(cells[i], geos[i], corners, group, k, freq, risk.get(k),
                                                    esd_run=esd)
    return out


def _same(a, b, where: str) -> None:
    if isinstance(a, float):
        assert type(b) is float and (a == b or (math.isnan(a) and math.isnan(b))), (where, a, b)
    elif isinstance(a, np.ndarray):
        np.testing.assert_array_equal(a, b, err_msg=where)
        assert a.dtype == b.dtype, where
    elif isinstance(a, dict):
        assert list(a) == list(b), where
        for k in a:
            _same(a[k], b[k], f"{where}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), where
        for k, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{where}[{k}]")
    else:
        assert type(a) is type(b) and a == b, (where, a, b)


def _compare(bulk, ref) -> None:
    for cell in bulk:
        want = ref[cell.name]
        for f in dataclasses.fields(cell):
            if f.name in ("corners", "netlist"):
                continue
            _same(getattr(want, f.name), getattr(cell, f.name), f"{cell.name}.{f.name}")
        assert list(cell.netlist) == list(want.netlist)
        for corner in want.netlist:
            assert netlist_to_dict(cell.netlist[corner]) == netlist_to_dict(want.netlist[corner])
            assert cell.netlist[corner] == want.netlist[corner]
        for c, w in zip(cell.corners, want.corners, strict=True):
            where = f"{cell.name}@{w.corner}"
            _same(w.corner, c.corner, where)
            _same(w.temperature_C, c.temperature_C, where)
            _same(w.supply_V, c.supply_V, where)
            _same(w.metrics, c.metrics, f"{where}.metrics")
            _same(w.flags, c.flags, f"{where}.flags")
            _same(w.response.freq_Hz, c.response.freq_Hz, f"{where}.freq")
            _same(w.response.z_ohm, c.response.z_ohm, f"{where}.z")
            assert (w.cv is None) == (c.cv is None)
            if w.cv is not None:
                for name in ("bias_V", "cap_F", "operating_bias_V", "operating_cap_F"):
                    _same(getattr(w.cv, name), getattr(c.cv, name), f"{where}.cv.{name}")


@pytest.fixture(scope="module")
def deck():
    return load_deck(DECK)


def _variants(n: int) -> list[CellSpec]:
    """Sizes from tiny to large (SRF and bandwidth bounds, beyond-band values), two structures."""
    return [CellSpec(name=f"v{i}", topology="nmos_inversion", width_sites=4 + 97 * i,
                     fingers=1 + i % 3, height_rows=1 + i % 7, contacted_ends=1 + i % 2)
            for i in range(n)]


def test_bulk_records_equal_the_per_variant_path_without_esd(deck) -> None:
    cells = load_cells(CELLS, deck) + _variants(24)
    bulk = engine.characterize(deck, cells, esd=False)
    assert {c.name for c in bulk.cells} == {c.name for c in cells}
    assert any(f.startswith("esd_not_run") for c in bulk.cells for k in c.corners for f in k.flags)
    assert any("_beyond_band" in f or "_is_bound" in f for c in bulk.cells for k in c.corners for f in k.flags)
    _compare(bulk.cells, _reference(deck, cells, esd=False))


def test_bulk_records_equal_the_per_variant_path_with_esd(deck) -> None:
    cells = load_cells(CELLS, deck)
    picked = list({c.topology: c for c in cells}.values()) + _variants(4)  # one cell per topology
    bulk = engine.characterize(deck, picked, esd=True)
    assert any(not math.isnan(k.metrics["hbm_oxide_peak_V"]) for c in bulk.cells for k in c.corners)
    _compare(bulk.cells, _reference(deck, picked, esd=True))


_figure = st.one_of(st.floats(allow_nan=True, allow_infinity=True, width=64), st.sampled_from([0.0, -0.0]))


def _strategy(name: str) -> st.SearchStrategy:
    if name.endswith("_is_bound"):
        return st.booleans()
    if name == "area_um2":  # a cell's footprint is never empty (a Python float would not divide by 0)
        return st.floats(min_value=1e-6, max_value=1e9)
    return _figure


@settings(max_examples=60, deadline=None)
@given(st.lists(st.fixed_dictionaries({f.name: _strategy(f.name) for f in dataclasses.fields(CornerFigures)}),
                min_size=1, max_size=6))
def test_every_metric_computes_element_wise_as_it_does_per_corner(rows) -> None:
    arrays = CornerFigures(**{name: np.array([r[name] for r in rows]).reshape(-1, 1) for name in rows[0]})
    with np.errstate(all="ignore"):
        for metric in METRICS:
            got = np.broadcast_to(np.asarray(metric.compute(arrays), dtype=float), (len(rows), 1))
            for k, r in enumerate(rows):
                want = float(metric.compute(CornerFigures(**{n: (bool(v) if n.endswith("_is_bound") else float(v))
                                                             for n, v in r.items()})))
                assert got[k, 0] == want or (math.isnan(want) and math.isnan(got[k, 0])), (metric.name, r)


@given(st.sampled_from(["esr_ohm", "cap_fF", "srf_GHz", "a.b", "x-y"]),
       st.lists(st.text(alphabet="esr_ohmcapfF GHz.,:;-x()ab", max_size=30), max_size=4))
def test_a_flag_names_a_metric_only_as_a_word_of_its_own(metric, flags) -> None:
    """Equivalence check: the shared whole-word rule (`records.flag_names_metric`, used by the
    engine and the catalog checks) against the regular expression it replaced."""
    word = re.compile(rf"(?<![A-Za-z0-9_]){re.escape(metric)}(?![A-Za-z0-9_])")
    assert flag_names_metric(metric, flags) == any(word.search(f) for f in flags)
    assert not flag_names_metric(metric, [None, 3.0])  # not text: names nothing


def test_corner_circuits_behave_as_a_dict(deck) -> None:
    run = engine.characterize(deck, _variants(3), esd=False)
    circuits = run.cells[1].netlist
    assert isinstance(circuits, CornerCircuits) and list(circuits) == run.corners and len(circuits) == len(run.corners)
    plain = dict(circuits)
    assert circuits == plain and plain == circuits
    assert circuits[run.corners[0]] is circuits[run.corners[0]]  # built once
    with pytest.raises(KeyError):
        circuits["no_such_corner"]
    assert circuits.get("no_such_corner") is None
    back = pickle.loads(pickle.dumps(run.cells[1]))
    assert type(back.netlist) is dict and back.netlist == plain


def test_parts_give_each_cell_the_result_of_one_call() -> None:
    """Equivalence check: `characterize_parts` (5 cells at a time) against one `characterize`
    call over the same cells (Z(f) and flags equal, metrics to the band searches' tolerance);
    progress counts over all the cells."""
    from celllab.engine import characterize, characterize_parts

    deck = load_deck(DECK)
    cells = load_cells(CELLS, deck)[:23]
    whole = characterize(deck, cells, esd=False)
    seen: list[tuple[int, int]] = []
    parts = list(characterize_parts(deck, cells, esd=False, size=5,
                                    progress=lambda stage, done, total: seen.append((done, total))))
    assert [len(p.cells) for p in parts] == [5, 5, 5, 5, 3]
    got = [c for p in parts for c in p.cells]
    assert [c.name for c in got] == [c.name for c in whole.cells]
    for a, b in zip(got, whole.cells):
        for ca, cb in zip(a.corners, b.corners):
            assert list(ca.metrics) == list(cb.metrics)
            # the band searches stop when every row of their batch has converged, so a crossing
            # found in a smaller batch may differ at the search's tolerance
            np.testing.assert_allclose(list(ca.metrics.values()), list(cb.metrics.values()), rtol=1e-9)
            np.testing.assert_array_equal(ca.response.z_ohm, cb.response.z_ohm)
            assert ca.flags == cb.flags
    assert seen[-1] == (23, 23) and all(t == 23 for _, t in seen)
    assert [len(p.cells) for p in characterize_parts(deck, [], esd=False)] == [0]
