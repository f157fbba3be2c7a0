"""The questions a designer asks of a decap fill (deck + cells in, plain results out; no I/O).

* `cell_oxide_risk`: per cell and corner, the figures that scale: FIT per mm^2 of gate oxide over
  the mission, and what one broken oxide costs the supply.
* `fill_oxide_risk`: "may I fill this block with 0.3 mm^2 of this decap for 10 years at
  125 degC?": the fill's failure fraction and FIT over the mission, and the largest fill the
  target failure fraction allows.
* `esd_exposure`: "what happens on a 2 kV zap?": each cell's oxide voltage, time above the
  pulse breakdown voltage and margin under HBM and CDM events, with the fill's own capacitance
  on the rail.

Areas are cell footprints (what a floorplan fills), mm^2 at this boundary; SI inside. All figures
are estimates for comparing cells and fills: follow the foundry's reliability and ESD rules,
JEDEC/ESDA qualification (JESD47, JEP122, JS-001, JS-002) and licensed practice.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.constants import micro, milli, nano, year, zero_Celsius

from celllab.characterization import cell_risk, esd_events, oxide_risk
from celllab.characterization.esd_events import EsdEvent
from celllab.characterization.oxide_risk import MissionProfile
from celllab.characterization.oxide_stress import tddb_failure_rate_per_area
from celllab.characterization.params import CornerSet
from celllab.characterization.risk_inputs import OxideRiskInputs, inputs_from_group
from celllab.physics import tddb

CAUTION = ("Estimates for comparing cells and fills, not qualification: follow the foundry's "
           "reliability and ESD rules, JEDEC/ESDA qualification (JESD47, JEP122, JS-001, JS-002) "
           "and licensed practice.")
MM2 = milli**2
#: Frequencies of the characterization run here (only the circuits are used), Hz.
_FREQ_HZ = np.logspace(5, 12, 29)
DEFAULT_EVENTS: tuple[EsdEvent, ...] = (
    EsdEvent("hbm", 2000.0), EsdEvent("hbm", 2000.0, "negative"),
    EsdEvent("cdm", 250.0), EsdEvent("cdm", 250.0, "negative"),
)
"""HBM 2 kV and CDM 250 V (common component-level targets, from memory) in both polarities,
unpowered."""


@dataclass(frozen=True)
class CellOxideRisk:
    """Per-corner oxide figures of one cell (arrays (n_corner,)).

    Attributes
    ----------
    fit_per_mm2            FIT per mm^2 of the cell's gate oxide over the mission (NaN: no oxide)
    fit_per_mm2_footprint  FIT per mm^2 of cell footprint (what a fill area costs)
    fault_current_mA       supply current when the cell's worst oxide breaks
    fault_power_mW         supply power then
    fault_survives         that current is below the domain's fault current limit
    """

    cell: str
    topology: str
    oxide: str
    corners: list[str]
    cell_area_um2: float
    gate_area_um2: float
    fit_per_mm2: np.ndarray
    fit_per_mm2_footprint: np.ndarray
    fault_current_mA: np.ndarray
    fault_power_mW: np.ndarray
    fault_limit_mA: np.ndarray
    fault_survives: np.ndarray
    cell_hazard: np.ndarray = field(repr=False)      # one cell's cumulative hazard (unitless)
    flags: list[list[str]] = field(default_factory=list)


def _check_cells(cells: Sequence[Any]) -> None:
    if not cells:
        raise ValueError("cells: give at least one cell")
    names = [c.name for c in cells]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(f"cells: duplicate names {dup}")


def _per_cell(inputs: list[OxideRiskInputs], n_cells: int) -> list[tuple[OxideRiskInputs, int]]:
    """(group, variant index in the group) for every cell position."""
    where: list[tuple[OxideRiskInputs, int] | None] = [None] * n_cells
    for g in inputs:
        for k, pos in enumerate(g.positions):
            where[pos] = (g, k)
    assert all(w is not None for w in where)
    return [w for w in where if w is not None]


def cell_oxide_risk(deck: Any, cells: Sequence[Any], *, corners: Sequence[str] | None = None,
                    life_years: float | None = None, temperature_C: float | None = None,
                    supply_scale: float | None = None) -> list[CellOxideRisk]:
    """Wear-out and broken-oxide figures of every cell at every corner (in the cells' order).

    Mission values default to the deck's ``[mission]`` (supply: the largest corner scale).
    """
    _check_cells(cells)
    mission = MissionProfile.from_deck(deck, life_years=life_years, temperature_C=temperature_C,
                                       supply_scale=supply_scale)
    return _cell_risks(gather(deck, list(cells), corners), len(cells), mission)


def _cell_risks(inputs: list[OxideRiskInputs], n_cells: int, mission: MissionProfile
                ) -> list[CellOxideRisk]:
    computed = {id(g): (oxide_risk.wearout(g, mission), oxide_risk.oxide_fault(g)) for g in inputs}
    out = []
    for g, k in _per_cell(inputs, n_cells):
        wear, fault = computed[id(g)]
        rows = slice(k * g.n_corner, (k + 1) * g.n_corner)
        cell = g.cells[k]
        gate = float(wear.gate_area_m2[rows][0])
        area = float(g.cell_area_m2[k])
        hazard = wear.cell_hazard[rows]
        flags = [g.flags[r] + wear.flags[r] for r in range(rows.start, rows.stop)]
        out.append(CellOxideRisk(
            cell=cell.name, topology=g.topology, oxide=cell.oxide, corners=g.corners,
            cell_area_um2=area / micro**2, gate_area_um2=gate / micro**2,
            fit_per_mm2=wear.fit_per_mm2[rows],
            fit_per_mm2_footprint=hazard / area * MM2 * 1e9 / mission.life_hours,
            fault_current_mA=fault.worst_current_A[rows] / milli,
            fault_power_mW=(np.max(fault.supply_power_W[rows], axis=1) if fault.oxides
                            else np.full(g.n_corner, np.nan)) / milli,
            fault_limit_mA=fault.limit_A[rows] / milli, fault_survives=fault.survives[rows],
            cell_hazard=hazard, flags=flags))
    return out


@dataclass(frozen=True)
class FillOxideRisk:
    """Wear-out of one fill over the mission, per corner (arrays (n_corner,)).

    Attributes
    ----------
    footprint_mm2 : dict       cell -> footprint area in the fill
    gate_area_mm2 : float      total gate oxide area of the fill
    failure_ppm                cumulative oxide failure fraction over the life, ppm
    fit                        average failure rate over the life, FIT (JESD85)
    affordable_footprint_mm2   the same mix scaled to reach the target fraction
    within_target              failure_ppm <= target
    worst_corner : str
    cells : list[CellOxideRisk]   per-cell figures, including the broken-oxide cost
    """

    mission: MissionProfile
    corners: list[str]
    footprint_mm2: dict[str, float]
    gate_area_mm2: float
    failure_ppm: np.ndarray
    fit: np.ndarray
    affordable_footprint_mm2: np.ndarray
    within_target: np.ndarray
    worst_corner: str
    cells: list[CellOxideRisk]
    caution: str = CAUTION

    @property
    def corner_label(self) -> str:
        """Which corner the headline figures are: "worst corner X", or "every corner" where the
        corners do not differ (the mission sets the stress; a deck whose corners change nothing
        the wear-out reads gives one answer for all)."""
        ppm = np.asarray(self.failure_ppm, dtype=float)
        if ppm.size > 1 and np.allclose(ppm, ppm[0], rtol=1e-9, atol=0.0):
            return "every corner"
        return f"worst corner {self.worst_corner}"

    def summary(self) -> str:
        """Plain-text answer, one line per fact."""
        m = self.mission
        j = self.corners.index(self.worst_corner)
        total = sum(self.footprint_mm2.values())
        lines = [
            f"fill: {total:.4g} mm^2 of decap ({self.gate_area_mm2:.4g} mm^2 of gate oxide) for "
            f"{m.life_s / year:.3g} years at {m.temperature_K - zero_Celsius:.4g} degC, "
            f"supply x{m.supply_scale:.3g}",
            f"{self.corner_label}: {self.failure_ppm[j]:.3g} ppm oxide failures over "
            f"the life ({self.fit[j]:.3g} FIT); target {m.target_fraction * 1e6:.3g} ppm -> "
            + ("within target" if self.within_target[j] else "EXCEEDS target"),
            f"largest fill of this mix within the target: {self.affordable_footprint_mm2[j]:.3g} mm^2",
        ]
        for c in self.cells:
            if not np.any(np.isfinite(c.fault_current_mA)):
                lines.append(f"{c.cell} ({c.topology}): no gate oxide to break")
                continue
            worst = int(np.nanargmax(c.fault_current_mA))
            lines.append(
                f"{c.cell} ({c.topology}): one broken oxide draws {c.fault_current_mA[worst]:.3g} mA "
                f"({c.fault_power_mW[worst]:.3g} mW) at {c.corners[worst]}; domain limit "
                f"{c.fault_limit_mA[worst]:.3g} mA -> "
                + ("survives" if c.fault_survives[worst] else "does NOT survive"))
        lines.append(self.caution)
        return "\n".join(lines)


def _fill_mapping(cells: Sequence[Any], fill_mm2: float | Mapping[str, float]) -> dict[str, float]:
    names = [c.name for c in cells]
    if isinstance(fill_mm2, Mapping):
        unknown = sorted(set(fill_mm2) - set(names))
        if unknown:
            raise ValueError(f"fill_mm2: no cell(s) {unknown}; cells: {', '.join(names)}")
        mapping = {k: float(v) for k, v in fill_mm2.items()}
    else:
        if len(cells) != 1:
            raise ValueError("fill_mm2: a single area needs exactly one cell; give a mapping "
                             "cell name -> mm^2 for a mixed fill")
        mapping = {names[0]: float(fill_mm2)}
    bad = {k: v for k, v in mapping.items() if not (np.isfinite(v) and v >= 0)}
    if bad or not any(v > 0 for v in mapping.values()):
        raise ValueError(f"fill_mm2 = {bad or mapping} -> areas must be >= 0 mm^2, at least one > 0")
    return mapping


def fill_oxide_risk(deck: Any, cells: Sequence[Any], fill_mm2: float | Mapping[str, float], *,
                    corners: Sequence[str] | None = None, life_years: float | None = None,
                    temperature_C: float | None = None, supply_scale: float | None = None,
                    target_ppm: float | None = None) -> FillOxideRisk:
    """Oxide wear-out of a fill over the mission, and what one broken oxide costs.

    Parameters
    ----------
    deck : Deck
    cells : sequence of CellSpec    the cells of the fill
    fill_mm2 : float | mapping      footprint area, mm^2: one number for a single cell, or
                                    cell name -> mm^2 for a mix
    corners : sequence of str       corners to evaluate (default: all)
    life_years, temperature_C, supply_scale, target_ppm
                                    override the deck's ``[mission]``

    Returns
    -------
    FillOxideRisk   (``summary()`` gives the plain-text answer)

    Notes
    -----
    Each cell's count is its footprint area / cell area; the fill's cumulative hazard is
    H = sum count x cell hazard, F = 1 - exp(-H) (weakest link), FIT = F x 1e9 / life[h]
    (JESD85), and the affordable area scales the mix by -ln(1 - target) / H.
    """
    _check_cells(cells)
    mapping = _fill_mapping(cells, fill_mm2)
    mission = MissionProfile.from_deck(deck, life_years=life_years, temperature_C=temperature_C,
                                       supply_scale=supply_scale, target_ppm=target_ppm)
    risks = _cell_risks(gather(deck, list(cells), corners), len(cells), mission)
    by_name = {r.cell: r for r in risks}
    hazard = np.zeros(len(risks[0].corners))
    gate = 0.0
    for name, area in mapping.items():
        r = by_name[name]
        count = area * MM2 / (r.cell_area_um2 * micro**2)
        hazard = hazard + count * r.cell_hazard
        gate += count * r.gate_area_um2 * micro**2 / MM2
    fraction = tddb.fraction_from_hazard(hazard)
    with np.errstate(divide="ignore"):
        scale = -np.log1p(-mission.target_fraction) / hazard
    total = sum(mapping.values())
    worst = int(np.argmax(fraction))
    return FillOxideRisk(
        mission=mission, corners=list(risks[0].corners), footprint_mm2=mapping, gate_area_mm2=gate,
        failure_ppm=fraction * 1e6, fit=tddb.average_fit(fraction, mission.life_s),
        affordable_footprint_mm2=scale * total, within_target=fraction <= mission.target_fraction,
        worst_corner=risks[0].corners[worst], cells=[by_name[n] for n in mapping])


def gather(deck: Any, cells: Sequence[Any], corners: Sequence[str] | None = None
           ) -> list[OxideRiskInputs]:
    """Characterize ``cells`` under ``deck`` and collect the oxide-risk inputs per circuit structure
    (the same topology evaluation as the engine; only the circuits and operating points are used)."""
    from celllab import topologies
    from celllab.cells.expand import resolve

    corner_set = CornerSet.from_deck(deck, list(corners) if corners else None)
    geos = [resolve(c, deck) for c in cells]
    groups: dict[str, list[int]] = {}
    for i, c in enumerate(cells):
        groups.setdefault(c.topology, []).append(i)
    found = []
    for topology, idx in groups.items():
        out = topologies.evaluate(topology, deck, corner_set, [cells[i] for i in idx],
                                  [geos[i] for i in idx], _FREQ_HZ)
        parts = out.parts if hasattr(out, "parts") else [(list(range(len(idx))), out)]
        for local, part in parts:
            positions = [idx[k] for k in local]
            found.append(inputs_from_group(deck, corner_set, topology, part, positions,
                                           [cells[i] for i in positions],
                                           [geos[i] for i in positions]))
    return found


# --- a chip's thin-oxide budget over a mission of phases (the planner's wear-out budget) -------


@dataclass(frozen=True)
class MissionPhase:
    """One phase of a mission profile: duration (s), junction temperature (K), gate voltage (V)."""

    duration: float
    temperature: float
    voltage: float


def mission_hazard_per_area(deck: Any, oxide: str, mission: Sequence[MissionPhase]) -> float:
    """Cumulative TDDB hazard of 1 m^2 of ``oxide`` gate after the mission, 1/m^2 (the deck's
    nominal process values).

    Notes
    -----
    Each phase's hazard from the one TDDB chain (`oxide_stress.tddb_failure_rate_per_area` x
    duration, at the phase's voltage and temperature); phases add by cumulative exposure,
    H = (sum_i H_i^(1/beta))^beta, i.e. sum_i t_i / eta_i raised to beta (W. Nelson, Accelerated
    Testing, Wiley 1990, from memory). Valid while one Weibull slope describes the oxide over
    the whole mission.
    """
    if oxide not in deck.oxides:
        raise ValueError(f"oxide = {oxide!r} -> allowed: {', '.join(deck.oxides)}")
    beta = float(deck.oxides[oxide].reliability.weibull_beta)
    nominal = CornerSet(["nominal"], [deck], np.array([zero_Celsius + deck.reference_temperature_C]),
                        zero_Celsius + deck.reference_temperature_C)
    exposure = 0.0
    for p in mission:  # a handful of phases
        if not (p.duration > 0 and p.temperature > 0 and np.isfinite(p.voltage)):
            raise ValueError(f"mission phase {p} -> duration and temperature must be > 0")
        rate = tddb_failure_rate_per_area(nominal, np.array([oxide]), np.array([[p.voltage]]),
                                          p.duration, temperature_K=p.temperature)
        exposure += float(rate.reshape(-1)[0] * p.duration) ** (1.0 / beta)
    return exposure**beta


def affordable_gate_area(deck: Any, oxide: str, mission: Sequence[MissionPhase],
                         failure_fraction: float) -> float:
    """Largest gate area of ``oxide`` whose failure fraction after the mission is at most
    ``failure_fraction`` (0 < F < 1), m^2; inf when the mission does not wear the oxide.

    A = -ln(1 - F) / H with H from `mission_hazard_per_area` (`tddb.area_for_fraction`).
    """
    if not 0 < failure_fraction < 1:
        raise ValueError(f"failure_fraction = {failure_fraction!r} -> must lie in (0, 1)")
    hazard = mission_hazard_per_area(deck, oxide, mission)
    if hazard <= 0:
        return float("inf")
    return float(tddb.area_for_fraction(failure_fraction, hazard))


def gate_failure_fraction(deck: Any, oxide: str, mission: Sequence[MissionPhase], area: float) -> float:
    """Failure fraction of ``area`` m^2 of ``oxide`` gate after the mission (0 for no area).

    F = 1 - exp(-A H) (weakest link, `tddb.fraction_from_hazard`).
    """
    if area <= 0:
        return 0.0
    return float(tddb.fraction_from_hazard(area * mission_hazard_per_area(deck, oxide, mission)))


# --- ESD ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CellEsdExposure:
    """One cell under each event at each corner (arrays (n_event, n_corner)).

    Attributes
    ----------
    events : list[str]        event labels
    peak_rail_V               rail voltage extreme (signed)
    peak_oxide_V              worst oxide's voltage extreme (signed); NaN without gate oxide
    time_above_ns             time the worst oxide spends above its pulse breakdown voltage
    margin                    V_BD,pulse / |peak oxide V| (> 1 survives), inf without oxide
    shielding                 |peak oxide V| / |peak rail V|
    survives                  margin > 1 and no time above breakdown
    notes : list[list[str]]   per event, per corner: does the cell's circuit shield its oxide?
    """

    cell: str
    topology: str
    oxide: str
    corners: list[str]
    events: list[str]
    fill_capacitance_nF: float
    v_bd_pulse_V: np.ndarray
    peak_rail_V: np.ndarray
    peak_oxide_V: np.ndarray
    time_above_ns: np.ndarray
    margin: np.ndarray
    shielding: np.ndarray
    survives: np.ndarray
    notes: list[list[str]]
    caution: str = esd_events.CAUTION

    def summary(self) -> str:
        """Plain-text table: the worst corner of each event."""
        lines = [f"{self.cell} ({self.topology}, {self.oxide} oxide), fill capacitance on the "
                 f"rail {self.fill_capacitance_nF:.3g} nF:"]
        for e, label in enumerate(self.events):
            j = int(np.argmin(self.margin[e]))
            lines.append(
                f"  {label}: rail {self.peak_rail_V[e, j]:.3g} V, oxide {self.peak_oxide_V[e, j]:.3g} V "
                f"vs V_BD,pulse {self.v_bd_pulse_V[j]:.3g} V -> margin {self.margin[e, j]:.3g}, "
                f"{self.time_above_ns[e, j]:.3g} ns above breakdown at {self.corners[j]}: "
                + ("survives" if self.survives[e, j] else "BREAKS") + f"; {self.notes[e][j]}")
        lines.append(self.caution)
        return "\n".join(lines)


def esd_exposure(deck: Any, cells: Sequence[Any], *,
                 events: Sequence[EsdEvent] = DEFAULT_EVENTS,
                 fill_mm2: float | Mapping[str, float] | None = None,
                 corners: Sequence[str] | None = None) -> list[CellEsdExposure]:
    """Each cell's gate-oxide stress under rail ESD events, at every corner.

    Parameters
    ----------
    deck, cells, corners : as for `fill_oxide_risk`
    events : sequence of EsdEvent   default `DEFAULT_EVENTS` (HBM 2 kV, CDM 250 V, both
                                    polarities, unpowered)
    fill_mm2 : None | float | mapping
        the decap fill on the same rails, whose capacitance adds to the deck's
        ``rail_capacitance_pF``: None (no fill), one area (each cell alone fills it: compare
        options), or cell name -> mm^2 (one mixed fill, its total capacitance on every cell's rail)

    Returns
    -------
    list[CellEsdExposure] in the cells' order

    Notes
    -----
    Transient analysis of each cell's own equivalent circuit with the rail clamp and source
    networks (`esd_events.simulate_event`); the fill enters as its low-frequency capacitance
    (count x cell capacitance) in parallel with the rail, its own ESR neglected.
    """
    _check_cells(cells)
    for ev in events:
        if not isinstance(ev, EsdEvent):
            raise ValueError(f"events: {ev!r} is not an EsdEvent")
    inputs = gather(deck, list(cells), corners)
    names = [c.name for c in cells]
    alone = fill_mm2 is not None and not isinstance(fill_mm2, Mapping)
    mix = _fill_mapping(cells, fill_mm2) if isinstance(fill_mm2, Mapping) else {}
    if alone and not (np.isfinite(float(fill_mm2)) and float(fill_mm2) >= 0):  # type: ignore[arg-type]
        raise ValueError(f"fill_mm2 = {fill_mm2!r} -> must be >= 0 mm^2")
    # capacitance per corner of every cell per mm^2 of footprint (the fill's contribution)
    c_per_mm2: dict[str, np.ndarray] = {}
    for g, k in _per_cell(inputs, len(cells)):
        rows = slice(k * g.n_corner, (k + 1) * g.n_corner)
        c_per_mm2[g.cells[k].name] = g.c_cell[rows] / g.cell_area_m2[k] * MM2
    mixed = sum((area * c_per_mm2[n] for n, area in mix.items()), np.zeros(1))

    results: dict[str, CellEsdExposure] = {}
    for g in inputs:
        fill_c = np.zeros(g.n_variant * g.n_corner)
        for k, cell in enumerate(g.cells):
            rows = slice(k * g.n_corner, (k + 1) * g.n_corner)
            fill_c[rows] = float(fill_mm2) * c_per_mm2[cell.name] if alone else mixed  # type: ignore[arg-type]
        fig = cell_risk.event_figures(g, events, fill_c)
        peak_all, above_all, margin_all = fig.peak_oxide_V, fig.time_above_s, fig.margin
        rail_all, shield_all = fig.peak_rail_V, fig.shielding
        for k, cell in enumerate(g.cells):
            rows = slice(k * g.n_corner, (k + 1) * g.n_corner)
            margin, above = margin_all[:, rows], above_all[:, rows]
            results[cell.name] = CellEsdExposure(
                cell=cell.name, topology=g.topology, oxide=cell.oxide, corners=g.corners,
                events=[ev.label for ev in events], fill_capacitance_nF=float(np.max(fill_c[rows])) / nano,
                v_bd_pulse_V=g.v_bd_pulse[rows], peak_rail_V=rail_all[:, rows],
                peak_oxide_V=peak_all[:, rows],
                time_above_ns=above / nano, margin=margin, shielding=shield_all[:, rows],
                survives=(margin > 1.0) & (above == 0.0),
                notes=[notes[rows] for notes in fig.notes])
    return [results[n] for n in names]
