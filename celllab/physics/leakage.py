"""Gate tunnelling leakage through thin SiO2: direct tunnelling / Fowler-Nordheim (WKB,
trapezoidal barrier) and deck-referenced scaling (SI: A/m^2, V, m, V/m)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import e, gram, h, m_e, nano, pi

from celllab.physics.constants import FloatArray

PHI_B_ECB_EV: float = 3.1
"""Si/SiO2 conduction-band barrier for electron tunnelling, eV (Lee & Hu 2001; BSIM4 default)."""
M_OX_ECB: float = 0.40
"""Effective tunnelling mass in SiO2 for ECB, units of m_0 (Lee & Hu 2001; BSIM4)."""


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
