"""What the oxide-risk analyses need from a characterization of cells (SI).

For every group of cells sharing one circuit structure: the equivalent circuit the
characterization built (values over rows = variant x corner, variant-major), which of its RC
lines are gate oxides, the device laws of the cross-coupled pair's channels, the rail domain's
protection and supply, and the reliability inputs of each oxide. This is the one place that
reads characterization results for `esd_events` and `oxide_risk`; the analyses themselves take
plain arrays and netlists.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.constants import micro, milli, nano, pico

from celllab.characterization.esd_events import RailProtection
from celllab.characterization.oxide_stress import oxide_subtable
from celllab.characterization.params import CornerSet
from celllab.physics import mos_cv
from celllab.physics.netlist import Element, Netlist
from celllab.physics.transient import DistributedChannel
from celllab.units import to_si

#: Lines of each topology's equivalent circuit that are gate oxides (label -> RCLINE name); a
#: topology not listed here gets empty ESD and broken-oxide figures.
OXIDE_LINES: dict[str, dict[str, str]] = {
    "nmos_inversion": {"gate": "channel"},
    "pmos_inversion": {"gate": "channel"},
    "accumulation": {"gate": "channel"},
    "mos_mom": {"gate": "mos_channel"},
    "cross_coupled": {"nmos": "mn_channel", "pmos": "mp_channel"},
    "tied_cmos": {"nmos": "nmos_channel", "pmos": "pmos_channel"},
    "mom": {},
}
#: Source/drain diffusion doping assumed for junction capacitances, m^-3 (1e20 cm^-3; typical
#: of a degenerate diffusion, common practice, no source).
DIFFUSION_DOPING = to_si(1e20, "cm^-3")
#: Drain-to-well leakage of the pair's devices in DC analyses, ohm: a stand-in (far above real
#: junction leakage, far below any fault current) that pulls each drain toward its own well, as
#: reverse junction leakage does, so the DC state of a pair whose device is off is defined.
DRAIN_LEAKAGE_OHM = 1e9
#: Smallest overdrive accepted for the pair's square law at its operating point, V.
MIN_OVERDRIVE_V = 0.05


@dataclass
class OxideRiskInputs:
    """One circuit structure's inputs; arrays are (rows,) = variant x corner unless stated."""

    topology: str
    cells: list[Any]
    positions: list[int]              # indices of ``cells`` in the caller's list
    corners: list[str]
    netlist: Netlist
    oxides: dict[str, str]
    flavour: np.ndarray               # (n_variant,) oxide flavour names
    gate_area: dict[str, np.ndarray]  # m^2 per oxide
    v_gate: dict[str, np.ndarray]     # operating gate-to-body voltage magnitude per oxide, V
    cell_area_m2: np.ndarray          # (n_variant,) footprint of one cell
    c_cell: np.ndarray                # low-frequency capacitance of one cell, F
    v_bd_pulse: np.ndarray
    supply: np.ndarray                # the corner's supply of the cell's domain, V
    nominal_supply: np.ndarray        # the domain's nominal supply, V
    protection: RailProtection
    series_rc: np.ndarray             # s
    spot_ohm: np.ndarray
    source_ohm: np.ndarray
    fault_limit_A: np.ndarray
    corner_set: CornerSet             # the corners' decks (process values per corner)
    channels: tuple[DistributedChannel, ...] = ()
    extra_elements: tuple[Element, ...] = ()    # added for transients (junction capacitances)
    dc_elements: tuple[Element, ...] = ()       # added for DC analyses (drain leakage)
    nodeset: dict[str, np.ndarray] = field(default_factory=dict)
    flags: list[list[str]] = field(default_factory=list)  # per row

    @property
    def n_variant(self) -> int:
        return len(self.cells)

    @property
    def n_corner(self) -> int:
        return len(self.corners)

    @property
    def pair(self) -> bool:
        return self.topology == "cross_coupled"


