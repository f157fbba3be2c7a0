"""Catalog side of planning: which stored cells may fill a block, and their figures at the
corners the policies pick (SI: F, A, m, m^2, Hz, V).

The only planner module that reads the catalog. Every figure is taken through a named policy
of ``corners``: low-frequency capacitance and leakage from the catalog's ``corner="worst"``
aggregate (or the block's named corner), the useful capacitance C_eff(f) and the PDN corner
computed here from each cell's stored per-corner data with the same definition of worst.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray
from pydantic import ValidationError
from scipy.constants import femto, giga, micro, nano

from celllab.deck.schema import Deck
from celllab.errors import CelllabError, PlanError, Problem
from celllab.physics.impedance import effective_capacitance
from celllab.planner import corners as policy
from celllab.planner.block import BlockFile
from celllab.records import CellResult

if TYPE_CHECKING:
    from celllab.catalog import Catalog

__all__ = [
    "PLACEMENTS",
    "Candidate",
    "CatalogContext",
    "cell_placement",
    "check_catalog",
    "load_candidates",
    "useful_capacitance",
]

#: Where a cell may stand: in-row gaps ("row") and/or open-region slots ("open"). A core-row
#: cell carries both well halves and its rails, so an open slot may be tiled with it as a small
#: grid of rows (``packing.grid_copies``); an open-region cell (full-height single-type device,
#: no row structure) never enters a row gap. Common practice, no source.
PLACEMENTS: dict[str, frozenset[str]] = {
    "core_row": frozenset({"row", "open"}),
    "open_region": frozenset({"open"}),
    "any": frozenset({"row", "open"}),
}


def cell_placement(row: Mapping[str, Any]) -> frozenset[str]:
    """Where a catalog cell may be placed: a subset of {"row", "open"}.

    Reads a ``placement`` column ("core_row", "open_region" or "any") when the catalog has
    one; without it a cell is taken as a core-row cell. Core-row cells may also stand in an
    open slot they fit (its outline in um decides, ``packing.grid_copies``).
    """
    value = row.get("placement")
    if value is None:
        return PLACEMENTS["any"]
    return PLACEMENTS.get(str(value), PLACEMENTS["any"])


@dataclass(frozen=True)
class Candidate:
    """One catalog cell that may fill the block (SI).

    cap : low-frequency capacitance per copy at the ``CAPACITANCE`` policy corner, F
    leakage : per copy at the ``LEAKAGE_BUDGET`` policy corner, A
    oxide_area : thin-oxide gate area per copy, m^2 (0 for other oxides and MOM)
    width_um, height_um : outline, um
    corner_cap, corner_leakage : (n_corners,) per stored corner (``CatalogContext.corners``)
    pdn_corner : corner whose stored Z(f) stands for the cell in the lumped PDN
    esr, bandwidth : catalog ESR (ohm) and usable bandwidth (Hz) at the query corner (NaN if
    missing)
    record : the stored cell (every corner's Z(f), metrics and equivalent circuit)
    bandwidth_is_bound : the catalog stores the bandwidth only as a lower bound (no cutoff or
    resonance found up to it); plan reports carry the flag with the value
    """

    name: str
    cell_hash: str
    topology: str
    oxide: str
    esd_safe: bool
    width_sites: int
    height_rows: int
    width_um: float
    height_um: float
    placement: frozenset[str]
    cap: float
    leakage: float
    oxide_area: float
    corner_cap: NDArray[np.float64]
    corner_leakage: NDArray[np.float64]
    pdn_corner: str
    esr: float
    bandwidth: float
    record: CellResult
    bandwidth_is_bound: bool = False


@dataclass(frozen=True)
class CatalogContext:
    """What the plan needs from the deck stored with the catalog."""

    deck: Deck
    supply: float
    corner: str
    corners: tuple[str, ...]
    thin_oxide: str


def _suggest(value: str, allowed: list[str]) -> str:
    guess = difflib.get_close_matches(value, allowed, n=1)
    return f". Did you mean {guess[0]!r}?" if guess else ""


def check_catalog(block: BlockFile, catalog: Catalog) -> CatalogContext:
    """Deck, corner and supply against the catalog (``PlanError`` located in the block file)."""
    b, c = block.block, block.candidates
    decks = [d.name for d in catalog.decks() if d.current]
    if b.deck not in decks:
        msg = "no such deck in the catalog; allowed: " + (", ".join(decks) or "(catalog empty)")
        raise PlanError([block.problem("block.deck", msg + _suggest(b.deck, decks), b.deck)])
    problems: list[Problem] = []
    stored = catalog.corners(b.deck)
    allowed = [policy.WORST, *stored]
    if c.corner not in allowed:
        problems.append(block.problem(
            "candidates.corner", f"not a corner of deck {b.deck}; allowed: "
            + ", ".join(allowed) + _suggest(c.corner, allowed), c.corner))
    params = catalog.deck_params(b.deck)
    try:
        deck = Deck.model_validate(params)
    except ValidationError:
        raise PlanError([block.problem("block.deck", "the deck stored in the catalog cannot be "
                                       "read by this version: rebuild the catalog", b.deck)]
                        ) from None
    supply = b.supply_V if b.supply_V is not None else deck.supplies.core_V
    if problems:
        raise PlanError(problems)
    thin = min(deck.oxides, key=lambda name: deck.oxides[name].eot_m)
    return CatalogContext(deck=deck, supply=float(supply), corner=c.corner,
                          corners=tuple(stored), thin_oxide=thin)


def _usable(row: Mapping[str, Any]) -> bool:
    cap, leak = row.get("cap_fF"), row.get("leakage_nA")
    return (isinstance(cap, (int, float)) and bool(np.isfinite(cap)) and cap > 0
            and isinstance(leak, (int, float)) and bool(np.isfinite(leak)) and leak >= 0)


def _outline_um(record: CellResult, ctx: CatalogContext) -> tuple[float, float]:
    g = record.geometry
    width = g.get("resolved_cell_width_um")
    height = g.get("resolved_cell_height_um")
    if not isinstance(width, (int, float)) or not isinstance(height, (int, float)):
        width = record.width_sites * ctx.deck.layout.site_width_um
        height = record.height_rows * ctx.deck.layout.row_height_um
    return float(width), float(height)


def _oxide_area(record: CellResult, ctx: CatalogContext) -> float:
    if record.oxide != ctx.thin_oxide:
        return 0.0
    area = record.geometry.get("resolved_gate_area_um2")
    if not isinstance(area, (int, float)):
        area = 0.0 if record.topology == "mom" else record.gate_area_um2
    return float(area) * micro**2


def load_candidates(block: BlockFile, catalog: Catalog, ctx: CatalogContext
                    ) -> tuple[list[Candidate], dict[str, int]]:
    """Cells matching the block's filter with usable figures, and how many each check
    excluded."""
    where = block.candidates.where
    try:
        rows = catalog.query(deck=block.block.deck, corner=ctx.corner, where=where, limit=None)
    except CelllabError as exc:
        raise PlanError([block.problem("candidates.where", p.message or str(p), where)
                         for p in exc.problems]) from None
    excluded = {"no usable cap_fF or leakage_nA": 0, "broken by the ESD zap (esd_survive)": 0,
                "broken oxide over the fault limit (broken_oxide_ok)": 0}
    out: list[Candidate] = []
    for row in rows:
        if not _usable(row):
            excluded["no usable cap_fF or leakage_nA"] += 1
            continue
        if block.budgets.esd_survive and any(_number(row.get(k)) < 0 for k in ("hbm_margin_V", "cdm_margin_V")):
            excluded["broken by the ESD zap (esd_survive)"] += 1
            continue
        if block.budgets.broken_oxide_ok and _number(row.get("broken_oxide_ok")) == 0:
            excluded["broken oxide over the fault limit (broken_oxide_ok)"] += 1
            continue
        record = catalog.cell(row["name"], deck=block.block.deck)
        caps = np.array([_metric(record, c, "cap_fF") for c in ctx.corners]) * femto
        leaks = np.array([_metric(record, c, "leakage_nA") for c in ctx.corners]) * nano
        if ctx.corner == policy.WORST:
            pdn_corner = ctx.corners[int(policy.PDN_RESPONSE.worst_index(caps))]
        else:
            pdn_corner = ctx.corner
        width_um, height_um = _outline_um(record, ctx)
        out.append(Candidate(
            name=row["name"], cell_hash=row["cell_hash"], topology=row["topology"],
            oxide=row["oxide"], esd_safe=bool(row.get("esd_safe")),
            width_sites=int(row["width_sites"]), height_rows=int(row["height_rows"]),
            width_um=width_um, height_um=height_um, placement=cell_placement(row),
            cap=float(row["cap_fF"]) * femto, leakage=float(row["leakage_nA"]) * nano,
            oxide_area=_oxide_area(record, ctx), corner_cap=caps, corner_leakage=leaks,
            pdn_corner=pdn_corner, esr=_number(row.get("esr_ohm")),
            bandwidth=_number(row.get("bandwidth_GHz")) * giga, record=record,
            bandwidth_is_bound=bool(_number(row.get("bandwidth_is_bound")) == 1.0)))
    if not out:
        why = "; ".join(f"{n} {k}" for k, n in excluded.items() if n)
        raise PlanError([block.problem(
            "candidates.where", f"no cell of deck {block.block.deck} can fill the block "
            f"({len(rows)} match the filter" + (f"; excluded: {why}" if why else "") + ")",
            where)])
    return out, {k: n for k, n in excluded.items() if n}


def _number(value: Any) -> float:
    return float(value) if isinstance(value, (int, float)) else float("nan")


def _metric(record: CellResult, corner: str, name: str) -> float:
    try:
        value = record.corner(corner).metrics.get(name)
    except KeyError:
        return float("nan")
    return float(value) if isinstance(value, (int, float)) else float("nan")


def useful_capacitance(cells: list[Candidate], frequency: float, ctx: CatalogContext
                       ) -> tuple[NDArray[np.float64], list[str]]:
    """C_eff = -1 / (2 pi f Im Z) of each cell at ``frequency`` (Hz) from its stored Z(f), at
    the ``USEFUL_CAPACITANCE`` policy corner (or the block's named corner), F; and that corner.

    Interpolated linearly in log f between stored points; NaN where ``frequency`` lies outside
    a corner's stored sweep. A negative C_eff (above self-resonance) counts as 0.
    """
    names = [ctx.corner] if ctx.corner != policy.WORST else list(ctx.corners)
    values = np.full((len(cells), len(names)), np.nan)
    for i, cell in enumerate(cells):
        for k, corner in enumerate(names):
            try:
                response = cell.record.corner(corner).response
            except KeyError:
                continue
            f = np.asarray(response.freq_Hz, dtype=float)
            z = np.asarray(response.z_ohm, dtype=complex)
            keep = (f > 0) & np.isfinite(z)
            f, z = f[keep], z[keep]
            if f.size < 2 or not f[0] <= frequency <= f[-1]:
                continue
            c_eff = effective_capacitance(f, z)
            values[i, k] = float(np.interp(np.log(frequency), np.log(f), c_eff))
    index = policy.USEFUL_CAPACITANCE.worst_index(values, axis=1)
    worst = np.take_along_axis(values, index[:, None], axis=1)[:, 0]
    return np.maximum(worst, 0.0), [names[int(k)] for k in index]
