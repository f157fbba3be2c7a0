"""Gate-oxide time-dependent dielectric breakdown: Weibull statistics, area scaling, voltage and
temperature acceleration, lifetime and FIT (SI: s, m^2, V, K, m; FIT per 1e9 device-hours)."""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import e, hour, k
from scipy.stats import chi2

from celllab.physics.constants import FloatArray

VoltageModel = Literal["power", "e", "inverse_e"]
"""Voltage-acceleration law: power law t ~ V^-n, E-model t ~ exp(-gamma E), 1/E model
t ~ exp(G/E)."""

_K_EV = k / e  # Boltzmann constant, eV/K


def weibull_cdf(t: ArrayLike, eta: ArrayLike, beta: ArrayLike) -> FloatArray:
    """Weibull failure fraction F(t) = 1 - exp[-(t/eta)^beta] (JESD92 / JEP122 TDDB statistics).

    Parameters: t, eta in s (> 0); beta the Weibull slope (> 0).
    """
    z = (np.asarray(t, dtype=float) / np.asarray(eta, dtype=float)) ** np.asarray(beta, dtype=float)
    return np.asarray(-np.expm1(-z), dtype=np.float64)


def weibull_percentile(fraction: ArrayLike, eta: ArrayLike, beta: ArrayLike) -> FloatArray:
    """Time to a failure fraction t_F = eta (-ln(1 - F))^(1/beta), s (0 < F < 1)."""
    f = np.asarray(fraction, dtype=float)
    return np.asarray(
        np.asarray(eta, dtype=float) * (-np.log1p(-f)) ** (1.0 / np.asarray(beta, dtype=float)),
        dtype=np.float64,
    )


def weibit(fraction: ArrayLike) -> FloatArray:
    """Weibull plotting variable W = ln(-ln(1 - F)) (= beta ln t - beta ln eta)."""
    return np.asarray(np.log(-np.log1p(-np.asarray(fraction, dtype=float))), dtype=np.float64)


def weibull_hazard(t: ArrayLike, eta: ArrayLike, beta: ArrayLike) -> FloatArray:
    """Weibull hazard rate h(t) = (beta/eta)(t/eta)^(beta-1), 1/s."""
    b = np.asarray(beta, dtype=float)
    eta_a = np.asarray(eta, dtype=float)
    return np.asarray(
        (b / eta_a) * (np.asarray(t, dtype=float) / eta_a) ** (b - 1.0), dtype=np.float64
    )


def area_scaled_eta(
    eta_ref: ArrayLike, area_ref: ArrayLike, area: ArrayLike, beta: ArrayLike
) -> FloatArray:
    """Characteristic life of an oxide of area ``area`` from a test area, s.

    Notes
    -----
    Poisson (weakest-link) area scaling eta_2 = eta_1 (A_1/A_2)^(1/beta) (Degraeve et al., IEEE
    TED 45(4):904, 1998; JEP122). beta = 1.5, A_test/A_chip = 1e-4 -> factor 2.1544e-3.
    """
    ratio = np.asarray(area_ref, dtype=float) / np.asarray(area, dtype=float)
    return np.asarray(
        np.asarray(eta_ref, dtype=float) * ratio ** (1.0 / np.asarray(beta, dtype=float)),
        dtype=np.float64,
    )


def area_scaled_fraction(
    fraction_ref: ArrayLike, area_ref: ArrayLike, area: ArrayLike
) -> FloatArray:
    """Failure fraction of area ``area`` at the time the test area reaches ``fraction_ref``:
    1 - F_2 = (1 - F_1)^(A_2/A_1) (weakest link, any failure distribution)."""
    exponent = np.asarray(area, dtype=float) / np.asarray(area_ref, dtype=float)
    return np.asarray(
        -np.expm1(exponent * np.log1p(-np.asarray(fraction_ref, dtype=float))), dtype=np.float64
    )


