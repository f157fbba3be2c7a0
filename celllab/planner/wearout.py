"""Gate-oxide wear-out of a fill: how much thin-oxide gate area a block can afford for a target
failure fraction over its mission (SI: m^2, s, K, V).

``affordable_oxide_area`` is the one function the planner calls to turn a failure target into
an area budget, and ``oxide_failure_fraction`` the one it calls to report a fill's failure
fraction; both rest on ``celllab.physics.tddb`` (Weibull statistics, weakest-link area
scaling, voltage and temperature acceleration).

Model
-----
A mission is a list of phases (duration t_i at gate voltage V_i and temperature T_i). The
test-area characteristic life at phase i is eta_i = eta_ref AF_V(V_ref -> V_i) AF_T(T_ref -> T_i)
(JESD92 / JEP122 extrapolation chain, as in ``tddb.time_to_failure``). Phases add by
cumulative exposure: the reference-area failure fraction after the mission is
F_ref = 1 - exp[-(sum_i t_i / eta_i)^beta] (W. Nelson, *Accelerated Testing*, Wiley 1990,
cumulative-exposure model; from memory). Gate area A fails as a weakest-link chain of
A / A_ref reference areas: 1 - F(A) = (1 - F_ref)^(A / A_ref) (``tddb.area_scaled_fraction``),
so the largest area meeting a target F* is A = A_ref ln(1 - F*) / ln(1 - F_ref).
Valid while one Weibull slope describes the oxide over the whole mission.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.constants import centi, mega, micro, zero_Celsius

from celllab.physics import tddb
from celllab.physics.tddb import VoltageModel

__all__ = [
    "MissionPhase",
    "OxideReliability",
    "affordable_oxide_area",
    "mission_exposure",
    "oxide_failure_fraction",
    "reliability_from_deck",
]

_MODEL: dict[str, VoltageModel] = {"power_law": "power", "e_model": "e",
                                   "inverse_e": "inverse_e"}
#: Deck units of the acceleration exponent -> SI (power law unitless; gamma cm/MV -> m/V;
#: G MV/cm -> V/m).
_EXPONENT_TO_SI = {"power_law": 1.0, "e_model": centi / mega, "inverse_e": mega / centi}


@dataclass(frozen=True)
class OxideReliability:
    """TDDB data of one gate oxide (SI).

    beta : Weibull slope; eta_ref : characteristic life of ``area_ref`` (m^2) at ``v_ref`` (V)
    and ``t_ref`` (K), s; model / exponent : voltage acceleration (``tddb.voltage_acceleration``,
    exponent in SI); ea_eV : activation energy, eV; t_ox : electrical thickness, m.
    """

    beta: float
    eta_ref: float
    area_ref: float
    v_ref: float
    t_ref: float
    model: VoltageModel
    exponent: float
    ea_eV: float
    t_ox: float


@dataclass(frozen=True)
class MissionPhase:
    """One phase of a mission profile: duration (s), temperature (K), gate voltage (V)."""

    duration: float
    temperature: float
    voltage: float


def reliability_from_deck(reliability: Mapping[str, Any], t_ox: float) -> OxideReliability:
    """Convert a deck's ``[oxides.X.reliability]`` table (deck units) to SI.

    ``t_ox`` is the oxide's electrical thickness, m (used by the field-driven models).
    """
    name = str(reliability["acceleration"])
    return OxideReliability(
        beta=float(reliability["weibull_beta"]), eta_ref=float(reliability["eta_ref_s"]),
        area_ref=float(reliability["area_ref_um2"]) * micro**2,
        v_ref=float(reliability["v_ref_V"]), t_ref=float(reliability["t_ref_C"]) + zero_Celsius,
        model=_MODEL[name], exponent=float(reliability["acceleration_exponent"])
        * _EXPONENT_TO_SI[name], ea_eV=float(reliability["activation_energy_eV"]), t_ox=t_ox)


def mission_exposure(oxide: OxideReliability, mission: Sequence[MissionPhase]) -> float:
    """Cumulative exposure sum_i t_i / eta_i of the reference area over the mission (unitless).

    eta_i = eta_ref AF_V AF_T at phase i (``tddb.voltage_acceleration``,
    ``tddb.temperature_acceleration``).
    """
    duration = np.array([p.duration for p in mission], dtype=float)
    temperature = np.array([p.temperature for p in mission], dtype=float)
    voltage = np.array([p.voltage for p in mission], dtype=float)
    af_v = tddb.voltage_acceleration(oxide.v_ref, voltage, model=oxide.model,
                                     exponent=oxide.exponent, t_ox=oxide.t_ox)
    af_t = tddb.temperature_acceleration(oxide.t_ref, temperature, oxide.ea_eV)
    return float(np.sum(duration / (oxide.eta_ref * af_v * af_t)))


def _reference_fraction(oxide: OxideReliability, mission: Sequence[MissionPhase]) -> float:
    return float(tddb.weibull_cdf(mission_exposure(oxide, mission), 1.0, oxide.beta))


def oxide_failure_fraction(oxide: OxideReliability, mission: Sequence[MissionPhase],
                           area: float) -> float:
    """Failure fraction F(A) of ``area`` m^2 of this oxide after the mission (0 for A = 0).

    1 - F(A) = (1 - F_ref)^(A / A_ref) (``tddb.area_scaled_fraction``).
    """
    if area <= 0:
        return 0.0
    return float(tddb.area_scaled_fraction(_reference_fraction(oxide, mission),
                                           oxide.area_ref, area))


def affordable_oxide_area(oxide: OxideReliability, mission: Sequence[MissionPhase],
                          failure_fraction: float) -> float:
    """Largest gate area of this oxide whose failure fraction after the mission is at most
    ``failure_fraction`` (0 < F* < 1), m^2; ``inf`` when the mission does not wear the oxide
    measurably.

    A = A_ref ln(1 - F*) / ln(1 - F_ref), the inverse of ``oxide_failure_fraction``.
    """
    if not 0 < failure_fraction < 1:
        raise ValueError("failure_fraction must lie in (0, 1)")
    f_ref = _reference_fraction(oxide, mission)
    if f_ref <= 0:
        return float("inf")
    return float(oxide.area_ref * np.log1p(-failure_fraction) / np.log1p(-f_ref))
