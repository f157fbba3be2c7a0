"""Channel sheet resistance and small-V_DS on-resistance of an inverted or accumulated MOS
channel (SI: ohm, ohm/sq, m, m^2/(V s), F/m^2, C/m^2, V, s)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray

STRONG_INVERSION_MIN_OVERDRIVE: float = 0.2
"""Overdrive below which the square-law channel formulas are flagged, V (common practice)."""


def channel_sheet_resistance(mu_eff: ArrayLike, q_mobile: ArrayLike) -> FloatArray:
    """Sheet resistance of a mobile-charge layer R_sq = 1 / (mu |Q_mobile|), ohm/sq.

    Parameters
    ----------
    mu_eff : array_like    effective mobility, m^2/(V s), > 0
    q_mobile : array_like  mobile charge per area, C/m^2 (``mos_cv.mobile_charge_per_area``)

    Returns
    -------
    ndarray   ohm per square; np.inf where the mobile charge is zero

    Notes
    -----
    Drift conductance per square sigma = mu Q (Sze & Ng 2007 ch. 6; Tsividis & McAndrew 2011
    ch. 4). Valid for small V_DS, where the channel charge is uniform along the channel.
    """
    g = np.asarray(mu_eff, dtype=float) * np.abs(np.asarray(q_mobile, dtype=float))
    with np.errstate(divide="ignore"):
        return np.where(g > 0.0, 1.0 / np.where(g > 0.0, g, 1.0), np.inf)


def inversion_sheet_resistance(mu_eff: ArrayLike, cox: ArrayLike, v_ov: ArrayLike) -> FloatArray:
    """Square-law inversion sheet resistance R_sq = 1 / (mu C_ox V_ov), ohm/sq.

    Notes
    -----
    Taur & Ning 2009 ch. 3, Sze & Ng 2007 ch. 6 (Q_inv = C_ox V_ov). mu = 300 cm^2/Vs,
    t_ox = 2 nm, V_ov = 0.8 V -> 2413.3 ohm/sq. np.inf for V_ov <= 0; strong inversion only
    (see ``strong_inversion_mask``).
    """
    q = np.asarray(cox, dtype=float) * np.maximum(np.asarray(v_ov, dtype=float), 0.0)
    return channel_sheet_resistance(mu_eff, q)


def triode_on_resistance(
    width: ArrayLike, length: ArrayLike, mu_eff: ArrayLike, cox: ArrayLike, v_ov: ArrayLike
) -> FloatArray:
    """Small-V_DS channel resistance R_ch = L / (W mu C_ox V_ov), ohm.

    Notes
    -----
    From the triode square law I_D = mu C_ox (W/L)[(V_GS - V_T) V_DS - V_DS^2/2] at V_DS -> 0
    (Sze & Ng 2007 ch. 6). W = 10 um, L = 1 um, mu = 300 cm^2/Vs, 2 nm, 0.8 V -> 241.3 ohm.
    np.inf for V_ov <= 0.
    """
    squares = np.asarray(length, dtype=float) / np.asarray(width, dtype=float)
    return np.asarray(squares * inversion_sheet_resistance(mu_eff, cox, v_ov), dtype=np.float64)


def channel_rc_time_constant(length: ArrayLike, mu_eff: ArrayLike, v_ov: ArrayLike) -> FloatArray:
    """Intrinsic channel time constant tau = R_ch C_gate = L^2 / (mu V_ov), s.

    Notes
    -----
    Independent of W and C_ox (Tsividis & McAndrew 2011 ch. 8 scaling). L = 1 um,
    mu = 300 cm^2/Vs, V_ov = 0.8 V -> 41.7 ps. np.inf for V_ov <= 0.
    """
    v = np.maximum(np.asarray(v_ov, dtype=float), 0.0)
    denom = np.asarray(mu_eff, dtype=float) * v
    length_sq = np.asarray(length, dtype=float) ** 2
    with np.errstate(divide="ignore"):
        return np.where(denom > 0.0, length_sq / np.where(denom > 0.0, denom, 1.0), np.inf)


def strong_inversion_mask(
    v_ov: ArrayLike, min_overdrive: ArrayLike = STRONG_INVERSION_MIN_OVERDRIVE
) -> NDArray[np.bool_]:
    """True where V_ov >= min_overdrive (0.2 V default), i.e. where the square-law channel
    formulas apply; weak/moderate inversion elsewhere (common practice threshold)."""
    return np.asarray(v_ov, dtype=float) >= np.asarray(min_overdrive, dtype=float)
