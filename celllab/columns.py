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
means no corner singled out, i.e. every corner.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Literal

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
    """

    name: str
    unit: str
    description: str
    better: Better | None = None
    kind: Kind = "number"
    digits: int = 4

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


#: Per cell x corner metrics, in display order.
METRICS: tuple[Column, ...] = (
    Column("cap_fF", "fF", "low-frequency capacitance at the operating bias", "higher"),
    Column("cap_density_fF_per_um2", "fF/um^2", "capacitance per cell footprint area", "higher"),
    Column("cap_ox_fF", "fF", "plain Cox x gate area (no depletion, centroid or overlap)", "higher"),
    Column("esr_ohm", "ohm", "low-frequency equivalent series resistance", "lower"),
    Column("esr_1GHz_ohm", "ohm", "series resistance Re Z at 1 GHz", "lower"),
    Column("bandwidth_GHz", "GHz", "usable bandwidth: where C_eff falls to C/sqrt(2)", "higher"),
    Column("esl_pH", "pH", "equivalent series inductance", "lower"),
    Column("srf_GHz", "GHz", "self-resonance frequency", "higher"),
    Column("tau_ps", "ps", "RC time constant ESR x C", "lower"),
    Column("leakage_nA", "nA", "gate tunnelling leakage at the supply", "lower"),
    Column("leakage_nA_per_nF", "nA/nF", "leakage per nF of capacitance", "lower"),
    Column("oxide_field_MV_per_cm", "MV/cm", "oxide field at the supply", "lower"),
    Column("tddb_life_years", "years", "time to 0.01 % oxide breakdown of this cell at the supply", "higher"),
    Column("pulse_vbd_V", "V", "gate-oxide breakdown voltage under a ~100 ns ESD-like pulse (rail clamps "
           "must hold the rails below it; empty for MOM)", "higher"),
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
#: Columns with a ranking direction (metrics and cell columns).
RANKED: dict[str, Column] = {**METRIC_BY_NAME, **CELL_COLUMNS}


def unit_of(name: str) -> str:
    """Unit of a column ('' for text and unknown columns)."""
    column = COLUMNS.get(name)
    return column.unit if column else ""


def best_first_descending(name: str) -> bool:
    """Sort direction that puts the best values first (text and unknown columns ascending)."""
    column = RANKED.get(name)
    return column is not None and column.higher_is_better
