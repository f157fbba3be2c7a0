"""Every catalog column once: name, unit, meaning, which direction is better, how it reads.

The catalog tables, the filter language, rankings, Pareto fronts, CSV/JSON headers, CLI tables
and the TUI all take their column facts from here. Names carry their unit (``cap_fF``,
``leakage_nA_per_nF``); ``unit`` repeats it for headers and legends.

Worst and best over corners (one definition, ``Column.extreme``): per metric, *worst* is the
least favourable value over a cell's corners (the minimum of a higher-is-better metric, the
maximum of a lower-is-better one) and *best* the most favourable. The catalog's SQL aggregate
(``Column.sql_aggregate``) and the Python version (``Column.over_corners``) both come from it;
empty values (NaN, NULL) are skipped, and a metric empty at every corner stays empty. A bound
flag (``Column.bounds``: ``srf_is_bound`` marks ``srf_GHz``) is not aggregated on its own: it is
the flag of the corner that gives its metric's worst/best value (``schema.fill_extremes``,
``records.corner_metrics``).

Corner selectors, read the same way by queries and exports: a corner name is that corner;
``"worst"`` / ``"best"`` (``AGGREGATE_CORNERS``) are the per-metric extremes above; ``None``
means no corner singled out: outputs that hold several rows give every corner (catalog
queries, CSV rows, the datasheet summary), outputs that hold exactly one corner (a SPICE
subcircuit, one Touchstone file) use the cell's first corner, the run's first.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

if TYPE_CHECKING:
    import numpy as np
    from numpy.typing import ArrayLike, NDArray

_convert: Callable[[Any, str], Any] | None = None


def from_si(value: Any, unit: str) -> Any:
    """``celllab.units.from_si``, imported on the first conversion: the column table itself is
    read by the command line's help and queries, which need no unit conversion (nor scipy)."""
    global _convert
    if _convert is None:
        from celllab.units import from_si as convert

        _convert = convert
    return _convert(value, unit)


Better = Literal["higher", "lower"]
Kind = Literal["number", "text", "bool"]
Extreme = Literal["worst", "best"]

#: The corner selectors that aggregate over a cell's corners, per metric.
AGGREGATE_CORNERS: tuple[Extreme, ...] = ("worst", "best")


@dataclass(frozen=True)
class Column:
    """Facts about one catalog column.

    Attributes
    ----------
    name : str          column, filter and header name (unit in the name)
    unit : str          unit for headers and legends ('' for text columns)
    description : str   one line for help texts and headers
    better : {"higher", "lower"} or None   ranking direction; None for text and conditions
    kind : {"number", "text", "bool"}
    digits : int        significant digits when shown to people
    compute : callable  metrics only: the value in ``unit`` from the SI figures of one cell at
                        one corner (``records.CornerFigures``); the engine calls it once per
                        group with array figures, so it must also work element-wise on those
    bounds : str        for a bound flag: the metric it marks (1 = that metric's value is only a
                        lower bound; shown with "≥", see ``bound_flag``)
    """

    name: str
    unit: str
    description: str
    better: Better | None = None
    kind: Kind = "number"
    digits: int = 4
    compute: Callable[[Any], float] | None = None
    bounds: str | None = None

    @property
    def higher_is_better(self) -> bool:
        return self.better == "higher"

    @property
    def arrow(self) -> str:
        """↑ when higher is better, ↓ when lower is, '' without a direction."""
        return {"higher": "↑", "lower": "↓"}.get(self.better or "", "")

    @property
    def minimize_sign(self) -> float:
        """-1 for higher-is-better (negate to minimize), +1 otherwise."""
        return -1.0 if self.higher_is_better else 1.0

    def takes_max(self, extreme: Extreme) -> bool:
        """Whether ``extreme`` ("worst" / "best") of this column is the maximum over corners."""
        if extreme not in AGGREGATE_CORNERS:
            raise ValueError(f"extreme = {extreme!r} -> allowed: {', '.join(AGGREGATE_CORNERS)}")
        return self.higher_is_better == (extreme == "best")

    def sql_aggregate(self, extreme: Extreme) -> str:
        """``MIN`` or ``MAX``: the SQL aggregate giving ``extreme`` over a cell's corners."""
        return "MAX" if self.takes_max(extreme) else "MIN"

    def over_corners(self, values: Iterable[float | None], extreme: Extreme) -> float:
        """``extreme`` of per-corner values, skipping empty ones (NaN when none is left)."""
        kept = [float(v) for v in values if v is not None and not math.isnan(float(v))]
        if not kept:
            return math.nan
        return max(kept) if self.takes_max(extreme) else min(kept)

    def corner_index(self, values: ArrayLike, extreme: Extreme, axis: int = -1
                     ) -> NDArray[np.intp]:
        """Index of the ``extreme`` corner along ``axis`` of an array of per-corner values:
        the vectorized twin of ``over_corners`` (empty values, NaN, are skipped; where every
        corner is empty the first is named)."""
        import numpy as np  # here, not at the top: the command line's start-up reads this table

        v = np.asarray(values, dtype=float)
        if self.takes_max(extreme):
            return np.asarray(np.argmax(np.where(np.isnan(v), -np.inf, v), axis=axis))
        return np.asarray(np.argmin(np.where(np.isnan(v), np.inf, v), axis=axis))

    def improved(self, before: float, after: float) -> bool:
        """Whether ``after`` is better than ``before`` in this column's direction."""
        return after > before if self.higher_is_better else after < before


