"""ESD events in time on a cell's own equivalent circuit: the voltage across each gate oxide,
the time it spends above the pulse breakdown voltage and the margin (SI: V, A, s, F, ohm).

A rail event is the cell's netlist between the rails (``vdd``, ``vss``) in parallel with the
rail domain's own capacitance and its supply clamp (`celllab.physics.transient.RailClamp`),
driven by a human-body-model or charged-device-model source network
(`celllab.physics.esd`), integrated by `celllab.physics.transient.simulate` for every row
(variant x corner) at once.

Chip state before the event
---------------------------
* unpowered (default): every node at 0 V (HBM) or at the device's precharge (CDM); devices
  given as `DistributedChannel` (the cross-coupled pair's) start off and turn on by their
  square law as the rail rises, their gates reached only through the circuit;
* powered (HBM only): every node at the DC operating point with the domain's supply applied
  (``nodeset`` picks the pair's both-on state); the off-chip supply is then left out of the
  event (behind the package it cannot follow ns edges, and a regulator does not sink the
  zap's current).

These are estimates for comparing cells, not ESD qualification: follow the foundry's ESD
rules, ANSI/ESDA/JEDEC JS-001 / JS-002 testing and licensed practice.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics import esd
from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Element, Netlist
from celllab.physics.transient import (
    LADDER_X_MAX,
    DistributedChannel,
    RailClamp,
    VoltageSource,
    constant,
    operating_point,
    piecewise_grid,
    simulate,
)

EsdModel = Literal["hbm", "cdm"]
Polarity = Literal["positive", "negative"]

CAUTION = ("ESD figures are transient estimates from the cell's equivalent circuit, a behavioural "
           "rail clamp and lumped HBM/CDM sources, for comparing cells; they are not ESD "
           "qualification. Follow the foundry's ESD rules, JS-001/JS-002 testing and licensed "
           "practice.")

#: Fraction of the rail's peak below which a cell's oxide counts as shielded by its circuit.
SHIELDED_BELOW = 0.9
#: Series R C against the event's rise time above which the R C filters the edge (common
#: practice, no source: a first-order low-pass passes an edge of rise t_r nearly whole while
#: R C < t_r / 10).
FILTERING_RC_TO_RISE = 0.1


@dataclass(frozen=True)
class EsdEvent:
    """One rail event.

    Attributes
    ----------
    model : {"hbm", "cdm"}
    voltage : float      tester voltage magnitude, V, > 0 (HBM precharge; CDM device charge)
    polarity : {"positive", "negative"}
        positive: VDD is driven above VSS (HBM: positive zap into VDD, VSS grounded; CDM: the
        device charged negative and discharged through VDD)
    rise_time : float | None   HBM only: 10-90 % rise of the short-circuit current, s
                               (JS-001: 2-10 ns; default 2 ns)
    powered : bool       HBM only: the chip sits at its operating point when zapped
    """

    model: EsdModel
    voltage: float
    polarity: Polarity = "positive"
    rise_time: float | None = None
    powered: bool = False

    def __post_init__(self) -> None:
        if self.model not in ("hbm", "cdm"):
            raise ValueError(f"ESD model = {self.model!r} -> allowed: hbm, cdm")
        if self.polarity not in ("positive", "negative"):
            raise ValueError(f"ESD polarity = {self.polarity!r} -> allowed: positive, negative")
        if not (np.isfinite(self.voltage) and self.voltage > 0):
            raise ValueError(f"ESD voltage = {self.voltage!r} -> must be a number > 0 (V)")
        if self.model == "cdm" and (self.powered or self.rise_time is not None):
            raise ValueError("CDM events happen to unpowered parts and set their own rise; "
                             "powered and rise_time apply to HBM")
        lo, hi = esd.HBM_RISE_RANGE
        if self.rise_time is not None and not lo <= self.rise_time <= hi:
            raise ValueError(f"HBM rise_time = {self.rise_time!r} s -> JS-001 allows {lo:g} to {hi:g}")

    @property
    def sign(self) -> float:
        """+1 when VDD is driven above VSS."""
        return 1.0 if self.polarity == "positive" else -1.0

    @property
    def edge_time(self) -> float:
        """Rise time of the event's current, s (HBM: 10-90 %; CDM: time to the current peak of
        our stand-in network, ~0.26 ns)."""
        if self.model == "hbm":
            return self.rise_time or esd.HBM_RISE_DEFAULT
        alpha = esd.CDM_RESISTANCE / (2 * esd.CDM_INDUCTANCE)
        w_d = np.sqrt(1 / (esd.CDM_INDUCTANCE * esd.CDM_CAPACITANCE) - alpha**2)
        return float(np.arctan2(w_d, alpha) / w_d)

    @property
    def label(self) -> str:
        state = ", powered" if self.powered else ""
        return f"{self.model.upper()} {'+' if self.sign > 0 else '-'}{self.voltage:g} V{state}"


@dataclass(frozen=True)
class RailProtection:
    """The rail domain around the cell, per row or scalar (SI).

    Attributes
    ----------
    v_on, r_on, t_response, v_diode : array_like   clamp (see `physics.transient.RailClamp`)
    c_rail : array_like     capacitance between the rails besides the cell, F
    v_supply : array_like   the domain's supply (powered events), V
    r_diode : array_like | None   the clamp's reverse-diode resistance, ohm (None: r_on)
    """

    v_on: ArrayLike
    r_on: ArrayLike
    t_response: ArrayLike
    v_diode: ArrayLike
    c_rail: ArrayLike
    v_supply: ArrayLike
    r_diode: ArrayLike | None = None


@dataclass(frozen=True)
class EventResult:
    """Waveforms and figures of one event on every row (variant x corner).

    Attributes (rows = n_rows, oxides = names in ``oxides``)
    ----------
    t : (n_t,) s
    rail_V : (n_rows, n_t)            V(vdd) - V(vss)
    clamp_A : (n_rows, n_t)           clamp current, VDD to VSS
    oxide_V : (n_rows, n_ox, n_t)     voltage across each oxide (gate plate minus channel), the
                                      worst point along the channel, signed
    peak_rail_V, peak_oxide_V         signed extremes (largest magnitude)
    time_above_s : (n_rows, n_ox)     time with |V_ox| above the pulse breakdown voltage
    margin : (n_rows, n_ox)           V_BD,pulse / |peak V_ox| (> 1: survives)
    v_bd_pulse : (n_rows,)
    converged : (n_rows,) bool        every Newton iteration converged
    n_segments : int                  largest ladder per channel line (`row_segments`)
    segments_capped : bool            some row wanted more than `MAX_EVENT_SEGMENTS`
    """

    event: EsdEvent
    oxides: tuple[str, ...]
    t: FloatArray
    rail_V: FloatArray
    clamp_A: FloatArray
    oxide_V: FloatArray
    peak_rail_V: FloatArray
    peak_oxide_V: FloatArray
    time_above_s: FloatArray
    margin: FloatArray
    v_bd_pulse: FloatArray
    converged: NDArray[np.bool_]
    n_segments: int
    segments_capped: bool = False

    @property
    def worst_margin(self) -> FloatArray:
        """Smallest margin over the row's oxides (inf for a row without gate oxide)."""
        if not self.oxides:
            return np.full(self.rail_V.shape[0], np.inf)
        return np.asarray(np.min(self.margin, axis=1), dtype=np.float64)

    @property
    def shielding(self) -> FloatArray:
        """|peak V_ox| / |peak rail V| of the worst oxide (1: the oxide sees the whole rail)."""
        if not self.oxides:
            return np.full(self.rail_V.shape[0], np.nan)
        worst = np.max(np.abs(self.peak_oxide_V), axis=1)
        return np.asarray(worst / np.abs(self.peak_rail_V), dtype=np.float64)


