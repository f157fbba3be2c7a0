"""Gate-oxide wear-out of a fill: how much thin-oxide gate area a block can afford for a target
failure fraction over its mission (SI: m^2, s, K, V).

``affordable_oxide_area`` is the one function the planner calls to turn a failure target into
an area budget, and ``oxide_failure_fraction`` the one it calls to report a fill's failure
fraction. Both are the fill-level wear-out of ``celllab.fill_risk`` (``affordable_gate_area``,
``gate_failure_fraction``), which rests on the one TDDB chain
(``characterization.oxide_stress.tddb_failure_rate_per_area``: Weibull statistics,
weakest-link area scaling, voltage and temperature acceleration).

Model
-----
A mission is a list of phases (duration t_i at gate voltage V_i and temperature T_i); phases
add by cumulative exposure, H = (sum_i t_i / eta_i)^beta per unit area (W. Nelson,
*Accelerated Testing*, Wiley 1990, from memory), F(A) = 1 - exp(-A H), so the largest area
meeting a target F* is A = -ln(1 - F*) / H. Valid while one Weibull slope describes the oxide
over the whole mission. Estimates for planning, not qualification: follow the foundry's
reliability rules and JEDEC practice.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from celllab.fill_risk import (
    MissionPhase,
    affordable_gate_area,
    gate_failure_fraction,
    mission_hazard_per_area,
)

__all__ = [
    "MissionPhase",
    "affordable_oxide_area",
    "mission_hazard_per_area",
    "oxide_failure_fraction",
]


def affordable_oxide_area(deck: Any, oxide: str, mission: Sequence[MissionPhase],
                          failure_fraction: float) -> float:
    """Largest gate area of the deck's ``oxide`` whose failure fraction after the mission is at
    most ``failure_fraction`` (0 < F* < 1), m^2; ``inf`` when the mission does not wear it
    (``fill_risk.affordable_gate_area``)."""
    return affordable_gate_area(deck, oxide, mission, failure_fraction)


def oxide_failure_fraction(deck: Any, oxide: str, mission: Sequence[MissionPhase],
                           area: float) -> float:
    """Failure fraction of ``area`` m^2 of the deck's ``oxide`` after the mission (0 for A = 0)
    (``fill_risk.gate_failure_fraction``)."""
    return gate_failure_fraction(deck, oxide, mission, area)
