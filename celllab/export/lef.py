"""LEF abstracts of decap cells with a technology section derived from the deck.

Written to the LEF/DEF 5.8 Language Reference: ``VERSION``, ``BUSBITCHARS``, ``DIVIDERCHAR``,
``UNITS DATABASE MICRONS``, ``MANUFACTURINGGRID``, then the layers in process order (bottom to
top), the placement ``SITE``, the ``MACRO``s and ``END LIBRARY``.

Technology (from the deck):

* one ``TYPE ROUTING`` layer per ``[[metals]]`` entry: ``DIRECTION`` (the rail layer runs along
  the rows, HORIZONTAL, and the others alternate), ``PITCH`` = min width + min space (one line
  and one space), ``WIDTH`` = min width, ``SPACING`` = min space, ``RESISTANCE RPERSQ``,
  ``HEIGHT`` and ``THICKNESS``;
* one ``TYPE CUT`` layer between neighbouring metals with ``RESISTANCE`` per cut = the upper
  metal's ``via_below_ohm`` (the deck gives no cut sizes, so no WIDTH or SPACING);
* ``SITE <deck>_core``: ``CLASS CORE``, ``SYMMETRY Y``, ``SIZE`` site width x row height.

Macros are written from the geometry the characterization used: the cell definition stored with
the record goes through ``celllab.cells.geometry.resolve_geometry`` under the deck again, and the
result must equal the stored resolved outline. Per cell:

* ``CLASS`` by placement (:func:`placement_class`): a core-row cell is ``CORE SPACER`` (a cell
  with power and ground pins only that fills row space); an open-region cell (pad-ring spacer
  or gap) is ``PAD SPACER`` (a spacer of the I/O rows);
* ``ORIGIN 0 0``, ``SIZE`` = outline (width = width_sites x site width), ``SYMMETRY X Y`` (R90
  too in open regions), ``SITE`` for core-row cells;
* the two rail ``PIN``s (``DIRECTION INOUT``, ``USE POWER``/``GROUND``, ``SHAPE ABUTMENT``), a
  rectangle on the rail layer along every row boundary, ``rail_width_um`` wide and centred on
  it, so half a rail lies inside the cell at its top and bottom edge; the ground rail is at the
  bottom edge of the first row and the rails alternate row by row (rows flip);
* ``OBS``: MOS cells block the rail layer between the rails over the diffusion (the contact
  straps to the rails); MOM cells block each finger layer over the finger array (bus bars to
  bus bars, full cell height). Poly and diffusion are not LEF routing layers here.

Every coordinate is an integer number of database units on the manufacturing grid; blockages
are snapped outwards (never smaller than the metal they stand for) and clipped to the outline.
"""

from __future__ import annotations

import datetime
import math
import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from decimal import Decimal
from pathlib import Path
from typing import Any, Literal

from pydantic import ValidationError

from celllab import MODEL_VERSION, __version__
from celllab.cells.expand import spec_from_record
from celllab.cells.geometry import GeometryProblem, resolve_geometry
from celllab.cells.schema import CellSpec
from celllab.errors import ExportError, Problem
from celllab.export import CAUTION
from celllab.export.files import write_text_atomic
from celllab.records import CellResult

__all__ = [
    "MACRO_CLASS",
    "PLACEMENTS",
    "MacroView",
    "Rect",
    "lef_grid",
    "macro_view",
    "placement_class",
    "render_lef",
    "site_name",
    "write_lef",
]

Placement = Literal["core_row", "open_region"]
PLACEMENTS: tuple[str, ...] = ("core_row", "open_region")
#: LEF macro class per placement (LEF/DEF 5.8 reference, MACRO CLASS).
MACRO_CLASS: dict[str, str] = {"core_row": "CORE SPACER", "open_region": "PAD SPACER"}
MACRO_SYMMETRY: dict[str, str] = {"core_row": "X Y", "open_region": "X Y R90"}

