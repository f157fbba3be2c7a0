"""Every resonance of an impedance curve, and the target-impedance check over a band
(SI: Hz, ohm, s).

Terms used here (power-delivery usage): a **peak** is a maximum of |Z| (a parallel, or
"anti-", resonance: an inductance and a capacitance exchanging energy behind the node, the
frequency where the supply rings); a **dip** is a minimum of |Z| (a series resonance, e.g. a
capacitor with its own ESL). Both are reported with their frequency, |Z| there and Q.

Method, all curves at once
--------------------------
1. Extrema of 20 log10 |Z| on the analysis grid with a prominence of at least
   ``min_prominence_dB`` (`scipy.signal.find_peaks`); grid ends are never extrema.
2. Each extremum refined on grids between its neighbouring points, evaluated by the caller's
   ``evaluate`` (the network itself), zooming three times, then a parabola through the
   best point and its neighbours in (ln f, ln |Z|).
3. Q from the -3 dB width: |Z| = |Z|_peak / sqrt(2) (peak) or sqrt(2) |Z|_dip (dip) found on
   both sides (a scan, then two bracket refinements), Q = f0 / (f_hi - f_lo). Exact for a
   parallel (series) RLC: bandwidth = f0 / Q (e.g. J. W. Nilsson, S. A. Riedel, *Electric Circuits*, parallel and series
   resonance). Where a side does not reach -3 dB before the next extremum (overlapping or heavily
   damped resonances) Q comes from the local fit instead: near a resonance of a single RLC,
   ln|Z| ~ -/+ 2 Q^2 (ln f/f0)^2, so Q = sqrt(|d^2 ln|Z| / d(ln f)^2| / 4) from a parabola through
   the refined points (derived here from the same RLC form; exact in the limit of high Q).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.signal import find_peaks

__all__ = [
    "BAND_EDGE_FACTOR",
    "Resonance",
    "TargetCheck",
    "activity_band_edge",
    "check_target",
    "find_resonances",
]

FloatArray = NDArray[np.float64]
Evaluate = Callable[[FloatArray], FloatArray]
"""|Z| at any frequencies: (n_group, m) Hz, one row of frequencies per group of curves (e.g.
per corner) -> (n_group, n_member, m) ohm (e.g. every region at that corner)."""

#: f_band = 0.35 / t_rise: the bandwidth of an edge (10-90 % rise of a single-pole response);
#: common practice, from memory.
BAND_EDGE_FACTOR = 0.35
_ZOOM_POINTS, _ZOOM_ROUNDS = 13, 3
_WIDTH_POINTS, _WIDTH_ROUNDS = 9, 3
_HALF_POWER = np.sqrt(2.0)


@dataclass(frozen=True)
class Resonance:
    """One resonance of one curve (SI).

    kind : "peak" (|Z| maximum, parallel resonance) or "dip" (|Z| minimum, series resonance)
    frequency : Hz;  magnitude : |Z| there, ohm
    q : quality factor;  q_method : "-3 dB width" or "local fit"
    prominence_dB : how far the extremum stands out of its neighbourhood, dB
    """

    kind: Literal["peak", "dip"]
    frequency: float
    magnitude: float
    q: float
    q_method: Literal["-3 dB width", "local fit"]
    prominence_dB: float


def _db(mag: FloatArray) -> FloatArray:
    return np.asarray(20.0 * np.log10(np.maximum(mag, 1e-300)), dtype=float)


def _grid(lo: FloatArray, hi: FloatArray, n: int) -> FloatArray:
    """(n_items, n) log-spaced points from lo to hi per item."""
    u = np.linspace(0.0, 1.0, n)
    return np.asarray(np.exp(np.log(lo)[:, None] + np.outer(np.log(hi / lo), u)), dtype=float)


class _Items:
    """The extrema being refined: which group and member (curve) each belongs to."""

    def __init__(self, group: NDArray[np.int_], member: NDArray[np.int_], n_group: int,
                 evaluate: Evaluate) -> None:
        self.group, self.member, self.n_group, self.evaluate = group, member, n_group, evaluate

    def values(self, grids: FloatArray) -> FloatArray:
        """|Z| of each item's own curve on its own grid (n_items, m), in one evaluate call:
        each group gets the concatenated grids of its items (padded to one length)."""
        n_items, m = grids.shape
        slot = np.zeros(n_items, dtype=int)
        counts = np.zeros(self.n_group, dtype=int)
        for i, g in enumerate(self.group):
            slot[i], counts[g] = counts[g], counts[g] + 1
        width = max(int(counts.max()), 1) * m
        points = np.full((self.n_group, width), float(grids[0, 0]))
        for i in range(n_items):
            points[self.group[i], slot[i] * m:(slot[i] + 1) * m] = grids[i]
        for g in range(self.n_group):  # pad with a real point of the group (any is fine)
            if counts[g]:
                points[g, counts[g] * m:] = points[g, 0]
        vals = np.asarray(self.evaluate(points), dtype=float)
        cols = slot[:, None] * m + np.arange(m)[None, :]
        return np.asarray(vals[self.group[:, None], self.member[:, None], cols], dtype=float)


def _local_q(fine_f: FloatArray, fine_mag: FloatArray, k: NDArray[np.int_]) -> FloatArray:
    """Q from the curvature of ln|Z| over ln f through three refined points around index k."""
    idx = np.clip(k, 1, fine_f.shape[1] - 2)
    rows = np.arange(fine_f.shape[0])[:, None]
    cols = idx[:, None] + np.array([-1, 0, 1])
    x, y = np.log(fine_f[rows, cols]), np.log(fine_mag[rows, cols])
    h1, h2 = x[:, 1] - x[:, 0], x[:, 2] - x[:, 1]
    second = 2.0 * ((y[:, 2] - y[:, 1]) / h2 - (y[:, 1] - y[:, 0]) / h1) / (h1 + h2)
    return np.asarray(np.sqrt(np.abs(second) / 4.0), dtype=float)


def _vertex(grids: FloatArray, vals: FloatArray, best: NDArray[np.int_], f0: FloatArray,
            m0: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Extremum of the parabola through the best point and its neighbours in (ln f, ln |Z|);
    the best point itself where it sits on the grid's edge."""
    idx = np.clip(best, 1, grids.shape[1] - 2)
    rows = np.arange(grids.shape[0])[:, None]
    cols = idx[:, None] + np.array([-1, 0, 1])
    x, y = np.log(grids[rows, cols]), np.log(vals[rows, cols])
    d1, d2 = x[:, 1] - x[:, 0], x[:, 2] - x[:, 1]
    s1, s2 = (y[:, 1] - y[:, 0]) / d1, (y[:, 2] - y[:, 1]) / d2
    curv = (s2 - s1) / (d1 + d2)
    slope = s1 + curv * d1
    safe = np.where(curv != 0, curv, 1.0)
    shift = -slope / (2.0 * safe)
    ok = (best == idx) & (curv != 0) & (shift > -d1) & (shift < d2)
    return (np.where(ok, np.exp(x[:, 1] + shift), f0),
            np.where(ok, np.exp(y[:, 1] - slope * slope / (4.0 * safe)), m0))


