"""Every figure of a block's power network in one call: impedance and resonances per region,
the target check, damping, droop in time and emission (SI).

    figures = evaluate_network(network, goals)

Worst-corner policy: **each figure at its own worst corner.** Every corner is evaluated; each
reported number (a resonance's peak |Z|, the worst |Z| / Z_target, the first droop, the
ringing Q, the settling time, an emission level) is taken at the corner where that number is
worst, and the corner is named beside it. Two figures of one region may therefore come from
different corners. For resonances, a peak's worst corner is the one with the highest |Z|; a
dip's is the one where it is shallowest (highest |Z|). The same resonance is followed across
corners by kind and frequency (within a factor ``TRACK_RATIO``).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import NDArray

from celllab.physics import pdn
from celllab.planner.corners import NETWORK_FIGURES
from celllab.planner.damping import (
    DampingTrade,
    cell_impedance,
    damping_score,
    match_ratio,
    size_entrance_resistors,
)
from celllab.planner.droop import DroopFigures, DroopRun, droop_figures, droop_grid, simulate_droop
from celllab.planner.emission import (
    BandLevels,
    EmissionSpectrum,
    compare_emission,
    emission_spectrum,
)
from celllab.planner.network import RING, BlockNetwork, FillEntry, entry_node
from celllab.planner.resonance import (
    Resonance,
    TargetCheck,
    activity_band_edge,
    check_target,
    find_resonances,
)
from celllab.planner.waveforms import block_current_spectrum

__all__ = [
    "WORST_CORNER_POLICY",
    "CellDamping",
    "NetworkFigures",
    "NetworkGoals",
    "RegionFigures",
    "ResonanceTrack",
    "evaluate_network",
    "region_targets",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

#: The corner rule of every figure here (named once, in `planner.corners`).
WORST_CORNER_POLICY = NETWORK_FIGURES.rule
#: Resonances of two corners within this frequency ratio (same kind) are the same one.
TRACK_RATIO = 1.3
#: Peaks at least this fraction of the largest in-band peak set the droop run's length.
SETTLE_PEAK_FRACTION = 0.3


@dataclass(frozen=True)
class NetworkGoals:
    """What the network is checked against, and what to compute (SI).

    ripple_fraction : float or mapping region -> float   allowed ripple / V_DD
    ir_drop_limit : float or mapping region -> float     V, for the entrance resistors
    freq : (n_freq,) Hz                                   analysis grid
    emission_f_max : Hz;  probe : ohm (the 1 ohm ground-return probe)
    size_entrance : size entrance resistors;  droop : run droop in time
    naive_fill : mapping region -> fill entries, optional: a comparison fill (e.g. every site
                 filled with the densest cell) for emission
    droop_segments : RC-line ladder segments for droop runs (None: `droop.LADDER_X` rule)
    """

    ripple_fraction: float | Mapping[str, float]
    ir_drop_limit: float | Mapping[str, float]
    freq: FloatArray
    emission_f_max: float = 1e9
    probe: float = 1.0
    size_entrance: bool = False
    droop: bool = True
    naive_fill: Mapping[str, Sequence[FillEntry]] | None = None
    droop_segments: int | None = None

    def per_region(self, value: float | Mapping[str, float], names: Sequence[str]) -> FloatArray:
        if isinstance(value, Mapping):
            return np.array([float(value[n]) for n in names])
        return np.full(len(names), float(value))


@dataclass(frozen=True)
class ResonanceTrack:
    """One resonance followed over corners, reported at its worst corner (SI)."""

    kind: str
    frequency: float
    magnitude: float
    q: float
    q_method: str
    corner: str
    per_corner: dict[str, Resonance]


@dataclass(frozen=True)
class CellDamping:
    """How one fill cell damps the region's worst in-band peak (SI; see `planner.damping`).

    f0 : Hz (the peak);  capacitance : F per cell (low frequency);  esr_at_f0 : ohm per cell
    match : x = 2 pi f0 ESR C (1 = matched);  score : g / (2 pi f0 C) (<= 0.5 for ESR-C)
    conductance : g, S per cell;  total_conductance : count x g, S
    """

    cell: str
    count: float
    f0: float
    capacitance: float
    esr_at_f0: float
    match: float
    score: float
    conductance: float
    total_conductance: float


@dataclass(frozen=True)
class RegionFigures:
    """One region's figures, each at its own worst corner (SI; corner names beside them).

    A quiet region (no current of its own) has ``target`` inf, no ``check`` and no
    ``conductance_needed`` (nan); its impedance, resonances and droop are still reported.
    ``top_peak`` is the highest |Z| peak inside the band (None: no peak there): the
    resonance ``cell_damping`` and ``conductance_needed`` are taken at.
    """

    name: str
    target: float
    band: tuple[float, float]
    check: TargetCheck | None
    check_corner: str
    resonances: list[ResonanceTrack]
    per_corner_resonances: dict[str, list[Resonance]]
    transfer_peak: dict[str, tuple[float, float, str]]
    cell_damping: list[CellDamping]
    conductance_needed: float
    dc_drop: float
    top_peak: ResonanceTrack | None = None
    droop: dict[str, tuple[float, str]] = field(default_factory=dict)
    droop_after: dict[str, tuple[float, str]] = field(default_factory=dict)


@dataclass(frozen=True)
class NetworkFigures:
    """All figures of a block network (SI). ``z``: (n_corner, n_freq, n_region, n_region)."""

    freq: FloatArray
    corners: tuple[str, ...]
    region_names: tuple[str, ...]
    z: ComplexArray
    regions: list[RegionFigures]
    droop_run: DroopRun | None
    droop_run_after: DroopRun | None
    damping: DampingTrade | None
    damping_ac_power: FloatArray | None
    emission: dict[str, EmissionSpectrum]
    emission_bands: list[BandLevels]
    policy: str = WORST_CORNER_POLICY
    notes: list[str] = field(default_factory=list)


def _tracks(per_corner: dict[str, list[Resonance]]) -> list[ResonanceTrack]:
    """Follow resonances across corners: same kind, frequency within ``TRACK_RATIO``."""
    items = sorted(((r, c) for c, rs in per_corner.items() for r in rs),
                   key=lambda x: x[0].frequency)
    groups: list[dict[str, Resonance]] = []
    for res, corner in items:
        for g in groups:
            first = next(iter(g.values()))
            if (first.kind == res.kind and corner not in g
                    and abs(np.log(res.frequency / first.frequency)) < np.log(TRACK_RATIO)):
                g[corner] = res
                break
        else:
            groups.append({corner: res})
    tracks = []
    for g in groups:
        names = list(g)
        corner = names[int(NETWORK_FIGURES.worst_index([g[c].magnitude for c in names]))]
        worst = g[corner]
        tracks.append(ResonanceTrack(worst.kind, worst.frequency, worst.magnitude, worst.q,
                                     worst.q_method, corner, dict(g)))
    return sorted(tracks, key=lambda t: t.frequency)


def _worst(values: FloatArray, corners: Sequence[str]) -> tuple[float, str]:
    """(value, corner) of the worst finite entry of a per-corner array (nan if none)."""
    return NETWORK_FIGURES.worst(values, list(corners))


def _droop_summary(fig: DroopFigures, r: int, corners: Sequence[str]
                   ) -> dict[str, tuple[float, str]]:
    out = {}
    for name in ("first_droop", "worst_droop", "overshoot", "ringing_q", "settling_time"):
        out[name] = _worst(getattr(fig, name)[:, r], corners)
    k = corners.index(out["first_droop"][1]) if out["first_droop"][1] in corners else 0
    out["first_droop_time"] = (float(fig.first_droop_time[k, r]), corners[k])
    out["settled_droop"] = (float(fig.settled_droop[k, r]), corners[k])
    kq = corners.index(out["ringing_q"][1]) if out["ringing_q"][1] in corners else k
    out["ringing_frequency"] = (float(fig.ringing_frequency[kq, r]), corners[kq])
    return out


def _cell_damping(network: BlockNetwork, r: int, f0: float, corner: int,
                  f_low: float) -> list[CellDamping]:
    region = network.regions[r]
    if not region.fill:
        return []
    circuits = [e.circuits[network.corners[corner]] for e in region.fill]
    z = cell_impedance(circuits, [f_low, f0])
    g = np.real(1.0 / z[:, 1])  # = resonance_conductance(circuits, f0)
    cap = np.imag(1.0 / z[:, 0]) / (2.0 * np.pi * f_low)
    esr = np.real(z[:, 1])
    x = match_ratio(esr, cap, f0)
    score = damping_score(g, cap, f0)
    return [CellDamping(e.cell, e.count, f0, float(c), float(s), float(xi), float(sc),
                        float(gi), float(e.count * gi))
            for e, c, s, xi, sc, gi in zip(region.fill, cap, esr, x, score, g)]


def _entrance_ac_power(network: BlockNetwork, entrance: FloatArray, f_max: float) -> FloatArray:
    """Power of the clock harmonics in each entrance resistor at its worst corner, W:
    sum_h |V_entry - V_ring|^2 / (2 R) with the regions' peak phasors superposed."""
    freq, currents = block_current_spectrum(network.activities, f_max)
    n = len(network.regions)
    if freq.size == 0:
        return np.zeros(n)
    observe = [RING, *[entry_node(r.name) for r in network.regions]]
    v = network.transfer(freq, observe, entrance)  # (n_c, n_h, 1 + n, n)
    # drawn current I lowers the nodes by Z I
    across = -np.einsum("chor,hr->cho", v, currents)
    delta = across[:, :, 1:] - across[:, :, :1]  # entry minus ring
    with np.errstate(divide="ignore", invalid="ignore"):
        power = np.where(entrance > 0, np.sum(np.abs(delta) ** 2, axis=1) / (2.0 * entrance),
                         0.0)
    return np.asarray(np.max(power, axis=0), dtype=float)


