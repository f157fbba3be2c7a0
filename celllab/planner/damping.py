"""Damping the supply resonances (SI: ohm, F, H, Hz, S, V, W).

Two levers:

(a) **Through the fill.** At a parallel resonance f0 the peak is |Z|max ~ 1 / G, G being the
    total conductance in parallel with the tank at f0 (series losses turned into parallel ones;
    Q >> 1). The fill's conductance at f0 is linear in the cell counts n_i,

        G_fill(f0) = sum_i n_i g_i,   g_i = Re(1 / Z_i(f0))   (S per cell),

    so a fill optimizer can use it directly: as a constraint
    ``sum_i n_i g_i >= 1 / Z_target - G_rest`` (the peak at f0 stays under the target), or as an
    objective term ``- w sum_i n_i g_i``. Which cells damp well per farad is
    ``damping_score = g_i / (2 pi f0 C_i)``: for a series ESR-C cell it equals
    x / (1 + x^2) with x = 2 pi f0 ESR_i C_i, largest (0.5) at x = 1. ``match_ratio`` gives x: a
    fill made of N such cells has ESR_i / N against Z0 = sqrt(L / (N C_i)), and
    (ESR_i / N) / Z0 = 2 pi f0 ESR_i C_i = x whatever N is, so x = 1 is the classical optimum
    ESR = sqrt(L/C) (P. Larsson, IEEE TCAS-I 45(8):849, 1998). f0 moves with the total C
    (f0 ~ 1/sqrt(L C)), so take g_i at the f0 of the previous plan and iterate once.

(b) **An entrance resistor** between the supply ring and each region's grid, sized by
    `size_entrance_resistors` (scipy.optimize COBYLA) to minimize the worst |Z| / Z_target
    over every region, corner and in-band frequency, subject to each region's DC IR drop
    (all regions drawing their average currents) staying within a limit. The trade it reports:
    peak |Z| before/after, IR drop, power lost in the resistors.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import minimize

from celllab.physics.netlist import Netlist, solve_impedance, stack_variants, structure_key
from celllab.planner.network import BlockNetwork

__all__ = [
    "DampingTrade",
    "cell_impedance",
    "PeakSummary",
    "conductance_needed",
    "damping_score",
    "match_ratio",
    "resonance_conductance",
    "size_entrance_resistors",
    "worst_peaks",
]

FloatArray = NDArray[np.float64]

#: Objective evaluations per optimizer start (two starts) when sizing entrance resistors.
MAX_EVALUATIONS = 60


def match_ratio(esr: ArrayLike, capacitance: ArrayLike, f_resonance: ArrayLike) -> FloatArray:
    """x = 2 pi f0 ESR C: a fill of this cell has ESR / Z0 = x at the tank's f0 (1 = matched).

    Parameters
    ----------
    esr : ohm;  capacitance : F (per cell);  f_resonance : Hz (broadcast)
    """
    return np.asarray(2.0 * np.pi * np.asarray(f_resonance, dtype=float)
                      * np.asarray(esr, dtype=float) * np.asarray(capacitance, dtype=float))


def cell_impedance(circuits: Sequence[Netlist], freq: ArrayLike) -> NDArray[np.complex128]:
    """Z of each cell's one-variant circuit, ohm, (n_cell, n_freq); circuits of one structure
    are solved together (one `solve_impedance` per structure)."""
    f = np.asarray(freq, dtype=float).reshape(-1)
    out = np.empty((len(circuits), f.size), dtype=complex)
    groups: dict[object, list[int]] = {}
    for i, nl in enumerate(circuits):
        groups.setdefault(structure_key(nl), []).append(i)
    for members in groups.values():
        out[members] = solve_impedance(stack_variants("cells", [circuits[i] for i in members]), f)
    return out


def resonance_conductance(circuits: Sequence[Netlist], f_resonance: float) -> FloatArray:
    """g_i = Re(1 / Z_i(f0)) of each cell's circuit, S (n_cell,): its damping per copy."""
    return np.asarray(np.real(1.0 / cell_impedance(circuits, [f_resonance])[:, 0]))


def damping_score(conductance: ArrayLike, capacitance: ArrayLike, f_resonance: ArrayLike
                  ) -> FloatArray:
    """g / (2 pi f0 C): damping conductance per farad at f0, unitless; x / (1 + x^2) <= 0.5 for a
    series ESR-C cell (x = `match_ratio`)."""
    return np.asarray(np.asarray(conductance, dtype=float)
                      / (2.0 * np.pi * np.asarray(f_resonance, dtype=float)
                         * np.asarray(capacitance, dtype=float)))