def _interpolating(freq: FloatArray, magnitude: FloatArray) -> Evaluate:
    """An `Evaluate` that interpolates the sampled curves linearly in (ln f, dB)."""
    log_f, db = np.log(freq), _db(magnitude)

    def evaluate(points: FloatArray) -> FloatArray:
        out = np.empty(db.shape[:2] + (points.shape[1],))
        for g in range(db.shape[0]):
            for j in range(db.shape[1]):
                out[g, j] = np.interp(np.log(points[g]), log_f, db[g, j])
        return np.asarray(10.0 ** (out / 20.0))

    return evaluate


def find_resonances(
    freq: ArrayLike,
    magnitude: ArrayLike,
    evaluate: Evaluate | None = None,
    min_prominence_dB: float = 1.0,
) -> list[list[list[Resonance]]]:
    """All peaks and dips of each |Z| curve, refined, with Q.

    Parameters
    ----------
    freq : array_like        (n_freq,) analysis grid, Hz, increasing
    magnitude : array_like   (n_group, n_member, n_freq) |Z|, ohm (e.g. corner x region)
    evaluate : callable, optional   |Z| at any frequencies (see `Evaluate`); without it the
                             refinement interpolates the grid (less precise)
    min_prominence_dB : float   smallest prominence counted as a resonance, dB

    Returns
    -------
    list [group][member] of lists of Resonance, in increasing frequency
    """
    f = np.asarray(freq, dtype=float)
    mag = np.asarray(magnitude, dtype=float)
    if mag.ndim != 3 or mag.shape[2] != f.size:
        raise ValueError(f"magnitude has shape {mag.shape} -> (n_group, n_member, {f.size})")
    n_group, n_member = mag.shape[:2]
    evaluate = evaluate or _interpolating(f, mag)
    found: list[tuple[int, int, str, int, float]] = []  # group, member, kind, index, prominence
    db = _db(mag)
    for g in range(n_group):
        for j in range(n_member):
            for kind, sign in (("peak", 1.0), ("dip", -1.0)):
                idx, props = find_peaks(sign * db[g, j], prominence=min_prominence_dB)
                found += [(g, j, kind, int(i), float(p))
                          for i, p in zip(idx, props["prominences"])]
    result: list[list[list[Resonance]]] = [[[] for _ in range(n_member)]
                                            for _ in range(n_group)]
    if not found:
        return result
    items = _Items(np.array([x[0] for x in found]), np.array([x[1] for x in found]), n_group,
                   evaluate)
    sign = np.array([1.0 if x[2] == "peak" else -1.0 for x in found])
    k = np.array([x[3] for x in found])
    rows = np.arange(len(found))
    lo, hi = f[np.maximum(k - 1, 0)], f[np.minimum(k + 1, f.size - 1)]
    for _ in range(_ZOOM_ROUNDS):  # zoom onto the extremum, a factor (n - 1) / 2 per round
        grids = _grid(lo, hi, _ZOOM_POINTS)
        vals = items.values(grids)
        best = np.argmax(sign[:, None] * np.log(vals), axis=1)
        f0, m0 = grids[rows, best], vals[rows, best]
        q_fit = _local_q(grids, vals, best)
        lo = grids[rows, np.maximum(best - 1, 0)]
        hi = grids[rows, np.minimum(best + 1, _ZOOM_POINTS - 1)]
    f0, m0 = _vertex(grids, vals, best, f0, m0)
    level = np.where(sign > 0, m0 / _HALF_POWER, m0 * _HALF_POWER)
    # the neighbouring extrema of the same curve bound the search for the -3 dB points
    left_stop, right_stop = np.zeros(len(found)), np.full(len(found), np.inf)
    for n, (g, j, _, kn, _) in enumerate(found):
        for g2, j2, _, k2, _ in found:
            if (g2, j2) == (g, j) and k2 != kn:
                if f[k2] < f0[n]:
                    left_stop[n] = max(left_stop[n], f[k2])
                else:
                    right_stop[n] = min(right_stop[n], f[k2])
    span = np.exp(np.clip(4.0 / np.maximum(q_fit, 1e-6), 1e-6, np.log(1e3)))
    far_left = np.where(f0 / span < left_stop, left_stop, f0 / span)
    far_right = np.where(f0 * span > right_stop, right_stop, f0 * span)
    # both sides of every extremum in the same evaluations
    both = _Items(np.tile(items.group, 2), np.tile(items.member, 2), n_group, evaluate)
    crossing = _crossings(both, np.tile(f0, 2), np.concatenate([far_left, far_right]),
                          np.tile(level, 2), np.tile(sign, 2))
    n_found = len(found)
    for n, (g, j, kind, _, prominence) in enumerate(found):
        f_left, f_right = crossing[n], crossing[n_found + n]
        if np.isfinite(f_left) and np.isfinite(f_right) and f_right > f_left:
            q, method = f0[n] / (f_right - f_left), "-3 dB width"
        else:
            q, method = float(q_fit[n]), "local fit"
        result[g][j].append(Resonance(kind, float(f0[n]), float(m0[n]), float(q),  # type: ignore[arg-type]
                                      method, prominence))  # type: ignore[arg-type]
    for per_group in result:
        for row in per_group:
            row.sort(key=lambda r: r.frequency)
    return result