#: Grid refinements: "fine" (default; checked against ngspice) and "coarse" (about a third of
#: the steps, for catalog-wide runs; checked against "fine" in the tests).
GRIDS: dict[str, tuple[float, float, float]] = {"fine": (40.0, 10.0, 1.0), "coarse": (16.0, 4.0, 4.0)}


def event_grid(event: EsdEvent, t_response_max: float = 0.0, resolution: str = "fine") -> FloatArray:
    """The time grid of an event, s: finest where the clamp turns on, coarser over the tail.

    "fine": steps of the edge time / 40, and over the first three edge times (where the rail
    crosses the clamp's turn-on) at most a tenth of the clamp's response time, up to ten edge
    times; HBM then 0.5 ns to 100 ns and 2.5 ns to 600 ns (four 150 ns decay constants); CDM
    then 20 ps to 10 ns. "coarse": edge / 16, response / 4 and tail steps four times longer.
    """
    if resolution not in GRIDS:
        raise ValueError(f"resolution = {resolution!r} -> allowed: {', '.join(GRIDS)}")
    per_edge, per_response, tail = GRIDS[resolution]
    edge = event.edge_time
    h_edge = edge / per_edge
    h_clamp = min(h_edge, t_response_max / per_response if t_response_max > 0 else np.inf)
    head = [(3 * edge, h_clamp), (10 * edge, h_edge)]
    if event.model == "hbm":
        return piecewise_grid([*head, (100e-9, 0.5e-9 * tail), (600e-9, 2.5e-9 * tail)])
    return piecewise_grid([*head, (10e-9, 20e-12 * tail)])


