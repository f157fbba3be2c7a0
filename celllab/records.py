"""Characterization results: the records the engine produces and the catalog stores.

This module is the contract between characterization (``engine``) and everything downstream
(catalog, exports, CLI, TUI). It holds plain data only: no physics, no I/O.

Units: every numeric field carries its unit in its name (``cap_fF``, ``esr_ohm``); frequency
responses are stored in SI (Hz, ohm) as numpy arrays.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from celllab.columns import (
    AGGREGATE_CORNERS,
    BOUND_FLAGS,
    CELL_COLUMNS,
    METRIC_BY_NAME,
    METRIC_NAMES,
    METRICS,
    Better,
    Column,
    is_lower_bound,
)

#: Column facts (units, better direction, worst/best) live in ``celllab.columns``; the names are
#: re-exported here because ``CornerResult.metrics`` is keyed by ``METRIC_NAMES``.
MetricInfo = Column

__all__ = [
    "CELL_COLUMNS", "METRICS", "METRIC_BY_NAME", "METRIC_NAMES", "Better", "CVCurve", "CellResult",
    "CharacterizationRun", "CornerFigures", "CornerResult", "FrequencyResponse", "MetricInfo", "corner_bounds", "corner_metrics",
    "netlist_from_dict", "netlist_to_dict", "CornerCircuits", "ESD_NOT_RUN", "flag_names_metric",
]

#: The flag a corner carries when it was built without the deck's ESD events (its event
#: columns empty): the engine writes it, a later build with the events looks for it.
ESD_NOT_RUN = "esd_not_run"

_WORD_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_")


def flag_names_metric(metric: str, flags: Iterable[Any]) -> bool:
    """True when one of ``flags`` names ``metric`` as a word of its own: an occurrence with no
    letter, digit or ``_`` on either side (what explains an empty metric; a flag that is not
    text names nothing)."""
    n = len(metric)
    for f in flags:
        if not isinstance(f, str):
            continue
        i = f.find(metric)
        while i >= 0:
            if (i == 0 or f[i - 1] not in _WORD_CHARS) and (i + n >= len(f) or f[i + n] not in _WORD_CHARS):
                return True
            i = f.find(metric, i + 1)
    return False


@dataclass(frozen=True)
class CornerFigures:
    """SI figures of one cell at one corner: what each metric (``columns.METRICS``) is computed from.

    The engine also builds one whose fields are (n_variant, n_corner) arrays, to compute a whole
    group's metrics at once; every ``compute`` works element-wise on both.

    The engine fills them from a topology's group result. SRF and bandwidth above the analysed
    band are computed from the circuit (flagged); where the circuit shows none up to the search
    top, that top is stored with ``*_is_bound`` set. Undefined values are NaN.
    """

    area_um2: float          # cell footprint, um^2 (the one non-SI figure: densities are per um^2)
    c_lf_F: float            # low-frequency capacitance, F
    cap_ox_F: float          # plain Cox x area (+ metal), F
    esr_lf_ohm: float        # low-frequency Re Z, ohm
    esr_probe_ohm: float     # Re Z at the ESR probe frequency (1 GHz), ohm
    bandwidth_Hz: float      # C_eff (loop inductance removed) = C / sqrt(2), at most the SRF, Hz
    esl_H: float             # series inductance, H
    srf_Hz: float            # self-resonance, Hz
    tau_s: float             # ESR x C, s
    gate_leakage_A: float    # gate tunnelling current at the supply, A
    junction_leakage_A: float  # reverse current of the biased well junctions, A (NaN: not modelled)
    e_ox_V_per_m: float      # SiO2-equivalent oxide field, V/m
    tddb_rate_per_s_m2: float  # mission-average TDDB failure rate per m^2 of gate oxide, 1/(s m^2)
    vbd_pulse_V: float       # pulse breakdown voltage, V
    srf_is_bound: bool = False        # srf_Hz is only a lower bound (no resonance found up to it)
    bandwidth_is_bound: bool = False  # bandwidth_Hz is only a lower bound

    @property
    def leakage_A(self) -> float:
        """Total leakage at the supply, A: gate plus junction (a junction part not modelled counts 0).

        Figures may also be arrays (the engine computes a part's metrics at once): then element-wise.
        """
        if isinstance(self.junction_leakage_A, np.ndarray):
            return self.gate_leakage_A + np.where(np.isnan(self.junction_leakage_A), 0.0, self.junction_leakage_A)
        junction = 0.0 if math.isnan(self.junction_leakage_A) else self.junction_leakage_A
        return self.gate_leakage_A + junction
    # ESD events of the deck's [esd] table and one broken oxide (NaN: not computed / no oxide)
    hbm_peak_oxide_V: float = math.nan    # |peak V_ox| of the worst oxide under HBM, V
    hbm_time_above_s: float = math.nan    # time above the pulse breakdown voltage, s
    cdm_peak_oxide_V: float = math.nan
    cdm_time_above_s: float = math.nan
    hbm_oxide_share: float = math.nan     # |peak V_ox| / |peak rail| under HBM, 0..1
    esd_series_helps: float = math.nan    # 1: the cell's series path keeps the zap off its oxide
    fault_current_A: float = math.nan     # supply current with the worst oxide broken, A
    fault_power_W: float = math.nan       # supply power then, W
    fault_survives: float = math.nan      # 1: that current is within the rail's limit


@dataclass
class FrequencyResponse:
    """Small-signal impedance between the cell's two rail ports.

    freq_Hz : (n_freq,) Hz;  z_ohm : (n_freq,) complex ohm.
    """

    freq_Hz: np.ndarray
    z_ohm: np.ndarray

    def c_eff_F(self, series_inductance_H: float = 0.0) -> np.ndarray:
        """Effective capacitance C_eff = -1/(omega (Im Z - omega L_series)), F.

        With the default 0 H this is the raw -1/(omega Im Z), which rises toward the
        self-resonance as the loop inductance cancels the capacitive reactance (not extra
        charge); pass the cell's ESL (``esl_pH`` metric) for the capacitance of its RC network,
        the curve the usable bandwidth is read from (``physics.impedance`` module notes).
        """
        w = 2 * np.pi * self.freq_Hz
        return -1.0 / (w * (np.imag(self.z_ohm) - w * series_inductance_H))


@dataclass
class CVCurve:
    """Quasi-static capacitance versus gate-to-body bias for the cell, and its operating point."""

    bias_V: np.ndarray
    cap_F: np.ndarray
    operating_bias_V: float
    operating_cap_F: float


@dataclass
class CornerResult:
    """Metrics of one cell at one corner. ``metrics`` keys are ``METRIC_NAMES``."""

    corner: str
    temperature_C: float
    supply_V: float
    metrics: dict[str, float]
    response: FrequencyResponse
    cv: CVCurve | None = None
    flags: list[str] = field(default_factory=list)


class CornerCircuits(Mapping[str, Any]):
    """Corner name -> one-variant equivalent circuit, each built on first use and kept.

    ``build(variant, corner_index)`` gives the circuit (``topologies.GroupResult.netlist_for``).
    A library build reads few of them before storing, so the engine hands this instead of
    building every variant's circuits up front. Compares, copies and pickles as a plain dict.
    """

    __slots__ = ("_corners", "_build", "_variant", "_built")

    def __init__(self, corners: Sequence[str], build: Callable[[int, int], Any], variant: int):
        self._corners = {name: j for j, name in enumerate(corners)}
        self._build = build
        self._variant = variant
        self._built: dict[str, Any] = {}

    def __getitem__(self, corner: str) -> Any:
        try:
            return self._built[corner]
        except KeyError:
            pass
        j = self._corners[corner]  # KeyError for an unknown corner, as a dict
        netlist = self._built[corner] = self._build(self._variant, j)
        return netlist

    def __iter__(self) -> Iterator[str]:
        return iter(self._corners)

    def __len__(self) -> int:
        return len(self._corners)

    def __repr__(self) -> str:
        return repr(dict(self))

    def __reduce__(self) -> tuple[Any, ...]:
        return (dict, (dict(self),))


@dataclass
class CellResult:
    """One characterized cell variant under one deck.

    ``geometry`` is the resolved geometry (all derived values filled in), in the cell file's
    units (um, sites, rows). ``netlist`` maps corner name -> the one-variant
    ``physics.netlist.Netlist`` equivalent circuit at that corner. ``placement`` is where the
    cell sits (``core_row`` / ``open_region``) and ``rail`` the supply rail it decouples and was
    characterized at (results stored before rails existed follow their oxide).
    """

    name: str
    cell_hash: str
    family: str
    topology: str
    oxide: str
    geometry: dict[str, Any]
    area_um2: float
    width_sites: int
    height_rows: int
    gate_area_um2: float
    esd_safe: bool
    corners: list[CornerResult]
    netlist: Any = None
    notes: list[str] = field(default_factory=list)
    placement: str = "core_row"
    rail: str = ""

    def __post_init__(self) -> None:
        if not self.rail:
            self.rail = self.oxide

    def corner(self, name: str) -> CornerResult:
        for c in self.corners:
            if c.corner == name:
                return c
        raise KeyError(name)


@dataclass
class CharacterizationRun:
    """Everything one ``characterize`` call produced: the deck it used and the cell results."""

    deck_name: str
    deck_hash: str
    deck_params: dict[str, Any]
    model_version: str
    corners: list[str]
    cells: list[CellResult]
    source_files: list[str] = field(default_factory=list)


def corner_metrics(cell: CellResult, corner: str) -> dict[str, float]:
    """Metrics of ``cell`` at a corner name, or per metric its "worst" / "best" over the corners.

    The Python twin of the catalog's worst/best rows (``columns.Column.over_corners``); a corner
    the cell lacks raises ``KeyError``.
    """
    if corner in AGGREGATE_CORNERS:
        out = {m.name: m.over_corners((c.metrics.get(m.name) for c in cell.corners), corner)
               for m in METRICS}
        for m in METRICS:
            if m.bounds:  # a bound flag follows the corner that gives its metric's extreme
                chosen = [c.metrics.get(m.name) for c in cell.corners if c.metrics.get(m.bounds) == out[m.bounds]]
                out[m.name] = max((float(v) for v in chosen if v is not None), default=math.nan)
        return out
    return dict(cell.corner(corner).metrics)


def corner_bounds(cell: CellResult, corner: str) -> frozenset[str]:
    """Metrics whose value ``corner_metrics(cell, corner)`` gives is a lower bound (for "worst" /
    "best" the bound flag follows the corner that gives the value; ``columns.is_lower_bound``)."""
    chosen = corner_metrics(cell, corner)
    return frozenset(name for name in BOUND_FLAGS if is_lower_bound(chosen, name))


def netlist_to_dict(netlist: Any) -> dict[str, Any]:
    """A one-variant ``physics.netlist.Netlist`` as plain JSON-able data."""
    elements = []
    for el in netlist.elements:
        item: dict[str, Any] = {"kind": el.kind, "name": el.name, "node_a": el.node_a, "node_b": el.node_b,
                                "value": float(np.asarray(el.value).reshape(-1)[0])}
        if el.kind == "RCLINE":
            item["c_total"] = float(np.asarray(el.c_total).reshape(-1)[0])
            item["contacted_ends"] = int(el.contacted_ends)
            if el.node_far is not None:
                item["node_far"] = el.node_far
        elements.append(item)
    return {"name": netlist.name, "ports": list(netlist.ports), "elements": elements}


def netlist_from_dict(data: dict[str, Any]) -> Any:
    """Inverse of ``netlist_to_dict``."""
    from celllab.physics.netlist import Element, Netlist

    elements = tuple(
        Element(e["kind"], e["name"], e["node_a"], e["node_b"], e["value"], e.get("c_total"),
                contacted_ends=e.get("contacted_ends", 1), node_far=e.get("node_far"))
        for e in data["elements"])
    return Netlist(data["name"], elements, tuple(data["ports"]))