def region_targets(network: BlockNetwork, goals: NetworkGoals
                   ) -> tuple[FloatArray, list[tuple[float, float]], list[str]]:
    """Each region's target impedance (ohm; inf for a region without a current of its own)
    and band (f_lo, f_hi) Hz, with notes on bands cut at the grid's end.

    Z_t = V_DD x ripple / I_peak (`physics.pdn.target_impedance`); the band runs from the
    bottom of the grid to 0.35 / min(t_rise, t_fall) (`resonance.activity_band_edge`), the
    block's fastest edge for a quiet region.
    """
    f = np.asarray(goals.freq, dtype=float)
    notes: list[str] = []
    ripple = goals.per_region(goals.ripple_fraction, network.region_names)
    # a quiet region (no current of its own) has no target: inf keeps it out of every ratio
    targets = np.array([np.inf if r.activity is None else float(pdn.target_impedance(
        network.supply.supply_voltage, ripple[k], r.activity.peak_current))
        for k, r in enumerate(network.regions)])
    edges = {r.name: activity_band_edge(r.activity.rise_time, r.activity.fall_time_s)
             for r in network.regions if r.activity is not None}
    block_edge = max(edges.values(), default=float(f[-1]))
    bands = []
    for r in network.regions:
        edge = edges.get(r.name, block_edge)  # quiet: the block's fastest edge
        if edge > f[-1]:
            notes.append(f"region {r.name}: its band reaches {edge / 1e9:.3g} GHz, above the "
                         f"analysis grid ({f[-1] / 1e9:.3g} GHz): checked up to the grid's end")
        bands.append((float(f[0]), float(min(edge, f[-1]))))
    return targets, bands, notes


