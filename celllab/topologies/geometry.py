"""Resolved cell geometry and the layout rules topologies build their geometry from.

Units: um (lengths), um^2 (areas), counts; these records are read back by people (catalog,
exports), so the unit stays in each name. Rules stated here once, used by the topology modules
(common practice, no source; docs/references.md [141], [142]; worked by hand in
tests/cells/test_geometry.py):

* Outline (every topology, applied by ``celllab.cells.geometry``): width = width_sites x
  site_width, height = height_rows x row_height. Every row has the ground rail along one edge and
  the power rail along the other, half of each rail inside the cell; rows of a multi-row cell
  alternate orientation (shared rails), so every row has the same geometry.
* Placement (the cell's ``placement``):

  - ``core_row``: a standard-cell row. Each row is split at the well boundary into an n-well half
    next to the power rail (``layout.nwell_height_um`` tall, half the row when omitted) and a
    p-well half next to the ground rail. The neighbours' wells reach the cell's side edges and,
    across the rails, the next rows' wells, so the row's n-well is on the power rail and its
    p-well on the ground rail everywhere around the cell. An NMOS may only sit on the p-well half
    and a PMOS only on the n-well half. A cell with one transistor type leaves the other half
    unused, to its well (the well stays, continuous with the neighbours'); a tied or
    cross-coupled cell puts one device on each half.
  - ``open_region``: space without row structure (I/O-ring spacers, corner cells, pad-ring gaps).
    A one-device cell may fill the whole active height of each row with one well; a cell with
    both device types splits the active height in two equal halves around the well boundary.

* Vertical room per row for one device (its band, before end caps), with r = rail_width / 2,
  c = rail_clearance, s = well_spacing (N-to-P active spacing; a well boundary sits in its
  middle, so an active keeps s/2 from any well edge, inside or outside), e = edge_margin:

  ========================  ======================================  ==========================
  device                    core_row                                open_region
  ========================  ======================================  ==========================
  NMOS (p-well)             H_p - r - c - s/2                       H - 2 (r + c)
  PMOS (n-well)             H_n - r - c - s/2                       H - 2 (r + c)
  NMOS + PMOS (both types)  each on its own half as above           each (H - 2 (r + c) - s) / 2
  n-well accumulation       H - (r + c) - max(r + c, S_nn + s/2);   H - 2 (r + c)
                            side margin max(e, S_nn + s/2)
  p-well accumulation       H - max(r + c, D) - max(r + c, s/2);    H - 2 max(r + c, D);
                            side margin max(e, D)                   side margin max(e, D)
  ========================  ======================================  ==========================

  H = row height, H_n / H_p = the row's n-well / p-well half; the side margin is e unless
  stated. An accumulation device is no transistor of the row: its well is on the other rail
  than the row's well of that type, so the cell becomes one well island over the whole row
  height and keeps the spacings to the neighbours' wells inside its outline. The n-well
  accumulation device (n+ gate over an n-well on the ground rail) keeps its n-well S_nn
  (``layout.nwell_to_nwell_space_um``) from the power-rail edge (the next row's n-well) and
  from both side edges (the neighbours' n-wells); toward the ground-rail edge it meets only
  p-well on the same rail. The p-well accumulation device (p+ gate over a p-well on the power
  rail) needs an isolated p-well in a deep n-well; its n-well ring is on the power rail and
  merges with the wells there (power-rail edge), and keeps D (``layout.deep_nwell_space_um``:
  ring plus deep-n-well spacing, from the active) from the ground-rail edge and both side
  edges, where the neighbours' p-wells may reach. In an open region the surroundings are
  substrate on the ground rail, so only the deep n-well keeps its spacing, on every side. A rule
  that needs S_nn or D refuses the cell when the deck gives none.
* MOS devices (``place_mos``): per row and device the diffusion (gate width) = band - 2
  poly_endcap. Along the width: side margin, then strip | gate | strip | ... | strip with
  ``fingers`` gates and fingers + 1 contacted diffusion strips, then side margin (both device
  types of a cell share the gate columns). A gate length left out fills the width:
  L = (width - 2 side margin - (fingers + 1) diffusion_strip) / fingers.
* MOM fingers (``place_mom``): fingers run along the cell height between two bus bars of one
  finger width; finger length = height - 2 finger_width - finger_space; finger count =
  floor((width - space) / (width_f + space)) per layer, one half space kept at each cell edge
  for abutment. Metal sits above the wells, so placement does not change it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from typing import Any, Literal

from scipy.constants import micro, nano

#: Rounding margins when comparing typed dimensions against limits, um (not design rules).
_SLACK_UM = 1e-9
_LENGTH_SLACK_UM = 1e-12
#: Geometry fields that shape the outline, placement and finger count of every topology.
OUTLINE_FIELDS: frozenset[str] = frozenset({"width_sites", "height_rows", "fingers", "placement"})
Placement = Literal["core_row", "open_region"]
#: Where a cell is placed (module docstring); the first is the default.
PLACEMENTS: tuple[Placement, ...] = ("core_row", "open_region")
#: MOS device roles by the well their body sits in (``characterization.mos.ROLES``).
DeviceRole = Literal["nmos", "pmos", "acc_n", "acc_p"]
#: Geometry fields of a MOS gate.
MOS_FIELDS: frozenset[str] = frozenset({"gate_length_um", "gate_width_um", "contacted_ends",
                                        "gate_contacted_ends"})
#: Geometry fields of metal finger (MOM) capacitors.
MOM_FIELDS: frozenset[str] = frozenset({"mom_bottom", "mom_top", "finger_width_um", "finger_space_um",
                                        "mom_alternate"})
_NM_TO_UM = nano / micro


@dataclass
class MomLayer:
    """One metal layer of a MOM finger capacitor (um, ohm)."""

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
    """Resolved geometry of one cell (um, um^2).

    ``gate_width_um`` is per finger, summed over rows, of the cell's device, or of the NMOS (on
    the p-well half) when the cell holds both types; ``pmos_gate_width_um`` is then the PMOS's
    (0 in one-device cells). ``device_region`` says where the devices sit in each row.
    """

    cell_width_um: float
    cell_height_um: float
    area_um2: float
    placement: str = "core_row"
    devices: int = 0                    # MOS devices per row (2 when both types share the cell)
    fingers: int = 0
    gate_length_um: float = 0.0
    gate_width_um: float = 0.0          # per finger, summed over rows (the NMOS of a two-device cell)
    pmos_gate_width_um: float = 0.0     # two-device cells: the PMOS, per finger summed over rows
    gate_area_um2: float = 0.0          # all devices
    diffusion_strips: int = 0
    device_region: str = ""             # where the devices sit in each row (people read it)
    mom_layers: list[MomLayer] = field(default_factory=list)
    mom_plate_area_um2: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class GeometryProblem(ValueError):
    """A cell that does not fit its outline; names the cell field at fault."""

    def __init__(self, fieldname: str, value: Any, message: str):
        super().__init__(message)
        self.field = fieldname
        self.value = value
        self.message = message


def active_row_height(deck: Any) -> float:
    """Height of one row left for devices after the rail and its clearances, um."""
    lay = deck.layout
    return float(lay.row_height_um - lay.rail_width_um - 2 * lay.rail_clearance_um)


@dataclass(frozen=True)
class Band:
    """Room of one MOS device in each row (module docstring), um."""

    role: str
    height_um: float          # before the two poly end caps
    side_margin_um: float     # diffusion to each side edge of the cell
    region: str               # where it sits, for people


def _needs(deck: Any, name: str, what: str, placement: str) -> float:
    value = getattr(deck.layout, name)
    if value is None:
        raise GeometryProblem("placement", placement, f"the deck's [layout] gives no {name}, which {what} "
                              "needs; add it to the deck")
    return float(value)


def device_band(spec: Any, deck: Any, role: str, *, both_types: bool = False) -> Band:
    """The band of one device in role ``role`` (``DeviceRole``) under the cell's placement.

    ``both_types``: the cell holds an NMOS and a PMOS (each then takes its own half). Raises
    ``GeometryProblem`` when the rule needs a spacing the deck does not give.
    """
    lay = deck.layout
    r, c, s = lay.rail_width_um / 2, lay.rail_clearance_um, lay.well_spacing_um
    edge = lay.edge_margin_um
    height = lay.row_height_um
    placement = spec.placement
    if placement == "core_row":
        if role == "nmos":
            return Band(role, lay.pwell_half_um - r - c - s / 2, edge, "p-well half")
        if role == "pmos":
            return Band(role, lay.nwell_half_um - r - c - s / 2, edge, "n-well half")
        if role == "acc_n":
            s_nn = _needs(deck, "nwell_to_nwell_space_um", "an n-well accumulation cell in a core row", placement)
            keep = s_nn + s / 2
            return Band(role, height - (r + c) - max(r + c, keep), max(edge, keep),
                        "ground-rail n-well island over the row")
        if role == "acc_p":
            dnw = _needs(deck, "deep_nwell_space_um", "a p-well accumulation cell (deep n-well)", placement)
            return Band(role, height - max(r + c, dnw) - max(r + c, s / 2), max(edge, dnw),
                        "isolated p-well in a deep n-well over the row")
    elif placement == "open_region":
        if both_types and role in ("nmos", "pmos"):
            half = "p-well" if role == "nmos" else "n-well"
            return Band(role, (height - 2 * (r + c) - s) / 2, edge, f"{half} half (open region)")
        if role in ("nmos", "pmos", "acc_n"):
            return Band(role, height - 2 * (r + c), edge, "full row (open region)")
        if role == "acc_p":
            dnw = _needs(deck, "deep_nwell_space_um", "a p-well accumulation cell (deep n-well)", placement)
            return Band(role, height - 2 * max(r + c, dnw), max(edge, dnw),
                        "isolated p-well in a deep n-well (open region)")
    raise ValueError(f"no band rule for role {role!r} in placement {placement!r}")


def place_mos(spec: Any, deck: Any, geo: Geometry, bands: Sequence[Band]) -> None:
    """Fill in the MOS gates: one device per band in each row (one or two bands).

    The first band's device gives ``gate_width_um``; a second band (the PMOS of a two-device
    cell) gives ``pmos_gate_width_um``. Raises ``GeometryProblem`` naming the cell field that
    does not fit.
    """
    lay = deck.layout
    widths = [b.height_um - 2 * lay.poly_endcap_um for b in bands]
    max_w_row = min(widths)
    if max_w_row <= 0:
        short = bands[widths.index(max_w_row)]
        raise GeometryProblem("height_rows", spec.height_rows,
                              f"row too short for a device on the {short.region} after rails, clearances, "
                              "well spacings and end caps")
    if spec.gate_width_um is not None:
        w_min = deck.oxides[spec.oxide].min_width_um
        if spec.gate_width_um < w_min - _LENGTH_SLACK_UM:
            raise GeometryProblem("gate_width_um", spec.gate_width_um,
                                  f"below the oxide's minimum gate width {w_min:g} um")
        if spec.gate_width_um > max_w_row + _SLACK_UM:
            raise GeometryProblem("gate_width_um", spec.gate_width_um,
                                  f"devices taller than the row allows; at most {max_w_row:.4g} um per row")
        widths = [spec.gate_width_um] * len(bands)
    margin = max(b.side_margin_um for b in bands)
    avail = geo.cell_width_um - 2 * margin - (spec.fingers + 1) * lay.diffusion_strip_um
    l_min = deck.oxides[spec.oxide].min_gate_length_um
    if spec.gate_length_um is None:
        length = avail / spec.fingers
        if length < l_min - _LENGTH_SLACK_UM:
            raise GeometryProblem("fingers", spec.fingers,
                                  f"{spec.fingers} fingers do not fit in {spec.width_sites} sites: gate "
                                  f"length would be {length:.4g} um, below the minimum {l_min:g} um")
    else:
        length = spec.gate_length_um
        if length < l_min - _LENGTH_SLACK_UM:
            raise GeometryProblem("gate_length_um", length, f"below the oxide's minimum gate length {l_min:g} um")
        if spec.fingers * length > avail + _SLACK_UM:
            need = spec.fingers * length + (spec.fingers + 1) * lay.diffusion_strip_um + 2 * margin
            raise GeometryProblem("gate_length_um", length,
                                  f"devices wider than the cell: {spec.fingers} x {length:g} um gates need "
                                  f"{need:.4g} um, the cell is {geo.cell_width_um:.4g} um wide")
    geo.devices = len(bands)
    geo.fingers = spec.fingers
    geo.gate_length_um = length
    geo.gate_width_um = widths[0] * spec.height_rows
    geo.pmos_gate_width_um = widths[1] * spec.height_rows if len(bands) > 1 else 0.0
    geo.gate_area_um2 = spec.fingers * length * (geo.gate_width_um + geo.pmos_gate_width_um)
    geo.diffusion_strips = spec.fingers + 1
    geo.device_region = " + ".join(b.region for b in bands)


def place_mom(spec: Any, deck: Any, geo: Geometry) -> None:
    """Fill in the MOM finger layers (``mom_bottom`` .. ``mom_top``) over the whole outline.

    Raises ``GeometryProblem`` naming the cell field that does not fit.
    """
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
        min_w, min_s = m.min_width_nm * _NM_TO_UM, m.min_space_nm * _NM_TO_UM
        w = spec.finger_width_um if spec.finger_width_um is not None else min_w
        s = spec.finger_space_um if spec.finger_space_um is not None else min_s
        if w < min_w - _SLACK_UM:
            raise GeometryProblem("finger_width_um", w, f"below {m.name} minimum width {min_w:g} um")
        if s < min_s - _SLACK_UM:
            raise GeometryProblem("finger_space_um", s, f"below {m.name} minimum space {min_s:g} um")
        count = math.floor((geo.cell_width_um - s) / (w + s))
        length = geo.cell_height_um - 2 * w - s
        if count < 2 or length <= 0:
            raise GeometryProblem("width_sites", spec.width_sites,
                                  f"too narrow for two {m.name} fingers of {w:g} um at {s:g} um spacing")
        layers.append(MomLayer(m.name, w, s, length, count, m.thickness_nm * _NM_TO_UM, m.height_nm * _NM_TO_UM,
                               m.ild_eps_r, m.sheet_ohm_per_sq, m.via_below_ohm))
    geo.mom_layers = layers
    geo.mom_plate_area_um2 = geo.area_um2


def nmos_and_pmos_per_row(spec: Any, deck: Any, geo: Geometry) -> None:
    """An NMOS on the p-well half and a PMOS on the n-well half of every row: the placement of
    every two-device cell (tied CMOS, cross-coupled pair)."""
    place_mos(spec, deck, geo, [device_band(spec, deck, "nmos", both_types=True),
                                device_band(spec, deck, "pmos", both_types=True)])
