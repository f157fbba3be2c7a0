"""Component-level ESD stress on decap oxides: HBM and CDM source networks for transient
analysis, charge sharing onto on-die capacitance, pulse breakdown margin and a labelled CDM
estimate (SI: V, A, F, ohm, H, s, C, J, m, V/m).

The source networks (`hbm_network`, `cdm_network`) are element lists for
`celllab.physics.transient.simulate` with the initial voltages that charge them; `rail_clamp`
builds the supply clamp. The rail is the pair of nodes the cell's equivalent circuit hangs on
(``vdd``, ``vss`` by default).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq

from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Element
from celllab.physics.transient import RailClamp

HBM_CAPACITANCE: float = 100e-12
"""HBM source capacitance, F (ANSI/ESDA/JEDEC JS-001)."""
HBM_RESISTANCE: float = 1500.0
"""HBM series resistance, ohm (JS-001)."""
HBM_RISE_RANGE: tuple[float, float] = (2e-9, 10e-9)
"""Rise time window (10-90 %) of the HBM short-circuit current waveform, s (JS-001)."""
HBM_RISE_DEFAULT: float = 2e-9
"""Rise time used unless given: the fastest the standard allows (the hardest case for a clamp
that needs time to respond), s."""
CDM_CAPACITANCE: float = 10e-12
"""Charged-device capacitance of our CDM stand-in, F: a mid-size package over the field plate.
Our choice (JS-002 does not define a lumped circuit; its verification modules are not used)."""
CDM_RESISTANCE: float = 25.0
"""Discharge-path resistance of our CDM stand-in (arc, pogo pin, current target), ohm; our
choice, chosen with `CDM_INDUCTANCE` to give a sub-ns rise."""
CDM_INDUCTANCE: float = 5e-9
"""Discharge-loop inductance of our CDM stand-in, H; our choice."""
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


# --- source networks for transient analysis ---------------------------------------------------


@dataclass(frozen=True)
class SourceNetwork:
    """An ESD source as circuit elements plus the initial voltages that charge it.

    Attributes
    ----------
    elements : tuple[Element, ...]   R, C, L elements to add to the cell's circuit
    initial_voltages : dict          node -> V at t = 0 (``"*"``: every node not listed)
    ground : str                     reference node of the analysis
    """

    elements: tuple[Element, ...]
    initial_voltages: dict[str, FloatArray]
    ground: str


def hbm_rise_time(
    ell: float, c_hbm: float = HBM_CAPACITANCE, r_hbm: float = HBM_RESISTANCE
) -> float:
    """10-90 % rise time of the HBM short-circuit current for a series inductance ``ell``, s.

    Notes
    -----
    Closed-form series R-L-C discharge (`series_rlc_discharge_current`), peak at
    t_p = ln(s2/s1) / (s1 - s2); the 10 % and 90 % crossings before it by Brent's method
    (scipy.optimize.brentq). Overdamped networks only (R > 2 sqrt(L/C), true for HBM).
    """
    alpha = r_hbm / (2.0 * ell)
    root = np.sqrt(alpha * alpha - 1.0 / (ell * c_hbm))
    s1, s2 = -alpha + root, -alpha - root
    t_peak = float(np.log(s2 / s1) / (s1 - s2))

    def current(t: float) -> float:
        return float(series_rlc_discharge_current(t, 1.0, c_hbm, ell, r_hbm))

    peak = current(t_peak)
    t10 = brentq(lambda t: current(t) - 0.1 * peak, 0.0, t_peak, xtol=1e-15)
    t90 = brentq(lambda t: current(t) - 0.9 * peak, 0.0, t_peak, xtol=1e-15)
    return float(t90 - t10)


def hbm_inductance_for_rise(
    rise_time: float, c_hbm: float = HBM_CAPACITANCE, r_hbm: float = HBM_RESISTANCE
) -> float:
    """Series inductance giving the HBM short-circuit current a 10-90 % rise ``rise_time``, H.

    Notes
    -----
    Solves `hbm_rise_time` (L) = rise_time by Brent's method, starting from the R-L estimate
    L = R t_r / ln 9 (an R-L step rises 10-90 % in (L/R) ln 9); the capacitor's decay during
    the rise makes the exact L ~10 % larger at 2 ns. Our way of producing the JS-001 rise
    time; the tester's stray capacitances are not modelled.
    """
    guess = r_hbm * rise_time / np.log(9.0)
    return float(brentq(lambda ell: hbm_rise_time(ell, c_hbm, r_hbm) - rise_time,
                        0.5 * guess, 3.0 * guess, xtol=1e-18, rtol=1e-12))


def hbm_network(
    v_zap: ArrayLike,
    rise_time: float = HBM_RISE_DEFAULT,
    pin: str = "vdd",
    reference: str = "vss",
    c_hbm: float = HBM_CAPACITANCE,
    r_hbm: float = HBM_RESISTANCE,
) -> SourceNetwork:
    """JS-001 human-body-model source zapping ``pin`` with ``reference`` grounded.

    ::

        esd_hbm_c (charged to v_zap) --R 1500 ohm-- esd_hbm_m --L-- pin
             |
            C 100 pF
             |
        reference (ground)

    Parameters
    ----------
    v_zap : array_like   signed precharge, V ((n_variant,) or scalar); > 0 drives pin up
    rise_time : float    10-90 % rise of the short-circuit current, s (JS-001: 2-10 ns)
    pin, reference : str
    c_hbm, r_hbm : float   100 pF and 1500 ohm (ANSI/ESDA/JEDEC JS-001)

    Notes
    -----
    Short-circuit current i(t) = V (e^(s1 t) - e^(s2 t)) / (L (s1 - s2)) (series R-L-C
    discharge, `series_rlc_discharge_current`), ~V/R e^(-t/RC) after the rise.
    """
    if not HBM_RISE_RANGE[0] * (1 - 1e-9) <= rise_time <= HBM_RISE_RANGE[1] * (1 + 1e-9):
        raise ValueError(f"HBM rise_time = {rise_time:g} s -> JS-001 allows 2e-9 ... 1e-8 s")
    ell = hbm_inductance_for_rise(rise_time, c_hbm, r_hbm)
    elements = (
        Element("C", "esd_hbm_cap", "esd_hbm_c", reference, c_hbm),
        Element("R", "esd_hbm_r", "esd_hbm_c", "esd_hbm_m", r_hbm),
        Element("L", "esd_hbm_l", "esd_hbm_m", pin, ell),
    )
    v = np.asarray(v_zap, dtype=float)
    # no current flows before the relay closes: the node between R and L sits at the precharge
    return SourceNetwork(elements, {"esd_hbm_c": v, "esd_hbm_m": v}, reference)


def cdm_network(
    v_charge: ArrayLike,
    pin: str = "vdd",
    body: str = "vss",
    c_device: float = CDM_CAPACITANCE,
    r_path: float = CDM_RESISTANCE,
    l_path: float = CDM_INDUCTANCE,
) -> SourceNetwork:
    """Field-induced CDM stand-in: the charged device discharging through ``pin``.

    ::

        body --C_device-- esd_cdm_plate (ground)
        pin --R_path-- esd_cdm_m --L_path-- esd_cdm_plate

    The device's capacitance to the field plate is lumped on ``body`` (the substrate and VSS
    net); every chip node starts at ``v_charge`` and ``pin`` is grounded through the pogo path
    at t = 0, so the chip's capacitance between ``pin`` and ``body`` carries the discharge:
    a device charged negative drives ``pin`` above ``body``.

    Parameters
    ----------
    v_charge : array_like   signed precharge of the device, V
    c_device, r_path, l_path : float   F, ohm, H (our stand-in values above: ~0.2 ns rise)

    Notes
    -----
    Labelled stand-in for ANSI/ESDA/JEDEC JS-002 field-induced CDM: sub-ns series R-L-C
    discharge; the tester's waveform (verification modules, arc, bandwidth) is not reproduced.
    """
    elements = (
        Element("C", "esd_cdm_cap", body, "esd_cdm_plate", c_device),
        Element("R", "esd_cdm_r", pin, "esd_cdm_m", r_path),
        Element("L", "esd_cdm_l", "esd_cdm_m", "esd_cdm_plate", l_path),
    )
    return SourceNetwork(elements, {"*": np.asarray(v_charge, dtype=float)}, "esd_cdm_plate")


def rail_clamp(
    v_on: ArrayLike,
    r_on: ArrayLike,
    t_response: ArrayLike = 0.0,
    v_diode: ArrayLike = 0.7,
    pos: str = "vdd",
    neg: str = "vss",
    r_diode: ArrayLike | None = None,
) -> RailClamp:
    """The supply clamp between the rails (see `celllab.physics.transient.RailClamp`)."""
    return RailClamp("esd_clamp", pos, neg, v_on, r_on, t_response, v_diode, r_diode)


def series_rlc_discharge_current(
    t: ArrayLike, v0: ArrayLike, c: ArrayLike, ell: ArrayLike, r: ArrayLike
) -> FloatArray:
    """Current of a capacitor charged to v0 discharging into series R and L from t = 0, A.

    Notes
    -----
    Roots s = -alpha +- sqrt(alpha^2 - w0^2), alpha = R/2L, w0^2 = 1/LC:
    i(t) = v0 (e^(s1 t) - e^(s2 t)) / (L (s1 - s2)) (overdamped; the underdamped form follows
    with complex roots, here taken through the real part of the same expression). Standard
    second-order circuit solution (e.g. Nilsson & Riedel, *Electric Circuits*, natural response
    of a series RLC circuit).
    """
    tt = np.asarray(t, dtype=float)
    ellv = np.asarray(ell, dtype=float)
    alpha = np.asarray(r, dtype=float) / (2.0 * ellv)
    disc = (alpha * alpha - 1.0 / (ellv * np.asarray(c, dtype=float))).astype(complex)
    root = np.sqrt(disc)
    s1, s2 = -alpha + root, -alpha - root
    i = np.asarray(v0, dtype=float) * (np.exp(s1 * tt) - np.exp(s2 * tt)) / (ellv * (s1 - s2))
    return np.asarray(np.where(tt >= 0.0, i.real, 0.0), dtype=np.float64)


def time_above(t: ArrayLike, v: ArrayLike, level: ArrayLike) -> FloatArray:
    """Total time a waveform spends with |v| above ``level``, s (over the last axis).

    Parameters
    ----------
    t : array_like       (n_t,) s, increasing
    v : array_like       (..., n_t)
    level : array_like   broadcast against v[..., 0], V, > 0

    Notes
    -----
    Exact for the piecewise-linear waveform through the samples: each interval contributes the
    part of it where the linear interpolant of |v| - level is positive (an interval crossing
    zero in v counts as two linear pieces of |v| only approximately).
    """
    tt = np.asarray(t, dtype=float)
    excess = np.abs(np.asarray(v, dtype=float)) - np.asarray(level, dtype=float)[..., None]
    a, b = excess[..., :-1], excess[..., 1:]
    dt = np.diff(tt)
    both = (a > 0) & (b > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        crossing = np.where(a > 0, a / (a - b), b / (b - a))
    part = np.where(both, 1.0, np.where((a > 0) ^ (b > 0), crossing, 0.0))
    return np.asarray(np.sum(part * dt, axis=-1), dtype=np.float64)
