"""Leakage of decap cells: gate tunnelling through thin SiO2 (direct tunnelling / Fowler-Nordheim,
WKB with a trapezoidal barrier, per carrier; deck-referenced scaling; temperature law) and the
reverse current of well junctions (BSIM4-style area + perimeter saturation current with its
temperature law). SI: A, A/m^2, A/m, V, m, V/m, K."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import e, gram, h, m_e, nano, pi

from celllab.physics.constants import FloatArray, bandgap_bsim4_eV, thermal_voltage

PHI_B_ECB_EV: float = 3.1
"""Si/SiO2 conduction-band barrier for electron tunnelling, eV (Lee & Hu 2001; BSIM4 default)."""
M_OX_ECB: float = 0.40
"""Effective tunnelling mass in SiO2 for ECB, units of m_0 (Lee & Hu 2001; BSIM4)."""
PHI_B_HVB_EV: float = 4.5
"""Si/SiO2 valence-band barrier for hole tunnelling (HVB), eV (Lee & Hu 2001; BSIM4 PMOS)."""
M_OX_HVB: float = 0.32
"""Effective tunnelling mass in SiO2 for HVB, units of m_0 (Lee & Hu 2001; BSIM4 PMOS)."""
IGT_DEFAULT: float = 2.5
"""Gate-current temperature exponent, (T/T_nom)^IGT (BSIM-CMG default; docs/references.md [73])."""


def schuegraf_coefficients(
    phi_b_eV: ArrayLike = PHI_B_ECB_EV, m_ox_rel: ArrayLike = M_OX_ECB
) -> tuple[FloatArray, FloatArray]:
    """Prefactors A (A/V^2) and B (V/m) of the WKB tunnelling expression.

    Parameters
    ----------
    phi_b_eV : array_like   barrier height, eV
    m_ox_rel : array_like   oxide effective mass / m_0

    Returns
    -------
    (A, B)   A = q^3 m_0 / (8 pi h m_ox q phi_b) in A/V^2, B = 8 pi sqrt(2 m_ox) (q phi_b)^1.5
             / (3 q h) in V/m. phi_b = 3.1 eV, m_ox = 0.4 -> 1.2431e-6 A/V^2, 235.80 MV/cm.

    Notes
    -----
    Lenzlinger & Snow, J. Appl. Phys. 40:278, 1969; Schuegraf, King & Hu, Symp. VLSI Tech. 1992.
    """
    phi = np.asarray(phi_b_eV, dtype=float)
    m_rel = np.asarray(m_ox_rel, dtype=float)
    a = e**2 / (8.0 * pi * h * phi * m_rel)
    b = 8.0 * pi * np.sqrt(2.0 * m_rel * m_e) * (e * phi) ** 1.5 / (3.0 * e * h)
    return a, b


def bsim_tunneling_prefactors(
    phi_b_eV: ArrayLike = PHI_B_ECB_EV, m_ox_rel: ArrayLike = M_OX_ECB
) -> tuple[FloatArray, FloatArray]:
    """Lee-Hu / BSIM4 gate-current constants A = q^2/(8 pi h phi_b), B = 8 pi sqrt(2 q m_ox)
    phi_b^1.5 / (3 h), with m_ox in grams as in the BSIM4 source (B in (g/F s^2)^0.5 units).

    Notes
    -----
    W.-C. Lee & C. Hu, IEEE TED 48(7):1366, 2001; BSIM4 manual gate tunnelling section.
    ECB (3.1 V, 0.40 m_0): A = 4.9724e-7, B = 7.4568e11.
    """
    phi = np.asarray(phi_b_eV, dtype=float)
    m_grams = np.asarray(m_ox_rel, dtype=float) * m_e / gram
    a = e**2 / (8.0 * pi * h * phi)
    b = 8.0 * pi * np.sqrt(2.0 * e * m_grams) * phi**1.5 / (3.0 * h)
    return a, b


def direct_tunneling_current_density(
    v_ox: ArrayLike,
    t_ox: ArrayLike,
    phi_b_eV: ArrayLike = PHI_B_ECB_EV,
    m_ox_rel: ArrayLike = M_OX_ECB,
) -> FloatArray:
    """Tunnelling current density through an SiO2 barrier, A/m^2 (magnitude).

    Parameters
    ----------
    v_ox : array_like      voltage across the oxide, V (sign ignored)
    t_ox : array_like      physical oxide thickness, m, > 0
    phi_b_eV, m_ox_rel     barrier height (eV) and effective mass (m_0)

    Returns
    -------
    ndarray   |J|, A/m^2

    Notes
    -----
    Direct tunnelling (V_ox < phi_b), trapezoidal-barrier WKB (Schuegraf, King & Hu 1992;
    Schuegraf & Hu, IEEE TED 41(5):761, 1994):
    J = A E^2 exp(-B [1 - (1 - V_ox/phi_b)^1.5] / E), E = V_ox / t_ox;
    for V_ox >= phi_b it becomes Fowler-Nordheim J = A E^2 exp(-B/E) (Lenzlinger & Snow 1969).
    Written as exp(-B t_ox g(x) / phi_b), g(x) = [1 - (1-x)^1.5]/x, x = V_ox/phi_b, so V_ox -> 0
    is finite (g -> 1.5). Free-electron prefactor, no image force or band-structure corrections:
    an order-of-magnitude estimate for 1-4 nm SiO2; use ``scaled_leakage_density`` with a
    measured reference for decks.
    """
    v = np.abs(np.asarray(v_ox, dtype=float))
    t = np.asarray(t_ox, dtype=float)
    phi = np.asarray(phi_b_eV, dtype=float)
    a, b = schuegraf_coefficients(phi, m_ox_rel)
    x = v / phi
    with np.errstate(divide="ignore", invalid="ignore"):
        g_dt = -np.expm1(1.5 * np.log1p(-np.minimum(x, 1.0))) / x
    g = np.where(x >= 1.0, 1.0 / np.where(x > 0.0, x, 1.0), np.where(x > 1e-9, g_dt, 1.5))
    field = v / t
    return np.asarray(a * field**2 * np.exp(-b * t * g / phi), dtype=np.float64)


def scaled_leakage_density(
    j_ref: ArrayLike,
    t_ref: ArrayLike,
    v_ref: ArrayLike,
    t_ox: ArrayLike,
    v: ArrayLike,
    decades_per_nm: ArrayLike,
    voltage_exponent: ArrayLike,
) -> FloatArray:
    """Gate leakage density scaled from a deck reference point, A/m^2.

    Parameters
    ----------
    j_ref : array_like            leakage density at (t_ref, v_ref), A/m^2
    t_ref, t_ox : array_like      reference and actual physical thickness, m
    v_ref, v : array_like         reference and actual gate voltage, V (magnitudes used)
    decades_per_nm : array_like   thickness slope, decades of current per nm (about 5: one
                                  decade per 0.2 nm is the common thin-SiO2 figure)
    voltage_exponent : array_like power-law exponent in voltage (about 2-3 near 1 V)

    Returns
    -------
    ndarray   J = j_ref 10^(-decades_per_nm (t_ox - t_ref)/1 nm) (|v|/|v_ref|)^voltage_exponent

    Notes
    -----
    Local exponential-in-thickness, power-in-voltage fit of direct tunnelling (compare
    ``direct_tunneling_current_density``: about 4 decades/nm and J ~ V^2-3 at 2 nm, 1 V).
    Valid within a few tenths of a nm and a few hundred mV of the reference.
    """
    dt_nm = (np.asarray(t_ox, dtype=float) - np.asarray(t_ref, dtype=float)) / nano
    ratio = np.abs(np.asarray(v, dtype=float)) / np.abs(np.asarray(v_ref, dtype=float))
    return np.asarray(
        np.asarray(j_ref, dtype=float)
        * 10.0 ** (-np.asarray(decades_per_nm, dtype=float) * dt_nm)
        * ratio ** np.asarray(voltage_exponent, dtype=float),
        dtype=np.float64,
    )


def tunnelling_temperature_factor(temperature: ArrayLike, t_ref: ArrayLike, exponent: ArrayLike = IGT_DEFAULT) -> FloatArray:
    """Temperature multiplier of a gate tunnelling current, (T / T_ref)^exponent.

    Parameters
    ----------
    temperature, t_ref : array_like   device and reference temperature, K, > 0
    exponent : array_like             unitless (2.5 default)

    Returns
    -------
    ndarray   J(T) / J(T_ref) at equal oxide voltage; 298.15 -> 398.15 K at 2.5: 2.0608

    Notes
    -----
    The law of the BSIM-CMG gate-current model (igtemp = (T/TNOM)^IGT, IGT = 2.5 by default,
    multiplying every gate-tunnelling component; docs/references.md [73]). It stands for the
    thermal spread of the tunnelling carriers; the shift of the surface potential, flat band and
    threshold with temperature acts on top through the oxide voltage. Fitted near room to
    hot-chip temperatures (about 230-420 K).
    """
    ratio = np.asarray(temperature, dtype=float) / np.asarray(t_ref, dtype=float)
    return np.asarray(ratio ** np.asarray(exponent, dtype=float), dtype=np.float64)


def junction_saturation_scale(
    temperature: ArrayLike, t_ref: ArrayLike, xti: ArrayLike = 3.0, emission: ArrayLike = 1.0
) -> FloatArray:
    """Temperature multiplier of a junction saturation current density, BSIM4 form.

    Parameters
    ----------
    temperature, t_ref : array_like   K, > 0
    xti : array_like                  saturation-current temperature exponent (XTIS, 3 default)
    emission : array_like             emission coefficient N (NJS, 1 default)

    Returns
    -------
    ndarray   J(T)/J(T_ref) = exp{[Eg(T_ref)/v_t(T_ref) - Eg(T)/v_t(T) + XTI ln(T/T_ref)] / N}

    Notes
    -----
    BSIM4 junction temperature law (public BSIM4 source; docs/references.md [74]) with BSIM4's
    bandgap fit (``constants.bandgap_bsim4_eV``). 298.15 -> 398.15 K, XTI 3, N 1: 3.067e5;
    -> 358.15 K: 4344. N about 2 describes a generation-dominated reverse current (activation
    near Eg/2).
    """
    t = np.asarray(temperature, dtype=float)
    t0 = np.asarray(t_ref, dtype=float)
    exponent = (bandgap_bsim4_eV(t0) / thermal_voltage(t0) - bandgap_bsim4_eV(t) / thermal_voltage(t)
                + np.asarray(xti, dtype=float) * np.log(t / t0)) / np.asarray(emission, dtype=float)
    return np.asarray(np.exp(exponent), dtype=np.float64)


def junction_reverse_current(
    j_area: ArrayLike,
    j_perimeter: ArrayLike,
    area: ArrayLike,
    perimeter: ArrayLike,
    v_reverse: ArrayLike,
    temperature: ArrayLike,
    t_ref: ArrayLike,
    xti: ArrayLike = 3.0,
    emission: ArrayLike = 1.0,
) -> FloatArray:
    """Reverse current of a junction with area and perimeter saturation densities, A (>= 0).

    Parameters
    ----------
    j_area : array_like        saturation current per area at t_ref, A/m^2
    j_perimeter : array_like   saturation current per perimeter length at t_ref, A/m
    area, perimeter : array_like   junction area (m^2) and perimeter (m)
    v_reverse : array_like     reverse bias, V (>= 0)
    temperature, t_ref : array_like   K
    xti, emission : array_like   temperature exponent and emission coefficient

    Returns
    -------
    ndarray   I = (J_A A + J_P P) s(T) (1 - exp(-V_R / (N v_t))), A

    Notes
    -----
    SPICE/BSIM4 ideal-diode reverse branch (I_s (exp(V/(N v_t)) - 1) at V = -V_R) with the
    saturation current split into area and perimeter parts (JSS, JSWS) and scaled by
    ``junction_saturation_scale``. No breakdown, tunnelling or trap-assisted terms: valid for
    reverse biases well below breakdown. Saturates at I_s for V_R >> N v_t.
    """
    t = np.asarray(temperature, dtype=float)
    i_s = (np.asarray(j_area, dtype=float) * np.asarray(area, dtype=float)
           + np.asarray(j_perimeter, dtype=float) * np.asarray(perimeter, dtype=float))
    n = np.asarray(emission, dtype=float)
    bias = -np.expm1(-np.maximum(np.asarray(v_reverse, dtype=float), 0.0) / (n * thermal_voltage(t)))
    return np.asarray(i_s * junction_saturation_scale(t, t_ref, xti, n) * bias, dtype=np.float64)