def voltage_acceleration(
    v_stress: ArrayLike,
    v_use: ArrayLike,
    *,
    model: VoltageModel,
    exponent: ArrayLike,
    t_ox: ArrayLike | None = None,
) -> FloatArray:
    """Voltage acceleration factor AF = t_BD(v_use) / t_BD(v_stress) (> 1 when v_use < v_stress).

    Parameters
    ----------
    v_stress, v_use : array_like   gate (oxide) voltages, V (magnitudes used)
    model : 'power' | 'e' | 'inverse_e'
    exponent : array_like
        power: n (unitless; ~40-48 for ultra-thin SiO2); e: gamma, m/V; inverse_e: G, V/m
    t_ox : array_like   oxide thickness, m (needed for 'e' and 'inverse_e': E = V/t_ox)

    Notes
    -----
    power law AF = (V_s/V_u)^n (E. Y. Wu et al.; Wu & Sune, IEEE TED 56(7):1433, 2009);
    E-model AF = exp(gamma (E_s - E_u)) (McPherson & Mogul, J. Appl. Phys. 84:1513, 1998);
    1/E model AF = exp(G (1/E_u - 1/E_s)) (Schuegraf & Hu 1994). n = 44, 2 V -> 1 V: 1.7592e13.
    """
    vs = np.abs(np.asarray(v_stress, dtype=float))
    vu = np.abs(np.asarray(v_use, dtype=float))
    p = np.asarray(exponent, dtype=float)
    if model == "power":
        return np.asarray((vs / vu) ** p, dtype=np.float64)
    if model not in ("e", "inverse_e"):
        raise ValueError(f"model must be 'power', 'e' or 'inverse_e', got {model!r}")
    if t_ox is None:
        raise ValueError(f"t_ox is required for the {model!r} voltage-acceleration model")
    t = np.asarray(t_ox, dtype=float)
    e_s, e_u = vs / t, vu / t
    if model == "e":
        return np.asarray(np.exp(p * (e_s - e_u)), dtype=np.float64)
    return np.asarray(np.exp(p * (1.0 / e_u - 1.0 / e_s)), dtype=np.float64)


def temperature_acceleration(
    t_stress_K: ArrayLike, t_use_K: ArrayLike, ea_eV: ArrayLike
) -> FloatArray:
    """Arrhenius acceleration AF = exp[(Ea/k)(1/T_use - 1/T_stress)] (JEP122).

    Ea = 0.7 eV, 105 -> 125 degC: 2.942; 85 -> 125 degC: 9.763. Thin oxides are not strictly
    Arrhenius; use an effective Ea for the temperature range of interest.
    """
    inv = 1.0 / np.asarray(t_use_K, dtype=float) - 1.0 / np.asarray(t_stress_K, dtype=float)
    return np.asarray(np.exp(np.asarray(ea_eV, dtype=float) / _K_EV * inv), dtype=np.float64)


def use_characteristic_life(
    area: ArrayLike,
    voltage: ArrayLike,
    temperature: ArrayLike,
    *,
    eta_ref_s: ArrayLike,
    area_ref: ArrayLike,
    v_ref: ArrayLike,
    t_ref_K: ArrayLike,
    beta: ArrayLike,
    model: VoltageModel,
    exponent: ArrayLike,
    ea_eV: ArrayLike,
    t_ox: ArrayLike | None = None,
) -> FloatArray:
    """Weibull characteristic life (63 % point) of an oxide area at use conditions, s.

    Parameters
    ----------
    area : array_like          stressed oxide area, m^2 (> 0)
    voltage, temperature       use conditions, V and K
    eta_ref_s, area_ref, v_ref, t_ref_K
                               characteristic life measured on area_ref (m^2) at v_ref, t_ref
    beta                       Weibull slope
    model, exponent, t_ox      voltage acceleration (`voltage_acceleration`)
    ea_eV                      activation energy, eV

    Notes
    -----
    eta_use = eta_ref (A_ref/A)^(1/beta) AF_V AF_T (JESD92 / JEP122 extrapolation chain:
    weakest-link area scaling, voltage law, Arrhenius). Valid within the voltage and
    temperature range where the chosen acceleration law was fitted.
    """
    eta = area_scaled_eta(eta_ref_s, area_ref, area, beta)
    eta = eta * voltage_acceleration(v_ref, voltage, model=model, exponent=exponent, t_ox=t_ox)
    return np.asarray(eta * temperature_acceleration(t_ref_K, temperature, ea_eV), dtype=np.float64)


def fraction_from_hazard(hazard: ArrayLike) -> FloatArray:
    """Failure fraction F = 1 - exp(-H) of a total cumulative hazard H (unitless)."""
    return np.asarray(-np.expm1(-np.asarray(hazard, dtype=float)), dtype=np.float64)