#: Manufacturing grids tried, coarsest first (um), and the database units LEF allows.
GRID_CANDIDATES_UM: tuple[float, ...] = (
    0.01,
    0.005,
    0.002,
    0.001,
    0.0005,
    0.00025,
    0.0002,
    0.0001,
    0.00005,
)
LEF_DATABASE_UNITS: tuple[int, ...] = (100, 200, 400, 800, 1000, 2000, 4000, 8000, 10000, 20000)
_ON_GRID = 1e-6  # slack, in grid steps, for the rounding of decimal deck lengths in binary


def placement_class(cell: CellResult) -> Placement:
    """Where the cell is placed: ``"core_row"`` (in a standard-cell row, spanning both well
    halves between the rails) or ``"open_region"`` (pad-ring spacer, corner or other space
    outside the rows). Read from the cell's geometry field ``placement``; cells without one are
    core-row cells."""
    value = cell.geometry.get("placement", cell.geometry.get("resolved_placement", "core_row"))
    if value not in PLACEMENTS:
        raise ExportError(
            [
                Problem(
                    f"cell {cell.name}",
                    "placement",
                    "not a placement; allowed: " + ", ".join(PLACEMENTS),
                    value,
                )
            ]
        )
    return value  # type: ignore[return-value]


@dataclass(frozen=True)
class Rect:
    """An axis-parallel rectangle on a layer, database units (integers)."""

    layer: str
    x1: int
    y1: int
    x2: int
    y2: int


@dataclass(frozen=True)
class MacroView:
    """What the LEF says about one cell, in database units."""

    name: str
    placement: Placement
    macro_class: str
    symmetry: str
    site: str | None
    width: int
    height: int
    width_sites: int
    pins: dict[str, tuple[str, list[Rect]]] = field(default_factory=dict)  # net -> (USE, rects)
    obstructions: list[Rect] = field(default_factory=list)


@dataclass(frozen=True)
class LefGrid:
    """Manufacturing grid (um) and database units per micron of one LEF file."""

    grid_um: float
    dbu: int

    @property
    def step(self) -> int:
        """Grid step in database units."""
        return round(self.grid_um * self.dbu)

    def units(self, um: float) -> int:
        """Nearest database unit of a length in um."""
        return round(um * self.dbu)

    def down(self, um: float) -> int:
        return math.floor(um * self.dbu / self.step + 1e-9) * self.step

    def text(self, units: int) -> str:
        decimals = len(str(self.dbu)) - 1
        return f"{units / self.dbu:.{decimals}f}"


def site_name(deck: Any) -> str:
    return f"{deck.name}_core"


def _deck_lengths(deck: Any) -> dict[str, tuple[float, float]]:
    """Deck lengths the LEF writes: field -> (value as the deck gives it, length in um)."""
    lay = deck.layout
    lengths = {
        "layout.site_width_um": (lay.site_width_um, lay.site_width_um),
        "layout.row_height_um": (lay.row_height_um, lay.row_height_um),
        "layout.rail_width_um (half of it)": (lay.rail_width_um, lay.rail_width_um / 2),
        "layout.edge_margin_um": (lay.edge_margin_um, lay.edge_margin_um),
    }
    for i, m in enumerate(deck.metals):
        lengths[f"metals[{i}].min_width_nm"] = (m.min_width_nm, m.min_width_nm / 1000)
        lengths[f"metals[{i}].min_space_nm"] = (m.min_space_nm, m.min_space_nm / 1000)
    return lengths


def _on_grid(length_um: float, grid_um: float) -> bool:
    steps = length_um / grid_um
    return abs(steps - round(steps)) <= _ON_GRID


