"""A region's switching current: a step, a clock-shaped pulse train or samples, in time and as
clock harmonics (SI: A, s, Hz, C).

The current a region draws from its supply node is described by an `Activity`:

``step``
    ``base_current`` until ``step_delay``, then a linear ramp over ``rise_time`` up to
    ``base_current + peak_current``, held there (a block waking up).
``clock``
    One pulse per clock period, starting at the clock edge: a linear rise over ``rise_time``
    to ``base_current + peak_current``, a flat top, a linear fall over ``fall_time``. The flat
    top follows from ``charge_per_cycle`` (Q = I_peak (t_flat + (t_rise + t_fall) / 2)); without
    it the pulse is a triangle (t_flat = 0).
``samples``
    A piecewise-linear current through given (t, i) samples (read from a CSV by the caller),
    held at its last value afterwards; as a periodic source (emission) the samples are one
    clock period (``clock_frequency`` given) or one period spanning the samples.

Every shape is piecewise linear, so its Fourier coefficients have an exact closed form
(`pwl_harmonics`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.integrate import trapezoid

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]
Stimulus = Literal["step", "clock", "samples"]
STIMULI: tuple[Stimulus, ...] = ("step", "clock", "samples")

__all__ = [
    "STIMULI",
    "Activity",
    "block_current_spectrum",
    "current_waveform",
    "harmonic_spectrum",
    "pwl_harmonics",
    "trapezoid_envelope",
    "trapezoid_harmonics",
]


@dataclass(frozen=True)
class Activity:
    """What a region's logic draws from its supply node (SI).

    Attributes
    ----------
    peak_current : float         A, > 0: height of the step or of each clock pulse
    rise_time : float            s, > 0: 0-100 % ramp of the step / pulse
    fall_time : float | None     s, > 0: pulse fall (default: ``rise_time``)
    clock_frequency : float | None   Hz: pulse rate of ``clock``; the harmonic spacing for
                                 emission (required there)
    charge_per_cycle : float | None  C: charge of one clock pulse (sets the flat top)
    samples : (t, i) | None      s, A: increasing times and currents for ``samples``
    stimulus : {"step", "clock", "samples"}   the waveform used for droop in time
    base_current : float         A, >= 0: current before the step / between pulses
    step_delay : float           s, >= 0: when the step starts
    average_current : float | None   A: the block's average draw for the DC IR drop; default
                                 from the waveform (`Activity.mean_current`)
    """

    peak_current: float
    rise_time: float
    fall_time: float | None = None
    clock_frequency: float | None = None
    charge_per_cycle: float | None = None
    samples: tuple[FloatArray, FloatArray] | None = None
    stimulus: Stimulus = "step"
    base_current: float = 0.0
    step_delay: float = 0.0
    average_current: float | None = None

    def __post_init__(self) -> None:
        problems = []
        if self.stimulus not in STIMULI:
            problems.append(f"stimulus = {self.stimulus!r} -> allowed: {', '.join(STIMULI)}")
        for name in ("peak_current", "rise_time"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value > 0):
                problems.append(f"{name} = {value!r} -> must be finite and > 0")
        for name in ("fall_time", "clock_frequency", "charge_per_cycle", "average_current"):
            value = getattr(self, name)
            if value is not None and not (np.isfinite(value) and value > 0):
                problems.append(f"{name} = {value!r} -> must be finite and > 0 (or omitted)")
        for name in ("base_current", "step_delay"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value >= 0):
                problems.append(f"{name} = {value!r} -> must be finite and >= 0")
        if self.stimulus == "clock" and self.clock_frequency is None:
            problems.append("stimulus 'clock' needs clock_frequency")
        if self.stimulus == "samples" and self.samples is None:
            problems.append("stimulus 'samples' needs samples (t, i)")
        if self.samples is not None:
            t, i = (np.asarray(a, dtype=float) for a in self.samples)
            if t.ndim != 1 or t.shape != i.shape or t.size < 2:
                problems.append("samples: t and i must be 1-D of equal length >= 2")
            elif np.any(np.diff(t) <= 0) or not np.all(np.isfinite(i)):
                problems.append("samples: times must increase and currents be finite")
        if not problems and self.clock_frequency is not None and self.stimulus != "samples":
            period = 1.0 / self.clock_frequency
            if self.rise_time + self.fall_time_s + self.flat_top > period * (1 + 1e-9):
                problems.append(
                    f"the pulse ({(self.rise_time + self.fall_time_s + self.flat_top):.4g} s) "
                    f"is longer than the clock period ({period:.4g} s)"
                )
        if problems:
            raise ValueError("; ".join(problems))

    @property
    def fall_time_s(self) -> float:
        """Fall time, s (``rise_time`` when not given)."""
        return self.rise_time if self.fall_time is None else self.fall_time

    @property
    def flat_top(self) -> float:
        """Flat top of the clock pulse, s: Q / I_peak - (t_rise + t_fall) / 2, or 0."""
        if self.charge_per_cycle is None:
            return 0.0
        flat = self.charge_per_cycle / self.peak_current - 0.5 * (self.rise_time + self.fall_time_s)
        if flat < -1e-12 * (self.rise_time + self.fall_time_s):
            raise ValueError(
                f"charge_per_cycle = {self.charge_per_cycle!r} C is less than a triangle pulse "
                f"of the given peak and edges holds "
                f"({self.peak_current * 0.5 * (self.rise_time + self.fall_time_s):.4g} C)"
            )
        return max(flat, 0.0)

    @property
    def period(self) -> float | None:
        """Repetition period, s, for the periodic (emission) view; None without one."""
        if self.clock_frequency is not None:
            return 1.0 / self.clock_frequency
        if self.samples is not None and self.stimulus == "samples":
            t = np.asarray(self.samples[0], dtype=float)
            return float(t[-1] - t[0])
        return None

    def mean_current(self) -> float:
        """Average current, A: ``average_current`` if given; else the time average of the
        periodic view (clock pulses, or the samples as one period) when there is one; else
        base + peak (a step with no clock: the state after the step)."""
        if self.average_current is not None:
            return self.average_current
        if self.period is not None:
            t, i = self.periodic_breakpoints()
            return float(trapezoid(i, t) / (t[-1] - t[0]))
        return self.base_current + self.peak_current

    def periodic_breakpoints(self) -> tuple[FloatArray, FloatArray]:
        """One period as piecewise-linear breakpoints (t from 0 to T, i(T) = i(0)), s and A."""
        period = self.period
        if period is None:
            raise ValueError("no period: give clock_frequency (or samples for 'samples')")
        if self.stimulus == "samples":
            t, i = (np.asarray(a, dtype=float) for a in self.samples)  # type: ignore[misc]
            t = t - t[0]
            if t[-1] > period * (1 + 1e-12):
                raise ValueError(
                    f"samples span {t[-1]:.4g} s, longer than the clock period {period:.4g} s"
                )
            if t[-1] < period * (1 - 1e-12):  # the period closes back to the first sample
                return np.append(t, period), np.append(i, i[0])
            return t, np.append(i[:-1], i[0])  # one full period: the last sample is the first
        tr, tf, flat = self.rise_time, self.fall_time_s, self.flat_top
        lo, hi = self.base_current, self.base_current + self.peak_current
        t = np.array([0.0, tr, tr + flat, tr + flat + tf, period])
        i = np.array([lo, hi, hi, lo, lo])
        keep = np.concatenate([[True], np.diff(t) > 0])
        return t[keep], i[keep]


def current_waveform(activity: Activity, t: ArrayLike) -> FloatArray:
    """The region's current at times ``t`` (s) for its droop stimulus, A."""
    tt = np.asarray(t, dtype=float)
    a = activity
    if a.stimulus == "step":
        ramp = np.clip((tt - a.step_delay) / a.rise_time, 0.0, 1.0)
        return a.base_current + a.peak_current * ramp
    if a.stimulus == "clock":
        bt, bi = a.periodic_breakpoints()
        return np.interp(np.mod(tt, bt[-1]), bt, bi)
    st, si = (np.asarray(x, dtype=float) for x in a.samples)  # type: ignore[misc]
    return np.interp(tt, st, si)


