"""Gate leakage, oxide field, TDDB life and pulse breakdown of MOS devices (SI, per variant x corner)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from celllab.characterization.params import CornerSet, _table
from celllab.physics import esd, leakage, tddb
from celllab.units import to_si

#: Failure fraction at which the catalog quotes oxide life (0.01 %).
TDDB_FRACTION = 1e-4
_MODEL = {"power_law": "power", "e_model": "e", "inverse_e": "inverse_e"}
#: Field acceleration exponents as typed (power law: unitless; E model: cm/MV; 1/E model: MV/cm) in SI.
_EXPONENT_TO_SI = {"power_law": 1.0, "e_model": 1.0 / to_si(1.0, "MV/cm"), "inverse_e": to_si(1.0, "MV/cm")}


@dataclass
class OxideStress:
    leakage_A: np.ndarray
    e_ox_V_per_m: np.ndarray
    ttf_s: np.ndarray
    vbd_pulse_V: np.ndarray


def oxide_stress(corners: CornerSet, oxides: np.ndarray, v_ox: np.ndarray, v_gate: np.ndarray,
                 gate_area: np.ndarray) -> OxideStress:
    """Leakage (A), SiO2-equivalent field (V/m), time to TDDB_FRACTION failures (s) and pulse V_BD (V).

    ``v_ox`` is the voltage across the dielectric, ``v_gate`` the applied gate-to-body voltage
    (the reliability reference voltages are applied gate voltages), ``gate_area`` m^2.
    """
    eot = corners.oxide_table("eot_m", oxides)
    temperature = corners.temperature_K[None, :]

    def lk(attr: str) -> np.ndarray:
        return oxide_subtable(corners, oxides, "leakage", attr)

    model = _sub_table_str(corners, oxides, "leakage", "model")
    j_wkb = leakage.direct_tunneling_current_density(v_ox, eot, lk("barrier_eV"), lk("mass_ratio")) * lk("area_factor")
    j_ref = to_si(np.nan_to_num(lk("j_ref_A_per_cm2"), nan=0.0), "A/cm^2")
    j_scaled = leakage.scaled_leakage_density(
        j_ref, to_si(np.nan_to_num(lk("j_ref_t_ox_nm"), nan=1.0), "nm"), np.nan_to_num(lk("j_ref_V"), nan=1.0),
        eot, np.abs(v_gate), lk("decades_per_nm"), lk("voltage_exponent"))
    j = np.where(model == "reference", j_scaled, j_wkb)

    rel = lambda attr: oxide_subtable(corners, oxides, "reliability", attr)  # noqa: E731
    accel = _sub_table_str(corners, oxides, "reliability", "acceleration")
    ttf = np.full(np.broadcast_shapes(v_gate.shape, eot.shape), np.nan)
    for name, model_name in _MODEL.items():  # at most three models: a loop over models, not variants
        mask = accel == name
        if not np.any(mask):
            continue
        t = tddb.time_to_failure(
            TDDB_FRACTION, gate_area, np.maximum(np.abs(v_gate), 1e-3), temperature,
            eta_ref_s=rel("eta_ref_s"), area_ref=to_si(rel("area_ref_um2"), "um^2"), v_ref=rel("v_ref_V"),
            t_ref_K=to_si(rel("t_ref_C"), "degC"), beta=rel("weibull_beta"), model=model_name,  # type: ignore[arg-type]
            exponent=rel("acceleration_exponent") * _EXPONENT_TO_SI[name], ea_eV=rel("activation_energy_eV"),
            t_ox=eot)
        ttf = np.where(mask, t, ttf)
    e_bd_pulse = to_si(corners.oxide_table("breakdown_field_pulse_MV_per_cm", oxides), "MV/cm")
    vbd = esd.pulse_breakdown_voltage(eot, e_bd_pulse)
    return OxideStress(leakage_A=j * gate_area, e_ox_V_per_m=np.abs(v_ox) / eot, ttf_s=ttf, vbd_pulse_V=vbd)


def oxide_subtable(corners: CornerSet, oxides: np.ndarray, group: str, attr: str) -> np.ndarray:
    """(n_variant, n_corner) of ``oxide.<group>.<attr>`` per variant's oxide flavour (None -> NaN)."""
    return _table(corners.decks, oxides, lambda ox: getattr(getattr(ox, group), attr))


def _sub_table_str(corners: CornerSet, oxides: np.ndarray, group: str, attr: str) -> np.ndarray:
    return _table(corners.decks, oxides, lambda ox: getattr(getattr(ox, group), attr), dtype=str)