def _rows(value: ArrayLike, n: int, what: str) -> FloatArray:
    arr = np.asarray(value, dtype=float).reshape(-1)
    if arr.size not in (1, n):
        raise ValueError(f"{what}: {arr.size} values for {n} rows")
    return np.broadcast_to(arr, (n,)).astype(float)


def _signed_peak(v: FloatArray) -> FloatArray:
    """The sample with the largest magnitude along the last axis, with its sign."""
    pick = np.argmax(np.abs(v), axis=-1)
    return np.asarray(np.take_along_axis(v, pick[..., None], axis=-1)[..., 0], dtype=np.float64)


@dataclass(frozen=True)
class EventCircuit:
    """Everything `simulate` integrates for one event (kept apart so it can be rendered)."""

    netlist: Netlist
    nonlinear: tuple[RailClamp | DistributedChannel, ...]
    initial_voltages: dict[str, ArrayLike]
    ground: str
    t_points: FloatArray
    n_segments: int
    probes: dict[str, str]
    n_rows: int
    v_bd_pulse: FloatArray
    segments_capped: bool = False


#: Ladder segments per channel line in an event: between 2 and this many.
MAX_EVENT_SEGMENTS = 32


def row_segments(netlist: Netlist, edge_time: float) -> tuple[NDArray[np.int_], NDArray[np.bool_]]:
    """Ladder segments each row's RC lines need in an event, and whether the cap was hit.

    N = ceil(sqrt(R C / (0.03 t_edge))) over the row's lines: omega R C / N^2 <= 0.03 at
    omega = 1 / t_edge (the accuracy rule of `physics.transient`, applied at the event's edge
    rather than at its step), rounded up to a power of two between 2 and `MAX_EVENT_SEGMENTS`
    (rows are simulated in bins of equal N). A capped ladder resolves a channel whose R C is
    far above the edge only coarsely near its contacts, where its oxide is stressed first.
    """
    lines = [el for el in netlist.elements if el.kind == "RCLINE"]
    n = netlist.n_variant
    if not lines:
        return np.ones(n, dtype=int), np.zeros(n, dtype=bool)
    rc = np.max([np.broadcast_to(np.asarray(el.value) * np.asarray(el.c_total), (n,))
                 for el in lines], axis=0)
    need = np.ceil(np.sqrt(rc / (LADDER_X_MAX * edge_time)))
    power = 2 ** np.ceil(np.log2(np.clip(need, 2, MAX_EVENT_SEGMENTS)))
    return power.astype(int), need > MAX_EVENT_SEGMENTS


def event_segments(netlist: Netlist, edge_time: float) -> tuple[int, bool]:
    """One ladder size for all rows of an event circuit (the largest `row_segments`)."""
    need, capped = row_segments(netlist, edge_time)
    return int(np.max(need)), bool(np.any(capped))