def _per_nF(f: Any) -> float:
    if not isinstance(f.c_lf_F, float):  # arrays of a whole group (``records.CornerFigures``)
        import numpy as np

        return np.where(f.c_lf_F > 0, from_si(f.leakage_A, "nA") / from_si(f.c_lf_F, "nF"), math.nan)  # type: ignore[return-value]
    return from_si(f.leakage_A, "nA") / from_si(f.c_lf_F, "nF") if f.c_lf_F > 0 else math.nan


def _number(flag: Any) -> float:
    """A bool figure as 1.0 / 0.0 (element-wise for an array of them)."""
    return flag * 1.0 if not isinstance(flag, bool) else float(flag)


#: Per cell x corner metrics, in display order; each computed from ``records.CornerFigures``.
METRICS: tuple[Column, ...] = (
    Column("cap_fF", "fF", "low-frequency capacitance at the operating bias", "higher",
           compute=lambda f: from_si(f.c_lf_F, "fF")),
    Column("cap_density_fF_per_um2", "fF/um^2", "capacitance per cell footprint area", "higher",
           compute=lambda f: from_si(f.c_lf_F, "fF") / f.area_um2),
    Column("cap_ox_fF", "fF", "plain Cox x gate area (no depletion, centroid or overlap)", "higher",
           compute=lambda f: from_si(f.cap_ox_F, "fF")),
    Column("esr_ohm", "ohm", "low-frequency equivalent series resistance", "lower",
           compute=lambda f: f.esr_lf_ohm),
    Column("esr_1GHz_ohm", "ohm", "series resistance Re Z at 1 GHz", "lower",
           compute=lambda f: f.esr_probe_ohm),
    Column("bandwidth_GHz", "GHz", "usable bandwidth: where C_eff (loop inductance removed) falls to "
           "C/sqrt(2), at most the self-resonance (a lower bound where bandwidth_is_bound)", "higher",
           compute=lambda f: from_si(f.bandwidth_Hz, "GHz")),
    Column("bandwidth_is_bound", "bool", "1 when bandwidth_GHz is only a lower bound", "lower", kind="bool",
           compute=lambda f: _number(f.bandwidth_is_bound), bounds="bandwidth_GHz"),
    Column("esl_pH", "pH", "equivalent series inductance", "lower",
           compute=lambda f: from_si(f.esl_H, "pH")),
    Column("srf_GHz", "GHz", "self-resonance frequency (above the deck's analysed band: computed from the "
           "equivalent circuit and flagged; a lower bound where srf_is_bound)", "higher",
           compute=lambda f: from_si(f.srf_Hz, "GHz")),
    Column("srf_is_bound", "bool", "1 when srf_GHz is only a lower bound: no resonance in the circuit up to it",
           "lower", kind="bool", compute=lambda f: _number(f.srf_is_bound), bounds="srf_GHz"),
    Column("tau_ps", "ps", "RC time constant ESR x C", "lower",
           compute=lambda f: from_si(f.tau_s, "ps")),
    Column("leakage_nA", "nA", "total leakage at the supply: gate tunnelling plus well-junction reverse "
           "current", "lower", compute=lambda f: from_si(f.leakage_A, "nA")),
    Column("leakage_nA_per_nF", "nA/nF", "total leakage per nF of capacitance", "lower", compute=_per_nF),
    Column("gate_leakage_nA", "nA", "gate tunnelling current at the supply (electrons or holes by device)",
           "lower", compute=lambda f: from_si(f.gate_leakage_A, "nA")),
    Column("junction_leakage_nA", "nA", "reverse current of the well junctions the supply biases (empty when "
           "the deck gives no densities)", "lower", compute=lambda f: from_si(f.junction_leakage_A, "nA")),
    Column("oxide_field_MV_per_cm", "MV/cm", "oxide field at the supply", "lower",
           compute=lambda f: from_si(f.e_ox_V_per_m, "MV/cm")),
    Column("tddb_fit_per_mm2", "FIT/mm^2", "gate-oxide breakdown rate per mm^2 of this cell's gate oxide, "
           "averaged over 10 years at this corner's supply and temperature (times a fill's gate area: its "
           "rate; empty for MOM)", "lower", compute=lambda f: from_si(f.tddb_rate_per_s_m2, "FIT/mm^2")),
    Column("pulse_vbd_V", "V", "gate-oxide breakdown voltage under a ~100 ns ESD-like pulse (rail clamps "
           "must hold the rails below it; empty for MOM)", "higher", compute=lambda f: f.vbd_pulse_V),
    Column("hbm_oxide_peak_V", "V", "largest voltage across the cell's gate oxide during the deck's HBM zap "
           "([esd] hbm_V, unpowered, on the rail's clamp; transient of the cell's circuit; empty for MOM)",
           "lower", compute=lambda f: f.hbm_peak_oxide_V),
    Column("hbm_over_vbd_ns", "ns", "time that oxide spends above pulse_vbd_V during the HBM zap", "lower",
           compute=lambda f: from_si(f.hbm_time_above_s, "ns")),
    Column("hbm_margin_V", "V", "pulse_vbd_V minus hbm_oxide_peak_V (negative: the zap breaks the oxide)",
           "higher", compute=lambda f: f.vbd_pulse_V - f.hbm_peak_oxide_V),
    Column("cdm_oxide_peak_V", "V", "largest voltage across the cell's gate oxide during the deck's CDM "
           "event ([esd] cdm_V; empty for MOM)", "lower", compute=lambda f: f.cdm_peak_oxide_V),
    Column("cdm_over_vbd_ns", "ns", "time that oxide spends above pulse_vbd_V during the CDM event", "lower",
           compute=lambda f: from_si(f.cdm_time_above_s, "ns")),
    Column("cdm_margin_V", "V", "pulse_vbd_V minus cdm_oxide_peak_V (negative: the event breaks the oxide)",
           "higher", compute=lambda f: f.vbd_pulse_V - f.cdm_peak_oxide_V),
    Column("hbm_oxide_share_pct", "%", "share of the rail's HBM peak that reaches the worst oxide (100: the "
           "oxide sees the whole rail)", "lower", compute=lambda f: from_si(f.hbm_oxide_share, "%")),
    Column("esd_series_helps", "bool", "1 when the cell's own series path (the pair's devices, a long "
           "channel) keeps the HBM zap off its oxide: the oxide sees under 90 % of the rail", "higher",
           kind="bool", compute=lambda f: f.esd_series_helps),
    Column("broken_oxide_mA", "mA", "DC supply current if one oxide of the cell breaks (tied: spot and "
           "supply limit it; pair: the protecting device); empty for MOM", "lower",
           compute=lambda f: from_si(f.fault_current_A, "mA")),
    Column("broken_oxide_mW", "mW", "supply power drawn then", "lower",
           compute=lambda f: from_si(f.fault_power_W, "mW")),
    Column("broken_oxide_ok", "bool", "1 when that current stays within the rail's fault_current_limit_mA",
           "higher", kind="bool", compute=lambda f: f.fault_survives),
)

