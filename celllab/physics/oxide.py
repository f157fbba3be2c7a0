"""Gate-dielectric capacitance, EOT/CET, poly-gate depletion and inversion-charge centroid (SI:
m, F/m^2, V, C/m^2, m^-3)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import e, epsilon_0, nano

from celllab.physics.constants import EPS_R_POLY, EPS_R_SI, EPS_R_SIO2, FloatArray

CENTROID_MAX: float = 1.9 * nano
"""Zero-field inversion charge thickness of the BSIM4 charge-thickness model, m."""
CENTROID_FIELD_SCALE: float = 2.0e8
"""Denominator scale of the BSIM4 X_DC argument, V/m (the 2e8*TOXP in the manual)."""


def oxide_capacitance_per_area(eps_r: ArrayLike, t_ox: ArrayLike) -> FloatArray:
    """Parallel-plate gate-oxide capacitance per unit area.

    Parameters
    ----------
    eps_r : array_like   relative permittivity of the dielectric (unitless)
    t_ox : array_like    physical thickness, m, > 0

    Returns
    -------
    ndarray   C_ox, F/m^2 (2 nm SiO2: 1.72657e-2 F/m^2 = 17.266 fF/um^2)

    Notes
    -----
    C_ox = epsilon_0 eps_r / t_ox (Sze & Ng 2007 §4.2). Uniform dielectric, no fringing.
    """
    return np.asarray(
        epsilon_0 * np.asarray(eps_r, dtype=float) / np.asarray(t_ox, dtype=float), dtype=np.float64
    )


def equivalent_oxide_thickness(
    thicknesses: ArrayLike, eps_rs: ArrayLike, axis: int = -1
) -> FloatArray:
    """Equivalent SiO2 thickness of a dielectric stack.

    Parameters
    ----------
    thicknesses : array_like   layer thicknesses, m, stacked along ``axis``
    eps_rs : array_like        layer relative permittivities, same shape (broadcast)
    axis : int                 the layer axis (default last)

    Returns
    -------
    ndarray   EOT, m

    Notes
    -----
    EOT = sum_i t_i * 3.9 / k_i (series plates; Taur & Ning 2009 §2.3, high-k discussions).
    0.5 nm SiO2 + 2 nm k=20 -> 0.89 nm.
    """
    t = np.asarray(thicknesses, dtype=float)
    k_r = np.asarray(eps_rs, dtype=float)
    return np.asarray(np.sum(t * (EPS_R_SIO2 / k_r), axis=axis), dtype=np.float64)


def capacitance_equivalent_thickness(capacitance_per_area: ArrayLike) -> FloatArray:
    """Capacitance-equivalent thickness (CET, T_inv) of a measured or modelled capacitance.

    Parameters
    ----------
    capacitance_per_area : array_like   F/m^2, > 0

    Returns
    -------
    ndarray   CET = 3.9 epsilon_0 / C, m (Taur & Ning 2009 §2.4)
    """
    return np.asarray(
        EPS_R_SIO2 * epsilon_0 / np.asarray(capacitance_per_area, dtype=float), dtype=np.float64
    )


def series_capacitance(*capacitances: ArrayLike) -> FloatArray:
    """Series combination 1/C = sum 1/C_i (any consistent unit; np.inf terms drop out)."""
    inverse = sum(1.0 / np.asarray(c, dtype=float) for c in capacitances)
    return 1.0 / np.asarray(inverse, dtype=float)


def centroid_distance(
    v_gsteff: ArrayLike,
    v_depletion: ArrayLike,
    toxp: ArrayLike,
    ados: ArrayLike = 1.0,
    bdos: ArrayLike = 1.0,
) -> FloatArray:
    """Inversion-charge centroid depth below the interface, BSIM4 charge-thickness form.

    Parameters
    ----------
    v_gsteff : array_like     effective gate overdrive, V, >= 0 (BSIM4 Vgsteff; with the charge
                              picture here, |Q_inv| / C_ox)
    v_depletion : array_like  VTH0 - VFB - Phi_s, V, >= 0 (the depletion-charge voltage
                              |Q_dep| / C_ox)
    toxp : array_like         physical (SiO2-equivalent) oxide thickness, m, > 0
    ados, bdos : array_like   BSIM4 ADOS/BDOS scale factors (default 1)

    Returns
    -------
    ndarray   X_DC, m (TOXP = 2 nm, numerator 2.2 V -> 0.4421 nm)

    Notes
    -----
    X_DC = ADOS * 1.9 nm / (1 + ((Vgsteff + 4 (VTH0 - VFB - Phi_s)) / (2e8 TOXP))^(0.7 BDOS))
    (BSIM4 manual, charge-thickness capacitance model capMod=2; same form as BSIM3v3 capMod=3).
    The correction capacitance is C_cen = eps_si / X_DC in series with C_ox. An empirical fit to
    self-consistent Schroedinger-Poisson results for SiO2 gates, about 1-3 nm; negative
    arguments are clipped to zero.
    """
    arg = np.maximum(np.asarray(v_gsteff, dtype=float), 0.0) + 4.0 * np.maximum(
        np.asarray(v_depletion, dtype=float), 0.0
    )
    x = arg / (CENTROID_FIELD_SCALE * np.asarray(toxp, dtype=float))
    return np.asarray(
        np.asarray(ados, dtype=float)
        * CENTROID_MAX
        / (1.0 + x ** (0.7 * np.asarray(bdos, dtype=float))),
        dtype=np.float64,
    )


def centroid_capacitance_per_area(x_dc: ArrayLike, eps_r_si: ArrayLike = EPS_R_SI) -> FloatArray:
    """Charge-centroid capacitance C_cen = eps_si / X_DC, F/m^2 (BSIM4 manual, capMod=2)."""
    return np.asarray(
        epsilon_0 * np.asarray(eps_r_si, dtype=float) / np.asarray(x_dc, dtype=float),
        dtype=np.float64,
    )


def poly_depletion_width(q_gate: ArrayLike, gate_doping: ArrayLike) -> FloatArray:
    """Depletion width in a poly gate carrying sheet charge ``q_gate``.

    Parameters
    ----------
    q_gate : array_like       gate charge per area, C/m^2 (magnitude used)
    gate_doping : array_like  active poly doping, m^-3 (np.inf: metal gate -> 0)

    Returns
    -------
    ndarray   W_p = |Q_gate| / (q N_gate), m (depletion approximation; Taur & Ning 2009 §2.3)
    """
    return np.asarray(
        np.abs(np.asarray(q_gate, dtype=float)) / (e * np.asarray(gate_doping, dtype=float)),
        dtype=np.float64,
    )


def poly_depletion_voltage(
    q_gate: ArrayLike, gate_doping: ArrayLike, eps_r_gate: ArrayLike = EPS_R_POLY
) -> FloatArray:
    """Potential drop across the depleted poly gate, V (magnitude).

    Notes
    -----
    V_poly = Q_gate^2 / (2 q eps_gate N_gate) (depletion approximation, uniform doping; the same
    relation underlies the BSIM4 NGATE model). Valid while V_poly stays below about 1 V, i.e.
    before the poly surface inverts. Metal gate (N_gate = inf) -> 0.
    """
    q = np.asarray(q_gate, dtype=float)
    eps_g = epsilon_0 * np.asarray(eps_r_gate, dtype=float)
    return np.asarray(
        q * q / (2.0 * e * eps_g * np.asarray(gate_doping, dtype=float)), dtype=np.float64
    )


def poly_depletion_capacitance(
    q_gate: ArrayLike, gate_doping: ArrayLike, eps_r_gate: ArrayLike = EPS_R_POLY
) -> FloatArray:
    """Small-signal capacitance of the depleted poly layer, F/m^2.

    Parameters
    ----------
    q_gate : array_like       gate charge per area, C/m^2 (in the depleting polarity)
    gate_doping : array_like  m^-3; np.inf for a metal gate (-> C_poly = inf)
    eps_r_gate : array_like   relative permittivity of the gate (default 11.7)

    Returns
    -------
    ndarray   C_poly = eps_gate / W_p = eps_gate q N_gate / |Q_gate| (Taur & Ning 2009 §2.3);
              np.inf where Q_gate = 0 or the gate is metal.
    """
    q = np.abs(np.asarray(q_gate, dtype=float))
    n_g = np.asarray(gate_doping, dtype=float)
    eps_g = epsilon_0 * np.asarray(eps_r_gate, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = eps_g * e * n_g / q
    return np.where(np.isinf(n_g) | (q == 0.0), np.inf, c)


def oxide_field(v_ox: ArrayLike, t_ox: ArrayLike) -> FloatArray:
    """Uniform oxide field E_ox = V_ox / t_ox, V/m (sign of ``v_ox`` kept)."""
    return np.asarray(
        np.asarray(v_ox, dtype=float) / np.asarray(t_ox, dtype=float), dtype=np.float64
    )