def _crossings(items: _Items, f0: FloatArray, far: FloatArray, level: FloatArray,
               sign: FloatArray) -> FloatArray:
    """Where |Z| first passes ``level`` going from f0 towards ``far`` (nan if it does not):
    a scan, then bracket refinement, then log-log interpolation."""
    start, end = f0.copy(), far.copy()
    found = np.zeros(f0.size, dtype=bool)
    for round_ in range(_WIDTH_ROUNDS):
        grids = _grid(start, end, _WIDTH_POINTS)
        vals = items.values(grids)
        passed = sign[:, None] * (vals - level[:, None]) <= 0
        passed[:, 0] = False
        has = passed.any(axis=1)
        j = np.where(has, np.argmax(passed, axis=1), 1)
        rows = np.arange(f0.size)
        if round_ == 0:
            found = has  # later rounds search inside the bracket, where the crossing lies
        start = np.where(has, grids[rows, j - 1], start)
        end = np.where(has, grids[rows, j], end)
        va, vb = vals[rows, j - 1], vals[rows, j]
    ya, yb = np.log(va), np.log(vb)
    t = np.divide(np.log(level) - ya, yb - ya, out=np.zeros_like(ya), where=yb != ya)
    cross = np.exp(np.log(start) + t * (np.log(end) - np.log(start)))
    return np.where(found, cross, np.nan)


