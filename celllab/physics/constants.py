"""Material constants and temperature-dependent silicon quantities (SI: m, K, V, m^-3).

Fundamental constants come from ``scipy.constants``; only material inputs that SciPy does not
carry are defined here, each with its source. They are module-level defaults: every function that
uses one accepts an override.
"""

from __future__ import annotations

from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.constants import centi, e, k

FloatArray = NDArray[np.float64]

EPS_R_SIO2: Final[float] = 3.9
"""Relative permittivity of thermal SiO2 (Sze & Ng 2007, appendix; the EOT reference value)."""

EPS_R_SI: Final[float] = 11.7
"""Relative permittivity of silicon. Documented choice: 11.7 is the value used in the BSIM4
manual (EPSRSUB default) and by Taur & Ning 2009; Sze & Ng 2007 tabulates 11.9. Pass
``eps_r_si=11.9`` where a textbook example uses it."""

N_I_300K: Final[float] = 9.65e9 * (1 / centi) ** 3
"""Intrinsic carrier density of Si at 300 K, m^-3 (9.65e9 cm^-3; Altermatt et al., J. Appl.
Phys. 93, 1598, 2003; also used by Sze & Ng 2007)."""

T_N_I_REF: Final[float] = 300.0
"""Temperature at which ``N_I_300K`` is given, K."""

VARSHNI_EG0_EV: Final[float] = 1.17
VARSHNI_ALPHA_EV_PER_K: Final[float] = 4.73e-4
VARSHNI_BETA_K: Final[float] = 636.0
"""Varshni coefficients for the Si bandgap (Thurmond 1975, quoted in Sze & Ng 2007 ch. 1):
Eg(T) = 1.17 - 4.73e-4 T^2 / (T + 636) eV."""

ELECTRON_AFFINITY_SI_EV: Final[float] = 4.05
"""Electron affinity of Si, eV (Sze & Ng 2007, appendix); used only for metal-gate work
functions."""

EPS_R_POLY: Final[float] = EPS_R_SI
"""Relative permittivity of a polysilicon gate (taken equal to silicon, as BSIM4's EPSRGATE)."""


def bandgap_eV(temperature: ArrayLike) -> FloatArray:
    """Silicon bandgap versus temperature.

    Parameters
    ----------
    temperature : array_like   lattice temperature, K, > 0

    Returns
    -------
    ndarray   Eg, eV

    Notes
    -----
    Varshni form Eg(T) = Eg0 - alpha T^2 / (T + beta) with the coefficients above (Thurmond 1975,
    in Sze & Ng 2007). Eg(300 K) = 1.1245 eV. Fitted for roughly 0-600 K.
    """
    t = np.asarray(temperature, dtype=float)
    return np.asarray(
        VARSHNI_EG0_EV - VARSHNI_ALPHA_EV_PER_K * t * t / (t + VARSHNI_BETA_K), dtype=np.float64
    )


BSIM4_EG0_EV: Final[float] = 1.16
BSIM4_EG_ALPHA_EV_PER_K: Final[float] = 7.02e-4
BSIM4_EG_BETA_K: Final[float] = 1108.0
"""BSIM4's own bandgap fit, Eg(T) = 1.16 - 7.02e-4 T^2 / (T + 1108) eV (public BSIM4 source;
docs/references.md [3]); used where a BSIM4 temperature law is reproduced (junction leakage)."""


def bandgap_bsim4_eV(temperature: ArrayLike) -> FloatArray:
    """Silicon bandgap of BSIM4's temperature laws, eV.

    Parameters
    ----------
    temperature : array_like   K, > 0

    Returns
    -------
    ndarray   Eg = 1.16 - 7.02e-4 T^2 / (T + 1108), eV (docs/references.md [3]: 1.1156 eV at
              298.15 K, 1.0861 eV at 398.15 K)
    """
    t = np.asarray(temperature, dtype=float)
    return np.asarray(
        BSIM4_EG0_EV - BSIM4_EG_ALPHA_EV_PER_K * t * t / (t + BSIM4_EG_BETA_K), dtype=np.float64
    )


def thermal_voltage(temperature: ArrayLike) -> FloatArray:
    """Thermal voltage kT/q.

    Parameters
    ----------
    temperature : array_like   K, > 0

    Returns
    -------
    ndarray   V (25.852 mV at 300 K)
    """
    return np.asarray(k * np.asarray(temperature, dtype=float) / e, dtype=np.float64)


def intrinsic_density(temperature: ArrayLike, n_i_ref: ArrayLike = N_I_300K) -> FloatArray:
    """Intrinsic carrier density of silicon.

    Parameters
    ----------
    temperature : array_like   K, > 0
    n_i_ref : array_like       n_i at 300 K, m^-3 (default 9.65e15 m^-3)

    Returns
    -------
    ndarray   n_i, m^-3

    Notes
    -----
    n_i(T) = n_i(300 K) (T/300)^1.5 exp[Eg(300)/(2 k 300) - Eg(T)/(2 k T)], i.e. the
    n_i ~ T^1.5 exp(-Eg/2kT) law (Sze & Ng 2007 eq. 1.22 with temperature-independent effective
    masses) anchored at the 300 K value, with the Varshni bandgap. Valid roughly 200-500 K.
    """
    t = np.asarray(temperature, dtype=float)
    eg_over_kt = bandgap_eV(t) / thermal_voltage(t)
    eg_over_kt_ref = bandgap_eV(T_N_I_REF) / thermal_voltage(T_N_I_REF)
    return (
        np.asarray(n_i_ref, dtype=float)
        * (t / T_N_I_REF) ** 1.5
        * np.exp(0.5 * (eg_over_kt_ref - eg_over_kt))
    )
