"""Gate-oxide wear-out over a mission and the cost of one broken oxide, per row (variant x
corner) of a group of cells (SI: s, K, V, A, W, m^2; FIT per 1e9 device-hours).

Wear-out: Weibull time to breakdown with weakest-link area scaling, the deck's voltage law
(power law, E-model or 1/E model) and Arrhenius temperature acceleration (JEDEC JEP122 /
JESD92 chain, `celllab.physics.tddb`), evaluated at the mission: life, junction temperature and
the supply at its mission level (by default the largest corner supply). Each oxide's cumulative
hazard per unit area adds over any mix of cells, so a fill's failure fraction is
F = 1 - exp(-sum_cells count x sum_oxides area x hazard per area).

Broken oxide: the DC current from VDD to VSS through the supply's source resistance when one
oxide of the cell has a hard-breakdown spot (a resistor from the gate plate to the channel next
to its source end): a tied cell is limited by the spot and the supply; a cross-coupled pair by
the protecting device, whose square law saturates.

Estimates for comparing cells and fills; not reliability qualification. Follow the foundry's
reliability rules, JEDEC qualification (JESD47, JEP122, JESD92) and licensed practice.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import hour, milli, year, zero_Celsius

from celllab.characterization.oxide_stress import tddb_failure_rate_per_area
from celllab.characterization.risk_inputs import OxideRiskInputs
from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Element, Netlist
from celllab.physics.transient import VoltageSource, constant, operating_point_status

CAUTION = ("Oxide wear-out and fault figures are model estimates for comparing cells and fills, not "
           "reliability qualification; follow the foundry's reliability rules, JEDEC qualification "
           "(JESD47, JEP122, JESD92) and licensed practice.")
MM2 = milli**2
#: The hazard-based FIT per mm^2 adds linearly while the fraction it stands for is small;
#: above this fraction of the mission a row is flagged.
LINEAR_FRACTION_LIMIT = 0.01


@dataclass(frozen=True)
class MissionProfile:
    """The life a fill must survive (SI).

    Attributes
    ----------
    life_s : float            s, > 0
    temperature_K : float     junction temperature, K
    supply_scale : float      supply over the life as a multiple of nominal
    target_fraction : float   cumulative failure fraction allowed over the life, 0..1
    """

    life_s: float
    temperature_K: float
    supply_scale: float
    target_fraction: float

    @classmethod
    def from_deck(cls, deck: object, *, life_years: float | None = None,
                  temperature_C: float | None = None, supply_scale: float | None = None,
                  target_ppm: float | None = None) -> MissionProfile:
        """The deck's ``[mission]`` with any of its values overridden (checked like the deck)."""
        mission = deck.mission  # type: ignore[attr-defined]
        life = mission.life_years if life_years is None else life_years
        temp = mission.temperature_C if temperature_C is None else temperature_C
        scale = deck.mission_supply_scale() if supply_scale is None else supply_scale  # type: ignore[attr-defined]
        ppm = mission.target_ppm if target_ppm is None else target_ppm
        checks = [("life_years", life, 0.0, 100.0, "> 0 and <= 100 (years)"),
                  ("temperature_C", temp, -55.0, 200.0, ">= -55 and <= 200 (degC)"),
                  ("supply_scale", scale, 0.5, 1.5, ">= 0.5 and <= 1.5"),
                  ("target_ppm", ppm, 0.0, 1e6, "> 0 and <= 1e6 (ppm)")]
        for name, value, lo, hi, allowed in checks:
            ok = isinstance(value, int | float) and np.isfinite(value) and lo <= value <= hi
            if not ok or (name in ("life_years", "target_ppm") and value <= 0):
                raise ValueError(f"mission.{name} = {value!r} -> must be {allowed}")
        return cls(float(life) * year, float(temp) + zero_Celsius, float(scale), float(ppm) * 1e-6)

    @property
    def life_hours(self) -> float:
        return self.life_s / hour


@dataclass(frozen=True)
class Wearout:
    """Mission wear-out of one row's oxides (arrays (rows,) unless stated).

    Attributes
    ----------
    hazard_per_m2 : dict    oxide label -> cumulative hazard per m^2 of that oxide over the life
    v_use : dict            oxide label -> gate voltage over the life, V
    cell_hazard             cumulative hazard of one cell (sum of area x hazard), unitless
    gate_area_m2            gate oxide area of one cell (all its oxides), m^2
    fit_per_mm2             FIT per mm^2 of the cell's gate oxide (average over the life; the
                            additive small-fraction figure), NaN for a cell without gate oxide
    flags : list[list[str]] per row
    """

    hazard_per_m2: dict[str, FloatArray]
    v_use: dict[str, FloatArray]
    cell_hazard: FloatArray
    gate_area_m2: FloatArray
    fit_per_mm2: FloatArray
    flags: list[list[str]]


