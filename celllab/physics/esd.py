"""Component-level ESD stress on decap oxides: HBM source, charge sharing onto on-die
capacitance, pulse breakdown margin and a labelled CDM estimate (SI: V, A, F, ohm, H, s, C, J, m,
V/m)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray

HBM_CAPACITANCE: float = 100e-12
"""HBM source capacitance, F (ANSI/ESDA/JEDEC JS-001)."""
HBM_RESISTANCE: float = 1500.0
"""HBM series resistance, ohm (JS-001)."""
CLAMP_FRACTION_OF_PULSE_BD: float = 0.8
"""Design window: clamp voltage at most this fraction of the pulse breakdown (common practice)."""


def hbm_peak_current(v_zap: ArrayLike, r_hbm: ArrayLike = HBM_RESISTANCE) -> FloatArray:
    """Ideal short-circuit HBM peak current I_pk = V / 1500 ohm, A (JS-001; 2 kV -> 1.333 A)."""
    return np.asarray(
        np.asarray(v_zap, dtype=float) / np.asarray(r_hbm, dtype=float), dtype=np.float64
    )


def hbm_time_constant(
    c_hbm: ArrayLike = HBM_CAPACITANCE, r_hbm: ArrayLike = HBM_RESISTANCE
) -> FloatArray:
    """HBM decay time constant tau = R C, s (150 ns nominal; JS-001 decay window 130-170 ns)."""
    return np.asarray(
        np.asarray(r_hbm, dtype=float) * np.asarray(c_hbm, dtype=float), dtype=np.float64
    )


def hbm_charge(v_zap: ArrayLike, c_hbm: ArrayLike = HBM_CAPACITANCE) -> FloatArray:
    """Charge stored on the HBM capacitor Q = C V, C (2 kV -> 200 nC)."""
    return np.asarray(
        np.asarray(c_hbm, dtype=float) * np.asarray(v_zap, dtype=float), dtype=np.float64
    )


def hbm_energy(v_zap: ArrayLike, c_hbm: ArrayLike = HBM_CAPACITANCE) -> FloatArray:
    """Energy stored on the HBM capacitor E = C V^2 / 2, J (2 kV -> 0.2 mJ)."""
    v = np.asarray(v_zap, dtype=float)
    return np.asarray(0.5 * np.asarray(c_hbm, dtype=float) * v * v, dtype=np.float64)


def hbm_current(
    t: ArrayLike,
    v_zap: ArrayLike,
    c_hbm: ArrayLike = HBM_CAPACITANCE,
    r_hbm: ArrayLike = HBM_RESISTANCE,
) -> FloatArray:
    """Ideal (zero rise time) HBM short-circuit current I(t) = (V/R) exp(-t/RC) for t >= 0, A."""
    tt = np.asarray(t, dtype=float)
    tau = hbm_time_constant(c_hbm, r_hbm)
    return np.where(
        tt >= 0.0, hbm_peak_current(v_zap, r_hbm) * np.exp(-np.maximum(tt, 0.0) / tau), 0.0
    )


def hbm_shared_voltage(
    v_zap: ArrayLike, c_decap: ArrayLike, c_hbm: ArrayLike = HBM_CAPACITANCE
) -> FloatArray:
    """Final rail voltage when the HBM charge is shared onto an on-die decap with no clamp, V.

    Notes
    -----
    Charge conservation V = V_zap C_hbm / (C_hbm + C_decap) (the series 1500 ohm only sets the
    time constant). 2 kV into 1 nF -> 181.8 V. Upper bound on the decap stress when no clamp
    conducts; a supply clamp normally limits it far below (Ker, IEEE TED 46(1):173, 1999).
    """
    ch = np.asarray(c_hbm, dtype=float)
    return np.asarray(
        np.asarray(v_zap, dtype=float) * ch / (ch + np.asarray(c_decap, dtype=float)),
        dtype=np.float64,
    )


def pulse_breakdown_voltage(t_ox: ArrayLike, e_bd_pulse: ArrayLike) -> FloatArray:
    """Oxide breakdown voltage under an ESD-like pulse V_BD = E_BD,pulse t_ox, V.

    Parameters: t_ox in m; e_bd_pulse the pulse breakdown field for the pulse width of interest,
    V/m (deck input; short pulses raise it above the DC ramp value, Wu & Rosenbaum, IEEE TED
    51(7):1192, 2004).
    """
    return np.asarray(
        np.asarray(e_bd_pulse, dtype=float) * np.asarray(t_ox, dtype=float), dtype=np.float64
    )


def oxide_stress_margin(v_stress: ArrayLike, v_bd_pulse: ArrayLike) -> FloatArray:
    """Breakdown margin ratio V_BD,pulse / |V_stress| (> 1: the oxide survives the pulse)."""
    with np.errstate(divide="ignore"):
        return np.asarray(
            np.asarray(v_bd_pulse, dtype=float) / np.abs(np.asarray(v_stress, dtype=float)),
            dtype=np.float64,
        )


def within_clamp_window(
    v_clamp: ArrayLike,
    v_bd_pulse: ArrayLike,
    fraction: ArrayLike = CLAMP_FRACTION_OF_PULSE_BD,
) -> NDArray[np.bool_]:
    """True where |v_clamp| <= fraction * V_BD,pulse (0.8 by default; common practice)."""
    limit = np.asarray(fraction, dtype=float) * np.asarray(v_bd_pulse, dtype=float)
    return np.asarray(np.abs(np.asarray(v_clamp, dtype=float)) <= limit, dtype=np.float64)


def cdm_peak_current_estimate(
    v_charge: ArrayLike, c_device: ArrayLike, l_loop: ArrayLike, r_loop: ArrayLike
) -> FloatArray:
    """ESTIMATE of a CDM-like peak current: series R-L-C discharge of the charged device, A.

    Parameters
    ----------
    v_charge : array_like   pre-charge voltage, V
    c_device : array_like   device-to-field-plate capacitance, F (> 0)
    l_loop, r_loop : array_like   discharge-loop inductance (H, > 0) and resistance (ohm, >= 0)

    Returns
    -------
    ndarray   peak |I| of i(t) for C charged to V discharging into series R, L

    Notes
    -----
    Labelled estimate: lumped second-order circuit (alpha = R/2L, w0 = 1/sqrt(LC)); the JS-002
    tester waveform (pogo-pin arc, probe, 1 ohm target, bandwidth) is not modelled and its
    verification-module values are not used. Underdamped: i = (V/(w_d L)) e^(-alpha t) sin(w_d t),
    peak at t = atan(w_d/alpha)/w_d; critically damped: V/(e alpha L); overdamped: the
    two-exponential solution at t = ln(s2/s1)/(s1 - s2).
    """
    v = np.abs(np.asarray(v_charge, dtype=float))
    c = np.asarray(c_device, dtype=float)
    ell = np.asarray(l_loop, dtype=float)
    r = np.asarray(r_loop, dtype=float)
    alpha = r / (2.0 * ell)
    w0_sq = 1.0 / (ell * c)
    disc = alpha * alpha - w0_sq
    with np.errstate(divide="ignore", invalid="ignore"):
        # underdamped
        wd = np.sqrt(np.maximum(-disc, 0.0))
        t_u = np.arctan2(wd, alpha) / np.where(wd > 0.0, wd, 1.0)
        i_u = v / (np.where(wd > 0.0, wd, 1.0) * ell) * np.exp(-alpha * t_u) * np.sin(wd * t_u)
        # overdamped (s1 > s2, both negative)
        root = np.sqrt(np.maximum(disc, 0.0))
        s1, s2 = -alpha + root, -alpha - root
        t_o = np.log(s2 / s1) / (s1 - s2)
        i_o = v / (ell * (s1 - s2)) * (np.exp(s1 * t_o) - np.exp(s2 * t_o))
        i_c = v / (np.e * alpha * ell)
    critical = np.isclose(disc, 0.0, rtol=0.0, atol=1e-12 * w0_sq)
    return np.asarray(np.where(critical, i_c, np.where(disc < 0.0, i_u, i_o)), dtype=np.float64)
