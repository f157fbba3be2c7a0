"""Thin-oxide wear-out budget: the planner's affordable area (the fill-level wear-out of
celllab.fill_risk over the one TDDB chain) against physics.tddb and an independent Weibull
calculation with scipy.stats."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.constants import Julian_year, micro, zero_Celsius
from scipy.stats import weibull_min

from celllab.deck import load_deck
from celllab.physics import tddb
from celllab.planner.wearout import (
    MissionPhase,
    affordable_oxide_area,
    mission_hazard_per_area,
    oxide_failure_fraction,
)

# invented oxide: eta 1e5 s on 1000 um^2 at 2.4 V / 125 C, beta 1.3, power law n = 30
BETA, ETA, AREA_REF, V_REF, T_REF, N, EA = 1.3, 1e5, 1000 * micro**2, 2.4, 125 + zero_Celsius, 30.0, 0.6
_BASE = load_deck(Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml")
_DATA = _BASE.full_dump()
_DATA["oxides"]["core"]["reliability"].update(
    weibull_beta=BETA, eta_ref_s=ETA, area_ref_um2=1000.0, v_ref_V=V_REF, t_ref_C=125.0,
    acceleration="power_law", acceleration_exponent=N, activation_energy_eV=EA)
DECK = type(_BASE).model_validate(_DATA)


def test_affordable_area_reproduces_the_mission_in_the_tddb_chain() -> None:
    # Source: celllab.physics.tddb.time_to_failure (JESD92 / JEP122 extrapolation chain): the
    # affordable area reaches the target fraction exactly at the end of a one-phase mission;
    # rel 1e-9
    phase = MissionPhase(duration=10 * Julian_year, temperature=105 + zero_Celsius, voltage=1.5)
    area = affordable_oxide_area(DECK, "core", [phase], 1e-5)
    t = tddb.time_to_failure(1e-5, area, 1.5, phase.temperature, eta_ref_s=ETA, area_ref=AREA_REF,
                             v_ref=V_REF, t_ref_K=T_REF, beta=BETA, model="power", exponent=N, ea_eV=EA)
    assert float(t) == pytest.approx(phase.duration, rel=1e-9)
    assert oxide_failure_fraction(DECK, "core", [phase], area) == pytest.approx(1e-5, rel=1e-9)


def test_two_phases_by_cumulative_exposure() -> None:
    # Source: scipy.stats.weibull_min with the area-scaled characteristic life and the
    # mission as equivalent time at the first phase's stress, t_eq = t1 + t2 eta1 / eta2
    # (cumulative exposure, W. Nelson, "Accelerated Testing", 1990, from memory); rel 1e-9
    p1 = MissionPhase(8 * Julian_year, 85 + zero_Celsius, 1.2)
    p2 = MissionPhase(2 * Julian_year, 125 + zero_Celsius, 1.32)
    area = 5e-9  # 5000 um^2

    def eta(p: MissionPhase) -> float:
        af_v = (V_REF / p.voltage) ** N
        af_t = np.exp(EA / 8.617333262e-5 * (1 / p.temperature - 1 / T_REF))
        return ETA * af_v * af_t

    t_eq = p1.duration + p2.duration * eta(p1) / eta(p2)
    eta_area = eta(p1) * (AREA_REF / area) ** (1 / BETA)
    expected = weibull_min.cdf(t_eq, BETA, scale=eta_area)
    assert oxide_failure_fraction(DECK, "core", [p1, p2], area) == pytest.approx(expected, rel=1e-9)
    assert mission_hazard_per_area(DECK, "core", [p1, p2]) * AREA_REF == pytest.approx(
        (t_eq / eta(p1)) ** BETA, rel=1e-9)


def test_weakest_link_area_scaling() -> None:
    # Source: weakest-link (Poisson) area scaling, 1 - F(2A) = (1 - F(A))^2 (JEP122); rel 1e-12
    mission = [MissionPhase(10 * Julian_year, 105 + zero_Celsius, 1.6)]
    f1 = oxide_failure_fraction(DECK, "core", mission, 1e-9)
    f2 = oxide_failure_fraction(DECK, "core", mission, 2e-9)
    assert np.log1p(-f2) == pytest.approx(2 * np.log1p(-f1), rel=1e-12)
    assert oxide_failure_fraction(DECK, "core", mission, 0.0) == 0.0
    with pytest.raises(ValueError, match="failure_fraction"):
        affordable_oxide_area(DECK, "core", mission, 0.0)
    with pytest.raises(ValueError, match="allowed: core, io"):
        affordable_oxide_area(DECK, "thick", mission, 1e-5)
