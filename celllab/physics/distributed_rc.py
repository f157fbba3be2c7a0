"""Uniform distributed RC lines: the channel or gate of a MOS decap (SI: ohm, F, rad/s, m).

A line has total series resistance R and total shunt capacitance C spread uniformly along it;
the shunt capacitance returns to one "plate" node (the gate, for a channel line). With
gamma = sqrt(j omega R C) the line is described exactly by the telegrapher solution for
an RC cable (V. Szekely, "Distributed RC networks", in *The Circuits and Filters Handbook*, CRC;
Tsividis & McAndrew 2011 ch. 8 for the MOS channel):

* input impedance, far end open: Z = (R / gamma) coth(gamma), series 1/(j omega C) + R/3 + ...
* both ends tied together: Z = R / (2 gamma) coth(gamma / 2) = half of a (R/2, C/2) line,
  so the low-frequency ESR is R/12 (P. Larsson, IEEE JSSC 32(4):574, 1997)
* two-port between the ends, voltages taken against the plate:
  y11 = y22 = (gamma / R) coth(gamma), y12 = y21 = -(gamma / R) / sinh(gamma)
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray

ComplexArray = NDArray[np.complex128]
ContactedEnds = Literal[1, 2]

_SERIES_LIMIT = 0.05
"""Below this |gamma| the closed forms are evaluated from their Taylor series (cancellation)."""
_EXP_LIMIT = 20.0
"""Above this Re(gamma) hyperbolic functions are evaluated from exp(-2 gamma) (no overflow)."""


def _gamma(r_total: ArrayLike, c_total: ArrayLike, omega: ArrayLike) -> ComplexArray:
    product = (
        np.asarray(omega, dtype=float)
        * np.asarray(r_total, dtype=float)
        * np.asarray(c_total, dtype=float)
    )
    # sqrt(j x) = sqrt(x/2) (1 + j) for x >= 0
    root = np.sqrt(0.5 * product)
    return root + 1j * root


def _coth_over_gamma_minus_inverse_square(gamma: ComplexArray) -> ComplexArray:
    """h(gamma) = coth(gamma)/gamma - 1/gamma^2, finite at gamma = 0 (h(0) = 1/3).

    h is even in gamma, so it is evaluated at the root with Re >= 0, where
    coth = (1 + e) / (1 - e) with e = exp(-2 gamma), |e| <= 1, cannot overflow (one exponential
    instead of cosh and sinh); below |gamma| = 0.05 from its Taylor series (cancellation).
    """
    gamma = np.asarray(gamma)
    g = np.where(gamma.real < 0, -gamma, gamma)
    small = np.abs(g) < _SERIES_LIMIT
    safe = np.where(small, 1.0, g)
    e = np.exp(-2.0 * safe)
    out = np.atleast_1d((1.0 + e) / ((1.0 - e) * safe) - 1.0 / (safe * safe))
    if small.any():
        # coth(x)/x = 1/x^2 + 1/3 - x^2/45 + 2x^4/945 - x^6/4725 + ...
        g2 = g[small] ** 2
        out[np.atleast_1d(small)] = 1.0 / 3.0 - g2 / 45.0 + 2.0 * g2**2 / 945.0 - g2**3 / 4725.0
    return np.asarray(out.reshape(g.shape), dtype=complex)


def rc_line_impedance(
    r_total: ArrayLike,
    c_total: ArrayLike,
    omega: ArrayLike,
    ends: ContactedEnds = 1,
) -> ComplexArray:
    """Input impedance of a uniform RC line between its contacted end(s) and its plate.

    Parameters
    ----------
    r_total : array_like   total series resistance R, ohm, >= 0
    c_total : array_like   total shunt capacitance C, F, > 0
    omega : array_like     angular frequency, rad/s, > 0
    ends : {1, 2}          1: contacted at one end, far end open; 2: both ends contacted
                           together (e.g. source and drain on the same rail)

    Returns
    -------
    ndarray   complex Z, ohm, broadcast over the inputs

    Notes
    -----
    One end: Z = (R/gamma) coth(gamma), gamma = sqrt(j omega R C); both ends: Z = half of a
    (R/2, C/2) line = R/(2 gamma) coth(gamma/2) (Szekely, CRC handbook; Tsividis ch. 8).
    Evaluated as 1/(j omega C) + R h(gamma^2 R C scaled) so R = 0 gives the ideal capacitor
    and small omega R C keeps full precision. Low-frequency ESR R/3 (one end), R/12 (both).
    """
    if ends not in (1, 2):
        raise ValueError(f"ends = {ends!r} -> must be 1 or 2")
    r = np.asarray(r_total, dtype=float)
    c = np.asarray(c_total, dtype=float)
    w = np.asarray(omega, dtype=float)
    if ends == 2:
        return 0.5 * rc_line_impedance(0.5 * r, 0.5 * c, w, ends=1)
    gamma = _gamma(r, c, w)
    return 1.0 / (1j * w * c) + r * _coth_over_gamma_minus_inverse_square(gamma)


def rc_line_even_odd_admittances(
    r_total: ArrayLike, c_total: ArrayLike, omega: ArrayLike
) -> tuple[ComplexArray, ComplexArray]:
    """Even- and odd-mode admittances of a uniform RC line, y11 + y12 and y11 - y12.

    Parameters
    ----------
    r_total : array_like   total series resistance R, ohm, > 0
    c_total : array_like   total shunt capacitance C, F, >= 0
    omega : array_like     angular frequency, rad/s, >= 0

    Returns
    -------
    (y_even, y_odd) : ndarrays   complex S

    Notes
    -----
    y_even = (gamma/R) tanh(gamma/2) (both ends driven together against the plate; -> j omega C
    / 2 per end at low frequency), y_odd = (gamma/R) coth(gamma/2) (ends driven against each
    other; -> 2/R). Computed directly, so the small even-mode admittance does not suffer the
    cancellation of y11 + y12.
    """
    r = np.asarray(r_total, dtype=float)
    gamma = _gamma(r, c_total, omega)
    half = 0.5 * gamma
    small = np.abs(gamma) < _SERIES_LIMIT
    large = gamma.real > _EXP_LIMIT
    moderate = np.where(large | small, 1.0, half)
    tanh_moderate = np.tanh(moderate)
    decay = np.exp(-2.0 * np.where(large, half, 1.0))
    tanh_large = (1.0 - decay) / (1.0 + decay)
    tanh_half = np.where(large, tanh_large, tanh_moderate)
    t2 = half * half
    # gamma tanh(gamma/2) = 2 (t^2 - t^4/3 + 2 t^6/15 - 17 t^8/315), t = gamma/2
    even_small = 2.0 * (t2 - t2**2 / 3.0 + 2.0 * t2**3 / 15.0 - 17.0 * t2**4 / 315.0)
    # gamma coth(gamma/2) = 2 (1 + t^2/3 - t^4/45 + 2 t^6/945)
    odd_small = 2.0 * (1.0 + t2 / 3.0 - t2**2 / 45.0 + 2.0 * t2**3 / 945.0)
    safe = np.where(small, 1.0, gamma)
    even = np.where(small, even_small, safe * tanh_half)
    odd = np.where(small, odd_small, safe / np.where(small, 1.0, tanh_half))
    return even / r, odd / r


def rc_line_y_parameters(
    r_total: ArrayLike, c_total: ArrayLike, omega: ArrayLike
) -> tuple[ComplexArray, ComplexArray]:
    """Two-port admittances of a uniform RC line (ports = the two ends, reference = the plate).

    Parameters
    ----------
    r_total : array_like   total series resistance R, ohm, > 0
    c_total : array_like   total shunt capacitance C, F, >= 0
    omega : array_like     angular frequency, rad/s, >= 0

    Returns
    -------
    (y11, y12) : ndarrays   complex S; y22 = y11 and y21 = y12 (symmetric, reciprocal line)

    Notes
    -----
    y11 = (gamma/R) coth(gamma), y12 = -(gamma/R) csch(gamma), gamma = sqrt(j omega R C)
    (Szekely, CRC handbook, RC-line chain matrix converted to Y), formed from the even/odd
    admittances as y11 = (y_e + y_o)/2, y12 = (y_e - y_o)/2. Far end open gives the input
    admittance (gamma/R) tanh(gamma); ends tied gives 2 y_e.
    """
    even, odd = rc_line_even_odd_admittances(r_total, c_total, omega)
    return 0.5 * (even + odd), 0.5 * (even - odd)


def distributed_esr_low_frequency(r_total: ArrayLike, ends: ContactedEnds = 1) -> FloatArray:
    """Low-frequency ESR of a uniform RC line: R/3 (one end contacted) or R/12 (both).

    Parameters
    ----------
    r_total : array_like   total series resistance, ohm
    ends : {1, 2}          contacted ends

    Returns
    -------
    ndarray   ESR, ohm

    Notes
    -----
    Limit omega -> 0 of Re Z of `rc_line_impedance` (Larsson, IEEE JSSC 32(4), 1997).
    """
    if ends not in (1, 2):
        raise ValueError(f"ends = {ends!r} -> must be 1 or 2")
    return np.asarray(r_total, dtype=float) / (3.0 if ends == 1 else 12.0)


def gate_resistance(
    r_sheet: ArrayLike,
    width: ArrayLike,
    length: ArrayLike,
    fingers: ArrayLike = 1,
    ends: ContactedEnds = 1,
) -> FloatArray:
    """Effective distributed gate (poly/metal-gate) resistance of a multi-finger device.

    Parameters
    ----------
    r_sheet : array_like   gate sheet resistance, ohm/sq
    width : array_like     finger width W (the length of the gate stripe along which gate
                           current flows), m
    length : array_like    gate length L (the stripe's width), m
    fingers : array_like   number of parallel fingers, >= 1
    ends : {1, 2}          gate contacted at one end or both ends of each finger

    Returns
    -------
    ndarray   R_g, ohm

    Notes
    -----
    R_g = R_sq W / (3 L N) (one end) or R_sq W / (12 L N) (both ends) (B. Razavi, R.-H. Yan,
    K. F. Lee, IEEE TCAS-I 41(11):750-754, 1994). 8 ohm/sq, W = 2 um, L = 0.1 um -> 53.33 ohm
    and 13.33 ohm. Assumes the gate stripe sees a uniformly distributed channel load.
    """
    stripe = (
        np.asarray(r_sheet, dtype=float)
        * np.asarray(width, dtype=float)
        / np.asarray(length, dtype=float)
    )
    return distributed_esr_low_frequency(stripe, ends) / np.asarray(fingers, dtype=float)
