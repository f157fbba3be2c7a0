"""Oxide wear-out over a mission and the cost of a broken oxide: DC fault currents of a tied and a
pair cell against ngspice operating points, the wear-out chain against scipy.stats.weibull_min,
and mission overrides."""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import pytest
from physics.ngspice_util import (  # tests/physics
    dc_operating_point,
    render_transient,
    require_ngspice,
)
from scipy.constants import hour, micro, year, zero_Celsius
from scipy.stats import weibull_min

from celllab.cells import CellSpec
from celllab.characterization.oxide_risk import MissionProfile, fault_circuit, oxide_fault, wearout
from celllab.characterization.risk_inputs import OxideRiskInputs
from celllab.deck import load_deck
from celllab.fill_risk import gather
from celllab.physics import transient as tr

DECK_DIR = Path(__file__).resolve().parents[2] / "process_decks"
DEMO_DECKS = ("lumen130", "tarn40lp", "quill28hk")
TIED = CellSpec(name="tied", topology="nmos_inversion", oxide="core", width_sites=16, fingers=2)
PAIR = CellSpec(name="pair", topology="cross_coupled", oxide="core", width_sites=16, fingers=2)


@functools.cache
def _inputs(deck_name: str) -> dict[str, OxideRiskInputs]:
    deck = load_deck(DECK_DIR / f"{deck_name}.toml")
    return {g.topology: g for g in gather(deck, [TIED, PAIR])}


def _scalar(v: object, row: int) -> float:
    arr = np.asarray(v, dtype=float).reshape(-1)
    return float(arr[0] if arr.size == 1 else arr[row])


@pytest.mark.parametrize("deck_name", DEMO_DECKS)
def test_tied_fault_current_matches_ngspice_op(tmp_path: Path, deck_name: str) -> None:
    # Source: ngspice DC operating point of the same cell circuit with the breakdown spot as a
    # resistor and the supply behind its source resistance; rel 1e-4
    require_ngspice()
    g = _inputs(deck_name)["nmos_inversion"]
    fault = oxide_fault(g)
    for row in range(g.supply.size):
        net, sources = fault_circuit(g.netlist.variant(row), "channel", _scalar(g.spot_ohm, row),
                                     _scalar(g.supply, row), _scalar(g.source_ohm, row))
        lines = render_transient(tr.expand(net, (), 4), 0, "vss")
        lines.append(f"vfault fault_supply_node 0 dc {_scalar(g.supply, row):.12e}")
        (ref,) = dc_operating_point(lines, ["-i(vfault)"], tmp_path)
        assert fault.current_A[row, 0] == pytest.approx(ref, rel=1e-4)
        # Source: series resistances by hand: source + gate + spot + the channel from the spot
        # node to the contacts (R/2N in parallel with the rest of a both-ends line, R - R/2N)
        # + access; rel 1e-6
        cell = g.netlist.variant(row)
        r_ch = cell.element("channel").value
        r0 = r_ch / 8
        series = (_scalar(g.source_ohm, row) + cell.element("r_gate").value + _scalar(g.spot_ohm, row)
                  + r0 * (r_ch - r0) / r_ch + cell.element("r_access").value)
        assert fault.current_A[row, 0] == pytest.approx(g.supply[row] / series, rel=1e-6)


def _pair_level1_lines(g: OxideRiskInputs, row: int, broken: str) -> tuple[list[str], dict[str, float]]:
    """The faulted pair with each channel as two ngspice level-1 MOSFETs split at the spot node.

    A square-law chain is one square-law device between any two of its nodes (the gradual-channel
    integral), so segment 1 (fraction 1/(2N) of the channel at its source end) and the rest are
    level-1 devices of KP W/L = beta / fraction.
    """
    n = 4
    net = g.netlist.variant(row)
    vdd = _scalar(g.supply, row)
    lines = ["* faulted pair", f"vfault fault_supply_node 0 dc {vdd:.12e}",
             f"rsource fault_supply_node vdd {max(_scalar(g.source_ohm, row), 1e-9):.12e}"]
    for el in net.elements:
        if el.kind == "R":
            lines.append(f"r{el.name} {el.node_a} {el.node_b} {el.value:.12e}")
        elif el.kind == "L":
            lines.append(f"l{el.name} {el.node_a} {el.node_b} {el.value:.12e}")
    for ch in g.channels:
        el = net.element(ch.line)
        beta, vt = _scalar(ch.beta, row), _scalar(ch.v_threshold, row)
        kind, sign = ("nmos", 1) if ch.polarity == "n" else ("pmos", -1)
        mid = f"{ch.line}_1"
        src = "0" if el.node_a == "vss" else el.node_a
        lines.append(f".model m{ch.line}_a {kind} level=1 vto={sign * vt:.12e} kp={beta * 2 * n:.12e} "
                     "lambda=0 gamma=0")
        lines.append(f".model m{ch.line}_b {kind} level=1 vto={sign * vt:.12e} "
                     f"kp={beta / (1 - 1 / (2 * n)):.12e} lambda=0 gamma=0")
        body = "0" if ch.polarity == "n" else src
        lines.append(f"m{ch.line}a {mid} {el.node_b} {src} {body} m{ch.line}_a w=1 l=1")
        lines.append(f"m{ch.line}b {el.node_far} {el.node_b} {mid} {body} m{ch.line}_b w=1 l=1")
        if ch.line == broken:
            lines.append(f"rspot {el.node_b} {mid} {_scalar(g.spot_ohm, row):.12e}")
    for el in g.dc_elements:
        lines.append(f"r{el.name} {el.node_a} {el.node_b} {_scalar(el.value, row):.12e}")
    nodeset = {k: _scalar(v, row) for k, v in g.nodeset.items()}
    return [ln.replace(" vss ", " 0 ").replace(" vss\n", " 0\n") for ln in lines], nodeset


