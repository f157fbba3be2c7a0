"""ESD events on cell circuits: a tied cell and a cross-coupled pair of every demo process under
HBM and CDM against ngspice .tran of the same circuit (elements, clamp and device laws rendered
from the same objects), plus the physical behaviour the figures must show."""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import pytest
from physics.ngspice_util import render_transient, require_ngspice, run_deck  # tests/physics

from celllab.cells import CellSpec
from celllab.characterization.esd_events import (
    EsdEvent,
    RailProtection,
    event_circuit,
    shielding_notes,
    simulate_event,
)
from celllab.characterization.risk_inputs import OxideRiskInputs
from celllab.deck import load_deck
from celllab.fill_risk import gather
from celllab.physics import transient as tr
from celllab.physics.circuits import mos_decap_circuit

DECK_DIR = Path(__file__).resolve().parents[2] / "process_decks"
DEMO_DECKS = ("lumen130", "tarn40lp", "quill28hk")

TIED = CellSpec(name="tied", topology="nmos_inversion", oxide="core", width_sites=16, fingers=2)
PAIR = CellSpec(name="pair", topology="cross_coupled", oxide="core", width_sites=16, fingers=2)


@functools.cache
def _inputs(deck_name: str, corner: str = "typ_25C") -> tuple[OxideRiskInputs, OxideRiskInputs]:
    deck = load_deck(DECK_DIR / f"{deck_name}.toml")
    found = gather(deck, [TIED, PAIR], [corner])
    by_topology = {g.topology: g for g in found}
    return by_topology["nmos_inversion"], by_topology["cross_coupled"]


def _node_expr(node: str, ground: str) -> str:
    return "0" if node == ground else f"v({node})"


def _ngspice_event(circuit, workdir: Path) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """Run the same event circuit in ngspice; returns (t, rail, {oxide line: worst segment})."""
    expanded = tr.expand(circuit.netlist, circuit.nonlinear, circuit.n_segments)
    ground = circuit.ground
    lines = render_transient(expanded, 0, ground)
    nodes = sorted({n for el in expanded.elements for n in el.nodes} - {ground})
    initial = dict(circuit.initial_voltages)
    default = initial.pop("*", None)
    ic = {n: float(np.asarray(default).reshape(-1)[0]) for n in nodes} if default is not None else {}
    ic.update({n: float(np.asarray(v).reshape(-1)[0]) for n, v in initial.items()})
    exprs = [f"{_node_expr('vdd', ground)}-{_node_expr('vss', ground)}"]
    members: dict[str, list[int]] = {}
    for line, (plate, segs) in expanded.line_nodes.items():
        members[line] = []
        for seg in segs:
            members[line].append(len(exprs))
            exprs.append(f"{_node_expr(plate, ground)}-{_node_expr(seg, ground)}")
    h_min = float(np.min(np.diff(circuit.t_points)))
    ic_text = " ".join(f"v({n})={v:.12e}" for n, v in ic.items() if abs(v) > 0)
    deck = "\n".join(["esd event", ".options rshunt=1e12 reltol=1e-4", *lines,
                      *([f".ic {ic_text}"] if ic_text else []), ".control",
                      f"tran {h_min:.6e} {circuit.t_points[-1]:.6e} 0 {h_min:.6e} uic",
                      f"wrdata ev.txt {' '.join(exprs)}", "quit", ".endc", ".end", ""])
    run_deck(deck, workdir, "event")
    data = np.atleast_2d(np.loadtxt(workdir / "ev.txt"))
    t, values = data[:, 0], data[:, 1::2]
    worst = {}
    for line, cols in members.items():
        block = values[:, cols]
        pick = np.argmax(np.abs(block), axis=1)
        worst[line] = block[np.arange(block.shape[0]), pick]
    return t, values[:, 0], worst


def _one_row(g: OxideRiskInputs, row: int = 0):
    """The inputs of one row, as plain scalars (a one-variant circuit for ngspice)."""
    net = g.netlist.variant(row)
    prot = RailProtection(*(float(np.asarray(getattr(g.protection, f)).reshape(-1)[row])
                            for f in ("v_on", "r_on", "t_response", "v_diode", "c_rail", "v_supply", "r_diode")))

    def pick(v):
        return None if v is None else float(np.asarray(v).reshape(-1)[row]) if np.size(v) > 1 else v

    channels = tuple(tr.DistributedChannel(c.line, c.polarity, pick(c.beta), pick(c.v_threshold), c.body,
                                           pick(c.c_body), pick(c.v_flatband)) for c in g.channels)
    extra = tuple(el.variant(row) for el in g.extra_elements)
    nodeset = {k: pick(v) for k, v in g.nodeset.items()}
    return net, prot, channels, extra, nodeset, float(g.v_bd_pulse[row])


