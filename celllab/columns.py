"""Every catalog column once: name, unit, meaning, which direction is better, how it reads.

The catalog tables, the filter language, rankings, Pareto fronts, CSV/JSON headers, CLI tables
and the TUI all take their column facts from here. Names carry their unit (``cap_fF``,
``leakage_nA_per_nF``); ``unit`` repeats it for headers and legends.

Worst and best over corners (one definition, ``Column.extreme``): per metric, *worst* is the
least favourable value over a cell's corners (the minimum of a higher-is-better metric, the
maximum of a lower-is-better one) and *best* the most favourable. The catalog's SQL aggregate
(``Column.sql_aggregate``) and the Python version (``Column.over_corners``) both come from it;
empty values (NaN, NULL) are skipped, and a metric empty at every corner stays empty.

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
from typing import Any, Literal

from celllab.units import from_si

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
                        one corner (``records.CornerFigures``); the engine calls it
    """

    name: str
    unit: str
    description: str
    better: Better | None = None
    kind: Kind = "number"
    digits: int = 4
    compute: Callable[[Any], float] | None = None

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

    def improved(self, before: float, after: float) -> bool:
        """Whether ``after`` is better than ``before`` in this column's direction."""
        return after > before if self.higher_is_better else after < before


def _per_nF(f: Any) -> float:
    return from_si(f.leakage_A, "nA") / from_si(f.c_lf_F, "nF") if f.c_lf_F > 0 else math.nan


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
    Column("bandwidth_GHz", "GHz", "usable bandwidth: where C_eff falls to C/sqrt(2)", "higher",
           compute=lambda f: from_si(f.bandwidth_Hz, "GHz")),
    Column("esl_pH", "pH", "equivalent series inductance", "lower",
           compute=lambda f: from_si(f.esl_H, "pH")),
    Column("srf_GHz", "GHz", "self-resonance frequency", "higher",
           compute=lambda f: from_si(f.srf_Hz, "GHz")),
    Column("tau_ps", "ps", "RC time constant ESR x C", "lower",
           compute=lambda f: from_si(f.tau_s, "ps")),
    Column("leakage_nA", "nA", "gate tunnelling leakage at the supply", "lower",
           compute=lambda f: from_si(f.leakage_A, "nA")),
    Column("leakage_nA_per_nF", "nA/nF", "leakage per nF of capacitance", "lower", compute=_per_nF),
    Column("oxide_field_MV_per_cm", "MV/cm", "oxide field at the supply", "lower",
           compute=lambda f: from_si(f.e_ox_V_per_m, "MV/cm")),
    Column("tddb_life_years", "years", "time to 0.01 % oxide breakdown of this cell at the supply", "higher",
           compute=lambda f: from_si(f.ttf_s, "years")),
    Column("pulse_vbd_V", "V", "gate-oxide breakdown voltage under a ~100 ns ESD-like pulse (rail clamps "
           "must hold the rails below it; empty for MOM)", "higher", compute=lambda f: f.vbd_pulse_V),
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


def unit_of(name: str) -> str:
    """Unit of a column ('' for text and unknown columns)."""
    column = COLUMNS.get(name)
    return column.unit if column else ""


def best_first_descending(name: str) -> bool:
    """Sort direction that puts the best values first (text and unknown columns ascending)."""
    column = RANKED.get(name)
    return column is not None and column.higher_is_better


# --- values that are bounds, not results -------------------------------------------------------

#: Flag codes (the text before the colon of a stored flag) that mark a metric's value as a
#: lower bound: the quantity lies beyond the analysed frequency sweep.
LOWER_BOUND_FLAGS: dict[str, str] = {
    "bandwidth_beyond_sweep": "bandwidth_GHz",
    "srf_beyond_sweep": "srf_GHz",
}

#: How a bound reads in front of its value, everywhere values are shown to people.
BOUND_MARK = "≥"


def bound_metrics(flags: Iterable[str] | None) -> frozenset[str]:
    """Metrics whose stored value is a lower bound, read from a row's (or corner's) flags."""
    found = set()
    for flag in flags or ():
        metric = LOWER_BOUND_FLAGS.get(str(flag).partition(":")[0].strip())
        if metric is not None:
            found.add(metric)
    return frozenset(found)


def is_lower_bound(row: Any, metric: str) -> bool:
    """Whether ``row[metric]`` is a lower bound rather than a result: the one place that decides.

    ``row`` is a catalog row (a mapping with ``flags``) or anything with a ``flags`` attribute
    (a ``records.CornerResult``). A worst/best catalog row carries the union of its corners'
    flags, so there the mark means "at least one corner only has a bound", which never hides
    a bound.
    """
    flags = row.get("flags") if isinstance(row, dict) else getattr(row, "flags", None)
    return metric in bound_metrics(flags)
