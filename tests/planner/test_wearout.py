"""Thin-oxide wear-out budget: the affordable area against the TDDB chain of physics.tddb and
an independent Weibull calculation with scipy.stats."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import Julian_year, micro, zero_Celsius
from scipy.stats import weibull_min

from celllab.physics import tddb
from celllab.planner.wearout import (
    MissionPhase,
    OxideReliability,
    affordable_oxide_area,
    mission_exposure,
    oxide_failure_fraction,
    reliability_from_deck,
)

# invented oxide: eta 1e5 s on 1000 um^2 at 2.4 V / 125 C, beta 1.3, power law n = 30
OXIDE = OxideReliability(beta=1.3, eta_ref=1e5, area_ref=1000 * micro**2, v_ref=2.4,
                         t_ref=125 + zero_Celsius, model="power", exponent=30.0, ea_eV=0.6,
                         t_ox=1.8e-9)


def test_affordable_area_reproduces_the_mission_in_the_tddb_chain() -> None:
    # Source: celllab.physics.tddb.time_to_failure (JESD92 / JEP122 extrapolation chain): the
    # affordable area reaches the target fraction exactly at the end of a one-phase mission;
    # rel 1e-9
    phase = MissionPhase(duration=10 * Julian_year, temperature=105 + zero_Celsius,
                         voltage=1.5)
    area = affordable_oxide_area(OXIDE, [phase], 1e-5)
    t = tddb.time_to_failure(1e-5, area, 1.5, phase.temperature, eta_ref_s=OXIDE.eta_ref,
                             area_ref=OXIDE.area_ref, v_ref=OXIDE.v_ref, t_ref_K=OXIDE.t_ref,
                             beta=OXIDE.beta, model="power", exponent=30.0, ea_eV=0.6)
    assert float(t) == pytest.approx(phase.duration, rel=1e-9)
    assert oxide_failure_fraction(OXIDE, [phase], area) == pytest.approx(1e-5, rel=1e-9)


def test_two_phases_by_cumulative_exposure() -> None:
    # Source: scipy.stats.weibull_min with the area-scaled characteristic life and the
    # mission as equivalent time at the first phase's stress, t_eq = t1 + t2 eta1 / eta2
    # (cumulative exposure, W. Nelson, "Accelerated Testing", 1990, from memory); rel 1e-9
    p1 = MissionPhase(8 * Julian_year, 85 + zero_Celsius, 1.2)
    p2 = MissionPhase(2 * Julian_year, 125 + zero_Celsius, 1.32)
    area = 5e-9  # 5000 um^2

    def eta(p: MissionPhase) -> float:
        af_v = (OXIDE.v_ref / p.voltage) ** OXIDE.exponent
        af_t = np.exp(OXIDE.ea_eV / 8.617333262e-5 * (1 / p.temperature - 1 / OXIDE.t_ref))
        return OXIDE.eta_ref * af_v * af_t

    t_eq = p1.duration + p2.duration * eta(p1) / eta(p2)
    eta_area = eta(p1) * (OXIDE.area_ref / area) ** (1 / OXIDE.beta)
    expected = weibull_min.cdf(t_eq, OXIDE.beta, scale=eta_area)
    assert oxide_failure_fraction(OXIDE, [p1, p2], area) == pytest.approx(expected, rel=1e-9)
    assert mission_exposure(OXIDE, [p1, p2]) == pytest.approx(t_eq / eta(p1), rel=1e-9)


def test_weakest_link_area_scaling() -> None:
    # Source: weakest-link (Poisson) area scaling, 1 - F(2A) = (1 - F(A))^2 (JEP122); rel 1e-12
    mission = [MissionPhase(10 * Julian_year, 105 + zero_Celsius, 1.6)]
    f1 = oxide_failure_fraction(OXIDE, mission, 1e-9)
    f2 = oxide_failure_fraction(OXIDE, mission, 2e-9)
    assert np.log1p(-f2) == pytest.approx(2 * np.log1p(-f1), rel=1e-12)
    assert oxide_failure_fraction(OXIDE, mission, 0.0) == 0.0
    with pytest.raises(ValueError):
        affordable_oxide_area(OXIDE, mission, 0.0)


def test_reliability_from_deck_units() -> None:
    # Source: unit definitions: 1000 um^2 = 1e-9 m^2; 125 degC = 398.15 K; an E-model gamma of
    # 1 cm/MV = 1e-8 m/V
    rel = reliability_from_deck({"weibull_beta": 1.2, "eta_ref_s": 1e5, "area_ref_um2": 1000,
                                 "v_ref_V": 2.2, "t_ref_C": 125, "acceleration": "e_model",
                                 "acceleration_exponent": 1.0, "activation_energy_eV": 0.5},
                                1.2e-9)
    assert rel.area_ref == pytest.approx(1e-9, rel=1e-12)
    assert rel.t_ref == pytest.approx(398.15, rel=1e-12)
    assert rel.model == "e" and rel.exponent == pytest.approx(1e-8, rel=1e-12)