def event_circuit(
    netlist: Netlist,
    event: EsdEvent,
    protection: RailProtection,
    oxides: Mapping[str, str],
    v_bd_pulse: ArrayLike,
    *,
    channels: Sequence[DistributedChannel] = (),
    extra_elements: Sequence[Element] = (),
    nodeset: Mapping[str, ArrayLike] | None = None,
    t_points: ArrayLike | None = None,
    n_segments: int | None = None,
) -> EventCircuit:
    """The cell, its rail domain and the ESD source as one circuit (see `simulate_event`).

    ``n_segments`` fixes the channel ladders (default: `event_segments`).
    """
    n_rows = max(netlist.n_variant, np.size(v_bd_pulse))
    pin, ref = netlist.ports
    p = {name: _rows(getattr(protection, name), n_rows, f"protection.{name}")
         for name in ("v_on", "r_on", "t_response", "v_diode", "c_rail", "v_supply")}
    chip = Netlist(
        netlist.name,
        (*netlist.elements, *extra_elements, Element("C", "esd_rail_c", pin, ref, p["c_rail"])),
        netlist.ports,
    )
    r_diode = p["r_on"] if protection.r_diode is None else _rows(protection.r_diode, n_rows,
                                                                    "protection.r_diode")
    clamp = esd.rail_clamp(p["v_on"], p["r_on"], p["t_response"], p["v_diode"], pin, ref, r_diode)
    nonlinear: tuple[RailClamp | DistributedChannel, ...] = (clamp, *channels)
    grid = (event_grid(event, float(np.max(p["t_response"]))) if t_points is None
            else np.asarray(t_points, dtype=float))
    n_seg, capped = event_segments(chip, event.edge_time)
    if n_segments is not None:
        n_seg = n_segments
    if event.model == "hbm":
        source = esd.hbm_network(event.sign * event.voltage, event.edge_time, pin, ref)
        initial: dict[str, ArrayLike] = {}
        if event.powered:
            supply = VoltageSource("esd_supply", pin, ref, constant(p["v_supply"]))
            op = operating_point(chip, [supply], nonlinear, nodeset=nodeset, n_segments=n_seg)
            initial = {k: v for k, v in op.items() if not k.startswith(("i(", "s("))}
        initial.update(source.initial_voltages)
    else:
        source = esd.cdm_network(-event.sign * event.voltage, pin, ref)
        initial = dict(source.initial_voltages)
    probes = {"rail": f"v({pin},{ref})", "clamp": f"i({clamp.name})"}
    probes.update({f"ox:{label}": f"vc({line})" for label, line in oxides.items()})
    return EventCircuit(
        Netlist(chip.name, (*chip.elements, *source.elements), chip.ports), nonlinear, initial,
        source.ground, grid, n_seg, probes, n_rows, _rows(v_bd_pulse, n_rows, "v_bd_pulse"),
        capped)


def simulate_event(
    netlist: Netlist,
    event: EsdEvent,
    protection: RailProtection,
    oxides: Mapping[str, str],
    v_bd_pulse: ArrayLike,
    *,
    channels: Sequence[DistributedChannel] = (),
    extra_elements: Sequence[Element] = (),
    nodeset: Mapping[str, ArrayLike] | None = None,
    t_points: ArrayLike | None = None,
    resolution: str = "fine",
) -> EventResult:
    """Simulate one ESD event on every row of a cell netlist.

    Parameters
    ----------
    netlist : Netlist       the cell's equivalent circuit between ports (vdd, vss); values
                            over rows (variant x corner, flattened)
    event : EsdEvent
    protection : RailProtection   per row or scalar
    oxides : mapping        oxide label -> RCLINE element whose distributed capacitance is that
                            gate oxide (e.g. {"nmos": "mn_channel", "pmos": "mp_channel"}); {}
                            for a cell without gate oxide
    v_bd_pulse : array_like pulse breakdown voltage per row, V
    channels : sequence     `DistributedChannel` of lines whose conduction depends on their
                            gate (the pair's devices); other lines keep their resistance
    extra_elements          elements added to the cell for the event (junction capacitances)
    nodeset : mapping       guess for the powered operating point
    t_points : array_like   time grid, s (default `event_grid` at ``resolution``)
    resolution : {"fine", "coarse"}   grid of `event_grid` when ``t_points`` is not given

    Returns
    -------
    EventResult

    Notes
    -----
    Source networks: JS-001 HBM (100 pF, 1500 ohm, series L for the rise time) and our CDM
    stand-in (`celllab.physics.esd`). Oxide voltages are across each line's capacitance, which
    holds the gate stack at its operating-point capacitance (oxide with poly depletion and
    inversion-layer centroid in series), so they bound the voltage across the dielectric from
    above. Time above breakdown uses the linear interpolant between samples.
    """
    n_rows = max(netlist.n_variant, np.size(v_bd_pulse))
    t_max = float(np.max(np.asarray(protection.t_response, dtype=float)))
    grid = (event_grid(event, t_max, resolution) if t_points is None
            else np.asarray(t_points, dtype=float))
    need, capped_rows = row_segments(netlist, event.edge_time)
    need = np.broadcast_to(need, (n_rows,))
    if resolution == "coarse":  # one ladder size for all rows: fewer runs, each a little larger
        need = np.full(n_rows, int(np.max(need)))
    v_bd = _rows(v_bd_pulse, n_rows, "v_bd_pulse")
    labels = tuple(oxides)
    rail = np.empty((n_rows, grid.size))
    clamp = np.empty((n_rows, grid.size))
    ox = np.empty((n_rows, len(labels), grid.size))
    converged = np.empty(n_rows, dtype=bool)
    for n_seg in np.unique(need):  # a few ladder sizes (powers of two), not one per row
        idx = np.flatnonzero(need == n_seg)
        whole = idx.size == n_rows

        def take(v: Any, idx: NDArray[np.int_] = idx, whole: bool = whole) -> Any:
            if v is None or whole or np.size(v) == 1:
                return v
            return np.asarray(v, dtype=float).reshape(-1)[idx]

        sub_net = netlist if whole else _take_rows(netlist, take)
        sub_prot = protection if whole else RailProtection(
            *(take(getattr(protection, f)) for f in ("v_on", "r_on", "t_response", "v_diode",
                                                      "c_rail", "v_supply", "r_diode")))
        sub_channels = [ch if whole else replace(
            ch, beta=take(ch.beta), v_threshold=take(ch.v_threshold), c_body=take(ch.c_body),
            v_flatband=take(ch.v_flatband)) for ch in channels]
        sub_extra = [el if whole else replace(el, value=take(el.value)) for el in extra_elements]
        sub_nodeset = None if nodeset is None else {k: take(v) for k, v in nodeset.items()}
        circuit = event_circuit(sub_net, event, sub_prot, oxides, v_bd[idx],
                                channels=sub_channels, extra_elements=sub_extra,
                                nodeset=sub_nodeset, t_points=grid, n_segments=int(n_seg))
        res = simulate(circuit.netlist, t_points=grid, probes=circuit.probes,
                       nonlinear=circuit.nonlinear, initial_voltages=circuit.initial_voltages,
                       ground=circuit.ground, n_segments=circuit.n_segments)
        shape = (idx.size, grid.size)
        rail[idx] = np.broadcast_to(res.probes["rail"], shape)
        clamp[idx] = np.broadcast_to(res.probes["clamp"], shape)
        for k, label in enumerate(labels):
            ox[idx, k] = np.broadcast_to(res.probes[f"ox:{label}"], shape)
        converged[idx] = np.broadcast_to(res.converged, (idx.size,))
    peak_ox = _signed_peak(ox)
    with np.errstate(divide="ignore"):
        margin = v_bd[:, None] / np.abs(peak_ox)
    return EventResult(
        event=event,
        oxides=labels,
        t=grid,
        rail_V=rail,
        clamp_A=clamp,
        oxide_V=ox,
        peak_rail_V=_signed_peak(rail),
        peak_oxide_V=peak_ox,
        time_above_s=esd.time_above(grid, ox, v_bd[:, None]),
        margin=np.asarray(margin, dtype=np.float64),
        v_bd_pulse=v_bd,
        converged=converged,
        n_segments=int(np.max(need)),
        segments_capped=bool(np.any(capped_rows)),
    )


