"""Power-delivery context for decaps: target impedance, package resonance, droop, sizing
(SI: V, A, ohm, H, F, Hz, s, W).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray

ComplexArray = NDArray[np.complex128]
_GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0


def target_impedance(
    vdd: ArrayLike, ripple_fraction: ArrayLike, delta_current: ArrayLike
) -> FloatArray:
    """Z_target = V_DD ripple / Delta I, ohm (1.0 V, 5 %, 10 A -> 5 mohm).

    Notes
    -----
    L. D. Smith, R. E. Anderson, D. W. Forehand, T. J. Pelc, T. Roy, IEEE Trans. Adv. Packag.
    22(3):284-291, 1999. A flat |Z| below Z_target does not bound the worst-case noise when the
    impedance profile has peaks.
    """
    return (
        np.asarray(vdd, dtype=float)
        * np.asarray(ripple_fraction, dtype=float)
        / np.asarray(delta_current, dtype=float)
    )


def resonance_frequency(inductance: ArrayLike, capacitance: ArrayLike) -> FloatArray:
    """f0 = 1 / (2 pi sqrt(L C)), Hz (1 nH with 100 nF -> 15.915 MHz)."""
    return 1.0 / (
        2.0
        * np.pi
        * np.sqrt(np.asarray(inductance, dtype=float) * np.asarray(capacitance, dtype=float))
    )


def characteristic_impedance(inductance: ArrayLike, capacitance: ArrayLike) -> FloatArray:
    """Z0 = sqrt(L / C), ohm (1 nH with 100 nF -> 0.1 ohm)."""
    return np.sqrt(np.asarray(inductance, dtype=float) / np.asarray(capacitance, dtype=float))


def tank_impedance(
    freq: ArrayLike,
    inductance: ArrayLike,
    capacitance: ArrayLike,
    r_inductor: ArrayLike = 0.0,
    r_capacitor: ArrayLike = 0.0,
) -> ComplexArray:
    """Impedance seen by the die: (R_L + j omega L) || (R_C + 1/(j omega C)), (..., n_freq).

    Notes
    -----
    Package inductance with its series loss against the on-die capacitance with its ESR
    (P. Larsson, IEEE TCAS-I 45(8):849-858, 1998). With R_L = R_C = Z0 the network is a
    constant resistance Z0 at every frequency.
    """
    w = 2.0 * np.pi * np.asarray(freq, dtype=float)
    z_l = (
        np.asarray(r_inductor, dtype=float)[..., None]
        + 1j * w * np.asarray(inductance, dtype=float)[..., None]
    )
    z_c = np.asarray(r_capacitor, dtype=float)[..., None] + 1.0 / (
        1j * w * np.asarray(capacitance, dtype=float)[..., None]
    )
    return z_l * z_c / (z_l + z_c)


def peak_impedance_estimate(
    inductance: ArrayLike, capacitance: ArrayLike, r_total: ArrayLike
) -> FloatArray:
    """|Z| at resonance for Q >> 1: Z0^2 / R_tot = L / (C R_tot), ohm."""
    return np.asarray(inductance, dtype=float) / (
        np.asarray(capacitance, dtype=float) * np.asarray(r_total, dtype=float)
    )


def peak_impedance(
    inductance: ArrayLike,
    capacitance: ArrayLike,
    r_inductor: ArrayLike = 0.0,
    r_capacitor: ArrayLike = 0.0,
    iterations: int = 80,
) -> tuple[FloatArray, FloatArray]:
    """Exact maximum of |Z| of the L-C tank and the frequency where it occurs.

    Returns
    -------
    (z_max, f_max) : ndarrays   ohm, Hz

    Notes
    -----
    Golden-section search of |Z(f)| on log f over [f0/30, 30 f0], all variants at once (|Z| is
    unimodal there for the lightly damped tank; a heavily damped one returns its largest value
    in that range). Checks (1 nH, 100 nF): R_L = 10 mohm,
    R_C = 0 -> 1.0050 ohm; R_L = R_C = 10 mohm -> 0.5050 ohm; R_L = R_C = 0.1 ohm -> 0.1 ohm.
    """
    l_v, c_v, rl, rc = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (inductance, capacitance, r_inductor, r_capacitor))
    )
    f0 = resonance_frequency(l_v, c_v)
    lo, hi = np.log(f0 / 30.0), np.log(f0 * 30.0)

    def mag(log_f: FloatArray) -> FloatArray:
        w = 2.0 * np.pi * np.exp(log_f)
        z_l = rl + 1j * w * l_v
        z_c = rc + 1.0 / (1j * w * c_v)
        return np.abs(z_l * z_c / (z_l + z_c))

    a = hi - _GOLDEN * (hi - lo)
    b = lo + _GOLDEN * (hi - lo)
    for _ in range(iterations):
        left = mag(a) >= mag(b)  # the maximum lies in [lo, b], else in [a, hi]
        hi = np.where(left, b, hi)
        lo = np.where(left, lo, a)
        a = hi - _GOLDEN * (hi - lo)
        b = lo + _GOLDEN * (hi - lo)
    log_best = 0.5 * (lo + hi)
    return mag(log_best), np.exp(log_best)


def first_droop(
    delta_current: ArrayLike, inductance: ArrayLike, capacitance: ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """Undamped first droop after a current step: (Delta V_max, t_peak), V and s.

    Notes
    -----
    Delta V = Delta I sqrt(L/C) at t = (pi/2) sqrt(L C) (step into a lossless L-C); damping and
    a finite di/dt reduce it. 1 A, 1 nH, 100 nF -> 0.100 V at 15.71 ns.
    """
    l_v, c_v = np.asarray(inductance, dtype=float), np.asarray(capacitance, dtype=float)
    return np.asarray(delta_current, dtype=float) * np.sqrt(l_v / c_v), 0.5 * np.pi * np.sqrt(
        l_v * c_v
    )


def decap_for_charge(
    delta_current: ArrayLike, duration: ArrayLike, delta_v: ArrayLike
) -> FloatArray:
    """C >= Delta I Delta t / Delta V, F (1 A for 1 ns at 50 mV -> 20 nF)."""
    return (
        np.asarray(delta_current, dtype=float)
        * np.asarray(duration, dtype=float)
        / np.asarray(delta_v, dtype=float)
    )


def decap_for_charge_sharing(c_switched: ArrayLike, droop_fraction: ArrayLike) -> FloatArray:
    """C_dec = C_sw (1 - x) / x for a droop Delta V / V = x = C_sw / (C_sw + C_dec), F.

    Notes
    -----
    Charge sharing between the switched and the decoupling capacitance (W. J. Dally,
    J. W. Poulton, *Digital Systems Engineering*, Cambridge 1998): 10 % droop -> 9 C_sw.
    """
    x = np.asarray(droop_fraction, dtype=float)
    return np.asarray(c_switched, dtype=float) * (1.0 - x) / x


def switched_capacitance(power: ArrayLike, vdd: ArrayLike, frequency: ArrayLike) -> FloatArray:
    """alpha C = P / (V_DD^2 f), F (1 W, 1 V, 1 GHz -> 1 nF)."""
    v = np.asarray(vdd, dtype=float)
    return np.asarray(power, dtype=float) / (v * v * np.asarray(frequency, dtype=float))


def intrinsic_decap(
    power: ArrayLike, vdd: ArrayLike, frequency: ArrayLike, switching_factor: ArrayLike
) -> FloatArray:
    """Decoupling from non-switching logic, (1 - SF) C_total with C_total = P/(SF V_DD^2 f), F.

    Notes
    -----
    After H. H. Chen, D. D. Ling, DAC 1997 (form recalled, not checked against the paper).
    Well-junction and rail-to-rail wiring capacitance come on top.
    """
    sf = np.asarray(switching_factor, dtype=float)
    return (1.0 - sf) * switched_capacitance(power, vdd, frequency) / sf


def parallel_impedance(*impedances: ArrayLike) -> ComplexArray:
    """Impedances in parallel (broadcast), ohm."""
    total: ComplexArray = np.zeros(
        np.broadcast_shapes(*(np.shape(z) for z in impedances)), dtype=complex
    )
    for z in impedances:
        total = total + 1.0 / np.asarray(z, dtype=complex)
    return np.asarray(1.0 / total, dtype=complex)


def block_impedance(
    freq: ArrayLike,
    z_cells_parallel: ArrayLike,
    l_pkg: ArrayLike,
    r_pkg: ArrayLike,
    c_intrinsic: ArrayLike = 0.0,
) -> ComplexArray:
    """PDN impedance seen by a block's switching current: package || on-die network.

    Parameters
    ----------
    freq : array_like               (n_freq,), Hz
    z_cells_parallel : array_like   (..., n_freq) the block's decap cells already combined in
                                    parallel (e.g. Z_cell / count), ohm
    l_pkg, r_pkg : array_like       (...,) package/board loop inductance and resistance, H, ohm
    c_intrinsic : array_like        (...,) intrinsic decap of the non-switching logic, F

    Returns
    -------
    ndarray   (..., n_freq) complex ohm: (R_pkg + j omega L_pkg) || Z_cells || 1/(j omega C_int)
    """
    w = 2.0 * np.pi * np.asarray(freq, dtype=float)
    y = 1.0 / (
        np.asarray(r_pkg, dtype=float)[..., None]
        + 1j * w * np.asarray(l_pkg, dtype=float)[..., None]
    )
    y = (
        y
        + 1.0 / np.asarray(z_cells_parallel)
        + 1j * w * np.asarray(c_intrinsic, dtype=float)[..., None]
    )
    return 1.0 / y


def exceeds_target(
    freq: ArrayLike, z: ArrayLike, z_target: ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """(worst |Z| / Z_target, frequency of the worst point) over the sweep; ratio > 1 fails."""
    mag = np.abs(np.asarray(z))
    ratio = mag / np.asarray(z_target, dtype=float)[..., None]
    k = np.argmax(ratio, axis=-1)
    return np.take_along_axis(ratio, k[..., None], -1)[..., 0], np.asarray(freq, dtype=float)[k]


def triangular_pulse_charge(
    peak_current: ArrayLike, rise_time: ArrayLike, fall_time: ArrayLike
) -> FloatArray:
    """Charge of a triangular current pulse Q = I_peak (t_r + t_f) / 2, C.

    Notes
    -----
    The area of a triangle; the switching load of a block modelled as a triangular current
    pulse as in M. Popovich, A. V. Mezhiba, E. G. Friedman, *Power Distribution Networks with
    On-Chip Decoupling Capacitors*, Springer 2008 (from memory). 1 A, 100 ps + 300 ps -> 200 pC.
    """
    return (
        np.asarray(peak_current, dtype=float)
        * (np.asarray(rise_time, dtype=float) + np.asarray(fall_time, dtype=float))
        / 2.0
    )


def rise_time_bandwidth(rise_time: ArrayLike) -> FloatArray:
    """Bandwidth of an edge, f = ln(9) / (2 pi t_r) ~ 0.35 / t_r, Hz.

    Notes
    -----
    Exact for the 10-90 % rise of a single-pole response (t_r = ln(9) tau, f_3dB = 1/(2 pi tau));
    the trade's 0.35 / t_r rule. 1 ns -> 349.7 MHz.
    """
    return np.log(9.0) / (2.0 * np.pi * np.asarray(rise_time, dtype=float))


def capacitance_for_impedance(target_impedance: ArrayLike, frequency: ArrayLike) -> FloatArray:
    """C with |1/(j omega C)| = Z at f: C = 1 / (2 pi f Z), F (1 ohm at 159.15 MHz -> 1 nF)."""
    return 1.0 / (
        2.0 * np.pi * np.asarray(frequency, dtype=float) * np.asarray(target_impedance, dtype=float)
    )