def lef_grid(deck: Any, manufacturing_grid_um: float | None = None) -> LefGrid:
    """The manufacturing grid and database units for the deck.

    Given ``manufacturing_grid_um``, every deck length written to the LEF (site width, row
    height, half rail width, edge margin, metal widths and spaces) must be a whole number of
    grid steps; without it, the coarsest of ``GRID_CANDIDATES_UM`` on which they all lie.
    The database units are the smallest LEF value (>= 1000) holding the grid exactly.
    """
    lengths = _deck_lengths(deck)
    if manufacturing_grid_um is not None:
        if not (manufacturing_grid_um > 0 and math.isfinite(manufacturing_grid_um)):
            raise ExportError(
                [
                    Problem(
                        f"deck {deck.name}",
                        "manufacturing grid",
                        "must be a positive length (um)",
                        manufacturing_grid_um,
                    )
                ]
            )
        off = [name for name, (_, um) in lengths.items() if not _on_grid(um, manufacturing_grid_um)]
        if off:
            raise ExportError(
                [
                    Problem(
                        f"deck {deck.name}",
                        name,
                        f"not a whole number of {manufacturing_grid_um:g} um grid steps",
                        lengths[name][0],
                    )
                    for name in off
                ]
            )
        grid = manufacturing_grid_um
    else:
        fitting = [
            g for g in GRID_CANDIDATES_UM if all(_on_grid(um, g) for _, um in lengths.values())
        ]
        if not fitting:
            finest = GRID_CANDIDATES_UM[-1]
            raise ExportError(
                [
                    Problem(
                        f"deck {deck.name}",
                        name,
                        f"not on any manufacturing grid down to {finest:g} um",
                        value,
                    )
                    for name, (value, um) in lengths.items()
                    if not _on_grid(um, finest)
                ]
            )
        grid = fitting[0]
    for dbu in LEF_DATABASE_UNITS:
        if dbu >= 1000 and _on_grid(grid * dbu, 1.0):
            return LefGrid(grid, dbu)
    raise ExportError(
        [
            Problem(
                f"deck {deck.name}",
                "manufacturing grid",
                "no LEF database unit "
                "(" + ", ".join(map(str, LEF_DATABASE_UNITS)) + ") holds it exactly",
                grid,
            )
        ]
    )


def _spec(cell: CellResult) -> CellSpec:
    try:
        return spec_from_record(cell)
    except ValidationError as exc:
        detail = "; ".join(
            f"{'.'.join(map(str, e['loc'])) or 'cell'}: {e['msg']}" for e in exc.errors()
        )
        raise ExportError(
            [
                Problem(
                    f"cell {cell.name}",
                    "geometry",
                    f"the stored record does not define a cell layout ({detail})",
                    has_value=False,
                )
            ]
        ) from None


def macro_view(cell: CellResult, deck: Any, grid: LefGrid) -> MacroView:
    """The cell's LEF macro (outline, pins, blockages) from its resolved geometry."""
    spec = _spec(cell)
    try:
        geo = resolve_geometry(spec, deck)
    except GeometryProblem as exc:
        raise ExportError(
            [Problem(f"cell {cell.name}", exc.field, exc.message, exc.value)]
        ) from None
    for key, now in (("cell_width_um", geo.cell_width_um), ("cell_height_um", geo.cell_height_um)):
        stored = cell.geometry.get(f"resolved_{key}")
        if stored is not None and not math.isclose(float(stored), now, rel_tol=1e-9):
            raise ExportError(
                [
                    Problem(
                        f"cell {cell.name}",
                        key,
                        f"{now:g} um under deck {deck.name} "
                        f"but {float(stored):g} um when characterized; export with the "
                        "deck the cell was characterized under",
                        now,
                    )
                ]
            )
    lay = deck.layout
    placement = placement_class(cell)
    site_w, row_h = grid.units(lay.site_width_um), grid.units(lay.row_height_um)
    width, height = spec.width_sites * site_w, spec.height_rows * row_h
    half_rail = grid.units(lay.rail_width_um / 2)
    try:
        power, ground = deck.supplies.rail_nets(cell.rail)
    except KeyError:
        raise ExportError(
            [
                Problem(
                    f"cell {cell.name}",
                    "rail",
                    "the deck has no such supply rail; allowed: "
                    + ", ".join(deck.supplies.rail_names()),
                    cell.rail,
                )
            ]
        ) from None
    rails: dict[str, list[Rect]] = {power: [], ground: []}
    for k in range(spec.height_rows + 1):
        y = k * row_h
        net = ground if k % 2 == 0 else power
        rails[net].append(
            Rect(lay.rail_layer, 0, max(0, y - half_rail), width, min(height, y + half_rail))
        )
    obstructions: list[Rect] = []
    if geo.devices > 0:  # MOS devices between the rails
        margin = grid.units(lay.edge_margin_um)
        for r in range(spec.height_rows):
            y1, y2 = r * row_h + half_rail, (r + 1) * row_h - half_rail
            if y2 > y1 and width - 2 * margin > 0:
                obstructions.append(Rect(lay.rail_layer, margin, y1, width - margin, y2))
    for layer in geo.mom_layers:
        array = (
            layer.finger_count * layer.finger_width_um
            + (layer.finger_count - 1) * layer.finger_space_um
        )
        x1 = max(0, grid.down((geo.cell_width_um - array) / 2))
        obstructions.append(Rect(layer.name, x1, 0, width - x1, height))
    return MacroView(
        name=cell.name,
        placement=placement,
        macro_class=MACRO_CLASS[placement],
        symmetry=MACRO_SYMMETRY[placement],
        site=site_name(deck) if placement == "core_row" else None,
        width=width,
        height=height,
        width_sites=spec.width_sites,
        pins={power: ("POWER", rails[power]), ground: ("GROUND", rails[ground])},
        obstructions=obstructions,
    )


