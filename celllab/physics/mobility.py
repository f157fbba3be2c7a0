"""Channel mobility and threshold temperature dependence (SI: m^2/(V s), V, V/m, K)."""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import centi, epsilon_0

from celllab.physics.constants import EPS_R_SI, FloatArray

Carrier = Literal["electron", "hole"]

UTE_DEFAULT: float = -1.5
"""BSIM4 default mobility temperature exponent UTE (phonon-limited)."""
KT1_DEFAULT: float = -0.11
"""BSIM4 default threshold temperature coefficient KT1, V."""

# Universal-mobility fit (Chen, Wann, ..., Hu, Solid-State Electron. 39(10):1515, 1996), SI.
# Coefficients recalled from the paper / Hu 2010 text, not re-checked against the source.
_UNIVERSAL = {
    "electron": (540 * centi**2, 0.9e8, 1.85),  # mu_max 540 cm^2/Vs in m^2/Vs, E_crit V/m, exponent
    "hole": (185 * centi**2, 0.45e8, 1.0),
}
_TAKAGI_ETA = {"electron": 0.5, "hole": 1.0 / 3.0}


def temperature_scaled_mobility(
    mu_ref: ArrayLike, temperature: ArrayLike, t_ref: ArrayLike, exponent: ArrayLike = UTE_DEFAULT
) -> FloatArray:
    """Power-law temperature scaling mu(T) = mu(T_ref) (T/T_ref)^UTE, m^2/(V s).

    Notes
    -----
    BSIM4 manual, temperature section (U0 scaled by (T/TNOM)^UTE, UTE = -1.5 default).
    298.15 -> 398.15 K with UTE = -1.5: ratio 0.64801.
    """
    t = np.asarray(temperature, dtype=float) / np.asarray(t_ref, dtype=float)
    return np.asarray(
        np.asarray(mu_ref, dtype=float) * t ** np.asarray(exponent, dtype=float), dtype=np.float64
    )


def effective_mobility(
    mu0: ArrayLike,
    theta: ArrayLike,
    v_ov: ArrayLike,
    temperature: ArrayLike,
    t_ref: ArrayLike,
    exponent: ArrayLike = UTE_DEFAULT,
) -> FloatArray:
    """Effective channel mobility with vertical-field degradation and temperature scaling.

    Parameters
    ----------
    mu0 : array_like          low-field mobility at ``t_ref``, m^2/(V s)
    theta : array_like        mobility degradation coefficient, 1/V
    v_ov : array_like         gate overdrive Vgs - Vt, V (negative values clipped to 0)
    temperature, t_ref : array_like   K
    exponent : array_like     UTE (default -1.5)

    Returns
    -------
    ndarray   mu_eff = mu0 (T/T_ref)^UTE / (1 + theta V_ov), m^2/(V s)

    Notes
    -----
    theta model (Sze & Ng 2007 ch. 6; first-order BSIM mobMod=0 equivalent theta ~ UA/TOXE).
    mu0 = 400 cm^2/Vs, theta = 0.5/V, V_ov = 0.8 V -> 285.7 cm^2/Vs. Strong inversion only.
    """
    overdrive = np.maximum(np.asarray(v_ov, dtype=float), 0.0)
    mu_t = temperature_scaled_mobility(mu0, temperature, t_ref, exponent)
    return np.asarray(mu_t / (1.0 + np.asarray(theta, dtype=float) * overdrive), dtype=np.float64)


def takagi_effective_field(
    q_depletion: ArrayLike,
    q_inversion: ArrayLike,
    carrier: Carrier = "electron",
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Effective transverse field E_eff = (|Q_dep| + eta |Q_inv|) / eps_si, V/m.

    Notes
    -----
    Takagi, Toriumi, Iwase, Tango, IEEE TED 41(12):2357, 1994; eta = 1/2 electrons, 1/3 holes
    on (100) Si.
    """
    eta = _TAKAGI_ETA[carrier]
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    return np.asarray(
        (
            np.abs(np.asarray(q_depletion, dtype=float))
            + eta * np.abs(np.asarray(q_inversion, dtype=float))
        )
        / eps_s,
        dtype=np.float64,
    )


def effective_field_from_voltages(
    v_gs: ArrayLike, v_t: ArrayLike, t_ox: ArrayLike, carrier: Carrier = "electron"
) -> FloatArray:
    """Closed-form effective field for the universal-mobility fit, V/m.

    Notes
    -----
    E_eff ~ (|V_GS| + |V_T|) / (6 T_ox) for electrons and (|V_GS| + 1.5 |V_T|) / (6 T_ox) for
    holes (Chen-Hu fit, recalled form; Hu, *Modern Semiconductor Devices for ICs*, 2010).
    T_ox is the electrical oxide thickness, m.
    """
    factor = 1.0 if carrier == "electron" else 1.5
    return np.asarray(
        (np.abs(np.asarray(v_gs, dtype=float)) + factor * np.abs(np.asarray(v_t, dtype=float)))
        / (6.0 * np.asarray(t_ox, dtype=float)),
        dtype=np.float64,
    )


def universal_mobility(
    e_eff: ArrayLike,
    carrier: Carrier = "electron",
    *,
    mu_max: ArrayLike | None = None,
    e_crit: ArrayLike | None = None,
    exponent: ArrayLike | None = None,
) -> FloatArray:
    """Universal inversion-layer mobility mu = mu_max / (1 + (E_eff/E_crit)^nu), m^2/(V s).

    Parameters
    ----------
    e_eff : array_like   effective field, V/m (``takagi_effective_field``)
    carrier : 'electron' | 'hole'
    mu_max, e_crit, exponent : optional overrides of the fit constants (m^2/Vs, V/m, -)

    Notes
    -----
    Closed-form fit after Chen et al. (Solid-State Electron. 39(10):1515, 1996): electrons
    540 cm^2/Vs, 0.9 MV/cm, nu = 1.85; holes 185 cm^2/Vs, 0.45 MV/cm, nu = 1 (defaults recalled,
    treat as typical values). Room temperature, (100) Si, moderate doping.
    """
    if carrier not in _UNIVERSAL:
        raise ValueError(f"carrier must be 'electron' or 'hole', got {carrier!r}")
    mu_d, e_d, nu_d = _UNIVERSAL[carrier]
    mu_m = np.asarray(mu_d if mu_max is None else mu_max, dtype=float)
    e_c = np.asarray(e_d if e_crit is None else e_crit, dtype=float)
    nu = np.asarray(nu_d if exponent is None else exponent, dtype=float)
    ratio = np.abs(np.asarray(e_eff, dtype=float)) / e_c
    return np.asarray(mu_m / (1.0 + ratio**nu), dtype=np.float64)


def threshold_shift(kt1: ArrayLike, temperature: ArrayLike, t_ref: ArrayLike) -> FloatArray:
    """Threshold-voltage temperature shift dV_T = KT1 (T/T_ref - 1), V.

    Notes
    -----
    BSIM4 manual temperature model, first-order term (KT1 = -0.11 V default; KT1L, KT2 omitted).
    298.15 -> 398.15 K with KT1 = -0.11 V: -36.894 mV. For a PMOS the deck gives the shift of |V_T|
    or a signed KT1 as its convention requires; the function only applies the formula.
    """
    ratio = np.asarray(temperature, dtype=float) / np.asarray(t_ref, dtype=float)
    return np.asarray(np.asarray(kt1, dtype=float) * (ratio - 1.0), dtype=np.float64)
