"""Figures of merit of a decap from its impedance sweep Z(f) (SI: ohm, F, H, Hz, s).

All functions take ``freq`` of shape (n_freq,) (ascending, > 0) and ``z`` of shape
(..., n_freq) and return arrays over the leading (variant) axes.

Definitions (conventions of the trade): C_eff(f) = -1/(omega Im Z),
ESR(f) = Re Z, Q(f) = -Im Z / Re Z. Crossing points are found by linear interpolation on
log f between the bracketing samples; a crossing not reached inside the sweep is ``inf``, one
already passed at the first sample is ``nan``. For tight values use a dense log grid or
`bandwidth_by_bisection`; beyond the sweep, `extend_beyond_sweep` searches the circuit itself.

C_eff near resonance: with the cell's series (loop) inductance L in Z, -1/(omega Im Z) =
C/(1 - omega^2 L C) for a series R-L-C, which rises toward the self-resonance and diverges at
it. That upturn measures the inductive reactance cancelling the capacitive one, not extra
charge the cell can deliver; the usable bandwidth is therefore read from C_eff with L removed
(``series_inductance``), and never beyond the self-resonance, above which the cell is inductive.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray

ComplexArray = NDArray[np.complex128]
DEFAULT_FRACTION = 1.0 / np.sqrt(2.0)


def _omega(freq: ArrayLike) -> FloatArray:
    return 2.0 * np.pi * np.asarray(freq, dtype=float)


def effective_capacitance(freq: ArrayLike, z: ArrayLike, series_inductance: ArrayLike = 0.0) -> FloatArray:
    """C_eff(f) = -1 / (2 pi f (Im Z - 2 pi f L_series)), F.

    With ``series_inductance`` 0 (default) this is the raw -1/(omega Im Z), negative above
    self-resonance and rising toward it (module notes); with the cell's loop inductance (H,
    broadcast over the leading axes) it is the capacitance of the cell's RC network alone.
    """
    w = _omega(freq)
    l_series = np.asarray(series_inductance, dtype=float)
    if l_series.ndim:
        l_series = l_series[..., None]
    return -1.0 / (w * (np.imag(np.asarray(z)) - w * l_series))


def esr(z: ArrayLike) -> FloatArray:
    """Equivalent series resistance Re Z, ohm."""
    return np.real(np.asarray(z))


def quality_factor(z: ArrayLike) -> FloatArray:
    """Q = -Im Z / Re Z (positive while capacitive)."""
    zz = np.asarray(z)
    return -np.imag(zz) / np.real(zz)


def _first_crossing(log_f: FloatArray, g: FloatArray) -> FloatArray:
    """First log-frequency where g goes from >= 0 to < 0 (interpolated); inf / nan as above."""
    below = g < 0
    first = np.argmax(below, axis=-1)
    found = np.any(below, axis=-1)
    at_start = found & (first == 0)
    k = np.clip(first, 1, g.shape[-1] - 1)
    g1 = np.take_along_axis(g, (k - 1)[..., None], -1)[..., 0]
    g2 = np.take_along_axis(g, k[..., None], -1)[..., 0]
    x1, x2 = log_f[k - 1], log_f[k]
    with np.errstate(invalid="ignore", divide="ignore"):
        x = x1 + (x2 - x1) * g1 / (g1 - g2)
    return np.where(~found, np.inf, np.where(at_start, np.nan, x))


def usable_bandwidth(
    freq: ArrayLike,
    c_eff: ArrayLike,
    c_lf: ArrayLike,
    fraction: float = DEFAULT_FRACTION,
) -> FloatArray:
    """First frequency where C_eff falls to ``fraction`` of its low-frequency value.

    Parameters
    ----------
    freq : array_like    (n_freq,), Hz, ascending
    c_eff : array_like   (..., n_freq), F
    c_lf : array_like    (...,), F, the reference (low-frequency) capacitance
    fraction : float     default 1/sqrt(2) (the catalog's cutoff definition)

    Returns
    -------
    ndarray   f_c, Hz; ``inf`` if C_eff stays above within the sweep, ``nan`` if already below
              at the first frequency

    Notes
    -----
    Interpolated linearly in log f. For a uniform RC line contacted at one end the exact point
    is omega R C = 4.7526 (both ends: 19.010), 1.58x above the lumped 1/(ESR C) estimate.
    """
    f = np.asarray(freq, dtype=float)
    ratio = np.asarray(c_eff, dtype=float) / np.asarray(c_lf, dtype=float)[..., None]
    return np.exp(_first_crossing(np.log(f), ratio - fraction))


def self_resonance(freq: ArrayLike, z: ArrayLike) -> FloatArray:
    """Self-resonant frequency: first sign change of Im Z from negative to positive.

    Returns
    -------
    ndarray   f_srf, Hz; ``inf`` if Im Z < 0 over the whole sweep, ``nan`` if Im Z >= 0 at the
              first frequency

    Notes
    -----
    Interpolates omega Im Z linearly in omega^2 between the bracketing samples, which is exact
    for a series R-L-C (omega X = omega^2 L - 1/C).
    """
    f = np.asarray(freq, dtype=float)
    g = -_omega(f) * np.imag(np.asarray(z))  # > 0 while capacitive
    below = g <= 0
    first = np.argmax(below, axis=-1)
    found = np.any(below, axis=-1)
    at_start = found & (first == 0)
    k = np.clip(first, 1, g.shape[-1] - 1)
    g1 = np.take_along_axis(g, (k - 1)[..., None], -1)[..., 0]
    g2 = np.take_along_axis(g, k[..., None], -1)[..., 0]
    w1, w2 = _omega(f[k - 1]) ** 2, _omega(f[k]) ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        w_sq = w1 + (w2 - w1) * g1 / (g1 - g2)
        f_res = np.sqrt(w_sq) / (2.0 * np.pi)
    return np.where(~found, np.inf, np.where(at_start, np.nan, f_res))


def low_frequency_values(freq: ArrayLike, z: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """(C_lf, ESR_lf) from the first (lowest) frequency of the sweep, F and ohm."""
    zz = np.asarray(z)
    f0 = np.asarray(freq, dtype=float)[0]
    return effective_capacitance(f0, zz[..., 0]), esr(zz[..., 0])


def esl_estimate(freq: ArrayLike, z: ArrayLike, c_lf: ArrayLike | None = None) -> FloatArray:
    """Equivalent series inductance from the top of the sweep, H.

    Parameters
    ----------
    freq, z : sweep
    c_lf : array_like, optional   low-frequency capacitance, F (default from the first sample)

    Returns
    -------
    ndarray   ESL = (Im Z(f_top) + 1/(omega_top C_lf)) / omega_top; ``nan`` where Im Z at the
              top frequency is still capacitive (no inductive region in the sweep)

    Notes
    -----
    Exact for a series R-L-C. For a distributed RC + L it is biased low by the line's
    -sqrt(R/(2 omega C)) reactance; sweep well past the self-resonance.
    """
    f = np.asarray(freq, dtype=float)
    zz = np.asarray(z)
    if c_lf is None:
        c_lf = low_frequency_values(f, zz)[0]
    w = _omega(f[-1])
    x_top = np.imag(zz[..., -1])
    est = (x_top + 1.0 / (w * np.asarray(c_lf, dtype=float))) / w
    return np.where(x_top > 0, est, np.nan)


def rc_time_constant(c_lf: ArrayLike, esr_lf: ArrayLike) -> FloatArray:
    """tau = ESR_lf * C_lf, s (lumped estimate; the distributed cutoff lies 1.58x higher)."""
    return np.asarray(c_lf, dtype=float) * np.asarray(esr_lf, dtype=float)


def esr_at(freq: ArrayLike, z: ArrayLike, at_Hz: ArrayLike) -> FloatArray:
    """ESR interpolated (linear in log f) at the frequencies ``at_Hz``; shape (..., n_at)."""
    f = np.log(np.asarray(freq, dtype=float))
    r = esr(z)
    at = np.log(np.atleast_1d(np.asarray(at_Hz, dtype=float)))
    k = np.clip(np.searchsorted(f, at), 1, f.size - 1)
    weight = (at - f[k - 1]) / (f[k] - f[k - 1])
    out = r[..., k - 1] + weight * (r[..., k] - r[..., k - 1])
    inside = (at >= f[0]) & (at <= f[-1])
    return np.where(inside, out, np.nan)


def capped_bandwidth(bandwidth_rc: ArrayLike, srf: ArrayLike) -> FloatArray:
    """Usable bandwidth: the RC cutoff, but never above the self-resonance, Hz.

    ``min(bandwidth_rc, srf)`` where the SRF is known (finite); ``bandwidth_rc`` otherwise.
    """
    bw = np.asarray(bandwidth_rc, dtype=float)
    f_srf = np.asarray(srf, dtype=float)
    return np.asarray(np.where(np.isfinite(f_srf), np.fmin(bw, f_srf), bw), dtype=np.float64)


def summarize(
    freq: ArrayLike,
    z: ArrayLike,
    esr_freqs_Hz: Sequence[float] = (),
    fraction: float = DEFAULT_FRACTION,
    series_inductance: ArrayLike = 0.0,
) -> dict[str, FloatArray]:
    """All figures of merit of a sweep as arrays over variants.

    Parameters
    ----------
    freq, z : sweep (n_freq,), (..., n_freq)
    esr_freqs_Hz : frequencies at which ESR is read, Hz
    fraction : C_eff / C_lf that ends the usable band (1/sqrt(2))
    series_inductance : array_like   the cell's loop inductance, H (..., broadcast), removed
        from C_eff before the bandwidth is read (module notes)

    Returns
    -------
    dict   ``c_lf_F``, ``esr_lf_ohm``, ``esr_at_ohm`` (..., len(esr_freqs_Hz)), ``esr_at_Hz``,
           ``bandwidth_rc_Hz`` (C_eff of the RC network = fraction C_lf), ``bandwidth_Hz``
           (that, capped at the SRF), ``esl_H``, ``srf_Hz``, ``tau_s``
    """
    f = np.asarray(freq, dtype=float)
    zz = np.asarray(z)
    c_lf, esr_lf = low_frequency_values(f, zz)
    srf = self_resonance(f, zz)
    bw_rc = usable_bandwidth(f, effective_capacitance(f, zz, series_inductance), c_lf, fraction)
    return {
        "c_lf_F": c_lf,
        "esr_lf_ohm": esr_lf,
        "esr_at_Hz": np.asarray(esr_freqs_Hz, dtype=float),
        "esr_at_ohm": (
            esr_at(f, zz, esr_freqs_Hz) if len(esr_freqs_Hz) else np.zeros(c_lf.shape + (0,))
        ),
        "bandwidth_rc_Hz": bw_rc,
        "bandwidth_Hz": capped_bandwidth(bw_rc, srf),
        "esl_H": esl_estimate(f, zz, c_lf),
        "srf_Hz": srf,
        "tau_s": rc_time_constant(c_lf, esr_lf),
    }


def bracketed_crossing(
    g: Callable[[FloatArray], FloatArray],
    f_low: ArrayLike,
    f_high: ArrayLike,
    iterations: int = 60,
    rtol: float = 1e-13,
) -> FloatArray:
    """Per variant, the frequency where g changes sign between ``f_low`` (g >= 0) and
    ``f_high`` (g < 0), Hz.

    Parameters
    ----------
    g : callable      ``f (n_variant,) -> (n_variant,)``, evaluated at one frequency per variant
    f_low, f_high : array_like   (n_variant,) brackets, Hz, 0 < f_low < f_high
    iterations : int  at most this many evaluations of g
    rtol : float      stop once every bracket is narrower than this, relative in f

    Notes
    -----
    Bracketing false position on log f with the Illinois modification (M. Dowell, P. Jarratt,
    BIT 11:168, 1971): superlinear on smooth crossings, and the bracket always holds the root,
    so it cannot do worse than keeping the bracket; a final midpoint is returned.
    """
    lo = np.log(np.asarray(f_low, dtype=float))
    hi = np.log(np.asarray(f_high, dtype=float))
    g_lo = np.asarray(g(np.exp(lo)), dtype=float)
    g_hi = np.asarray(g(np.exp(hi)), dtype=float)
    side = np.zeros(lo.shape, dtype=int)  # which end was kept last (+1 low, -1 high)
    for _ in range(iterations):
        if np.all(hi - lo <= rtol):
            break
        with np.errstate(invalid="ignore", divide="ignore"):
            x = hi - g_hi * (hi - lo) / (g_hi - g_lo)
        bad = ~np.isfinite(x) | (x <= lo) | (x >= hi)
        x = np.where(bad, 0.5 * (lo + hi), x)
        g_x = np.asarray(g(np.exp(x)), dtype=float)
        above = g_x >= 0
        # Illinois: halve the value at the end that stays twice in a row
        g_hi = np.where(above & (side == 1), 0.5 * g_hi, g_hi)
        g_lo = np.where(~above & (side == -1), 0.5 * g_lo, g_lo)
        lo, g_lo = np.where(above, x, lo), np.where(above, g_x, g_lo)
        hi, g_hi = np.where(above, hi, x), np.where(above, g_hi, g_x)
        side = np.where(above, 1, -1)
    return np.asarray(np.exp(0.5 * (lo + hi)), dtype=np.float64)


def extend_beyond_sweep(
    impedance: Callable[[FloatArray], ComplexArray],
    f_top: float,
    c_lf: ArrayLike,
    series_inductance: ArrayLike,
    need_srf: ArrayLike,
    need_bandwidth: ArrayLike,
    search_top: ArrayLike,
    points_per_decade: int = 10,
    fraction: float = DEFAULT_FRACTION,
    impedance_rows: Callable[[FloatArray, NDArray[np.intp]], ComplexArray] | None = None,
) -> dict[str, FloatArray]:
    """Self-resonance and RC cutoff above the sweep, from the circuit itself.

    Parameters
    ----------
    impedance : callable   ``freq (n_freq,) or (n_variant, n) -> Z (n_variant, n)``, e.g.
                           ``lambda f: solve_impedance(netlist, f)``
    f_top : float          top of the sweep, Hz
    c_lf : array_like      (n_variant,) low-frequency capacitance, F
    series_inductance : array_like   (n_variant,) loop inductance removed for the cutoff, H
    need_srf, need_bandwidth : array_like of bool   (n_variant,) rows to search
    search_top : array_like   (n_variant,) highest frequency searched per row (where the circuit
                              still describes the cell), Hz
    points_per_decade : int   coarse grid of the search, refined in its bracket
    impedance_rows : callable, optional   ``(freq (k, n), rows (k,)) -> Z (k, n)`` of only the
                           given rows: then only the rows searched are evaluated (each row's
                           result is the same; without it every row is evaluated each step)

    Returns
    -------
    dict   ``srf_Hz``, ``bandwidth_rc_Hz`` (n_variant,): the first crossing above f_top, refined
           in its bracket to full precision; ``inf`` where none lies at or below the row's search
           top (NaN for rows not searched)

    Notes
    -----
    The same conditions as in the sweep: Im Z turning from capacitive to inductive, and C_eff
    of the RC network falling to ``fraction`` C_lf. Values found here are computed from the
    equivalent circuit above the band the deck states; the lumped circuit is an extrapolation
    there, so callers flag them.
    """
    c = np.asarray(c_lf, dtype=float)
    l_series = np.broadcast_to(np.asarray(series_inductance, dtype=float), c.shape)
    top = np.broadcast_to(np.asarray(search_top, dtype=float), c.shape)
    decades = max(float(np.log10(np.max(top) / f_top)), 1.0 / points_per_decade)
    grid = f_top * np.logspace(0.0, decades, int(np.ceil(decades * points_per_decade)) + 1)
    wanted_any = np.asarray(need_srf, dtype=bool) | np.asarray(need_bandwidth, dtype=bool)
    if impedance_rows is None:
        z = impedance(grid)
    else:  # rows searched for neither stay NaN: never found, never wanted
        z = np.full(c.shape + grid.shape, np.nan, dtype=complex)
        some = np.flatnonzero(wanted_any)
        if some.size:
            z[some] = impedance_rows(np.broadcast_to(grid, (some.size, grid.size)), some)
    g_srf = -_omega(grid) * np.imag(z)  # > 0 while capacitive
    g_bw = effective_capacitance(grid, z, l_series) / c[:, None] - fraction

    def first(g: FloatArray) -> tuple[FloatArray, FloatArray, NDArray[np.bool_]]:
        below = g < 0
        found = np.any(below, axis=-1)
        k = np.clip(np.argmax(below, axis=-1), 1, grid.size - 1)
        return grid[k - 1], grid[k], found

    def impedance_at(f: FloatArray, rows: NDArray[np.intp]) -> ComplexArray:
        """Z of ``rows`` at one frequency each (f: (rows,))."""
        if impedance_rows is not None:
            return impedance_rows(f[:, None], rows)[:, 0]
        full = np.full(c.shape, f_top)
        full[rows] = f
        return impedance(full[:, None])[rows, 0]

    def refine(g_grid: FloatArray, need: ArrayLike,
               g: Callable[[FloatArray, NDArray[np.intp]], FloatArray]) -> FloatArray:
        lo, hi, found = first(g_grid)
        wanted = np.asarray(need, dtype=bool)
        search = wanted & found
        root = np.full(c.shape, np.inf)
        rows = np.flatnonzero(search)
        if rows.size:  # each row's bracket is refined on its own; rows not searched cost nothing
            root[rows] = bracketed_crossing(lambda f: g(f, rows), lo[rows], hi[rows])
        found = search & (root <= top)
        return np.where(wanted, np.where(found, root, np.inf), np.nan)

    return {
        "srf_Hz": refine(g_srf, need_srf, lambda f, rows: -_omega(f) * np.imag(impedance_at(f, rows))),
        "bandwidth_rc_Hz": refine(
            g_bw, need_bandwidth,
            lambda f, rows: -1.0 / (_omega(f) * (np.imag(impedance_at(f, rows)) - _omega(f) * l_series[rows]))
            / c[rows] - fraction),
    }


def bandwidth_by_bisection(
    impedance: Callable[[FloatArray], ComplexArray],
    c_lf: ArrayLike,
    f_low: float,
    f_high: float,
    fraction: float = DEFAULT_FRACTION,
    n_grid: int = 41,
    iterations: int = 40,
) -> FloatArray:
    """Cutoff frequency solved to full precision from an impedance function.

    Parameters
    ----------
    impedance : callable   ``freq (n_variant, n) -> Z (n_variant, n)``, e.g.
                           ``lambda f: solve_impedance(netlist, f)``
    c_lf : array_like      (n_variant,), F
    f_low, f_high : float  search range, Hz
    fraction : float       C_eff / C_lf target
    n_grid : int           coarse log grid to bracket the first crossing
    iterations : int       bisection steps on log f (40 -> relative 1e-12 of the bracket)

    Returns
    -------
    ndarray   (n_variant,) Hz; ``inf``/``nan`` as for `usable_bandwidth`
    """
    c = np.asarray(c_lf, dtype=float)
    n_var = c.shape[0]
    grid = np.geomspace(f_low, f_high, n_grid)
    z = impedance(np.broadcast_to(grid, (n_var, n_grid)))
    g = effective_capacitance(grid, z) / c[:, None] - fraction
    crossing = _first_crossing(np.log(grid), g)
    ok = np.isfinite(crossing)
    below = np.argmax(g < 0, axis=-1)
    lo = np.log(grid[np.clip(below - 1, 0, n_grid - 1)])
    hi = np.log(grid[np.clip(below, 0, n_grid - 1)])
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        fm = np.exp(mid)
        zm = impedance(fm[:, None])[:, 0]
        gm = effective_capacitance(fm, zm) / c - fraction
        lo = np.where(gm >= 0, mid, lo)
        hi = np.where(gm >= 0, hi, mid)
    return np.where(ok, np.exp(0.5 * (lo + hi)), np.exp(crossing))