def conductance_needed(z_target: ArrayLike, g_other: ArrayLike = 0.0) -> FloatArray:
    """Fill conductance at f0 that brings the peak down to Z_target: 1 / Z_t - G_other, S
    (<= 0: the rest of the network already damps enough)."""
    return np.asarray(1.0 / np.asarray(z_target, dtype=float) - np.asarray(g_other, dtype=float))


@dataclass(frozen=True)
class PeakSummary:
    """Worst in-band |Z| per region (SI): magnitude (ohm), ratio to target, frequency (Hz) and
    the corner index where it is worst."""

    magnitude: FloatArray
    ratio: FloatArray
    frequency: FloatArray
    corner: NDArray[np.int_]


def worst_peaks(network: BlockNetwork, freq: ArrayLike, targets: ArrayLike,
                bands: Sequence[tuple[float, float]], entrance: ArrayLike | None = None
                ) -> PeakSummary:
    """Worst |Z_rr| / Z_target_r over corners and the in-band grid of each region r.

    The grid maximum is refined by a parabola through it and its neighbours in
    (ln f, ln |Z|), so the figure changes smoothly with the network values. A region whose
    target is inf (quiet) reports its highest |Z| and a ratio of 0.
    """
    f = np.asarray(freq, dtype=float)
    z = network.z_matrix(f, entrance)
    n_r = z.shape[-1]
    mag = np.abs(z[..., np.arange(n_r), np.arange(n_r)])  # (n_c, n_f, n_r)
    target = np.asarray(targets, dtype=float)
    inside = np.array([(f >= lo) & (f <= hi) for lo, hi in bands]).T  # (n_f, n_r)
    # a region without a target (inf: quiet) is ranked by |Z| itself; its ratio is 0
    scale = np.where(np.isfinite(target), target, 1.0)
    ratio = np.where(inside[None], mag / scale, -np.inf)
    n_c, n_f = mag.shape[:2]
    flat = ratio.transpose(2, 0, 1).reshape(n_r, -1)
    best = np.argmax(flat, axis=1)
    c_best, k = np.divmod(best, n_f)
    regions = np.arange(n_r)
    km = np.clip(k, 1, n_f - 2)
    x = np.log(f[np.stack([km - 1, km, km + 1])])
    y = np.log(mag[c_best, np.stack([km - 1, km, km + 1]), regions])
    d1, d2 = x[1] - x[0], x[2] - x[1]
    s1, s2 = (y[1] - y[0]) / d1, (y[2] - y[1]) / d2
    curv = (s2 - s1) / (d1 + d2)
    slope = s1 + curv * d1
    safe = np.where(curv < 0, curv, -1.0)
    shift = -slope / (2.0 * safe)
    lo_band = np.log([b_[0] for b_ in bands])
    hi_band = np.log([b_[1] for b_ in bands])
    ok = (curv < 0) & (k == km) & (shift > -d1) & (shift < d2)
    ok &= (x[1] + shift >= lo_band) & (x[1] + shift <= hi_band)
    peak_log = np.where(ok, y[1] - slope * slope / (4.0 * safe), y[1])
    f_peak = np.where(ok, np.exp(x[1] + shift), f[k])
    magnitude = np.exp(np.where(k == km, peak_log, np.log(mag[c_best, k, regions])))
    f_peak = np.where(k == km, f_peak, f[k])
    return PeakSummary(magnitude, magnitude / target, f_peak, c_best)


@dataclass(frozen=True)
class DampingTrade:
    """What the entrance resistors buy and cost (SI; arrays in region order).

    resistance : ohm, the sized resistors (``before_resistance``: the network as given)
    peak_before, peak_after : PeakSummary   worst in-band |Z| per region, own worst corner
    ir_drop_before, ir_drop_after : V       DC drop at each region node (average currents)
    ir_drop_limit : V
    power : W                               DC power lost in each resistor, I^2 R
    converged : bool;  message : str        the optimizer's verdict
    """

    resistance: FloatArray
    before_resistance: FloatArray
    peak_before: PeakSummary
    peak_after: PeakSummary
    ir_drop_before: FloatArray
    ir_drop_after: FloatArray
    ir_drop_limit: FloatArray
    power: FloatArray
    converged: bool
    message: str

    @property
    def objective_before(self) -> float:
        return float(np.max(self.peak_before.ratio))

    @property
    def objective_after(self) -> float:
        return float(np.max(self.peak_after.ratio))


def _characteristic_impedance(network: BlockNetwork, freq: FloatArray) -> FloatArray:
    """sqrt(L_loop / C_region) per region: package + grid inductance against the region's
    low-frequency capacitance (fill + intrinsic); a scale for the optimizer."""
    f_lo = freq[:1]
    y_fill = network.fill_admittance(f_lo)
    s = network.supply
    z0 = []
    for region in network.regions:
        c = float(np.max(np.imag(y_fill[region.name][:, 0]))) / (2 * np.pi * f_lo[0])
        c += region.intrinsic_capacitance
        loop = s.package_inductance + s.paths[region.name].grid_inductance
        z0.append(np.sqrt(loop / c) if c > 0 and loop > 0 else 1.0)
    return np.asarray(z0, dtype=float)


