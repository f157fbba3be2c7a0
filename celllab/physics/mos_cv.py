"""MOS capacitor electrostatics: exact surface potential, charges and quasi-static C-V (SI: V, m,
K, m^-3, C/m^2, F/m^2).

Model
-----
Uniformly doped body, Boltzmann statistics, Sze's F-function for the semiconductor charge (both
carrier types), optional poly-gate depletion and an optional charge-centroid (quantum
"dark-space") correction:

    Vg - Vfb = psi_s + V_poly(Q_g) + Q_g / C_ox + V_cen(psi_s),     Q_g = -Q_s(psi_s)

Sign conventions
----------------
* ``psi_s`` is the band bending (body potential at the surface relative to the neutral bulk),
  with its real sign: > 0 depletes/inverts a p-body, < 0 depletes/inverts an n-body.
* ``Q_gate`` is the signed gate charge per area (Q_s = -Q_gate in the classical case); the
  threshold and flat-band voltages are signed gate voltages (PMOS thresholds come out negative).
* An n-body is solved in the mirrored frame of a p-body, psi' = -psi_s, V' = -(Vg - Vfb):
  every equation below is written for the p-body and the results are mapped back. Capacitance and
  charge magnitudes are frame-independent.
* Gate polarity: a gate of the opposite type to the body (n+ poly on p-body, p+ poly on n-body:
  inversion-mode devices) depletes when the body inverts; a gate of the same type (p+ poly over a
  p-well, n+ poly over an n-well: accumulation decaps) depletes when the body accumulates.

The capacitance is quasi-static (low frequency): source/drain or well taps supply the mobile
carriers, as in a decap. Use ``hf_min_capacitance`` only for an isolated MOS capacitor.

Minority carriers: ``minority_carriers=False`` describes a device whose contacts supply majority
carriers only (an accumulation capacitor: n+ gate over an n-well with n+ taps). Driven from flat
band toward inversion its surface cannot invert within any electrical time scale, so it goes into
deep depletion: the minority term of F is dropped and the depletion region keeps widening past
W_max (Nicollian & Brews 1982; Sze & Ng 2007 ch. 4; docs/references.md [25]). Thermal generation
refills an inversion layer only over ms to s; that slow equilibrium is not modelled.
"""

from __future__ import annotations

from typing import Literal, NamedTuple, TypedDict, Unpack

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import e, epsilon_0

from celllab.physics.constants import (
    ELECTRON_AFFINITY_SI_EV,
    EPS_R_POLY,
    EPS_R_SI,
    EPS_R_SIO2,
    FloatArray,
    bandgap_eV,
    intrinsic_density,
    thermal_voltage,
)
from celllab.physics.oxide import centroid_distance

BodyType = Literal["p", "n"]
GateType = Literal["n", "p"]
PolyGate = Literal["n+poly", "p+poly"]

_U_MAX = 500.0  # bracket on |psi_s| in units of kT/q; keeps exp() finite, far beyond any root
_STEP_IN_VT = 4.0e-5  # difference step for explicit functions of psi (about 1 uV at 300 K)
_TOL_IN_VT = 1.0e-11  # root tolerance on psi_s in units of kT/q
_MAX_ITER = 200


class MosOperatingPoint(NamedTuple):
    """Solved MOS state, all broadcast to one shape (see module notes for signs)."""

    psi_s: FloatArray  # surface band bending, V (signed)
    q_gate: FloatArray  # gate charge per area, C/m^2 (signed)
    q_mobile: FloatArray  # |inversion or accumulation charge| per area, C/m^2
    q_depletion: FloatArray  # |ionized-dopant (depletion) charge| per area, C/m^2
    capacitance: FloatArray  # quasi-static dQ_gate/dVg per area, F/m^2


# --------------------------------------------------------------------------------------------
# Bulk quantities


def _body_sign(body_type: BodyType | ArrayLike) -> FloatArray:
    bt = np.asarray(body_type)
    if not np.all(np.isin(bt, ["p", "n"])):
        raise ValueError(f"body_type must be 'p' or 'n', got {body_type!r}")
    return np.where(bt == "p", 1.0, -1.0)


def _n_i(temperature: ArrayLike, n_i: ArrayLike | None) -> FloatArray:
    return intrinsic_density(temperature) if n_i is None else np.asarray(n_i, dtype=float)