def _comment(text: str) -> str:
    return "# " + " ".join(str(text).split())


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _decimal(value: float) -> str:
    """A deck number as plain decimal text (LEF numbers have no exponent)."""
    text = format(Decimal(repr(float(value))), "f")
    return text.rstrip("0").rstrip(".") if "." in text else text


def _technology(deck: Any, grid: LefGrid) -> list[str]:
    t = grid.text
    lines = [
        "VERSION 5.8 ;",
        'BUSBITCHARS "[]" ;',
        'DIVIDERCHAR "/" ;',
        "",
        "UNITS",
        f"  DATABASE MICRONS {grid.dbu} ;",
        "END UNITS",
        "",
        f"MANUFACTURINGGRID {_decimal(grid.grid_um)} ;",
        "",
    ]
    names = [m.name for m in deck.metals]
    rail = names.index(deck.layout.rail_layer)
    for i, m in enumerate(deck.metals):
        if i > 0:
            cut = f"CUT_{names[i - 1]}_{m.name}"
            lines += [
                f"LAYER {cut}",
                "  TYPE CUT ;",
                f"  RESISTANCE {_decimal(m.via_below_ohm)} ;",
                f"END {cut}",
                "",
            ]
        width, space = grid.units(m.min_width_nm / 1000), grid.units(m.min_space_nm / 1000)
        lines += [
            f"LAYER {m.name}",
            "  TYPE ROUTING ;",
            f"  DIRECTION {'HORIZONTAL' if (i - rail) % 2 == 0 else 'VERTICAL'} ;",
            f"  PITCH {t(width + space)} ;",
            f"  WIDTH {t(width)} ;",
            f"  SPACING {t(space)} ;",
            f"  RESISTANCE RPERSQ {_decimal(m.sheet_ohm_per_sq)} ;",
            f"  HEIGHT {_decimal(m.height_nm / 1000)} ;",
            f"  THICKNESS {_decimal(m.thickness_nm / 1000)} ;",
            f"END {m.name}",
            "",
        ]
    site = site_name(deck)
    lines += [
        f"SITE {site}",
        "  CLASS CORE ;",
        "  SYMMETRY Y ;",
        f"  SIZE {t(grid.units(deck.layout.site_width_um))} BY "
        f"{t(grid.units(deck.layout.row_height_um))} ;",
        f"END {site}",
        "",
    ]
    return lines


def _rect(r: Rect, t: Any) -> str:
    return f"      RECT {t(r.x1)} {t(r.y1)} {t(r.x2)} {t(r.y2)} ;"