def wearout(inputs: OxideRiskInputs, mission: MissionProfile) -> Wearout:
    """Cumulative TDDB hazard of every oxide of every row over the mission.

    Notes
    -----
    V_use = |V_gate at the corner| x (V_nominal x supply_scale) / V_corner (the operating gate
    voltage scaled with the supply); T_use = the mission temperature; the corner's own process
    values (thickness, Weibull and acceleration parameters). Hazard per area = the mission-average
    rate of `oxide_stress.tddb_failure_rate_per_area` (the one TDDB chain) x life; FIT per mm^2 = h x 1 mm^2 x 1e9 / life[h] (JESD85 FIT,
    linear in area while F is small).
    """
    n_rows = inputs.supply.size
    shape = (inputs.n_variant, inputs.n_corner)
    hazards: dict[str, FloatArray] = {}
    v_use: dict[str, FloatArray] = {}
    cell_hazard = np.zeros(n_rows)
    area = np.zeros(n_rows)
    for label in inputs.oxides:
        v = inputs.v_gate[label] * inputs.nominal_supply * mission.supply_scale / inputs.supply
        rate = tddb_failure_rate_per_area(inputs.corner_set, inputs.flavour, v.reshape(shape),
                                          mission.life_s, temperature_K=mission.temperature_K)
        h = np.asarray(rate, dtype=float).reshape(-1) * mission.life_s
        hazards[label], v_use[label] = h, v
        cell_hazard += inputs.gate_area[label] * h
        area += inputs.gate_area[label]
    with np.errstate(invalid="ignore", divide="ignore"):
        per_m2 = cell_hazard / area
    fit = np.where(area > 0, per_m2 * MM2 * 1e9 / mission.life_hours, np.nan)
    flags: list[list[str]] = [[] for _ in range(n_rows)]
    for r in np.flatnonzero(per_m2 * MM2 > LINEAR_FRACTION_LIMIT):
        flags[r].append("wearout_not_small: 1 mm^2 of this gate exceeds 1 % failures over the "
                        "mission; FIT per mm^2 no longer adds linearly")
    return Wearout(hazards, v_use, cell_hazard, area, np.asarray(fit, dtype=np.float64), flags)


# --- one broken oxide --------------------------------------------------------------------------


def fault_circuit(netlist: Netlist, line: str, spot_ohm: object, v_supply: object,
                  source_ohm: object, extra: tuple[Element, ...] = ()
                  ) -> tuple[Netlist, list[VoltageSource]]:
    """The cell with a breakdown spot in the oxide of RCLINE ``line``, fed by the supply.

    The spot is a resistor from the line's plate (gate) to the first segment node of its
    expanded ladder (``{line}_1``, next to the line's source end); the supply is a voltage source
    behind ``source_ohm`` on the cell's first port; ``extra`` elements are added (the pair's
    drain leakage).
    """
    el = netlist.element(line)
    pin, ref = netlist.ports
    elements = (*netlist.elements, *extra,
                Element("R", "fault_spot", el.node_b, f"{line}_1", np.asarray(spot_ohm, dtype=float)),
                Element("R", "fault_source", "fault_supply_node", pin,
                        np.asarray(source_ohm, dtype=float)))
    supply = VoltageSource("fault_supply", "fault_supply_node", ref,
                           constant(np.asarray(v_supply, dtype=float)))
    return Netlist(f"{netlist.name}_fault", elements, netlist.ports), [supply]


@dataclass(frozen=True)
class OxideFault:
    """DC cost of one broken oxide (arrays (rows, n_oxide) unless stated).

    Attributes
    ----------
    oxides : tuple[str, ...]
    current_A            supply current with that oxide broken
    supply_power_W       V_supply x current
    spot_power_W         dissipated in the breakdown spot
    worst_current_A : (rows,)   the larger over the cell's oxides (NaN: no gate oxide)
    limit_A : (rows,)           the domain's fault current limit
    survives : (rows,) bool     worst current below the limit (False where not converged)
    converged : (rows,) bool    the DC solution was found (NaN currents otherwise)

    """

    oxides: tuple[str, ...]
    current_A: FloatArray
    supply_power_W: FloatArray
    spot_power_W: FloatArray
    worst_current_A: FloatArray
    limit_A: FloatArray
    survives: np.ndarray
    converged: np.ndarray


def oxide_fault(inputs: OxideRiskInputs) -> OxideFault:
    """Supply current and power when each oxide of each row breaks (DC operating point).

    Notes
    -----
    Modified nodal DC analysis (`celllab.physics.transient.operating_point`) of the cell's
    equivalent circuit with the spot resistor (deck ``breakdown_spot_ohm``) and the supply
    (corner supply behind ``supply_source_ohm``); the pair's channels follow their square law,
    so its protecting device limits the current at its saturation current
    beta (V_GS - V_T)^2 / 2. Gate leakage of the healthy oxide is left out (nA against mA); the
    pair's drains leak to their wells through `risk_inputs.DRAIN_LEAKAGE_OHM`, which settles a
    device that the fault turns off in the state its junction leakage would pull it to.
    """
    n_rows = inputs.supply.size
    labels = tuple(inputs.oxides)
    current = np.full((n_rows, len(labels)), np.nan)
    spot_power = np.full((n_rows, len(labels)), np.nan)
    converged = np.ones(n_rows, dtype=bool)
    for k, label in enumerate(labels):  # one or two oxides per cell, not a loop over rows
        line = inputs.oxides[label]
        net, sources = fault_circuit(inputs.netlist, line, inputs.spot_ohm, inputs.supply,
                                     inputs.source_ohm, inputs.dc_elements)
        guess = {**inputs.nodeset, "fault_supply_node": inputs.supply}
        op, ok = operating_point_status(net, sources, inputs.channels, nodeset=guess)
        converged &= ok
        current[:, k] = np.where(ok, -op["i(fault_supply)"], np.nan)
        plate = inputs.netlist.element(line).node_b
        v_plate = op[plate] if plate in op else np.zeros(n_rows)
        drop = v_plate - op[f"{line}_1"]
        spot_power[:, k] = np.where(ok, drop * drop / inputs.spot_ohm, np.nan)
    if not labels:  # no gate oxide: nothing to break here
        worst = np.full(n_rows, np.nan)
        return OxideFault(labels, current, current, spot_power, worst, inputs.fault_limit_A,
                          np.ones(n_rows, dtype=bool), converged)
    worst = np.max(current, axis=1)
    return OxideFault(labels, current, current * inputs.supply[:, None], spot_power, worst,
                      inputs.fault_limit_A, worst < inputs.fault_limit_A, converged)