def activity_band_edge(rise_time: float, fall_time: float | None = None) -> float:
    """Upper edge of the band that matters for a region: 0.35 / min(t_rise, t_fall), Hz.

    Common practice, from memory (the bandwidth of an edge; most of a trapezoidal current's
    spectrum lies below it). The band's lower edge is the bottom of the analysis grid.
    """
    edge = rise_time if fall_time is None else min(rise_time, fall_time)
    return BAND_EDGE_FACTOR / edge


@dataclass(frozen=True)
class TargetCheck:
    """|Z| against Z_target over a band (SI).

    target : ohm;  band : (f_lo, f_hi) Hz
    worst_ratio : max |Z| / Z_target in the band (> 1 fails);  worst_frequency : Hz
    exceed_bands : list of (f_lo, f_hi) Hz where |Z| > Z_target
    """

    target: float
    band: tuple[float, float]
    worst_ratio: float
    worst_frequency: float
    exceed_bands: list[tuple[float, float]]

    @property
    def passes(self) -> bool:
        return self.worst_ratio <= 1.0


def check_target(freq: ArrayLike, magnitude: ArrayLike, target: float, band: tuple[float, float],
                 resonances: list[Resonance] = ()) -> TargetCheck:  # type: ignore[assignment]
    """Worst |Z| / Z_target inside ``band`` on the grid and at refined peaks in the band.

    Parameters
    ----------
    freq : (n_freq,) Hz;  magnitude : (n_freq,) ohm;  target : ohm, > 0
    band : (f_lo, f_hi) Hz;  resonances : refined extrema of this curve (their peaks count)

    Notes
    -----
    Target impedance Z_t = V_DD x ripple / Delta I (L. D. Smith et al., IEEE Trans. Adv.
    Packag. 22(3):284, 1999). A profile under Z_t everywhere still does not bound the noise
    when it has sharp peaks: the droop in time is the check for that.
    """
    f = np.asarray(freq, dtype=float)
    mag = np.asarray(magnitude, dtype=float)
    inside = (f >= band[0]) & (f <= band[1])
    ratio = np.where(inside, mag / target, -np.inf)
    k = int(np.argmax(ratio))
    worst, f_worst = float(ratio[k]), float(f[k])
    for r in resonances:
        if r.kind == "peak" and band[0] <= r.frequency <= band[1] and r.magnitude / target > worst:
            worst, f_worst = r.magnitude / target, r.frequency
    over = inside & (mag > target)
    bands = []
    edges = np.flatnonzero(np.diff(np.concatenate([[0], over.astype(int), [0]])))
    for a, b in zip(edges[::2], edges[1::2]):
        bands.append((float(f[a]), float(f[b - 1])))
    return TargetCheck(float(target), (float(band[0]), float(band[1])), worst, f_worst, bands)