def pwl_harmonics(t: ArrayLike, i: ArrayLike, n_max: int) -> ComplexArray:
    """Complex Fourier coefficients a_n, n = 1..n_max, of a periodic piecewise-linear current.

    Parameters
    ----------
    t : array_like   (m,) breakpoints from t_0 to t_0 + T, s, increasing
    i : array_like   (m,) currents there, A, with i[-1] = i[0] (continuous over the period)
    n_max : int      highest harmonic

    Returns
    -------
    ndarray   (n_max,) a_n, A: i(t) = a_0 + sum_n 2 Re(a_n exp(j n w t)); the one-sided peak
              amplitude of harmonic n is 2 |a_n|

    Notes
    -----
    Integrating by parts once (i continuous and periodic) and using the constant slope s_k of
    each segment: a_n = (1/T) int i e^{-j w_n t} dt = -(1 / (T w_n^2)) sum_k s_k
    (e^{-j w_n t_k} - e^{-j w_n t_k+1}), w_n = 2 pi n / T. Exact for any piecewise-linear wave.
    """
    tt, ii = np.asarray(t, dtype=float), np.asarray(i, dtype=float)
    if not np.isclose(ii[-1], ii[0], rtol=1e-12, atol=1e-15 * max(1.0, np.max(np.abs(ii)))):
        raise ValueError("the current must return to its first value over one period")
    period = tt[-1] - tt[0]
    slope = np.diff(ii) / np.diff(tt)
    w = 2.0 * np.pi * np.arange(1, n_max + 1) / period
    e = np.exp(-1j * w[:, None] * (tt - tt[0])[None, :])
    coeff = -(slope[None, :] * (e[:, :-1] - e[:, 1:])).sum(axis=1) / (period * w * w)
    return np.asarray(coeff, dtype=complex)