#: Per-cell (corner-independent) columns that can be filtered and ranked too.
CELL_COLUMNS: dict[str, Column] = {
    c.name: c
    for c in (
        Column("area_um2", "um^2", "cell footprint area", "lower"),
        Column("width_sites", "sites", "cell width in placement sites", "lower"),
        Column("height_rows", "rows", "cell height in placement rows", "lower"),
        Column("gate_area_um2", "um^2", "total gate (or plate) area", "higher"),
        Column("esd_safe", "bool", "1 when no gate is tied directly to a rail", "higher", kind="bool"),
        Column("placement", "", "where the cell sits: core_row (standard-cell row, NMOS on the p-well "
               "half, PMOS on the n-well half) or open_region (no row structure)", kind="text"),
        Column("rail", "", "supply rail the cell decouples and was characterized at (core, io or a "
               "named rail)", kind="text"),
    )
}

#: Conditions of one corner (empty in worst/best rows, where no single corner applies).
CORNER_COLUMNS: dict[str, Column] = {
    c.name: c
    for c in (
        Column("temperature_C", "degC", "corner temperature"),
        Column("supply_V", "V", "supply voltage at this corner"),
    )
}

#: Identity columns of a catalog row (text), in the filter language's order.
TEXT_COLUMNS: dict[str, Column] = {
    c.name: c
    for c in (
        Column("name", "", "cell name", kind="text"),
        Column("deck", "", "process deck", kind="text"),
        Column("family", "", "cell family", kind="text"),
        Column("topology", "", "decap topology", kind="text"),
        Column("oxide", "", "gate-oxide flavour", kind="text"),
        Column("corner", "", "corner (or the worst/best one per metric)", kind="text"),
    )
}

