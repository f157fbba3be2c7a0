"""Supply droop in time: every region drawing its current waveform at once, integrated by the
project's transient solver on the whole network (SI: s, V, A, Hz).

`simulate_droop` hands `BlockNetwork.netlist` (variants = corners; each fill cell's stored
circuit scaled by its count) with one current source per region to
`celllab.physics.transient.simulate` (TR-BDF2 modified nodal analysis), starting from the DC
operating point of the currents at t = 0, and probes every region node. The droop is
V_nominal - V(node): positive when the node falls.

Figures per corner and region (`droop_figures`):

first droop      the first clear maximum of the droop after the stimulus starts (the
                 die-package resonance answering the load change; see ``FIRST_PROMINENCE``),
                 and when it occurs
worst droop      the largest droop of the run
settled droop    where the droop ends: the last 5 % of the run (step, samples) or the mean over
                 the last clock period (clock)
overshoot        the largest rebound above the settled level after the first droop
ringing          step and samples: frequency from the first two droop maxima from the first
                 droop on (each placed by a parabola through its samples), Q from their decay (log decrement delta of a second-order response:
                 zeta = delta / sqrt(4 pi^2 + delta^2), Q = 1 / (2 zeta)); clock: not computed
settling time    after the stimulus edge, the last time the droop is more than
                 ``SETTLE_FRACTION`` of the first excursion away from the settled level (step,
                 samples), or the last clock period whose peak droop differs from the final one
                 by more than that fraction (clock); nan when the run ends before
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.signal import find_peaks

from celllab.physics import transient as tr
from celllab.planner.network import GROUND, BlockNetwork, region_node
from celllab.planner.waveforms import Activity, current_waveform

__all__ = [
    "CLOCK_STEPS_PER_EDGE",
    "SETTLE_FRACTION",
    "DroopFigures",
    "DroopRun",
    "droop_figures",
    "droop_grid",
    "simulate_droop",
]

FloatArray = NDArray[np.float64]

#: Settling band: this fraction of the first droop's excursion from the settled level
#: (common practice, no source).
SETTLE_FRACTION = 0.02
#: A droop maximum counts as the first droop when it stands out by this fraction of the
#: droop's range and reaches this fraction of the worst droop (above the initial level):
#: small bumps during the edge are not the die-package response (common practice, no source).
FIRST_PROMINENCE, FIRST_LEVEL = 0.05, 0.25
#: Largest number of time steps of one run.
MAX_STEPS = 6000
#: RC-line ladder rule for the droop: omega R C / N^2 <= this at the ringing frequency (the
#: SPICE export's accuracy rule, applied where the droop's energy is), N within the bounds.
#: Decap channels and fingers are short lines at the ringing frequency (omega R C << 1), so
#: the rule usually asks for few segments; each segment adds a node per line and cell kind to
#: every time step.
LADDER_X = 0.03
LADDER_BOUNDS = (2, 64)
#: Time steps per fastest edge in a clock run (the whole run is stepped this finely, since
#: every pulse has edges); a pulse's corners then fall within a third of an edge, which moved
#: the first and worst droop of the demo blocks by under 0.5 % against a tenth of an edge.
CLOCK_STEPS_PER_EDGE = 3


@dataclass(frozen=True)
class DroopRun:
    """One transient run (SI).

    t : (n_t,) s;  droop : (n_corner, n_t, n_region) V (nominal minus node voltage)
    current : (n_t, n_region) A drawn by each region;  stimulus_end : (n_region,) s, the end of
    each region's step edge (step), 0 (clock) or the last sample time (samples)
    n_segments : RC-line ladder segments used;  truncated : the run hit ``MAX_STEPS``
    """

    t: FloatArray
    droop: FloatArray
    current: FloatArray
    corners: tuple[str, ...]
    regions: tuple[str, ...]
    stimuli: tuple[str, ...]
    stimulus_end: FloatArray
    n_segments: int
    truncated: bool


def droop_grid(activities: Sequence[Activity | None], f_ring: float, settle_time: float
               ) -> tuple[FloatArray, bool]:
    """Time grid for a droop run, s.

    Step and samples: steps of a tenth of the fastest edge over the edges, then 1/60 of the
    ringing period over three ring periods, then a coarser step (at most 400 more) to
    ``settle_time`` after the edges. Clocks: a third of the fastest edge throughout
    (``CLOCK_STEPS_PER_EDGE``; every pulse has edges), or 1/60 of the ringing period if
    finer, over ``settle_time`` and at least three clock periods.

    Parameters
    ----------
    activities : the regions' activities (None: a quiet region, ignored)
    f_ring : Hz   frequency of the ringing to resolve (the worst in-band |Z| peak)
    settle_time : s   how long the response needs to settle after the stimulus

    Returns
    -------
    (t, truncated)   grid from 0; ``truncated`` when ``MAX_STEPS`` shortened it
    """
    activities = [a for a in activities if a is not None]
    if not activities:
        raise ValueError("no region draws a current: nothing to simulate")
    edge = min(min(a.rise_time, a.fall_time_s) for a in activities)
    fine = edge / 10.0
    ring = max(fine, 1.0 / (60.0 * f_ring))
    clocks = [a for a in activities if a.stimulus == "clock"]
    if clocks:
        periods = [1.0 / a.clock_frequency for a in clocks]  # type: ignore[operator]
        step = min(edge / CLOCK_STEPS_PER_EDGE, 1.0 / (60.0 * f_ring))
        stretches = [(max(settle_time, 3.0 * max(periods)), step)]
    else:
        ends = [a.step_delay + a.rise_time if a.stimulus == "step"
                else float(np.asarray(a.samples[0])[-1])  # type: ignore[index]
                for a in activities]
        edge_end = max(ends)
        samples = [a for a in activities if a.stimulus == "samples"]
        if samples:  # resolve the sampled waveform wherever it moves
            spacing = min(float(np.min(np.diff(np.asarray(a.samples[0]))))  # type: ignore[index]
                          for a in samples)
            fine = min(fine, spacing)
        fast_end = edge_end + 2.0 * edge
        ring_end = fast_end + 3.0 / f_ring
        t_stop = max(edge_end + settle_time, 1.5 * ring_end)
        coarse = max(ring, (t_stop - ring_end) / 400.0)
        stretches = [(fast_end, fine), (ring_end, ring), (t_stop, coarse)]
    grid = tr.piecewise_grid(stretches)
    truncated = grid.size > MAX_STEPS + 1
    return (grid[: MAX_STEPS + 1] if truncated else grid), truncated


def _ladder_segments(network: BlockNetwork, f_ring: float) -> int:
    products = [float(np.max(np.asarray(el.value) * np.asarray(el.c_total)))
                for r in network.regions for e in r.fill for nl in e.circuits.values()
                for el in nl.elements if el.kind == "RCLINE"]
    if not products:
        return LADDER_BOUNDS[0]
    needed = np.sqrt(2.0 * np.pi * f_ring * max(products) / LADDER_X)
    return int(np.clip(np.ceil(needed), *LADDER_BOUNDS))


def simulate_droop(network: BlockNetwork, t: ArrayLike, f_ring: float,
                   entrance: ArrayLike | None = None, n_segments: int | None = None
                   ) -> DroopRun:
    """Every region draws its `Activity` current at once; the region nodes' droop over ``t``.

    Parameters
    ----------
    network : BlockNetwork
    t : array_like         time grid from 0, s (`droop_grid`)
    f_ring : float         Hz, the ringing frequency (sets the RC-line ladder length)
    entrance : array_like, optional   entrance resistors, ohm (default: the network's)
    n_segments : int, optional   ladder segments per RC line (default: ``LADDER_X`` at
                           ``f_ring``, within ``LADDER_BOUNDS``)

    Notes
    -----
    The network is linear and the supply an ideal source (AC ground), so the node voltages
    are the deviations from nominal; the initial state is the DC operating point of the
    currents at t = 0 (the drop of any base current).
    """
    grid = np.asarray(t, dtype=float)
    netlist = network.netlist(entrance)
    n_seg = n_segments if n_segments is not None else _ladder_segments(network, f_ring)
    active = [r for r in network.regions if r.activity is not None]
    if not active:
        raise ValueError("no region draws a current: nothing to simulate")
    sources = [tr.CurrentSource(f"i_{r.name}", region_node(r.name), GROUND,
                                lambda tt, a=r.activity: current_waveform(a, tt)[None, :])
               for r in active]
    probes = {r.name: f"v({region_node(r.name)})" for r in network.regions}
    result = tr.simulate(netlist, sources, t_points=grid, probes=probes, initial="dc",
                         n_segments=n_seg)
    droop = -np.stack([result.probes[r.name] for r in network.regions], axis=-1)
    current = np.stack([np.zeros_like(grid) if r.activity is None
                        else current_waveform(r.activity, grid) for r in network.regions], axis=-1)
    refs = _references(network.activities)
    ends = []
    for a in refs:
        if a.stimulus == "step":
            ends.append(a.step_delay + a.rise_time)
        elif a.stimulus == "clock":
            ends.append(0.0)
        else:
            ends.append(float(np.asarray(a.samples[0])[-1]))  # type: ignore[index]
    return DroopRun(grid, droop, current, network.corners, network.region_names,
                    tuple(a.stimulus for a in refs), np.array(ends),
                    result.n_segments or n_seg, False)


def _references(activities: Sequence[Activity | None]) -> list[Activity]:
    """The activity each region's droop is read against: its own, or for a quiet region the
    first region that draws a current (its start, edge and period)."""
    first = next(a for a in activities if a is not None)
    return [first if a is None else a for a in activities]


@dataclass(frozen=True)
class DroopFigures:
    """Droop figures per corner and region, (n_corner, n_region) arrays (SI: V, s, Hz)."""

    first_droop: FloatArray
    first_droop_time: FloatArray
    worst_droop: FloatArray
    worst_droop_time: FloatArray
    settled_droop: FloatArray
    overshoot: FloatArray
    ringing_frequency: FloatArray
    ringing_q: FloatArray
    settling_time: FloatArray

    def worst_corner(self) -> NDArray[np.int_]:
        """Per region, the corner index with the largest worst droop."""
        return np.asarray(np.argmax(self.worst_droop, axis=0))


def _vertex(t: FloatArray, y: FloatArray, k: int) -> tuple[float, float]:
    """(time, value) of the parabola through samples k-1, k, k+1 (a maximum between grid
    points); the sample itself at the ends of the trace."""
    if k <= 0 or k >= t.size - 1:
        return float(t[k]), float(y[k])
    t0, t1, t2 = t[k - 1], t[k], t[k + 1]
    y0, y1, y2 = y[k - 1], y[k], y[k + 1]
    s1, s2 = (y1 - y0) / (t1 - t0), (y2 - y1) / (t2 - t1)
    curv = (s2 - s1) / (t2 - t0)
    if curv >= 0:
        return float(t1), float(y1)
    slope = s1 + curv * (t1 - t0)
    shift = float(np.clip(-slope / (2.0 * curv), t0 - t1, t2 - t1))
    return float(t1 + shift), float(y1 + slope * shift + curv * shift * shift)


def _trace_figures(t: FloatArray, d: FloatArray, stimulus: str, start: float, end: float,
                   period: float | None) -> tuple[float, ...]:
    """(first, t_first, worst, t_worst, settled, overshoot, f_ring, q, t_settle) of one trace."""
    after = t >= start
    tt, dd = t[after], d[after]
    k_worst = int(np.argmax(dd))
    t_worst, worst = _vertex(tt, dd, k_worst)
    if stimulus == "clock" and period is not None:
        settled = float(np.mean(d[t >= t[-1] - period]))
    else:
        settled = float(np.mean(d[t >= t[-1] - 0.05 * (t[-1] - t[0])]))
    span = float(np.ptp(dd)) or 1.0
    peaks, _ = find_peaks(dd, prominence=FIRST_PROMINENCE * span)
    peaks = peaks[dd[peaks] - dd[0] >= FIRST_LEVEL * (worst - dd[0])]
    k_first = int(peaks[0]) if peaks.size else k_worst
    t_first, first = _vertex(tt, dd, k_first)
    rest = dd[k_first:] - settled
    overshoot = float(max(-np.min(rest), 0.0))
    f_ring = q = t_settle = float("nan")
    if stimulus == "clock" and period is not None:
        n_cycles = int(np.floor((t[-1] - t[0]) / period))
        if n_cycles >= 2:
            cycle = np.minimum(np.floor((t - t[0]) / period).astype(int), n_cycles - 1)
            per_cycle = np.array([d[cycle == c].max() for c in range(n_cycles)])
            off = np.abs(per_cycle - per_cycle[-1]) > SETTLE_FRACTION * abs(per_cycle[-1] or 1.0)
            last = np.flatnonzero(off)
            t_settle = float((last[-1] + 1) * period) if last.size else 0.0
            if last.size and last[-1] == n_cycles - 1:
                t_settle = float("nan")
        return first, t_first, worst, t_worst, settled, overshoot, f_ring, q, t_settle
    dev = dd - settled
    maxima, _ = find_peaks(dev, prominence=FIRST_PROMINENCE * abs(first - settled))
    maxima = maxima[maxima >= k_first]
    if maxima.size >= 2 and dev[maxima[0]] > 0 and dev[maxima[1]] > 0:
        (ta, ya), (tb, yb) = _vertex(tt, dev, int(maxima[0])), _vertex(tt, dev, int(maxima[1]))
        f_ring = 1.0 / (tb - ta)
        delta = float(np.log(ya / yb))
        if delta > 0:
            zeta = delta / np.sqrt(4.0 * np.pi ** 2 + delta ** 2)
            q = 1.0 / (2.0 * zeta)
    excursion = abs(first - settled)
    outside = np.abs(dev) > SETTLE_FRACTION * excursion
    idx = np.flatnonzero(outside)
    if idx.size == 0:
        t_settle = 0.0
    elif idx[-1] < dd.size - 1:
        t_settle = max(float(tt[idx[-1] + 1]) - end, 0.0)
    return first, t_first, worst, t_worst, settled, overshoot, f_ring, q, t_settle


def droop_figures(run: DroopRun, activities: Sequence[Activity | None]) -> DroopFigures:
    """First and worst droop, ringing and settling of every corner and region of a run (a quiet
    region is read against the first region that draws a current)."""
    refs = _references(activities)
    n_c, _, n_r = run.droop.shape
    out = np.full((9, n_c, n_r), np.nan)
    for r in range(n_r):
        a = refs[r]
        start = a.step_delay if a.stimulus == "step" else 0.0
        for c in range(n_c):
            out[:, c, r] = _trace_figures(run.t, run.droop[c, :, r], a.stimulus, start,
                                          float(run.stimulus_end[r]), a.period)
    first, t_first, worst, t_worst, settled, over, f_ring, q, t_settle = out
    starts = np.array([a.step_delay if a.stimulus == "step" else 0.0 for a in refs])
    return DroopFigures(first, t_first - starts[None, :], worst, t_worst - starts[None, :],
                        settled, over, f_ring, q, t_settle)