def _rows(a: Any, n_v: int, n_c: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(a, dtype=float), (n_v, n_c)).reshape(-1).copy()


def _value(net: Netlist, name: str, attr: str = "value") -> np.ndarray | None:
    try:
        el = net.element(name)
    except KeyError:
        return None
    return np.asarray(getattr(el, attr), dtype=float)


def _protection(deck: Any, corners: CornerSet, rails: np.ndarray, supply: np.ndarray
                ) -> tuple[RailProtection, np.ndarray, np.ndarray]:
    """Clamp and supply of each cell's rail per row from each corner's deck (clamp default:
    1.5 x the rail's nominal voltage)."""
    flavour = rails
    n_v, n_c = len(rails), len(corners.names)

    def table(get: Any) -> np.ndarray:
        return np.array([[get(d, str(f)) for d in corners.decks] for f in flavour], dtype=float)

    v_on = table(lambda d, f: d.rail(f).clamp_on_V if d.rail(f).clamp_on_V is not None
                 else 1.5 * deck.supply_for(f))
    prot = RailProtection(
        v_on=_rows(v_on, n_v, n_c),
        r_on=_rows(table(lambda d, f: d.rail(f).clamp_on_ohm), n_v, n_c),
        t_response=_rows(table(lambda d, f: d.rail(f).clamp_response_ns) * nano, n_v, n_c),
        v_diode=_rows(table(lambda d, f: d.rail(f).clamp_diode_V), n_v, n_c),
        c_rail=_rows(table(lambda d, f: d.rail(f).rail_capacitance_pF) * pico, n_v, n_c),
        v_supply=supply,
        r_diode=_rows(table(lambda d, f: d.rail(f).clamp_diode_ohm if d.rail(f).clamp_diode_ohm
                            is not None else d.rail(f).clamp_on_ohm), n_v, n_c),
    )
    source = _rows(table(lambda d, f: d.rail(f).supply_source_ohm), n_v, n_c)
    limit = _rows(table(lambda d, f: d.rail(f).fault_current_limit_mA) * milli, n_v, n_c)
    return prot, source, limit