CASES = [(deck, kind, event) for deck in DEMO_DECKS for kind, event in (
    ("tied", EsdEvent("hbm", 2000.0)), ("tied", EsdEvent("cdm", 500.0)),
    ("pair", EsdEvent("hbm", 2000.0)), ("pair", EsdEvent("cdm", 500.0, "negative")))]


@pytest.mark.parametrize(("deck_name", "kind", "event"), CASES,
                         ids=[f"{d}-{k}-{e.model}{'+' if e.sign > 0 else '-'}" for d, k, e in CASES])
def test_oxide_voltage_matches_ngspice(tmp_path: Path, deck_name: str, kind: str, event: EsdEvent) -> None:
    # Source: ngspice .tran (uic) of the same circuit: cell netlist, rail capacitance, clamp and
    # (pair) square-law channels as B-sources, the same source network and initial charge; the
    # peak oxide voltage within 2 % and the waveform (magnitude) within 2 % of the peak on our grid
    require_ngspice()
    tied, pair = _inputs(deck_name)
    g = tied if kind == "tied" else pair
    net, prot, channels, extra, nodeset, v_bd = _one_row(g)
    circuit = event_circuit(net, event, prot, g.oxides, v_bd, channels=channels, extra_elements=extra,
                            nodeset=nodeset)
    ours = simulate_event(net, event, prot, g.oxides, v_bd, channels=channels, extra_elements=extra,
                          nodeset=nodeset)
    assert ours.converged.all()
    t_ref, rail_ref, worst_ref = _ngspice_event(circuit, tmp_path)
    inside = ours.t <= t_ref[-1]
    for k, (label, line) in enumerate(g.oxides.items()):
        ref = worst_ref[line]
        peak_ref = ref[np.argmax(np.abs(ref))]
        assert ours.peak_oxide_V[0, k] == pytest.approx(peak_ref, rel=0.02), label
        # magnitudes: the sign of the worst segment flips where two segments of opposite sign
        # are equally stressed, a step in the signed value but not in its magnitude
        wave = np.interp(ours.t[inside], t_ref, np.abs(ref))
        assert np.max(np.abs(np.abs(ours.oxide_V[0, k, inside]) - wave)) <= 0.02 * abs(peak_ref), label
    rail = np.interp(ours.t[inside], t_ref, rail_ref)
    assert np.max(np.abs(ours.rail_V[0, inside] - rail)) <= 0.02 * np.max(np.abs(rail_ref))


def test_small_pair_turns_on_with_the_rail_and_matches_ngspice(tmp_path: Path) -> None:
    # a pair of short fingers, whose drain junctions hold its gates apart, latches on as the rail
    # rises (its oxides then carry the clamped rail); Source: ngspice .tran of the same circuit,
    # peak oxide voltages within 2 %
    require_ngspice()
    small = CellSpec(name="small", topology="cross_coupled", oxide="core", width_sites=4, fingers=2)
    (g,) = gather(load_deck(DECK_DIR / "lumen130.toml"), [small], ["typ_25C"])
    net, prot, channels, extra, nodeset, v_bd = _one_row(g)
    event = EsdEvent("hbm", 2000.0)
    ours = simulate_event(net, event, prot, g.oxides, v_bd, channels=channels, extra_elements=extra)
    assert np.all(ours.shielding > 0.9)
    circuit = event_circuit(net, event, prot, g.oxides, v_bd, channels=channels, extra_elements=extra)
    _, _, worst = _ngspice_event(circuit, tmp_path)
    for k, line in enumerate(g.oxides.values()):
        ref = worst[line]
        assert ours.peak_oxide_V[0, k] == pytest.approx(ref[np.argmax(np.abs(ref))], rel=0.02)


def test_powered_pair_starts_at_its_operating_point_and_matches_ngspice(tmp_path: Path) -> None:
    # Source: ngspice .tran of the same circuit from the same initial state (our DC operating
    # point with the pair both on, x ~ VSS, y ~ VDD); peak oxide voltages within 2 %
    require_ngspice()
    _, pair = _inputs("lumen130")
    net, prot, channels, extra, nodeset, v_bd = _one_row(pair)
    event = EsdEvent("hbm", 2000.0, powered=True)
    circuit = event_circuit(net, event, prot, pair.oxides, v_bd, channels=channels, extra_elements=extra,
                            nodeset=nodeset)
    assert circuit.initial_voltages["y"] == pytest.approx(prot.v_supply, rel=1e-3)
    assert abs(float(np.asarray(circuit.initial_voltages["x"]).reshape(-1)[0])) < 1e-3
    ours = simulate_event(net, event, prot, pair.oxides, v_bd, channels=channels, extra_elements=extra,
                          nodeset=nodeset)
    # both oxides start at the supply (inverted NMOS gate high, PMOS gate low)
    assert ours.oxide_V[0, 0, 0] == pytest.approx(prot.v_supply, rel=1e-2)
    assert ours.oxide_V[0, 1, 0] == pytest.approx(-prot.v_supply, rel=1e-2)
    _, _, worst = _ngspice_event(circuit, tmp_path)
    for k, line in enumerate(pair.oxides.values()):
        ref = worst[line]
        assert ours.peak_oxide_V[0, k] == pytest.approx(ref[np.argmax(np.abs(ref))], rel=0.02)