def fermi_potential(
    body_doping: ArrayLike, temperature: ArrayLike, *, n_i: ArrayLike | None = None
) -> FloatArray:
    """Bulk Fermi potential magnitude phi_F = (kT/q) ln(N / n_i), V (> 0 for either body type).

    Parameters
    ----------
    body_doping : array_like   net body doping N_A or N_D, m^-3, >> n_i
    temperature : array_like   K
    n_i : array_like, optional intrinsic density, m^-3 (default ``intrinsic_density(T)``)

    Notes
    -----
    Sze & Ng 2007 §4.2 (psi_B). N_A = 1e17 cm^-3, n_i = 1e10 cm^-3, 300 K -> 0.41669 V.
    Non-degenerate body only.
    """
    return thermal_voltage(temperature) * np.log(
        np.asarray(body_doping, dtype=float) / _n_i(temperature, n_i)
    )


def debye_length(
    body_doping: ArrayLike, temperature: ArrayLike, eps_r_si: ArrayLike = EPS_R_SI
) -> FloatArray:
    """Extrinsic Debye length L_D = sqrt(eps_si kT / (q^2 N)), m (Sze & Ng 2007 eq. 4.12)."""
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    return np.asarray(
        np.sqrt(eps_s * thermal_voltage(temperature) / (e * np.asarray(body_doping, dtype=float))),
        dtype=np.float64,
    )