def _pair_devices(deck: Any, corners: CornerSet, out: Any, cells: list[Any], geos: list[Any],
                  flavour: np.ndarray) -> tuple[tuple[DistributedChannel, ...], tuple[Element, ...],
                                                tuple[Element, ...], dict[str, np.ndarray],
                                                list[list[str]]]:
    """Square-law channels, drain junctions and the both-on guess of the pair's devices."""
    n_v, n_c = out.n_variant, out.n_corner
    net = out.netlist
    supply = out.supply_V
    vth_n = np.abs(corners.device_table(flavour, np.array(["nmos"] * n_v), "vth_V"))
    vth_p = np.abs(corners.device_table(flavour, np.array(["pmos"] * n_v), "vth_V"))
    # operating point: NMOS gate at y (stored), PMOS gate at x ~ VSS (within the gate leakage
    # times R_on, microvolts)
    vov_n = np.asarray(out.cv_operating_V, dtype=float) - vth_n
    vov_p = supply - vth_p
    low = (vov_n < MIN_OVERDRIVE_V) | (vov_p < MIN_OVERDRIVE_V)
    flags = [["pair_weak_overdrive: operating overdrive below 50 mV; square law clipped"]
             if low.reshape(-1)[r] else [] for r in range(n_v * n_c)]
    r_on_n, r_on_p = _value(net, "mn_channel"), _value(net, "mp_channel")
    assert r_on_n is not None and r_on_p is not None
    beta_n = 1.0 / (r_on_n * _rows(np.maximum(vov_n, MIN_OVERDRIVE_V), n_v, n_c))
    beta_p = 1.0 / (r_on_p * _rows(np.maximum(vov_p, MIN_OVERDRIVE_V), n_v, n_c))
    temp = corners.temperature_K[None, :]
    fingers = np.array([c.fingers for c in cells])[:, None]
    length = np.array([g.gate_length_um for g in geos])[:, None] * micro
    width_n = np.array([g.gate_width_um for g in geos])[:, None] * micro
    width_p = np.array([g.pmos_gate_width_um for g in geos])[:, None] * micro
    area_n, area_p = fingers * length * width_n, fingers * length * width_p
    strip = ((fingers + 1) // 2) * deck.layout.diffusion_strip_um * micro
    drain_n, drain_p = strip * width_n, strip * width_p
    dop_p = to_si(corners.deck_value(lambda d: d.wells.pwell_doping_cm3), "cm^-3")
    dop_n = to_si(corners.deck_value(lambda d: d.wells.nwell_doping_cm3), "cm^-3")
    c_dep_n = _rows(mos_cv.depletion_capacitance_per_area(dop_p, temp) * area_n, n_v, n_c)
    c_dep_p = _rows(mos_cv.depletion_capacitance_per_area(dop_n, temp) * area_p, n_v, n_c)
    c_j_n = _rows(mos_cv.junction_capacitance_per_area(dop_p, temp, DIFFUSION_DOPING) * drain_n,
                  n_v, n_c)
    c_j_p = _rows(mos_cv.junction_capacitance_per_area(dop_n, temp, DIFFUSION_DOPING) * drain_p,
                  n_v, n_c)
    vfb_n = _rows(mos_cv.flatband_voltage("n+poly", dop_p, "p", temp), n_v, n_c)
    vfb_p = _rows(mos_cv.flatband_voltage("p+poly", dop_n, "n", temp), n_v, n_c)
    mn, mp = net.element("mn_channel"), net.element("mp_channel")
    channels = (
        DistributedChannel("mn_channel", "n", beta_n, _rows(vth_n, n_v, n_c), body=mn.node_a,
                           c_body=c_dep_n, v_flatband=vfb_n),
        DistributedChannel("mp_channel", "p", beta_p, _rows(vth_p, n_v, n_c), body=mp.node_a,
                           c_body=c_dep_p, v_flatband=vfb_p),
    )
    assert mn.node_far is not None and mp.node_far is not None
    extra = (Element("C", "esd_cj_n", mn.node_far, mn.node_a, c_j_n),
             Element("C", "esd_cj_p", mp.node_far, mp.node_a, c_j_p))
    leaks = (Element("R", "dc_leak_n", mn.node_far, mn.node_a, DRAIN_LEAKAGE_OHM),
             Element("R", "dc_leak_p", mp.node_far, mp.node_a, DRAIN_LEAKAGE_OHM))
    vdd = _rows(supply, n_v, n_c)
    guess = {mn.node_far: np.zeros_like(vdd), mp.node_far: vdd, mn.node_b: vdd,
             mp.node_b: np.zeros_like(vdd)}
    return channels, extra, leaks, guess, flags


def _series_rc(topology: str, net: Netlist) -> np.ndarray:
    """R C between the rail and the oxide, s: the pair's protecting on-resistance times the
    gate capacitance it feeds; a tied cell's low-frequency ESR times its gate capacitance."""
    if topology == "cross_coupled":
        r_n, r_p = _value(net, "mn_channel"), _value(net, "mp_channel")
        c_n, c_p = _value(net, "mn_channel", "c_total"), _value(net, "mp_channel", "c_total")
        assert r_n is not None and r_p is not None and c_n is not None and c_p is not None
        return np.maximum(r_p * c_n, r_n * c_p)
    rcs = []
    for line_name in OXIDE_LINES.get(topology, {}).values():
        prefix = line_name[: -len("channel")]
        line = net.element(line_name)
        r_line = np.asarray(line.value, dtype=float) / (12.0 if line.contacted_ends == 2 else 3.0)
        extra = sum((v for v in (_value(net, f"{prefix}r_gate"), _value(net, f"{prefix}r_access"))
                     if v is not None), np.zeros(1))
        rcs.append((r_line + extra) * np.asarray(line.c_total, dtype=float))
    return np.asarray(np.max(np.broadcast_arrays(*rcs), axis=0), dtype=float)


def inputs_from_group(deck: Any, corners: CornerSet, topology: str, out: Any, positions: list[int],
                      cells: list[Any], geos: list[Any]) -> OxideRiskInputs:
    """The oxide-risk inputs of one characterized group (``topologies.common.GroupResult``).

    ``positions`` are the group's cells' indices in the caller's list; ``cells`` and ``geos``
    the group's cells and resolved geometries in the group's order.
    """
    n_v, n_c = out.n_variant, out.n_corner
    flavour = np.array([c.oxide for c in cells])
    rails = np.array([c.rail for c in cells])
    supply = _rows(out.supply_V, n_v, n_c)
    oxides = OXIDE_LINES.get(topology, {})  # a topology not listed: no ESD/fault figures
    gate_um2 = np.array([g.gate_area_um2 for g in geos])[:, None]
    # two-device cells: each device's gate area from its own width (fingers x length x width)
    per_um = np.array([c.fingers * g.gate_length_um for c, g in zip(cells, geos)])[:, None]
    area_n = _rows(per_um * np.array([g.gate_width_um for g in geos])[:, None] * micro**2, n_v, n_c)
    area_p = _rows(per_um * np.array([g.pmos_gate_width_um for g in geos])[:, None] * micro**2, n_v, n_c)
    if topology == "cross_coupled":
        gate_area = {"nmos": area_n, "pmos": area_p}
        v_gate = {"nmos": _rows(np.abs(out.cv_operating_V), n_v, n_c), "pmos": supply.copy()}
    elif topology == "tied_cmos":  # both gates tied across the rails
        gate_area = {"nmos": area_n, "pmos": area_p}
        v_gate = {"nmos": supply.copy(), "pmos": supply.copy()}
    elif oxides:
        gate_area = {"gate": _rows(gate_um2 * micro**2, n_v, n_c)}
        v_gate = {"gate": _rows(np.abs(out.cv_operating_V), n_v, n_c)}
    else:
        gate_area, v_gate = {}, {}
    prot, source, limit = _protection(deck, corners, rails, supply)
    spot = _rows(oxide_subtable(corners, flavour, "reliability", "breakdown_spot_ohm"), n_v, n_c)
    flags: list[list[str]] = [[] for _ in range(n_v * n_c)]
    channels: tuple[DistributedChannel, ...] = ()
    extra: tuple[Element, ...] = ()
    leaks: tuple[Element, ...] = ()
    nodeset: dict[str, np.ndarray] = {}
    if topology == "cross_coupled":
        channels, extra, leaks, nodeset, flags = _pair_devices(deck, corners, out, cells, geos,
                                                               flavour)
    return OxideRiskInputs(
        topology=topology, cells=cells, positions=positions, corners=list(corners.names),
        netlist=out.netlist, oxides=dict(oxides), flavour=flavour, gate_area=gate_area,
        v_gate=v_gate, cell_area_m2=np.array([g.area_um2 for g in geos]) * micro**2,
        c_cell=_rows(out.summary["c_lf_F"], n_v, n_c),
        v_bd_pulse=_rows(out.vbd_pulse_V, n_v, n_c), supply=supply,
        nominal_supply=_rows(np.array([deck.supply_for(str(r)) for r in rails])[:, None], n_v, n_c),
        protection=prot, series_rc=(_series_rc(topology, out.netlist) if oxides
                                    else np.full(n_v * n_c, np.nan)),
        spot_ohm=spot, source_ohm=source, fault_limit_A=limit, corner_set=corners,
        channels=channels, extra_elements=extra, dc_elements=leaks, nodeset=nodeset, flags=flags)