# --- behaviour ---------------------------------------------------------------------------------


def test_tied_oxide_follows_the_clamped_rail_at_every_corner() -> None:
    # A tied gate's R C (ps) is far below a 2 ns HBM rise: its oxide carries the whole rail, which
    # the clamp holds near v_on + I_peak r_on (I_peak ~ V/1500 ohm, JS-001); 5 %
    tied, _ = gather(load_deck(DECK_DIR / "lumen130.toml"), [TIED])[0], None
    res = simulate_event(tied.netlist, EsdEvent("hbm", 2000.0), tied.protection, tied.oxides,
                         tied.v_bd_pulse)
    v_on = np.asarray(tied.protection.v_on)
    r_on = np.asarray(tied.protection.r_on)
    np.testing.assert_allclose(res.peak_oxide_V[:, 0], res.peak_rail_V, rtol=1e-3)
    assert np.all(res.peak_rail_V < v_on + 2000 / 1500 * r_on * 1.05 + 1.0)
    assert np.all(res.peak_rail_V > v_on)
    assert all("tied gate" in n for n in shielding_notes(res, tied.series_rc, False))


def test_unclamped_hbm_charge_shares_onto_the_rail() -> None:
    # Source: charge conservation V = V_zap C_hbm / (C_hbm + C_rail) (physics.esd.hbm_shared_voltage;
    # 2 kV onto 1 nF -> 181.8 V) when the clamp never turns on; 1 %
    net = mos_decap_circuit(1e-15, 10.0)
    prot = RailProtection(v_on=1000.0, r_on=1.0, t_response=0.0, v_diode=1000.0, c_rail=1e-9, v_supply=1.0)
    grid = tr.piecewise_grid([(20e-9, 0.1e-9), (3e-6, 5e-9)])  # 20 time constants of 136 ns
    res = simulate_event(net, EsdEvent("hbm", 2000.0), prot, {"gate": "channel"}, 5.0, t_points=grid)
    assert res.rail_V[0, -1] == pytest.approx(2000 * 100e-12 / (100e-12 + 1e-9), rel=0.01)
    assert res.time_above_s[0, 0] > 400e-9


def test_slower_clamp_lets_more_through() -> None:
    # a clamp that needs longer to respond leaves the rail to charge further (monotonic)
    net = mos_decap_circuit(1e-15, 10.0)
    peaks = []
    for t_resp in (0.0, 0.3e-9, 1e-9):
        prot = RailProtection(v_on=2.0, r_on=1.0, t_response=t_resp, v_diode=0.7, c_rail=100e-12, v_supply=1.2)
        peaks.append(simulate_event(net, EsdEvent("cdm", 500.0), prot, {"gate": "channel"}, 5.0).peak_rail_V[0])
    assert peaks[0] < peaks[1] < peaks[2]


def test_event_arguments_are_checked() -> None:
    with pytest.raises(ValueError, match="allowed: hbm, cdm"):
        EsdEvent("mm", 200.0)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="must be a number > 0"):
        EsdEvent("hbm", -5.0)
    with pytest.raises(ValueError, match="JS-001 allows"):
        EsdEvent("hbm", 2000.0, rise_time=20e-9)
    with pytest.raises(ValueError, match="unpowered"):
        EsdEvent("cdm", 500.0, powered=True)
    assert EsdEvent("cdm", 250.0, "negative").label == "CDM -250 V"


def test_unpowered_pair_stays_off_where_a_powered_one_conducts() -> None:
    # The same long-finger pair: unpowered, its devices start off and its gates follow the rail
    # through the channel-to-body and junction capacitances (little oxide stress); powered, both
    # devices are on and each oxide carries the rail (the series R C is ps against a 2 ns edge)
    tied, pair = _inputs("lumen130")
    net, prot, channels, extra, nodeset, v_bd = _one_row(pair)
    off = simulate_event(net, EsdEvent("hbm", 2000.0), prot, pair.oxides, v_bd, channels=channels,
                         extra_elements=extra)
    on = simulate_event(net, EsdEvent("hbm", 2000.0, powered=True), prot, pair.oxides, v_bd,
                        channels=channels, extra_elements=extra, nodeset=nodeset)
    assert off.shielding[0] < 0.2 < 0.9 < on.shielding[0]
    assert "stay off" in shielding_notes(off, pair.series_rc[:1], True)[0]
    assert "does not help" in shielding_notes(on, pair.series_rc[:1], True)[0]
