"""Derive a cell's full geometry from its outline and the deck's layout rules.

Units: um (lengths), um^2 (areas), counts. Rules (stated here once, used everywhere):

* Outline: width = width_sites x site_width, height = height_rows x row_height.
* Each row loses one rail width (half a rail at top and bottom edge) and a rail clearance at each
  rail: active height per row = row_height - rail_width - 2 rail_clearance.
* Single-type MOS cells (nmos/pmos inversion, accumulation, the MOS of mos_mom): per row the
  diffusion (gate width) = active height - 2 poly_endcap. Cross-coupled cells hold an NMOS and
  a PMOS per row: each gets (active height - well_spacing)/2 - 2 poly_endcap.
* Along the width: edge_margin, then strip | gate | strip | ... | strip with ``fingers`` gates and
  fingers + 1 contacted diffusion strips, then edge_margin. A gate length left out fills the width:
  L = (width - 2 edge_margin - (fingers + 1) diffusion_strip) / fingers.
* MOM: fingers run along the cell height between two bus bars of one finger width; finger length =
  height - 2 finger_width - finger_space; finger count = floor((width - space) / (width_f + space))
  per layer, one half space kept at each cell edge for abutment.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

from celllab.cells.schema import MOM_TOPOLOGIES, MOS_TOPOLOGIES, CellSpec


@dataclass
class MomLayer:
    name: str
    finger_width_um: float
    finger_space_um: float
    finger_length_um: float
    finger_count: int
    thickness_um: float
    height_um: float
    ild_eps_r: float
    sheet_ohm_per_sq: float
    via_below_ohm: float


@dataclass
class Geometry:
    """Resolved geometry of one cell (um, um^2)."""

    cell_width_um: float
    cell_height_um: float
    area_um2: float
    devices: int = 0                    # MOS devices (2 for cross_coupled)
    fingers: int = 0
    gate_length_um: float = 0.0
    gate_width_um: float = 0.0          # per finger, summed over rows
    gate_area_um2: float = 0.0          # all devices
    diffusion_strips: int = 0
    mom_layers: list[MomLayer] = field(default_factory=list)
    mom_plate_area_um2: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class GeometryProblem(ValueError):
    def __init__(self, fieldname: str, value: Any, message: str):
        super().__init__(message)
        self.field = fieldname
        self.value = value
        self.message = message


def resolve_geometry(spec: CellSpec, deck: Any) -> Geometry:
    """Fill in every derived dimension; raises GeometryProblem naming the field at fault."""
    lay = deck.layout
    width = spec.width_sites * lay.site_width_um
    height = spec.height_rows * lay.row_height_um
    geo = Geometry(cell_width_um=width, cell_height_um=height, area_um2=width * height)
    if spec.oxide not in deck.oxides:
        raise GeometryProblem("oxide", spec.oxide, "the deck defines no such oxide flavour; allowed: "
                              + ", ".join(deck.oxides))
    if spec.topology in MOS_TOPOLOGIES:
        _resolve_mos(spec, deck, geo)
    if spec.topology in MOM_TOPOLOGIES:
        _resolve_mom(spec, deck, geo)
    return geo


def _resolve_mos(spec: CellSpec, deck: Any, geo: Geometry) -> None:
    lay = deck.layout
    active = lay.row_height_um - lay.rail_width_um - 2 * lay.rail_clearance_um
    pair = spec.topology == "cross_coupled"
    per_device = (active - lay.well_spacing_um) / 2 if pair else active
    max_w_row = per_device - 2 * lay.poly_endcap_um
    if max_w_row <= 0:
        raise GeometryProblem("height_rows", spec.height_rows,
                              "row too short for a device after rails, clearances and end caps")
    w_min = deck.oxides[spec.oxide].min_width_um
    if spec.gate_width_um is not None:
        if spec.gate_width_um < w_min - 1e-12:
            raise GeometryProblem("gate_width_um", spec.gate_width_um,
                                  f"below the oxide's minimum gate width {w_min:g} um")
        if spec.gate_width_um > max_w_row + 1e-9:
            raise GeometryProblem("gate_width_um", spec.gate_width_um,
                                  f"devices taller than the row allows; at most {max_w_row:.4g} um per row")
        w_row = spec.gate_width_um
    else:
        w_row = max_w_row
    avail = geo.cell_width_um - 2 * lay.edge_margin_um - (spec.fingers + 1) * lay.diffusion_strip_um
    l_min = deck.oxides[spec.oxide].min_gate_length_um
    if spec.gate_length_um is None:
        length = avail / spec.fingers
        if length < l_min - 1e-12:
            raise GeometryProblem("fingers", spec.fingers,
                                  f"{spec.fingers} fingers do not fit in {spec.width_sites} sites: gate "
                                  f"length would be {length:.4g} um, below the minimum {l_min:g} um")
    else:
        length = spec.gate_length_um
        if length < l_min - 1e-12:
            raise GeometryProblem("gate_length_um", length, f"below the oxide's minimum gate length {l_min:g} um")
        if spec.fingers * length > avail + 1e-9:
            raise GeometryProblem("gate_length_um", length,
                                  f"devices wider than the cell: {spec.fingers} x {length:g} um gates need "
                                  f"{spec.fingers * length + (spec.fingers + 1) * lay.diffusion_strip_um + 2 * lay.edge_margin_um:.4g} um, "
                                  f"the cell is {geo.cell_width_um:.4g} um wide")
    geo.devices = 2 if pair else 1
    geo.fingers = spec.fingers
    geo.gate_length_um = length
    geo.gate_width_um = w_row * spec.height_rows
    geo.gate_area_um2 = geo.devices * spec.fingers * length * geo.gate_width_um
    geo.diffusion_strips = spec.fingers + 1


def _resolve_mom(spec: CellSpec, deck: Any, geo: Geometry) -> None:
    names = [m.name for m in deck.metals]
    rail_index = names.index(deck.layout.rail_layer)
    bottom = spec.mom_bottom or (names[rail_index + 1] if rail_index + 1 < len(names) else None)
    if bottom is None:
        raise GeometryProblem("mom_bottom", spec.mom_bottom, "no metal layer above the rail layer")
    if bottom not in names:
        raise GeometryProblem("mom_bottom", bottom, "not a metal layer of the deck; allowed: " + ", ".join(names))
    b = names.index(bottom)
    if b <= rail_index:
        raise GeometryProblem("mom_bottom", bottom, f"must be above the rail layer {deck.layout.rail_layer}; "
                              "allowed: " + ", ".join(names[rail_index + 1:]))
    top = spec.mom_top or names[min(b + 2, len(names) - 1)]
    if top not in names:
        raise GeometryProblem("mom_top", top, "not a metal layer of the deck; allowed: " + ", ".join(names))
    t = names.index(top)
    if t < b:
        raise GeometryProblem("mom_top", top, f"must not be below mom_bottom {bottom}")
    layers: list[MomLayer] = []
    for m in deck.metals[b: t + 1]:
        w = spec.finger_width_um if spec.finger_width_um is not None else m.min_width_nm / 1000
        s = spec.finger_space_um if spec.finger_space_um is not None else m.min_space_nm / 1000
        if w < m.min_width_nm / 1000 - 1e-9:
            raise GeometryProblem("finger_width_um", w, f"below {m.name} minimum width {m.min_width_nm / 1000:g} um")
        if s < m.min_space_nm / 1000 - 1e-9:
            raise GeometryProblem("finger_space_um", s, f"below {m.name} minimum space {m.min_space_nm / 1000:g} um")
        count = math.floor((geo.cell_width_um - s) / (w + s))
        length = geo.cell_height_um - 2 * w - s
        if count < 2 or length <= 0:
            raise GeometryProblem("width_sites", spec.width_sites,
                                  f"too narrow for two {m.name} fingers of {w:g} um at {s:g} um spacing")
        layers.append(MomLayer(m.name, w, s, length, count, m.thickness_nm / 1000, m.height_nm / 1000,
                               m.ild_eps_r, m.sheet_ohm_per_sq, m.via_below_ohm))
    geo.mom_layers = layers
    geo.mom_plate_area_um2 = geo.area_um2