@pytest.mark.parametrize("deck_name", DEMO_DECKS)
def test_pair_fault_current_matches_ngspice_level1(tmp_path: Path, deck_name: str) -> None:
    # Source: ngspice DC operating point of the faulted pair with level-1 (Shichman-Hodges)
    # MOSFETs of the same beta and threshold and the spot as a resistor; rel 1e-3 + 1 nA
    require_ngspice()
    g = _inputs(deck_name)["cross_coupled"]
    fault = oxide_fault(g)
    assert fault.converged.all()
    row = 0
    for k, line in enumerate(g.oxides.values()):
        lines, nodeset = _pair_level1_lines(g, row, line)
        (ref,) = dc_operating_point(lines, ["-i(vfault)"], tmp_path, nodeset=nodeset)
        assert fault.current_A[row, k] == pytest.approx(ref, rel=1e-3, abs=1e-9), line


@pytest.mark.parametrize("deck_name", DEMO_DECKS)
def test_pair_limits_the_fault_current_below_a_tied_cell(deck_name: str) -> None:
    # the protecting device saturates at beta (V_GS - V_T)^2 / 2 (Shichman-Hodges), far below
    # V / R_spot: the figure that makes the pair "ESD-safe" after a breakdown
    found = _inputs(deck_name)
    tied, pair = oxide_fault(found["nmos_inversion"]), oxide_fault(found["cross_coupled"])
    assert np.all(pair.worst_current_A < 0.2 * tied.worst_current_A)
    g = found["cross_coupled"]
    beta_p = np.asarray(g.channels[1].beta)
    i_sat = beta_p / 2 * (g.supply - np.asarray(g.channels[1].v_threshold)) ** 2
    assert np.all(pair.current_A[:, 0] <= i_sat * 1.001)
    assert np.all(pair.supply_power_W == pytest.approx(pair.current_A * g.supply[:, None]))


# --- wear-out ------------------------------------------------------------------------------


def test_wearout_matches_scipy_weibull_for_a_fill() -> None:
    # A fill of N cells: F = 1 - exp(-N x cell hazard) must be scipy.stats.weibull_min's CDF at the
    # mission of the area-scaled, voltage- and temperature-accelerated characteristic life written
    # out here from the deck (JEP122 chain: eta_ref (A_ref/A)^(1/beta) (V_ref/V)^n exp(Ea/k ...));
    # rel 1e-6
    deck = load_deck(DECK_DIR / "lumen130.toml")
    g = _inputs("lumen130")["nmos_inversion"]
    mission = MissionProfile.from_deck(deck)
    w = wearout(g, mission)
    row = 0                                            # core oxide, power law
    rel = deck.oxides["core"].reliability
    n_cells = 1e6
    area = n_cells * g.gate_area["gate"][row]
    v_use = w.v_use["gate"][row]
    k_ev = 8.617333262e-5
    eta = (rel.eta_ref_s * (rel.area_ref_um2 * micro**2 / area) ** (1 / rel.weibull_beta)
           * (rel.v_ref_V / v_use) ** rel.acceleration_exponent
           * np.exp(rel.activation_energy_eV / k_ev * (1 / mission.temperature_K - 1 / (rel.t_ref_C + zero_Celsius))))
    f_fill = -np.expm1(-n_cells * w.cell_hazard[row])
    assert f_fill == pytest.approx(weibull_min.cdf(mission.life_s, rel.weibull_beta, scale=eta), rel=1e-6)
    # the mission voltage is the nominal supply times the largest corner scale (1.1)
    assert v_use == pytest.approx(1.2 * 1.1, rel=1e-3)
    # FIT per mm^2: hazard per area x 1 mm^2 x 1e9 / life in hours (JESD85 FIT)
    assert w.fit_per_mm2[row] == pytest.approx(w.cell_hazard[row] / w.gate_area_m2[row] * 1e-6 * 1e9
                                               / (10 * year / hour), rel=1e-9)


def test_mission_supply_drives_wearout_by_the_power_law() -> None:
    # power law t ~ V^-n: hazard ~ (V^n)^beta, so 5 % more supply multiplies it by 1.05^(n beta)
    deck = load_deck(DECK_DIR / "lumen130.toml")
    g = _inputs("lumen130")["nmos_inversion"]
    rel = deck.oxides["core"].reliability
    base = wearout(g, MissionProfile.from_deck(deck, supply_scale=1.0)).fit_per_mm2[0]
    more = wearout(g, MissionProfile.from_deck(deck, supply_scale=1.05)).fit_per_mm2[0]
    assert more / base == pytest.approx(1.05 ** (rel.acceleration_exponent * rel.weibull_beta), rel=1e-6)


@pytest.mark.parametrize(("kwargs", "says"), [
    (dict(life_years=0), "mission.life_years = 0 -> must be > 0"),
    (dict(temperature_C=400.0), "mission.temperature_C = 400.0"),
    (dict(supply_scale=3.0), "mission.supply_scale = 3.0 -> must be >= 0.5 and <= 1.5"),
    (dict(target_ppm=-1.0), "mission.target_ppm"),
])
def test_mission_overrides_are_checked(kwargs: dict, says: str) -> None:
    with pytest.raises(ValueError, match=says.replace("(", r"\(").replace(".", r"\.")):
        MissionProfile.from_deck(load_deck(DECK_DIR / "lumen130.toml"), **kwargs)
