"""Gate leakage per carrier, oxide field, TDDB failure rate and pulse breakdown of MOS devices
(SI, arrays per variant x corner)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import Julian_year

from celllab.characterization.params import CornerSet, _table
from celllab.physics import esd, leakage, tddb
from celllab.units import to_si

#: The catalog's TDDB figure holds the corner's supply and temperature for this mission, s.
MISSION_S = 10.0 * Julian_year
_MODEL = {"power_law": "power", "e_model": "e", "inverse_e": "inverse_e"}
#: Field acceleration exponents as typed (power law: unitless; E model: cm/MV; 1/E model: MV/cm) in SI.
_EXPONENT_TO_SI = {"power_law": 1.0, "e_model": 1.0 / to_si(1.0, "MV/cm"), "inverse_e": to_si(1.0, "MV/cm")}
#: Tunnelling carrier of each device role (characterization.mos.ROLES): electrons from the
#: conduction band where the channel or accumulation layer holds electrons, holes from the
#: valence band where it holds holes (Lee & Hu 2001; docs/references.md [71]).
CARRIER = {"nmos": "electron", "pmos": "hole", "acc_n": "electron", "acc_p": "hole"}


@dataclass
class OxideStress:
    leakage_A: np.ndarray             # gate tunnelling current, A
    e_ox_V_per_m: np.ndarray          # SiO2-equivalent oxide field, V/m
    tddb_rate_per_s_m2: np.ndarray    # TDDB failures per second per m^2 of gate oxide, mission average
    vbd_pulse_V: np.ndarray           # pulse breakdown voltage, V


def oxide_stress(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, v_ox: np.ndarray,
                 v_gate: np.ndarray, gate_area: np.ndarray) -> OxideStress:
    """Gate leakage (A), SiO2-equivalent field (V/m), TDDB failure rate per area (1/(s m^2)) and
    pulse V_BD (V) of one MOS device per variant in the given ``roles``.

    ``v_ox`` is the voltage across the dielectric, ``v_gate`` the applied gate-to-body voltage
    (the reliability reference voltages are applied gate voltages), ``gate_area`` m^2.
    """
    eot = corners.oxide_table("eot_m", oxides)
    e_bd_pulse = to_si(corners.oxide_table("breakdown_field_pulse_MV_per_cm", oxides), "MV/cm")
    return OxideStress(
        leakage_A=gate_leakage_density(corners, oxides, roles, v_ox, v_gate) * gate_area,
        e_ox_V_per_m=np.abs(v_ox) / eot,
        tddb_rate_per_s_m2=tddb_failure_rate_per_area(corners, oxides, v_gate),
        vbd_pulse_V=esd.pulse_breakdown_voltage(eot, e_bd_pulse))


def gate_leakage_density(corners: CornerSet, oxides: np.ndarray, roles: np.ndarray, v_ox: np.ndarray,
                         v_gate: np.ndarray) -> np.ndarray:
    """Gate tunnelling current density per variant x corner, A/m^2, by each role's carrier.

    Notes
    -----
    ``direct_tunnel``: WKB density (``leakage.direct_tunneling_current_density``) at the oxide
    voltage with the carrier's barrier and mass from ``[oxides.<flavour>.tunnelling]``, times the
    deck's ``area_factor``. ``reference``: the deck's electron reference density scaled to the
    device's EOT and gate voltage; holes use the hole reference when the deck gives one, else the
    electron reference times the WKB hole/electron ratio at the same oxide and voltage. Both are
    then multiplied by the tunnelling temperature law (T/T_ref)^exponent
    (``leakage.tunnelling_temperature_factor``); the bias shift with temperature already acts
    through ``v_ox``.
    """
    eot = corners.oxide_table("eot_m", oxides)
    temperature = corners.temperature_K[None, :]

    def lk(attr: str) -> np.ndarray:
        return oxide_subtable(corners, oxides, "leakage", attr)

    def tn(attr: str) -> np.ndarray:
        return oxide_subtable(corners, oxides, "tunnelling", attr)

    hole = (np.array([CARRIER[str(r)] for r in roles]) == "hole")[:, None]
    j_electron = leakage.direct_tunneling_current_density(v_ox, eot, tn("electron_barrier_eV"),
                                                          tn("electron_mass_ratio"))
    j_hole = leakage.direct_tunneling_current_density(v_ox, eot, tn("hole_barrier_eV"), tn("hole_mass_ratio"))
    j_wkb = np.where(hole, j_hole, j_electron) * lk("area_factor")

    t_ref = to_si(np.nan_to_num(lk("j_ref_t_ox_nm"), nan=1.0), "nm")
    v_ref = np.nan_to_num(lk("j_ref_V"), nan=1.0)
    slope, exponent = lk("decades_per_nm"), lk("voltage_exponent")
    j_ref_e = to_si(np.nan_to_num(lk("j_ref_A_per_cm2"), nan=0.0), "A/cm^2")
    scaled_e = leakage.scaled_leakage_density(j_ref_e, t_ref, v_ref, eot, np.abs(v_gate), slope, exponent)
    j_ref_h = to_si(tn("hole_j_ref_A_per_cm2"), "A/cm^2")
    scaled_h = np.where(
        np.isnan(j_ref_h),
        scaled_e * np.divide(j_hole, j_electron, out=np.zeros_like(j_hole), where=j_electron > 0),
        leakage.scaled_leakage_density(np.nan_to_num(j_ref_h), t_ref, v_ref, eot, np.abs(v_gate), slope, exponent))
    j_scaled = np.where(hole, scaled_h, scaled_e)

    model = _sub_table_str(corners, oxides, "leakage", "model")
    j = np.where(model == "reference", j_scaled, j_wkb)
    return j * leakage.tunnelling_temperature_factor(temperature, corners.reference_temperature_K,
                                                     tn("temperature_exponent"))


def tddb_failure_rate_per_area(corners: CornerSet, oxides: np.ndarray, v_gate: np.ndarray,
                               mission_s: float = MISSION_S,
                               temperature_K: float | np.ndarray | None = None) -> np.ndarray:
    """Mission-average TDDB failure rate per unit gate-oxide area, 1/(s m^2), per variant x corner.

    The one place oxide wear is computed: the catalog's figure (the corner's gate voltage and
    temperature held for ``mission_s``) and a fill's mission (``temperature_K``, K, replaces the
    corners' temperatures; ``v_gate`` the mission's gate voltage), each corner's process values.

    Notes
    -----
    Weibull characteristic life taken from the deck's reference stress to use voltage and
    temperature (``tddb.voltage_acceleration``, ``tddb.temperature_acceleration``) and to 1 m^2
    (``tddb.area_scaled_eta``); the Weibull cumulative hazard over the mission,
    H = (t / eta)^beta = -ln(1 - F(t)) (docs/references.md [81]), divided by the mission time.
    Weakest-link statistics make H exactly
    proportional to area, so the figure times a fill's gate area (in the same unit) is that
    fill's average failure rate while H stays small (docs/references.md [86]). FIT per mm^2 =
    this x 1e9 h x 1 mm^2. Valid within the deck's acceleration model (JESD92/JEP122 chain).
    """
    eot = corners.oxide_table("eot_m", oxides)
    temperature = corners.temperature_K[None, :] if temperature_K is None else np.asarray(temperature_K)
    v_use = np.maximum(np.abs(v_gate), 1e-3)

    def rel(attr: str) -> np.ndarray:
        return oxide_subtable(corners, oxides, "reliability", attr)

    accel = _sub_table_str(corners, oxides, "reliability", "acceleration")
    beta = rel("weibull_beta")
    af_v = np.full(np.broadcast_shapes(v_use.shape, eot.shape), np.nan)
    for name, model_name in _MODEL.items():  # at most three models: a loop over models, not variants
        mask = accel == name
        if np.any(mask):
            af = tddb.voltage_acceleration(rel("v_ref_V"), v_use, model=model_name,  # type: ignore[arg-type]
                                           exponent=rel("acceleration_exponent") * _EXPONENT_TO_SI[name], t_ox=eot)
            af_v = np.where(mask, af, af_v)
    af_t = tddb.temperature_acceleration(to_si(rel("t_ref_C"), "degC"), temperature, rel("activation_energy_eV"))
    eta_unit_area = tddb.area_scaled_eta(rel("eta_ref_s") * af_v * af_t, to_si(rel("area_ref_um2"), "um^2"),
                                         1.0, beta)
    hazard_per_m2 = (mission_s / eta_unit_area) ** beta  # Weibull cumulative hazard of 1 m^2 of oxide
    return np.asarray(hazard_per_m2 / mission_s, dtype=np.float64)


def oxide_subtable(corners: CornerSet, oxides: np.ndarray, group: str, attr: str) -> np.ndarray:
    """(n_variant, n_corner) of ``oxide.<group>.<attr>`` per variant's oxide flavour (None -> NaN)."""
    return _table(corners.decks, oxides, lambda ox: getattr(getattr(ox, group), attr))


def _sub_table_str(corners: CornerSet, oxides: np.ndarray, group: str, attr: str) -> np.ndarray:
    return _table(corners.decks, oxides, lambda ox: getattr(getattr(ox, group), attr), dtype=str)