def area_for_fraction(fraction: ArrayLike, hazard_per_area: ArrayLike) -> FloatArray:
    """Oxide area that reaches failure fraction F at a hazard per area h: -ln(1 - F) / h, m^2."""
    with np.errstate(divide="ignore"):
        return np.asarray(
            -np.log1p(-np.asarray(fraction, dtype=float)) / np.asarray(hazard_per_area, dtype=float),
            dtype=np.float64,
        )


def average_fit(fraction: ArrayLike, mission_time_s: ArrayLike) -> FloatArray:
    """Average failure rate over a mission, FIT: F / t[h] * 1e9.

    FIT = failures per 1e9 device-hours (JEDEC JESD85): the fraction F of devices failing over t
    hours gives F / t failures per device-hour on average.
    """
    hours = np.asarray(mission_time_s, dtype=float) / hour
    return np.asarray(np.asarray(fraction, dtype=float) / hours * 1e9, dtype=np.float64)


def time_to_failure(
    fraction: ArrayLike,
    area: ArrayLike,
    voltage: ArrayLike,
    temperature: ArrayLike,
    *,
    eta_ref_s: ArrayLike,
    area_ref: ArrayLike,
    v_ref: ArrayLike,
    t_ref_K: ArrayLike,
    beta: ArrayLike,
    model: VoltageModel,
    exponent: ArrayLike,
    ea_eV: ArrayLike,
    t_ox: ArrayLike | None = None,
) -> FloatArray:
    """Time for ``fraction`` of parts with oxide ``area`` to break down at use conditions, s.

    Parameters
    ----------
    fraction : array_like      cumulative failure fraction, 0 < F < 1 (e.g. 1e-4)
    area : array_like          total stressed oxide area, m^2
    voltage, temperature       use conditions, V and K
    eta_ref_s, area_ref, v_ref, t_ref_K
                               Weibull characteristic life measured on area_ref at v_ref, t_ref
    beta                       Weibull slope
    model, exponent, t_ox      voltage acceleration (``voltage_acceleration``)
    ea_eV                      activation energy, eV

    Notes
    -----
    eta_use = eta_ref (A_ref/A)^(1/beta) AF_V AF_T, t_F = eta_use (-ln(1-F))^(1/beta)
    (JESD92 / JEP122 extrapolation chain).
    """
    eta = use_characteristic_life(
        area, voltage, temperature, eta_ref_s=eta_ref_s, area_ref=area_ref, v_ref=v_ref,
        t_ref_K=t_ref_K, beta=beta, model=model, exponent=exponent, ea_eV=ea_eV, t_ox=t_ox)
    return weibull_percentile(fraction, eta, beta)


def fit_upper_bound(
    failures: ArrayLike,
    devices: ArrayLike,
    test_time_s: ArrayLike,
    confidence: ArrayLike = 0.6,
    acceleration: ArrayLike = 1.0,
) -> FloatArray:
    """Upper confidence bound of a constant failure rate from a life test, in FIT.

    Parameters
    ----------
    failures : array_like      observed failures r (integer >= 0)
    devices : array_like       number of devices N on test
    test_time_s : array_like   test duration t per device, s
    confidence : array_like    confidence level, 0 < CL < 1 (60 % default)
    acceleration : array_like  acceleration factor of the test over use

    Notes
    -----
    lambda = chi2(CL; 2r + 2) / (2 N t AF) * 1e9 h (JESD85). r = 0, 60 %, N t = 1e6 device-hours
    -> 916.29 FIT.
    """
    r = np.asarray(failures, dtype=float)
    q = chi2.ppf(np.asarray(confidence, dtype=float), 2.0 * r + 2.0)
    device_hours = np.asarray(devices, dtype=float) * np.asarray(test_time_s, dtype=float) / hour
    return np.asarray(q / (2.0 * device_hours * np.asarray(acceleration, dtype=float)) * 1e9)


def fit_from_lifetime(eta_s: ArrayLike, beta: ArrayLike, mission_time_s: ArrayLike) -> FloatArray:
    """Average failure rate over a mission, FIT: F(t_mission) / t_mission[h] * 1e9 (Weibull)."""
    t = np.asarray(mission_time_s, dtype=float)
    return np.asarray(weibull_cdf(t, eta_s, beta) / (t / hour) * 1e9, dtype=np.float64)
