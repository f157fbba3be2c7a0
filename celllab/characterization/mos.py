"""MOS decap devices under a deck at every corner: bias, C-V, channel, gate and leakage terms.

All arrays are (n_variant, n_corner) unless stated; C-V curves add a trailing bias axis. SI units.

Device roles (how a topology uses a MOS device):

=================  ======  =====  ===============  ==========  ============
role               body    gate   parameters       bias V_GB   mode
=================  ======  =====  ===============  ==========  ============
nmos (inversion)   p-well  n      oxide.nmos       +V_supply   inversion
pmos (inversion)   n-well  p      oxide.pmos       -V_supply   inversion
acc_n              n-well  n      oxide.nmos (e-)  +V_supply   accumulation
acc_p              p-well  p      oxide.pmos (h+)  -V_supply   accumulation
=================  ======  =====  ===============  ==========  ============

``acc_p`` assumes an isolated p-well (deep n-well) tied to VDD with the p+ gate on VSS.
Accumulation devices have majority-carrier contacts only (well taps of the body's type): their
C-V curve goes into deep depletion beyond flat band toward inversion, with no quasi-static
inversion branch (``mos_cv.mos_operating_point(minority_carriers=False)``).
Inversion devices take their flat-band voltage from the deck's threshold (inverting the 2 phi_F
relation, Sze & Ng 2007 eq. 4.35) unless the deck gives ``vfb_V``; accumulation devices take it
from the gate/body work-function difference.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.constants import epsilon_0

from celllab.characterization.params import CornerSet
from celllab.physics import channel, distributed_rc, mobility, mos_cv, oxide
from celllab.physics.constants import EPS_R_SIO2
from celllab.units import to_si

ROLES = ("nmos", "pmos", "acc_n", "acc_p")
_BODY = {"nmos": "p", "pmos": "n", "acc_n": "n", "acc_p": "p"}
_GATE = {"nmos": "n", "pmos": "p", "acc_n": "n", "acc_p": "p"}
_PARAMS = {"nmos": "nmos", "pmos": "pmos", "acc_n": "nmos", "acc_p": "pmos"}
_BIAS_SIGN = {"nmos": 1.0, "pmos": -1.0, "acc_n": 1.0, "acc_p": -1.0}
N_BIAS = 61
CV_SPAN = 1.5          # C-V sweep spans +/- 1.5 x the supply
STRONG_INVERSION_V = 0.2
#: Validity flags: a dielectric thinner than this (m), a body doped above this (m^-3).
THIN_DIELECTRIC_M = to_si(1.0, "nm")
DEGENERATE_DOPING_M3 = to_si(1e19, "cm^-3")


@dataclass
class MosGeometry:
    """Per-variant geometry (n_variant, 1), SI."""

    gate_length: np.ndarray
    gate_width_row: np.ndarray      # per finger per row
    rows: np.ndarray
    fingers: np.ndarray
    strips: np.ndarray              # contacted diffusion strips per row
    contacted_ends: np.ndarray      # 1 or 2
    gate_contacted_ends: np.ndarray

    @property
    def gate_area(self) -> np.ndarray:
        return self.gate_length * self.gate_width_row * self.rows * self.fingers

    @property
    def total_width(self) -> np.ndarray:
        """Channel width of all fingers and rows in parallel, m."""
        return self.gate_width_row * self.rows * self.fingers


@dataclass
class MosResult:
    """Everything the engine needs from one MOS device per variant x corner (SI)."""

    c_gate: np.ndarray              # quasi-static gate capacitance at bias (intrinsic), F
    c_overlap: np.ndarray           # overlap + fringe to the diffusions, F
    c_ox_plain: np.ndarray          # eps/t x area, F
    r_channel: np.ndarray           # total channel line resistance (all fingers parallel), ohm
    r_gate: np.ndarray              # effective distributed gate resistance, ohm
    r_access: np.ndarray            # contacts, ohm
    r_sheet: np.ndarray             # channel sheet resistance, ohm/sq
    v_ov: np.ndarray                # effective overdrive |Q_mobile|/C_ox, V
    v_ox: np.ndarray                # voltage across the dielectric, V
    v_gb: np.ndarray                # signed gate-to-body operating bias, V
    cv_bias: np.ndarray             # (n_v, n_c, n_bias) signed V_GB
    cv_cap: np.ndarray              # (n_v, n_c, n_bias) F (intrinsic + overlap)
    mu_eff: np.ndarray
    cox: np.ndarray                 # F/m^2 (SiO2-equivalent)
    flags: list[list[list[str]]] = field(default_factory=list)   # [variant][corner] -> flags


def _role_table(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, attr: str) -> np.ndarray:
    devices = np.array([_PARAMS[r] for r in roles])
    return corners.device_table(oxides, devices, attr)


def _per_role(roles: np.ndarray, mapping: dict[str, object]) -> np.ndarray:
    return np.array([mapping[r] for r in roles])[:, None]


def _flatband(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, cox: np.ndarray,
              body_doping: np.ndarray, temperature: np.ndarray) -> np.ndarray:
    body = _per_role(roles, _BODY)
    vth_ref = _role_table(corners, oxides, roles, "vth_V")
    kt1 = _role_table(corners, oxides, roles, "vth_temp_coeff_V")
    polarity = np.where(body == "p", 1.0, -1.0)       # |Vt| moves by KT1 (T/Tref - 1)
    vth = vth_ref + polarity * mobility.threshold_shift(kt1, temperature, corners.reference_temperature_K)
    # inversion: Vfb = Vt - (Vt - Vfb)_classical
    vfb_inv = vth - mos_cv.threshold_voltage(0.0, cox, body_doping, body, temperature)
    vfb_given = _role_table(corners, oxides, roles, "vfb_V")
    vfb_inv = np.where(np.isnan(vfb_given), vfb_inv, vfb_given)
    # accumulation: work-function difference
    metal = corners.oxide_table("gate_doping_cm3", oxides)  # NaN for metal gates
    wf_n = corners.oxide_table("nmos_gate_workfunction_eV", oxides)
    wf_p = corners.oxide_table("pmos_gate_workfunction_eV", oxides)
    gate = _per_role(roles, _GATE)
    wf = np.where(gate == "n", wf_n, wf_p)
    vfb_npoly = mos_cv.flatband_voltage("n+poly", body_doping, body, temperature)
    vfb_ppoly = mos_cv.flatband_voltage("p+poly", body_doping, body, temperature)
    vfb_poly = np.where(gate == "n", vfb_npoly, vfb_ppoly)
    is_metal = np.isnan(metal)
    vfb_metal = mos_cv.flatband_voltage(np.where(np.isnan(wf), 4.6, wf), body_doping, body, temperature)
    vfb_acc = np.where(is_metal, vfb_metal, vfb_poly)
    accumulation = np.char.startswith(roles.astype(str), "acc")[:, None]
    return np.where(accumulation, vfb_acc, vfb_inv)


def characterize_mos(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, geo: MosGeometry,
                     supply: np.ndarray) -> MosResult:
    """Characterize one MOS device per variant at every corner.

    ``oxides`` and ``roles`` are (n_variant,) string arrays; ``supply`` is (n_variant, n_corner) V.
    The per-area electrostatics depend only on (oxide, role, bias), so they are solved once per
    distinct combination and scattered back to the variants.
    """
    supply = np.broadcast_to(np.asarray(supply, dtype=float), (len(oxides), len(corners.names)))
    _, ox_code = np.unique(np.asarray(oxides, dtype=str), return_inverse=True)
    _, role_code = np.unique(np.asarray(roles, dtype=str), return_inverse=True)
    rows = np.column_stack([ox_code.reshape(-1), role_code.reshape(-1), supply])
    _, first, inverse = np.unique(rows, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    per_area = _per_area(corners, oxides[first], roles[first], supply[first])
    return _assemble(corners, oxides, roles, geo, supply, {k: v[inverse] for k, v in per_area.items()})


def _operating_point(vg: np.ndarray, kwargs: dict, centroid: np.ndarray) -> mos_cv.MosOperatingPoint:  # type: ignore[type-arg]
    """``mos_operating_point`` with the centroid correction switched per element."""
    on = mos_cv.mos_operating_point(vg, **kwargs, centroid=True)
    if np.all(centroid):
        return on
    off = mos_cv.mos_operating_point(vg, **kwargs, centroid=False)
    return mos_cv.MosOperatingPoint(*(np.where(centroid, a, b) for a, b in zip(on, off)))


def _per_area(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, supply: np.ndarray) -> dict[str, np.ndarray]:
    """Bias-dependent per-area quantities for distinct (oxide, role, supply) rows."""
    temperature = corners.temperature_K[None, :]
    eot = corners.oxide_table("eot_m", oxides)
    t_phys = corners.oxide_table("physical_thickness_m", oxides)
    cox = oxide.oxide_capacitance_per_area(EPS_R_SIO2, eot)
    body = _per_role(roles, _BODY)
    gate_type = _per_role(roles, _GATE)
    doping_p = corners.deck_value(lambda d: d.wells.pwell_doping_cm3)
    doping_n = corners.deck_value(lambda d: d.wells.nwell_doping_cm3)
    body_doping = to_si(np.where(body == "p", doping_p, doping_n), "cm^-3")
    gate_doping_cm3 = corners.oxide_table("gate_doping_cm3", oxides)
    gate_doping = np.where(np.isnan(gate_doping_cm3), np.inf, to_si(np.nan_to_num(gate_doping_cm3, nan=1.0), "cm^-3"))
    centroid = corners.oxide_table("centroid_model", oxides) > 0.5   # per oxide flavour
    cet_adder = corners.oxide_table("cet_adder_nm", oxides)
    use_adder = ~np.isnan(cet_adder)
    vfb = _flatband(corners, oxides, roles, cox, body_doping, temperature)

    sign = _per_role(roles, _BIAS_SIGN).astype(float)
    v_gb = sign * supply
    # accumulation capacitors have majority-carrier contacts only: deep depletion past flat band
    minority = ~np.char.startswith(roles.astype(str), "acc")[:, None]
    kwargs = dict(vfb=vfb, cox=cox, body_doping=body_doping, body_type=body, temperature=temperature,
                  gate_doping=gate_doping, gate_type=gate_type, minority_carriers=minority)
    op = _operating_point(v_gb, kwargs, centroid & ~use_adder)
    c_area = op.capacitance
    if np.any(use_adder):  # a fixed CET adder (SiO2-equivalent nm) replaces the centroid model
        c_adder = EPS_R_SIO2 * epsilon_0 / np.where(use_adder, to_si(cet_adder, "nm"), 1.0)
        c_area = np.where(use_adder, 1.0 / (1.0 / op.capacitance + 1.0 / c_adder), c_area)

    frac = np.linspace(-CV_SPAN, CV_SPAN, N_BIAS)
    cv_bias = (np.abs(supply)[..., None] * frac)  # signed V_GB sweep around zero
    cv_op = _operating_point(cv_bias, {k: (np.asarray(v)[..., None] if isinstance(v, np.ndarray) else v)
                                       for k, v in kwargs.items()}, (centroid & ~use_adder)[..., None])
    cv_area = cv_op.capacitance
    if np.any(use_adder):
        cv_area = np.where(use_adder[..., None], 1.0 / (1.0 / cv_area + 1.0 / c_adder[..., None]), cv_area)
    v_ov = op.q_mobile / cox
    mu0 = to_si(_role_table(corners, oxides, roles, "mu0_cm2_per_Vs"), "cm^2/(V s)")
    theta = _role_table(corners, oxides, roles, "theta_per_V")
    ute = _role_table(corners, oxides, roles, "mobility_temp_exponent")
    mu_eff = mobility.effective_mobility(mu0, theta, v_ov, temperature, corners.reference_temperature_K, ute)
    q_floor = np.maximum(op.q_mobile, 1e-12)
    return {"c_area": c_area, "cv_bias": cv_bias, "cv_area": cv_area, "v_ov": v_ov, "mu_eff": mu_eff,
            "r_sheet": channel.channel_sheet_resistance(mu_eff, q_floor), "v_ox": np.abs(op.q_gate) / cox,
            "v_gb": v_gb, "cox": np.broadcast_to(cox, v_gb.shape), "t_phys": np.broadcast_to(t_phys, v_gb.shape),
            "body_doping": np.broadcast_to(body_doping, v_gb.shape)}


def _assemble(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, geo: MosGeometry, supply: np.ndarray,
              pa: dict[str, np.ndarray]) -> MosResult:
    """Scale per-area quantities by each variant's geometry."""
    c_area, cv_bias, cv_area, v_ov, mu_eff = pa["c_area"], pa["cv_bias"], pa["cv_area"], pa["v_ov"], pa["mu_eff"]
    r_sheet, v_ox, v_gb, cox = pa["r_sheet"], pa["v_ox"], pa["v_gb"], pa["cox"]
    t_phys, body_doping = pa["t_phys"], pa["body_doping"]
    area = geo.gate_area
    c_gate = c_area * area
    c_overlap = to_si(corners.oxide_table("overlap_cap_fF_per_um", oxides), "fF/um") \
        * 2 * geo.gate_width_row * geo.rows * geo.fingers
    c_ox_plain = oxide.oxide_capacitance_per_area(corners.oxide_table("eps_r", oxides),
                                                  corners.oxide_table("physical_thickness_m", oxides)) * area

    r_channel = r_sheet * geo.gate_length / geo.total_width

    r_gate_sheet = corners.deck_value(lambda d: d.resistances.gate_sheet_ohm_per_sq)
    r_gate = np.where(
        geo.gate_contacted_ends == 2,
        distributed_rc.gate_resistance(r_gate_sheet, geo.gate_width_row, geo.gate_length, geo.fingers * geo.rows, ends=2),
        distributed_rc.gate_resistance(r_gate_sheet, geo.gate_width_row, geo.gate_length, geo.fingers * geo.rows, ends=1),
    )
    contact = corners.deck_value(lambda d: d.resistances.contact_ohm)
    pitch = to_si(corners.deck_value(lambda d: d.resistances.contact_pitch_um), "um")
    per_strip = np.maximum(1.0, np.floor(geo.gate_width_row / pitch))
    r_sd = contact / (per_strip * geo.strips * geo.rows)
    r_gc = contact / (geo.fingers * geo.rows * geo.gate_contacted_ends)
    r_access = r_sd + r_gc

    flags = _flags(roles, v_ov, v_ox, t_phys, body_doping)
    cv_cap = cv_area * area[..., None] + c_overlap[..., None]
    return MosResult(c_gate=c_gate, c_overlap=c_overlap, c_ox_plain=c_ox_plain, r_channel=r_channel,
                     r_gate=r_gate, r_access=np.broadcast_to(r_access, c_gate.shape).copy(), r_sheet=r_sheet,
                     v_ov=v_ov, v_ox=v_ox, v_gb=v_gb, cv_bias=cv_bias, cv_cap=cv_cap, mu_eff=mu_eff, cox=cox,
                     flags=flags)


def _flags(roles: np.ndarray, v_ov: np.ndarray, v_ox: np.ndarray, t_phys: np.ndarray,
           body_doping: np.ndarray) -> list[list[list[str]]]:
    n_v, n_c = v_ov.shape
    weak = ~channel.strong_inversion_mask(v_ov, STRONG_INVERSION_V)
    thin = np.broadcast_to(t_phys < THIN_DIELECTRIC_M, (n_v, n_c))
    degenerate = np.broadcast_to(body_doping > DEGENERATE_DOPING_M3, (n_v, n_c))
    out: list[list[list[str]]] = [[[] for _ in range(n_c)] for _ in range(n_v)]
    for (i, j) in zip(*np.nonzero(weak)):
        out[i][j].append("weak_channel: overdrive below 0.2 V, channel resistance formulas outside "
                         "their strong-inversion range")
    for (i, j) in zip(*np.nonzero(thin)):
        out[i][j].append("thin_dielectric: physical thickness below 1 nm, direct-tunnelling and "
                         "classical C-V models at the edge of validity")
    for (i, j) in zip(*np.nonzero(degenerate)):
        out[i][j].append("degenerate_body: body doping above 1e19 cm^-3, Boltzmann statistics overestimate")
    return out