def evaluate_network(network: BlockNetwork, goals: NetworkGoals,
                     progress: Callable[[str], None] | None = None) -> NetworkFigures:
    """Impedance, resonances, target check, damping, droop and emission of a block network.

    Parameters
    ----------
    network : BlockNetwork   (`planner.network.build_network`)
    goals : NetworkGoals
    progress : callable, optional   called with a short stage text before each step

    Returns
    -------
    NetworkFigures   per region and per figure at its own worst corner (`WORST_CORNER_POLICY`)

    Notes
    -----
    Band of each region: from the bottom of the analysis grid to 0.35 / min(t_rise, t_fall)
    (`resonance.activity_band_edge`: common practice, from memory). Target impedance
    Z_t = V_DD x ripple / I_peak (Smith et al. 1999, `physics.pdn.target_impedance`).
    """
    say = progress or (lambda _text: None)
    say("supply network: impedance and resonances")
    f = np.asarray(goals.freq, dtype=float)
    names, corners = network.region_names, network.corners
    n_r = len(names)
    targets, bands, notes = region_targets(network, goals)
    z = network.z_matrix(f)
    diag = np.abs(z[..., np.arange(n_r), np.arange(n_r)]).transpose(0, 2, 1)  # (c, r, f)

    def evaluate(points: FloatArray) -> FloatArray:
        zz = network.z_matrix(points)
        return np.abs(zz[..., np.arange(n_r), np.arange(n_r)]).transpose(0, 2, 1)

    found = find_resonances(f, diag, evaluate)
    dc = network.dc_state()
    regions: list[RegionFigures] = []
    worst_peak = np.zeros(n_r)
    ring_f = np.full(n_r, np.nan)
    for k, region in enumerate(network.regions):
        per_corner = {c: found[i][k] for i, c in enumerate(corners)}
        quiet = region.activity is None
        checks = [check_target(f, diag[i, k], 1.0 if quiet else targets[k], bands[k],
                               found[i][k]) for i in range(len(corners))]
        i_worst = int(NETWORK_FIGURES.worst_index([c.worst_ratio for c in checks]))
        tracks = _tracks(per_corner)
        in_band = [t for t in tracks if t.kind == "peak" and bands[k][0] <= t.frequency
                   <= bands[k][1]]
        top = None
        if in_band:
            top = max(in_band, key=lambda t: t.magnitude)
            f0, c0 = top.frequency, corners.index(top.corner)
            worst_peak[k], ring_f[k] = top.magnitude, top.frequency
        else:
            f0, c0 = checks[i_worst].worst_frequency, i_worst
        damping = _cell_damping(network, k, f0, c0, float(f[0]))
        g_total = 1.0 / float(np.abs(network.z_matrix(np.array([f0]))[c0, 0, k, k]))
        g_fill = sum(d.total_conductance for d in damping)
        transfer = {}
        for j, other in enumerate(names):
            if j == k:
                continue
            inside = (f >= bands[k][0]) & (f <= bands[k][1])
            mag = np.where(inside[None, :], np.abs(z[:, :, k, j]), -np.inf)
            c_idx, f_idx = np.unravel_index(np.argmax(mag), mag.shape)
            transfer[other] = (float(mag[c_idx, f_idx]), float(f[f_idx]), corners[c_idx])
        regions.append(RegionFigures(
            name=region.name, target=float(targets[k]), band=bands[k],
            check=None if quiet else checks[i_worst],
            check_corner="-" if quiet else corners[i_worst], resonances=tracks,
            per_corner_resonances=per_corner, transfer_peak=transfer, cell_damping=damping,
            conductance_needed=float("nan") if quiet else float(1.0 / targets[k]
                                                                - (g_total - g_fill)),
            dc_drop=float(dc.drop[k]), top_peak=top))

    trade = ac_power = run = run_after = None
    droop_fig = droop_after = None
    active = any(a is not None for a in network.activities)
    if not active and (goals.droop or goals.size_entrance):
        notes.append("no region draws a current: no droop run and no entrance resistors")
    if active and (goals.droop or goals.size_entrance):
        f_ring = float(np.nanmax(ring_f)) if np.any(np.isfinite(ring_f)) else float(
            np.sqrt(f[0] * f[-1]))
        settle = 0.0
        for reg in regions:
            for t in reg.resonances:
                if (t.kind == "peak" and t.magnitude >= SETTLE_PEAK_FRACTION * np.max(worst_peak)
                        and np.isfinite(t.q) and reg.band[0] <= t.frequency <= reg.band[1]):
                    settle = max(settle, 5.0 * max(t.q, 0.5) / (np.pi * t.frequency))
        settle = max(settle, 10.0 / f_ring)
        grid, truncated = droop_grid(network.activities, f_ring, settle)
        if truncated:
            notes.append(f"the droop run was cut at {grid[-1] * 1e9:.4g} ns (step limit): "
                         "settling may lie beyond it")
        activities = network.activities
        if goals.droop:
            say(f"supply network: droop in time ({grid.size - 1} steps)")
            run = simulate_droop(network, grid, f_ring, n_segments=goals.droop_segments)
            droop_fig = droop_figures(run, activities)
        if goals.size_entrance:
            say("supply network: sizing entrance resistors")
            limit = goals.per_region(goals.ir_drop_limit, names)
            trade = size_entrance_resistors(network, f, targets, bands, limit)
            ac_power = _entrance_ac_power(network, trade.resistance, goals.emission_f_max)
            if goals.droop:
                say(f"supply network: droop with the entrance resistors ({grid.size - 1} "
                    "steps)")
                run_after = simulate_droop(network, grid, f_ring, trade.resistance,
                                           n_segments=goals.droop_segments)
                droop_after = droop_figures(run_after, activities)
    if droop_fig is not None:
        regions = [_with_droop(reg, droop_fig, droop_after, k, corners)
                   for k, reg in enumerate(regions)]

    emission: dict[str, EmissionSpectrum] = {}
    bands_out: list[BandLevels] = []
    if any(a is not None and a.period is not None for a in network.activities):
        say("supply network: emission")
        emission["plan"] = emission_spectrum(network, goals.emission_f_max, "plan", goals.probe)
        emission["no on-die decap"] = emission_spectrum(network.with_fill({}),
                                                        goals.emission_f_max, "no on-die decap",
                                                        goals.probe)
        if goals.naive_fill is not None:
            emission["naive fill"] = emission_spectrum(network.with_fill(goals.naive_fill),
                                                       goals.emission_f_max, "naive fill",
                                                       goals.probe)
        bands_out = compare_emission(emission, "plan")
    else:
        notes.append("no region has a clock frequency: no emission spectrum")
    return NetworkFigures(f, corners, names, z, regions, run, run_after, trade, ac_power,
                          emission, bands_out, WORST_CORNER_POLICY, notes)


def _with_droop(reg: RegionFigures, fig: DroopFigures, after: DroopFigures | None, k: int,
                corners: Sequence[str]) -> RegionFigures:
    return replace(reg, droop=_droop_summary(fig, k, corners),
                   droop_after=_droop_summary(after, k, corners) if after is not None else {})