def _take_rows(netlist: Netlist, take: Callable[[Any], Any]) -> Netlist:
    """The netlist of a subset of rows (``take`` picks them from each value array)."""
    elements = tuple(
        replace(el, value=take(el.value),
                c_total=None if el.c_total is None else take(el.c_total))
        for el in netlist.elements)
    return Netlist(netlist.name, elements, netlist.ports)


def shielding_notes(result: EventResult, series_rc: ArrayLike, pair: bool) -> list[str]:
    """One sentence per row: does the cell's own circuit keep the event off its oxide?

    ``series_rc`` is the R C between the rail and the oxide (for a pair the protecting
    device's on-resistance times the gate capacitance it feeds), s.
    """
    rc = _rows(series_rc, result.rail_V.shape[0], "series_rc")
    edge = result.event.edge_time
    notes = []
    for ratio, share in zip(rc / edge, result.shielding):
        if not np.isfinite(share):
            notes.append("no gate oxide")
            continue
        rc_text = f"series R*C = {ratio * edge * 1e12:.3g} ps vs {edge * 1e9:.3g} ns rise"
        if share < SHIELDED_BELOW and pair and not result.event.powered:
            # unpowered, the devices start off: the on-resistance is not in the path at all
            filtering = "would filter" if ratio >= FILTERING_RC_TO_RISE else "no filtering"
            notes.append(f"oxide sees {share:.0%} of the rail: the pair's devices stay off and "
                         f"the gates float with the rail ({rc_text}: {filtering} once on)")
        elif share < SHIELDED_BELOW:
            notes.append(f"oxide sees {share:.0%} of the rail: the series resistance filters the "
                         f"edge ({rc_text})")
        elif pair:
            notes.append(f"oxide sees {share:.0%} of the rail: the pair's series resistance does "
                         f"not help ({rc_text})")
        else:
            notes.append(f"oxide sees {share:.0%} of the rail (tied gate; {rc_text})")
    return notes