def harmonic_spectrum(activity: Activity, f_max: float) -> tuple[FloatArray, ComplexArray]:
    """Clock harmonics of the region's periodic current up to ``f_max``: (f_n Hz, a_n A).

    Uses the periodic view of the activity (clock pulse train, or the samples as one period);
    ``a_n`` as in `pwl_harmonics` (peak amplitude 2 |a_n|). Raises ``ValueError`` without a
    period.
    """
    t, i = activity.periodic_breakpoints()
    period = float(t[-1] - t[0])
    n_max = max(int(np.floor(f_max * period * (1 + 1e-12))), 1)
    coeff = pwl_harmonics(t, i, n_max)
    return np.arange(1, n_max + 1) / period, coeff


def trapezoid_harmonics(
    amplitude: ArrayLike, period: float, width: float, edge: float, n: ArrayLike
) -> FloatArray:
    """One-sided peak amplitude of harmonic n of a symmetric trapezoidal pulse train, A.

    Parameters
    ----------
    amplitude : array_like   pulse height A, A
    period : float           T, s
    width : float            tau, s: pulse width at half height (t_flat + t_edge)
    edge : float             t_r = t_f, s
    n : array_like           harmonic numbers >= 1

    Notes
    -----
    c_n = 2 A (tau / T) |sin(n pi tau / T) / (n pi tau / T)| |sin(n pi t_r / T) / (n pi t_r / T)|
    (C. R. Paul, *Introduction to Electromagnetic Compatibility*, 2nd ed., Wiley 2006, ch. 3,
    spectrum of the trapezoidal pulse train). Only for equal rise and fall times.
    """
    nn = np.asarray(n, dtype=float)
    x1, x2 = nn * width / period, nn * edge / period
    return np.asarray(
        2.0 * np.asarray(amplitude) * width / period * np.abs(np.sinc(x1)) * np.abs(np.sinc(x2)),
        dtype=float,
    )


def trapezoid_envelope(
    freq: ArrayLike, amplitude: float, period: float, width: float, edge: float
) -> FloatArray:
    """Asymptotic bound of the trapezoid spectrum: flat 2 A tau / T up to 1 / (pi tau), then
    -20 dB/decade up to 1 / (pi t_r), then -40 dB/decade (Paul 2006, ch. 3), A."""
    f = np.asarray(freq, dtype=float)
    level = 2.0 * amplitude * width / period
    f1, f2 = 1.0 / (np.pi * width), 1.0 / (np.pi * edge)
    bound = level * np.minimum(1.0, f1 / f)
    return np.asarray(bound * np.minimum(1.0, f2 / f), dtype=float)


def block_current_spectrum(activities: Sequence[Activity | None], f_max: float
                           ) -> tuple[FloatArray, ComplexArray]:
    """The regions' clock harmonics on one frequency axis, as peak phasors.

    Parameters
    ----------
    activities : sequence of Activity or None   one per region (None, or no period: 0)
    f_max : float                       Hz: highest harmonic kept

    Returns
    -------
    (freq, current) : (n_h,) Hz, sorted union of every region's harmonics; (n_h, n_region)
                      complex A, peak phasor 2 a_n of each region at each frequency (0 where
                      that region has no harmonic)

    Notes
    -----
    Every clock starts its period at t = 0 (edges aligned), so the phasors of regions on one
    clock add with their true relative phase.
    """
    spectra = []
    for a in activities:
        spectra.append(harmonic_spectrum(a, f_max) if a is not None and a.period is not None
                       else
                       (np.empty(0), np.empty(0, dtype=complex)))
    freq = np.unique(np.round(np.concatenate([f for f, _ in spectra] or [np.empty(0)]), 3))
    current = np.zeros((freq.size, len(activities)), dtype=complex)
    for j, (f, c) in enumerate(spectra):
        if f.size:
            current[np.searchsorted(freq, np.round(f, 3)), j] = 2.0 * c
    return freq, current