METRIC_NAMES: tuple[str, ...] = tuple(m.name for m in METRICS)
METRIC_BY_NAME: dict[str, Column] = {m.name: m for m in METRICS}
#: Every column above by name: text, metrics, cell columns, corner conditions.
COLUMNS: dict[str, Column] = {**TEXT_COLUMNS, **METRIC_BY_NAME, **CELL_COLUMNS, **CORNER_COLUMNS}
#: Columns with a ranking direction (metrics and the cell columns that have one).
RANKED: dict[str, Column] = {**METRIC_BY_NAME, **{n: c for n, c in CELL_COLUMNS.items() if c.better}}


#: Metric name -> the bool metric that marks its value as a lower bound.
BOUND_FLAGS: dict[str, str] = {c.bounds: c.name for c in METRICS if c.bounds}


def bound_flag(name: str) -> str | None:
    """The column that marks ``name``'s value as a lower bound (``srf_GHz`` -> ``srf_is_bound``)."""
    return BOUND_FLAGS.get(name)


def is_lower_bound(row: Any, name: str) -> bool:
    """Whether ``row`` (a mapping of column values, or a corner result) holds only a lower bound
    for ``name``: the one place that decides."""
    flag = BOUND_FLAGS.get(name)
    if flag is None:
        return False
    if hasattr(row, "metrics"):  # a records.CornerResult: its own metrics hold the flag
        row = row.metrics
    value = row.get(flag) if hasattr(row, "get") else None
    return value is not None and not (isinstance(value, float) and math.isnan(value)) and bool(value)


def unit_of(name: str) -> str:
    """Unit of a column ('' for text and unknown columns)."""
    column = COLUMNS.get(name)
    return column.unit if column else ""


def best_first_descending(name: str) -> bool:
    """Sort direction that puts the best values first (text and unknown columns ascending)."""
    column = RANKED.get(name)
    return column is not None and column.higher_is_better