def max_depletion_width(
    body_doping: ArrayLike,
    temperature: ArrayLike,
    *,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Depletion width at the onset of strong inversion, m.

    Notes
    -----
    W_max = sqrt(2 eps_si (2 phi_F) / (q N)) (Sze & Ng 2007 eq. 4.31, depletion approximation).
    N_A = 1e17 cm^-3, n_i = 1e10 cm^-3 -> 0.1038 um.
    """
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    two_phi_f = 2.0 * fermi_potential(body_doping, temperature, n_i=n_i)
    return np.asarray(
        np.sqrt(2.0 * eps_s * two_phi_f / (e * np.asarray(body_doping, dtype=float))),
        dtype=np.float64,
    )


def depletion_capacitance_per_area(
    body_doping: ArrayLike,
    temperature: ArrayLike,
    *,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Channel-to-body depletion capacitance at the onset of strong inversion, F/m^2.

    Notes
    -----
    C_dep = eps_si / W_max (depletion approximation, Sze & Ng 2007 §4.2; W_max from
    `max_depletion_width`). N_A = 1e17 cm^-3, n_i = 1e10 cm^-3 -> 9.98e-4 F/m^2. The smallest
    body capacitance of a depleted channel; valid while the body is not accumulated.
    """
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    return np.asarray(
        eps_s / max_depletion_width(body_doping, temperature, n_i=n_i, eps_r_si=eps_r_si),
        dtype=np.float64,
    )


def junction_capacitance_per_area(
    light_doping: ArrayLike,
    temperature: ArrayLike,
    heavy_doping: ArrayLike = 1e26,
    v_reverse: ArrayLike = 0.0,
    *,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Depletion capacitance of a one-sided abrupt p-n junction (diffusion in a well), F/m^2.

    Parameters
    ----------
    light_doping : array_like   well doping, m^-3
    temperature : array_like    K
    heavy_doping : array_like   source/drain diffusion doping, m^-3 (default 1e20 cm^-3)
    v_reverse : array_like      reverse bias, V (> -V_bi)

    Notes
    -----
    C_j = sqrt(q eps_si N / (2 (V_bi + V_R - 2 kT/q))), V_bi = (kT/q) ln(N N_heavy / n_i^2)
    (one-sided abrupt junction, Sze & Ng 2007 §2.3, eqs. 2.10-2.26 with the majority-carrier
    correction 2 kT/q). N = 1e17, N_heavy = 1e20 cm^-3, n_i = 1e10 cm^-3, 300 K: V_bi = 1.012 V,
    9.30e-4 F/m^2 at 0 V. Valid in the depletion approximation, below forward bias.
    """
    vt = thermal_voltage(temperature)
    ni = _n_i(temperature, n_i)
    light = np.asarray(light_doping, dtype=float)
    v_bi = vt * np.log(light * np.asarray(heavy_doping, dtype=float) / (ni * ni))
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    return np.asarray(
        np.sqrt(e * eps_s * light / (2.0 * (v_bi + np.asarray(v_reverse, dtype=float) - 2.0 * vt))),
        dtype=np.float64,
    )


def threshold_voltage(
    vfb: ArrayLike,
    cox: ArrayLike,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    *,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Long-channel threshold voltage by the 2 phi_F criterion, V (signed; V_SB = 0).

    Notes
    -----
    p-body: V_T = V_FB + 2 phi_F + sqrt(2 eps_si q N_A 2 phi_F) / C_ox; n-body mirrored:
    V_T = V_FB - 2 phi_F - sqrt(2 eps_si q N_D 2 phi_F) / C_ox (Sze & Ng 2007 eq. 4.35).
    Classical charge, uniform doping, metal-like gate (no poly depletion or centroid shift).
    """
    sign = _body_sign(body_type)
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    two_phi_f = 2.0 * fermi_potential(body_doping, temperature, n_i=n_i)
    q_dep = np.sqrt(2.0 * eps_s * e * np.asarray(body_doping, dtype=float) * two_phi_f)
    return np.asarray(
        np.asarray(vfb, dtype=float) + sign * (two_phi_f + q_dep / np.asarray(cox, dtype=float)),
        dtype=np.float64,
    )


def flatband_voltage(
    gate: PolyGate | ArrayLike,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    *,
    oxide_charge: ArrayLike = 0.0,
    cox: ArrayLike | None = None,
    n_i: ArrayLike | None = None,
    eg_eV: ArrayLike | None = None,
    electron_affinity_eV: ArrayLike = ELECTRON_AFFINITY_SI_EV,
) -> FloatArray:
    """Flat-band voltage from the gate-body work-function difference, V.

    Parameters
    ----------
    gate : 'n+poly' | 'p+poly' | array_like
        degenerate poly gate (Fermi level at the band edge), or a metal work function in eV
    body_doping, body_type, temperature : body description (m^-3, 'p'/'n', K)
    oxide_charge : array_like  fixed interface charge Q_f, C/m^2 (positive shifts V_FB down)
    cox : array_like           F/m^2, required when ``oxide_charge`` is non-zero
    n_i : array_like, optional intrinsic density, m^-3
    eg_eV : array_like, optional        bandgap override, eV (default ``bandgap_eV(T)``)
    electron_affinity_eV : array_like   chi_Si, eV (4.05)

    Notes
    -----
    V_FB = phi_ms - Q_f / C_ox with phi_ms = Phi_gate - (chi + Eg/2 +/- phi_F), + for a p-body
    (Sze & Ng 2007 §4.3.1); n+ poly: Phi = chi, p+ poly: Phi = chi + Eg. Hence n+ poly on a
    p-body gives -(Eg/2 + phi_F), n+ poly on an n-well -(Eg/2 - phi_F). Intrinsic level taken at
    midgap.
    """
    sign = _body_sign(body_type)
    eg = bandgap_eV(temperature) if eg_eV is None else np.asarray(eg_eV, dtype=float)
    chi = np.asarray(electron_affinity_eV, dtype=float)
    phi_f = fermi_potential(body_doping, temperature, n_i=n_i)
    if isinstance(gate, str):
        if gate == "n+poly":
            phi_gate = chi + 0.0 * eg
        elif gate == "p+poly":
            phi_gate = chi + eg
        else:
            raise ValueError(
                f"gate must be 'n+poly', 'p+poly' or a work function in eV, got {gate!r}"
            )
    else:
        phi_gate = np.asarray(gate, dtype=float)
    phi_ms = phi_gate - (chi + 0.5 * eg + sign * phi_f)
    q_f = np.asarray(oxide_charge, dtype=float)
    if cox is None:
        if np.any(q_f != 0.0):
            raise ValueError("cox is required when oxide_charge is non-zero")
        return np.asarray(phi_ms, dtype=float)
    return np.asarray(phi_ms - q_f / np.asarray(cox, dtype=float), dtype=np.float64)


def hf_min_capacitance(
    cox: ArrayLike,
    body_doping: ArrayLike,
    temperature: ArrayLike,
    *,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """High-frequency minimum capacitance of an isolated MOS capacitor, F/m^2.

    Notes
    -----
    C_min = C_ox C_d / (C_ox + C_d), C_d = eps_si / W_max (Sze & Ng 2007 eq. 4.43). Not for decaps
    with diffusions or well taps (those follow the quasi-static curve).
    """
    c_d = (
        epsilon_0
        * np.asarray(eps_r_si, dtype=float)
        / max_depletion_width(body_doping, temperature, n_i=n_i, eps_r_si=eps_r_si)
    )
    c_ox = np.asarray(cox, dtype=float)
    return np.asarray(c_ox * c_d / (c_ox + c_d), dtype=np.float64)


# --------------------------------------------------------------------------------------------
# Semiconductor charge as a function of psi_s (p-body frame)


def _charge_scale(body_doping: ArrayLike, vt: ArrayLike, eps_s: ArrayLike) -> FloatArray:
    # sqrt(2) eps_s (kT/q) / L_D = sqrt(2 eps_s q N kT/q)
    return np.asarray(
        np.sqrt(2.0 * np.asarray(eps_s) * e * np.asarray(body_doping, dtype=float) * vt),
        dtype=np.float64,
    )


def _pframe_charges(
    u: FloatArray, ratio: FloatArray, scale: FloatArray, confined: bool = False
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Gate charge (signed), mobile, depletion and confined-accumulation charge for u = psi/Vt.

    F^2 = (e^-u + u - 1) + (n0/p0)(e^u - u - 1) (Sze & Ng 2007 eq. 4.16). The depletion part is
    the majority-carrier term alone (charge-sheet split); inversion charge is the remainder.
    The confined accumulation charge (only computed when asked) excludes the linear
    Debye-screening part sqrt((1 + n0/p0)/2) |u| of F.
    """
    u = np.clip(u, -_U_MAX - 1.0, _U_MAX + 1.0)
    f_maj2 = np.maximum(np.expm1(-u) + u, 0.0)
    f_min2 = ratio * np.maximum(np.expm1(u) - u, 0.0)
    f2 = f_maj2 + f_min2
    f = np.sqrt(f2)
    f_maj = np.sqrt(f_maj2)
    positive = u >= 0.0
    sum_f = f + f_maj
    q_mobile = scale * np.where(positive, f_min2 / np.where(sum_f > 0.0, sum_f, 1.0), f)
    q_dep = scale * np.where(positive, f_maj, 0.0)
    q_gate = np.where(positive, scale * f, -scale * f)
    if confined:
        lin = np.sqrt(0.5 * (1.0 + ratio)) * np.maximum(-u, 0.0)
        excess = np.maximum(f2 - lin * lin, 0.0)
        q_conf = scale * np.where(positive, 0.0, excess / np.where(positive, 1.0, f + lin))
    else:
        q_conf = np.zeros_like(q_gate)
    return q_gate, q_mobile, q_dep, q_conf


def surface_charge_per_area(
    psi_s: ArrayLike,
    *,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Total semiconductor charge per area Q_s(psi_s), C/m^2 (signed; Q_s < 0 when a p-body
    depletes or inverts).

    Notes
    -----
    Q_s = -sign(psi_s) sqrt(2) (eps_s kT / (q L_D)) F(psi_s) (Sze & Ng 2007 eqs. 4.16-4.18),
    exact for uniform doping and Boltzmann statistics; mirrored for an n-body.
    """
    sign = _body_sign(body_type)
    vt = thermal_voltage(temperature)
    n = np.asarray(body_doping, dtype=float)
    ratio = (_n_i(temperature, n_i) / n) ** 2
    scale = _charge_scale(n, vt, epsilon_0 * np.asarray(eps_r_si, dtype=float))
    q_gate, _, _, _ = _pframe_charges(sign * np.asarray(psi_s, dtype=float) / vt, ratio, scale)
    return -sign * q_gate


def semiconductor_capacitance_per_area(
    psi_s: ArrayLike,
    *,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
) -> FloatArray:
    """Low-frequency semiconductor capacitance C_s = |dQ_s/dpsi_s|, F/m^2.

    Notes
    -----
    C_s = (eps_s / (sqrt(2) L_D)) |1 - e^(-u) + (n0/p0)(e^u - 1)| / F, u = q psi_s / kT
    (Sze & Ng 2007 eq. 4.19); the flat-band limit eps_s sqrt(1 + n0/p0) / L_D is used for
    |u| < 1e-6. N_A = 1e17 cm^-3: C_s(0) = 8.0126e-3 F/m^2.
    """
    sign = _body_sign(body_type)
    vt = thermal_voltage(temperature)
    n = np.asarray(body_doping, dtype=float)
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    ratio = (_n_i(temperature, n_i) / n) ** 2
    l_d = debye_length(n, temperature, eps_r_si)
    u = np.clip(sign * np.asarray(psi_s, dtype=float) / vt, -_U_MAX, _U_MAX)
    f = np.sqrt(np.maximum(np.expm1(-u) + u, 0.0) + ratio * np.maximum(np.expm1(u) - u, 0.0))
    g = np.abs(-np.expm1(-u) + ratio * np.expm1(u))
    small = np.abs(u) < 1e-6
    with np.errstate(divide="ignore", invalid="ignore"):
        c = eps_s / (np.sqrt(2.0) * l_d) * g / np.where(small, 1.0, f)
    return np.asarray(np.where(small, eps_s * np.sqrt(1.0 + ratio) / l_d, c), dtype=np.float64)


# --------------------------------------------------------------------------------------------
# Gate equation and its solution


class _Frame(NamedTuple):
    vt: FloatArray
    ratio: FloatArray
    scale: FloatArray
    cox: FloatArray
    eps_s: FloatArray
    poly_coeff: FloatArray  # 1 / (2 q eps_gate N_gate); 0 for a metal gate
    dep_sign: FloatArray  # +1: gate depletes for Q_g' > 0, -1: for Q_g' < 0
    toxp: FloatArray
    has_poly: bool
    centroid: bool


def _frame(
    *,
    cox: ArrayLike,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    gate_doping: ArrayLike | None,
    gate_type: GateType | ArrayLike | None,
    centroid: bool,
    n_i: ArrayLike | None,
    eps_r_si: ArrayLike,
    eps_r_gate: ArrayLike,
    minority_carriers: bool | ArrayLike = True,
) -> tuple[FloatArray, _Frame]:
    sign = _body_sign(body_type)
    vt = thermal_voltage(temperature)
    n = np.asarray(body_doping, dtype=float)
    eps_s = epsilon_0 * np.asarray(eps_r_si, dtype=float)
    # no minority-carrier supply (deep depletion): the minority term of F is absent
    ratio = (_n_i(temperature, n_i) / n) ** 2 * np.where(np.asarray(minority_carriers, dtype=bool), 1.0, 0.0)
    c_ox = np.asarray(cox, dtype=float)
    if gate_doping is None:
        n_gate = np.asarray(np.inf)
    else:
        n_gate = np.asarray(gate_doping, dtype=float)
        n_gate = np.where(n_gate > 0.0, n_gate, np.inf)
    poly_coeff = 1.0 / (2.0 * e * epsilon_0 * np.asarray(eps_r_gate, dtype=float) * n_gate)
    if gate_type is None:
        dep_sign = np.asarray(1.0)
    else:
        gt = np.asarray(gate_type)
        if not np.all(np.isin(gt, ["n", "p"])):
            raise ValueError(f"gate_type must be 'n', 'p' or None, got {gate_type!r}")
        dep_sign = np.where(gt == np.where(sign > 0, "p", "n"), -1.0, 1.0)
    return sign, _Frame(
        vt=vt,
        ratio=ratio,
        scale=_charge_scale(n, vt, eps_s),
        cox=c_ox,
        eps_s=eps_s,
        poly_coeff=poly_coeff,
        dep_sign=dep_sign,
        toxp=EPS_R_SIO2 * epsilon_0 / c_ox,
        has_poly=bool(np.any(poly_coeff > 0.0)),
        centroid=centroid,
    )


def _pframe_state(
    psi: FloatArray, fr: _Frame
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Explicit gate voltage V' = Vg' - Vfb' for a p-frame band bending psi, with the charges."""
    q_gate, q_mob, q_dep, q_conf = _pframe_charges(
        psi / fr.vt, fr.ratio, fr.scale, confined=fr.centroid
    )
    v = psi + q_gate / fr.cox
    if fr.has_poly:
        v = v + np.where(fr.dep_sign * q_gate > 0.0, q_gate * np.abs(q_gate) * fr.poly_coeff, 0.0)
    if fr.centroid:
        # inversion: BSIM4 X_DC with Vgsteff -> Q_inv/C_ox, VTH0-VFB-Phi_s -> Q_dep/C_ox;
        # accumulation (Q_dep = 0 there): same form, applied to the confined charge
        z = centroid_distance(q_mob / fr.cox, q_dep / fr.cox, fr.toxp)
        v = v + np.where(psi >= 0.0, q_mob, -q_conf) * z / fr.eps_s
    return v, q_gate, q_mob, q_dep


def _solve_pframe(v_target: FloatArray, fr: _Frame) -> FloatArray:
    """Vectorized bracketed Newton (bisection fallback) for V'(psi) = v_target.

    V'(psi) = psi + G(psi) with G increasing and exponential at large |psi|; Newton runs on the
    equivalent, nearly linear residual asinh(G/kT) - asinh((v_target - psi)/kT), whose root is
    the same (both sides monotonic), so a few iterations suffice from any start.
    """
    psi_max = _U_MAX * fr.vt
    lo = np.maximum(np.minimum(v_target, 0.0), -psi_max)
    hi = np.minimum(np.maximum(v_target, 0.0), psi_max)
    lo, hi = np.broadcast_arrays(lo, hi)
    lo, hi = lo.astype(float), hi.astype(float)
    h = _STEP_IN_VT * fr.vt
    tol = _TOL_IN_VT * fr.vt
    scale = fr.vt
    x = 0.5 * (lo + hi)
    for _ in range(_MAX_ITER):
        g_x = _pframe_state(x, fr)[0] - x
        g_h = _pframe_state(x + h, fr)[0] - (x + h)
        rest = (v_target - x) / scale
        resid = np.arcsinh(g_x / scale) - np.arcsinh(rest)
        slope = (np.arcsinh(g_h / scale) - np.arcsinh(g_x / scale)) / h + 1.0 / (
            scale * np.sqrt(1.0 + rest * rest)
        )
        above = resid > 0.0
        hi = np.where(above, x, hi)
        lo = np.where(above, lo, x)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            step = resid / slope
        newton = x - step
        bad = ~np.isfinite(newton) | (newton < lo) | (newton > hi)
        x = np.where(bad, 0.5 * (lo + hi), newton)
        if np.all((~bad & (np.abs(step) <= tol)) | (hi - lo <= tol)):
            break
    return np.asarray(x, dtype=float)


def mos_operating_point(
    vg: ArrayLike,
    *,
    vfb: ArrayLike,
    cox: ArrayLike,
    body_doping: ArrayLike,
    body_type: BodyType | ArrayLike,
    temperature: ArrayLike,
    gate_doping: ArrayLike | None = np.inf,
    gate_type: GateType | ArrayLike | None = None,
    centroid: bool = True,
    n_i: ArrayLike | None = None,
    eps_r_si: ArrayLike = EPS_R_SI,
    eps_r_gate: ArrayLike = EPS_R_POLY,
    minority_carriers: bool | ArrayLike = True,
) -> MosOperatingPoint:
    """Solve the MOS gate equation and return surface potential, charges and capacitance.

    Parameters
    ----------
    vg : array_like            gate-to-body voltage, V
    vfb : array_like           flat-band voltage, V (``flatband_voltage``)
    cox : array_like           oxide capacitance per area, F/m^2 (SiO2-equivalent)
    body_doping : array_like   m^-3
    body_type : 'p' | 'n'      body conductivity type (or an array of them)
    temperature : array_like   K
    gate_doping : array_like   poly doping, m^-3; np.inf, 0 or None for a metal gate
    gate_type : 'n' | 'p' | None
        poly type; None means opposite to the body (inversion-mode device)
    centroid : bool            apply the charge-centroid correction (default True)
    n_i : array_like, optional intrinsic density override, m^-3
    eps_r_si, eps_r_gate : relative permittivities of body and poly (11.7)
    minority_carriers : bool or array_like of bool
        True (default): contacts supply minority carriers, the quasi-static curve inverts.
        False: majority-carrier contacts only; beyond flat band toward inversion the surface
        goes into deep depletion (no inversion branch; see module notes)

    Returns
    -------
    MosOperatingPoint   psi_s (V), q_gate, q_mobile, q_depletion (C/m^2), capacitance (F/m^2)

    Notes
    -----
    Gate equation (p-body; n-body mirrored, see module notes):
    Vg - Vfb = psi_s + V_poly + Q_g/C_ox + V_cen with Q_g = -Q_s from Sze's F-function
    (Sze & Ng 2007 §4.2), V_poly = Q_g^2/(2 q eps_gate N_gate) in the depleting polarity
    (Taur & Ning 2009 §2.3) and V_cen = Q_mob X_DC / eps_si, X_DC from the BSIM4 charge-thickness
    form (``oxide.centroid_distance``) with Vgsteff -> |Q_inv|/C_ox, VTH0-VFB-Phi_s ->
    |Q_dep|/C_ox and TOXP -> 3.9 eps_0/C_ox. BSIM4 capMod=2 likewise adds X_DC on top of its
    classical surface-potential term. In accumulation the same thickness is applied to the
    accumulation charge beyond the linear Debye-screening part (which is already spread over L_D),
    so the correction vanishes smoothly at flat band; BSIM4's own accumulation form
    (LDEB exp(ACDE ...)) replaces the classical thickness rather than adding to it and is not
    used.
    The capacitance is dQ_g/dVg taken along the exact solution (ratio of differences of the
    explicit functions Q_g(psi), Vg(psi)). Root: bracketed Newton with bisection fallback,
    |psi| tolerance 1e-11 kT/q. Valid for non-degenerate uniform bodies, |V_poly| < ~1 V.
    """
    sign, fr = _frame(
        cox=cox,
        body_doping=body_doping,
        body_type=body_type,
        temperature=temperature,
        gate_doping=gate_doping,
        gate_type=gate_type,
        centroid=centroid,
        n_i=n_i,
        eps_r_si=eps_r_si,
        eps_r_gate=eps_r_gate,
        minority_carriers=minority_carriers,
    )
    v_target = sign * (np.asarray(vg, dtype=float) - np.asarray(vfb, dtype=float))
    shape = np.broadcast_shapes(np.shape(v_target), *(np.shape(a) for a in fr[:-2]))
    v_target = np.broadcast_to(v_target, shape)
    psi = _solve_pframe(v_target, fr)
    _, q_gate, q_mob, q_dep = _pframe_state(psi, fr)
    h = _STEP_IN_VT * fr.vt
    v_plus, q_plus, _, _ = _pframe_state(psi + h, fr)
    v_minus, q_minus, _, _ = _pframe_state(psi - h, fr)
    capacitance = (q_plus - q_minus) / (v_plus - v_minus)
    return MosOperatingPoint(
        psi_s=np.broadcast_to(sign * psi, shape).astype(float),
        q_gate=np.broadcast_to(sign * q_gate, shape).astype(float),
        q_mobile=np.broadcast_to(q_mob, shape).astype(float),
        q_depletion=np.broadcast_to(q_dep, shape).astype(float),
        capacitance=np.broadcast_to(capacitance, shape).astype(float),
    )


class MosInputs(TypedDict, total=False):
    """Keyword arguments shared by ``mos_operating_point`` and its one-field wrappers."""

    vfb: ArrayLike
    cox: ArrayLike
    body_doping: ArrayLike
    body_type: BodyType | ArrayLike
    temperature: ArrayLike
    gate_doping: ArrayLike | None
    gate_type: GateType | ArrayLike | None
    centroid: bool
    n_i: ArrayLike | None
    eps_r_si: ArrayLike
    eps_r_gate: ArrayLike
    minority_carriers: bool | ArrayLike


def solve_surface_potential(vg: ArrayLike, **inputs: Unpack[MosInputs]) -> FloatArray:
    """Exact surface band bending psi_s(Vg), V (signed). Arguments as ``mos_operating_point``."""
    return mos_operating_point(vg, **inputs).psi_s


def mos_capacitance_per_area(vg: ArrayLike, **inputs: Unpack[MosInputs]) -> FloatArray:
    """Quasi-static gate capacitance per area dQ_gate/dVg, F/m^2: oxide, poly depletion, centroid
    and semiconductor in series, self-consistently. Arguments as ``mos_operating_point``."""
    return mos_operating_point(vg, **inputs).capacitance


def gate_charge_per_area(vg: ArrayLike, **inputs: Unpack[MosInputs]) -> FloatArray:
    """Signed gate charge per area Q_gate(Vg), C/m^2. Arguments as ``mos_operating_point``."""
    return mos_operating_point(vg, **inputs).q_gate


def mobile_charge_per_area(vg: ArrayLike, **inputs: Unpack[MosInputs]) -> FloatArray:
    """Magnitude of the mobile (inversion, or accumulation beyond flat band) charge, C/m^2.

    Notes
    -----
    Inversion: |Q_inv| = |Q_s| - |Q_dep| with Q_dep from the majority-carrier term of F alone
    (charge-sheet split of the exact F-function). Accumulation: the whole |Q_s|. This is the
    charge that carries channel current (``channel.channel_sheet_resistance``). Arguments as
    ``mos_operating_point``.
    """
    return mos_operating_point(vg, **inputs).q_mobile