def _macro(view: MacroView, cell: CellResult, grid: LefGrid) -> list[str]:
    t = grid.text
    lines = [
        _comment(
            f"{view.name}: {cell.topology}, {cell.oxide} oxide, {_count(view.width_sites, 'site')}"
            f" x {_count(cell.height_rows, 'row')}, {view.placement.replace('_', ' ')} cell; "
            f"cell hash {cell.cell_hash}"
        ),
        f"MACRO {view.name}",
        f"  CLASS {view.macro_class} ;",
        "  ORIGIN 0 0 ;",
        f"  SIZE {t(view.width)} BY {t(view.height)} ;",
        f"  SYMMETRY {view.symmetry} ;",
    ]
    if view.site:
        lines.append(f"  SITE {view.site} ;")
    for net, (use, rects) in view.pins.items():
        lines += [
            f"  PIN {net}",
            "    DIRECTION INOUT ;",
            f"    USE {use} ;",
            "    SHAPE ABUTMENT ;",
            "    PORT",
        ]
        for layer in dict.fromkeys(r.layer for r in rects):
            lines.append(f"      LAYER {layer} ;")
            lines += ["  " + _rect(r, t) for r in rects if r.layer == layer]
        lines += ["    END", f"  END {net}"]
    if view.obstructions:
        lines.append("  OBS")
        for layer in dict.fromkeys(r.layer for r in view.obstructions):
            lines.append(f"    LAYER {layer} ;")
            lines += [_rect(r, t) for r in view.obstructions if r.layer == layer]
        lines.append("  END")
    lines += [f"END {view.name}", ""]
    return lines


def render_lef(
    cells: Sequence[CellResult],
    deck: Any,
    manufacturing_grid_um: float | None = None,
    date: str | None = None,
    model_version: str = MODEL_VERSION,
) -> str:
    """Render the deck's technology section and one macro per cell as LEF 5.8 text.

    Parameters
    ----------
    cells : sequence of CellResult   characterized under ``deck`` (their stored geometry is
        resolved again under it and must match)
    deck : celllab.deck.Deck
    manufacturing_grid_um : float, optional   default: derived by :func:`lef_grid`
    date : str, optional   written in the header (default: today)
    model_version : str   written in the header

    Raises
    ------
    ExportError   empty selection, duplicate names, a deck length off the grid, or a cell
        whose geometry cannot be resolved under the deck or differs from the characterized one
    """
    if not cells:
        raise ExportError(
            [
                Problem(
                    f"deck {deck.name}",
                    "cells",
                    "no cell to write; the selection is empty",
                    has_value=False,
                )
            ]
        )
    names = [c.name for c in cells]
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise ExportError(
            [
                Problem(
                    f"deck {deck.name}",
                    "cells",
                    "a library holds each cell once; given more than once",
                    ", ".join(duplicates),
                )
            ]
        )
    grid = lef_grid(deck, manufacturing_grid_um)
    views, problems = [], []
    for cell in cells:
        try:
            views.append(macro_view(cell, deck, grid))
        except ExportError as exc:
            problems += exc.problems
    if problems:
        raise ExportError(problems)
    today = date or datetime.date.today().isoformat()
    lines = [
        _comment(
            f"celllab {__version__} LEF view: technology of deck {deck.name} and "
            f"{_count(len(cells), 'decoupling-cell abstract')}"
        ),
        _comment(
            f"deck: {deck.name} (content hash {deck.content_hash}); models: {model_version}; "
            f"written {today}"
        ),
        _comment(f"CAUTION: estimate. {CAUTION}"),
        _comment(
            "the layer rules below restate the deck's minimum widths and spaces; they are "
            "not a design-rule deck"
        ),
        "",
        *_technology(deck, grid),
    ]
    for view, cell in zip(views, cells):
        lines += _macro(view, cell, grid)
    lines.append("END LIBRARY")
    return "\n".join(lines) + "\n"


def write_lef(
    path: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck: Any,
    manufacturing_grid_um: float | None = None,
    date: str | None = None,
    force: bool = False,
) -> Path:
    """Write :func:`render_lef` output to ``path`` atomically (``force``: replace a file)."""
    return write_text_atomic(path, render_lef(cells, deck, manufacturing_grid_um, date=date), force)
