"""End-to-end characterization of the demo decks: every topology, every corner, outside checks."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.constants import epsilon_0, femto, micro

from celllab.cells import CellSpec, load_cells, resolve
from celllab.deck import load_deck
from celllab.engine import characterize
from celllab.records import METRIC_NAMES
from celllab.topologies import REGISTRY

DECK = "process_decks/lumen130.toml"
CELLS = "process_decks/cells/lumen130_cells.toml"


@pytest.fixture(scope="module")
def deck():
    return load_deck(DECK)


@pytest.fixture(scope="module")
def run(deck):
    return characterize(deck, load_cells(CELLS, deck), esd=False)  # ESD columns: tests/test_engine_risk.py


def _cell(deck, **kw) -> CellSpec:
    base = dict(name="t", topology="nmos_inversion", oxide="core", width_sites=16, fingers=2)
    base.update(kw)
    return CellSpec(**base)


def test_every_topology_and_corner_has_finite_positive_capacitance(run, deck) -> None:
    seen = {c.topology for c in run.cells}
    assert seen == set(REGISTRY)  # the demo covers every topology
    for cell in run.cells:
        assert [c.corner for c in cell.corners] == deck.corner_names()
        for corner in cell.corners:
            assert set(corner.metrics) == set(METRIC_NAMES)
            assert corner.metrics["cap_fF"] > 0 and math.isfinite(corner.metrics["cap_fF"])
            assert corner.metrics["esr_ohm"] > 0
            assert corner.metrics["bandwidth_GHz"] > 0
            assert corner.response.z_ohm.shape == corner.response.freq_Hz.shape


def test_plain_oxide_capacitance_matches_formula(run, deck) -> None:
    # Source: parallel plate C = eps0 eps_r / t x gate area (Sze & Ng 2007 §4.1), scipy.constants; rel 1e-9
    for cell in run.cells:
        if cell.topology not in ("nmos_inversion", "pmos_inversion", "accumulation"):
            continue
        for corner in cell.corners:
            d = deck.at_corner(corner.corner)
            ox = d.oxides[cell.oxide]
            area = resolve(CellSpec(**{k: v for k, v in cell.geometry.items() if not k.startswith("resolved_")},
                                    name=cell.name, topology=cell.topology, oxide=cell.oxide), d).gate_area_um2
            expected = epsilon_0 * ox.eps_r / (ox.t_ox_nm * 1e-9) * area * micro**2 / femto
            assert corner.metrics["cap_ox_fF"] == pytest.approx(expected, rel=1e-9)


def test_inversion_capacitance_below_plain_oxide_by_depletion_and_centroid(run) -> None:
    # Fact of the trade (Taur & Ning 2009 §2.3-2.4): poly depletion and the charge centroid make the
    # inversion capacitance of a ~2 nm oxide 10-30 % lower than eps/t; overlap adds a few % on
    # gates of 0.5 um and longer (2 x 0.32 fF/um / (15.7 fF/um^2 x 0.5 um) = 8 % at most).
    for cell in run.cells:
        if cell.topology == "nmos_inversion" and cell.oxide == "core" \
                and cell.geometry["resolved_gate_length_um"] >= 0.5:
            typ = cell.corners[0].metrics
            assert 0.65 < typ["cap_fF"] / typ["cap_ox_fF"] < 0.98


def test_mos_esr_matches_distributed_line_sum(deck) -> None:
    # Source: Larsson, IEEE JSSC 32(4):574, 1997 (both ends: R_ch/12) and Razavi et al. 1994 (gate
    # R W/(3L) per finger); the overlap capacitance (no series R) sits beside the channel branch, so
    # that branch's ESR is weighted by (C_g/(C_g + C_ov))^2 (two parallel RC branches,
    # docs/references.md [44]). The nodal solution's low-frequency ESR must equal the sum; rel 1e-3
    from celllab.characterization.params import CornerSet
    from celllab.topologies.common import mos_devices

    cell = _cell(deck)
    run = characterize(deck, [cell], corners=["typ_25C"])
    res = mos_devices(CornerSet.from_deck(deck, ["typ_25C"]), [cell], [resolve(cell, deck)], np.array(["nmos"])).result
    weight = (res.c_gate[0, 0] / (res.c_gate[0, 0] + res.c_overlap[0, 0])) ** 2
    expected = res.r_channel[0, 0] / 12 * weight + res.r_gate[0, 0] + res.r_access[0, 0]
    assert run.cells[0].corners[0].metrics["esr_ohm"] == pytest.approx(expected, rel=1e-3)


def test_one_end_contact_quadruples_channel_esr(deck) -> None:
    # Source: distributed RC line, R/3 (one end) vs R/12 (both ends), Larsson 1997; rel 1e-3
    from celllab.characterization.params import CornerSet
    from celllab.topologies.common import mos_devices

    one, two = _cell(deck, contacted_ends=1, name="a"), _cell(deck, contacted_ends=2, name="b")
    run = characterize(deck, [one, two], corners=["typ_25C"])
    res = mos_devices(CornerSet.from_deck(deck, ["typ_25C"]), [one], [resolve(one, deck)], np.array(["nmos"])).result
    extra = res.r_gate[0, 0] + res.r_access[0, 0]
    esr1, esr2 = (c.corners[0].metrics["esr_ohm"] - extra for c in run.cells)  # overlap weight cancels
    assert esr1 / esr2 == pytest.approx(4.0, rel=1e-3)


def test_cross_coupled_loses_capacitance_and_gains_esr_against_tied(deck) -> None:
    # Fact of the trade (Meng, Arabi, Saleh, ISQED 2006): the cross-coupled cell trades ESR for ESD
    # safety; its gates sit behind the other device's channel, so ESR is far above a tied cell's.
    pair = _cell(deck, topology="cross_coupled", name="x", width_sites=16, fingers=2)
    tied = _cell(deck, topology="nmos_inversion", name="n", width_sites=16, fingers=2)
    run = characterize(deck, [pair, tied], corners=["typ_25C"])
    mp, mt = (c.corners[0].metrics for c in run.cells)
    assert mp["esr_ohm"] > 5 * mt["esr_ohm"]
    assert mp["bandwidth_GHz"] < mt["bandwidth_GHz"]
    assert run.cells[0].esd_safe and not run.cells[1].esd_safe


def test_cross_coupled_internal_nodes_sit_at_the_rails(deck) -> None:
    # Source: docs/references.md [50] operating state: x ~ VSS, y ~ VDD (only gate leakage
    # flows); 1 mV
    pair = _cell(deck, topology="cross_coupled", name="x")
    run = characterize(deck, [pair])
    cv = run.cells[0].corners[0].cv
    supply = run.cells[0].corners[0].supply_V
    assert cv.operating_bias_V == pytest.approx(supply, abs=1e-3)


def test_mom_cell_has_no_leakage_and_follows_the_back_end_corners(run) -> None:
    # lumen130's corners: typ_25C and leaky_125C leave the back end alone (no bias or temperature
    # dependence in the MOM model), slow_125C thins the metal, narrows the lines (wider gaps),
    # raises the stack and lowers eps; fast_m40C does the opposite. Lateral C ~ eps t / s.
    for cell in run.cells:
        if cell.topology == "mom":
            for corner in cell.corners:
                assert corner.metrics["leakage_nA"] == 0.0
                assert corner.cv is None
            cap = {c.corner: c.metrics["cap_fF"] for c in cell.corners}
            assert cap["leaky_125C"] == pytest.approx(cap["typ_25C"], rel=1e-12)
            assert cap["slow_125C"] < cap["typ_25C"] < cap["fast_m40C"]


def test_io_oxide_leaks_far_less_than_core(run) -> None:
    # Fact of the trade (docs/references.md [72] [CP]): thick-oxide decaps hardly leak.
    core = [c.corners[0].metrics["leakage_nA_per_nF"] for c in run.cells if c.oxide == "core" and c.topology == "nmos_inversion"]
    io = [c.corners[0].metrics["leakage_nA_per_nF"] for c in run.cells if c.oxide == "io" and c.topology == "nmos_inversion"]
    assert max(io) < 1e-3 * min(core)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(t1=st.floats(1.8, 3.0), dt=st.floats(0.1, 1.0))
def test_capacitance_falls_and_leakage_drops_as_oxide_thickens(deck, t1: float, dt: float) -> None:
    cell = _cell(deck)
    thin = characterize(deck.with_changes({"oxides.core.t_ox_nm": t1}), [cell], corners=["typ_25C"])
    thick = characterize(deck.with_changes({"oxides.core.t_ox_nm": t1 + dt}), [cell], corners=["typ_25C"])
    a, b = thin.cells[0].corners[0].metrics, thick.cells[0].corners[0].metrics
    assert b["cap_fF"] < a["cap_fF"]
    assert b["leakage_nA"] < a["leakage_nA"]


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(length=st.floats(0.2, 1.5))
def test_esr_grows_with_channel_length(deck, length: float) -> None:
    # The channel's share grows as L^2/(W) per unit C; with a near-ideal gate electrode (the gate
    # stripe's own R ~ W/L falls with L) the cell ESR must grow with L (Larsson 1997).
    low_rg = deck.with_changes({"resistances.gate_sheet_ohm_per_sq": 0.02})
    a = _cell(deck, gate_length_um=length, name="a", fingers=1, width_sites=8)
    b = _cell(deck, gate_length_um=length * 1.5, name="b", fingers=1, width_sites=8)
    run = characterize(low_rg, [a, b], corners=["typ_25C"])
    assert run.cells[1].corners[0].metrics["esr_ohm"] > run.cells[0].corners[0].metrics["esr_ohm"]


def test_without_inductance_ceff_never_exceeds_low_frequency_value(deck) -> None:
    # Property of any passive RC network (positive-real, Foster): C_eff(f) <= C(0); rel 1e-9
    from celllab.physics.netlist import solve_impedance

    run = characterize(deck, [_cell(deck), _cell(deck, topology="cross_coupled", name="x")], corners=["typ_25C"])
    for cell in run.cells:
        net = cell.netlist["typ_25C"]
        no_l = type(net)(net.name, tuple(dataclasses.replace(e, value=0.0) if e.kind == "L" else e
                                         for e in net.elements), net.ports)
        f = np.logspace(5, 12, 200)
        z = solve_impedance(no_l, f)[0]
        c_eff = -1 / (2 * np.pi * f * z.imag)
        assert np.all(c_eff <= c_eff[0] * (1 + 1e-9))


def test_unknown_corner_is_a_deck_error(deck) -> None:
    from celllab.errors import DeckError

    with pytest.raises(DeckError) as err:
        characterize(deck, [_cell(deck)], corners=["nope"])
    assert "allowed" in str(err.value)


def test_all_demo_decks_characterize() -> None:
    import pathlib

    from celllab.demo import demo_pairs

    pairs = demo_pairs(pathlib.Path("process_decks"))
    assert len(pairs) >= 3
    for deck_file, cell_file in pairs:
        d = load_deck(deck_file)
        cells = load_cells(cell_file, d)
        assert 40 <= len(cells) <= 400
        r = characterize(d, cells[:: max(1, len(cells) // 12)])
        assert all(c.corners[0].metrics["cap_fF"] > 0 for c in r.cells)
        # every cell with a gate oxide carries ESD and broken-oxide figures at every corner
        for c in r.cells:
            for corner in c.corners:
                has_oxide = c.topology != "mom"
                for key in ("hbm_oxide_peak_V", "cdm_margin_V", "broken_oxide_mA", "tddb_fit_per_mm2"):
                    assert np.isfinite(corner.metrics[key]) == has_oxide, (c.name, corner.corner, key)