def size_entrance_resistors(
    network: BlockNetwork,
    freq: ArrayLike,
    targets: ArrayLike,
    bands: Sequence[tuple[float, float]],
    ir_drop_limit: ArrayLike,
    max_resistance: float | None = None,
) -> DampingTrade:
    """Entrance resistors minimizing the worst in-band |Z| / Z_target under an IR-drop limit.

    Parameters
    ----------
    network : BlockNetwork
    freq : array_like          analysis grid, Hz
    targets : array_like       (n_region,) Z_target, ohm
    bands : sequence           (n_region,) (f_lo, f_hi) Hz: each region's band
    ir_drop_limit : array_like   V, scalar or (n_region,): largest DC drop allowed at each
                               region node with every region at its average current
    max_resistance : float, optional   upper bound per resistor, ohm (default 20 x the largest
                               sqrt(L/C) of the regions)

    Returns
    -------
    DampingTrade

    Notes
    -----
    Minimizes max_r max_{corner, f in band_r} |Z_rr| / Z_t,r over the resistors R_r >= 0 with
    scipy.optimize.minimize(method="COBYLA") (derivative-free, inequality constraints; the
    objective is a maximum, so not smooth), constraints drop_r(R) <= limit_r from the DC
    solution of the network, started from R = sqrt(L/C) per region and from the resistors
    given; the best feasible point wins. The search evaluates every other grid point (the
    peak refined by a parabola in log-log); the reported peaks use the whole grid. Each start
    gets at most ``MAX_EVALUATIONS`` evaluations: on the demo blocks the worst peak moves by
    less than 0.2 % beyond that, while a resistor that no peak depends on (a quiet region's)
    keeps drifting. A drop already over the limit with the given resistors is reported, not
    repaired (the resistors can only add drop).
    """
    f = np.asarray(freq, dtype=float)
    n_r = len(network.regions)
    limit = np.broadcast_to(np.asarray(ir_drop_limit, dtype=float), (n_r,)).copy()
    before_r = network.supply.entrance_resistances()
    z0 = _characteristic_impedance(network, f)
    scale = float(np.median(z0))
    upper = (max_resistance if max_resistance is not None else 20.0 * float(np.max(z0))) / scale

    def drops(x: FloatArray) -> FloatArray:
        return network.dc_state(np.maximum(x, 0.0) * scale).drop

    # the search runs on every other grid point (the peak is refined by a parabola); the
    # reported figures use the whole grid
    f_search = f[::2] if f.size > 100 else f

    def objective(x: FloatArray) -> float:
        return float(np.max(worst_peaks(network, f_search, targets, bands,
                                        np.maximum(x, 0.0) * scale).ratio))

    peak_before = worst_peaks(network, f, targets, bands, before_r)
    drop_before = network.dc_state(before_r).drop
    constraints = [{"type": "ineq", "fun": lambda x: (limit - drops(x)) / limit}]
    best_x, best_val, message, converged = before_r / scale, np.max(peak_before.ratio), "", False
    if np.any(network.dc_state(np.zeros(n_r)).drop > limit):
        message = "the DC drop exceeds the limit without any entrance resistor"
    else:
        starts = [np.clip(z0 / scale, 0.0, upper), np.clip(before_r / scale, 0.0, upper)]
        for x0 in starts:
            res = minimize(objective, x0, method="COBYLA", constraints=constraints,
                           bounds=[(0.0, upper)] * n_r,
                           options={"rhobeg": 0.25, "maxiter": MAX_EVALUATIONS, "tol": 1e-3})
            x = np.clip(res.x, 0.0, upper)
            feasible = bool(np.all(drops(x) <= limit * (1 + 1e-6)))
            value = objective(x)
            if feasible and value < best_val:
                best_x, best_val, converged, message = x, value, bool(res.success), str(res.message)
        if not message:
            message = "no resistor value improves on the network as given"
            converged = True
    resistance = np.maximum(best_x, 0.0) * scale
    dc_after = network.dc_state(resistance)
    return DampingTrade(
        resistance=resistance,
        before_resistance=before_r,
        peak_before=peak_before,
        peak_after=worst_peaks(network, f, targets, bands, resistance),
        ir_drop_before=drop_before,
        ir_drop_after=dc_after.drop,
        ir_drop_limit=limit,
        power=dc_after.entrance_power,
        converged=converged,
        message=message,
    )
