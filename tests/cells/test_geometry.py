"""Geometry rules: outline, core-row well halves, open regions, end caps, fingers, MOM fingers.

Hand arithmetic uses lumen130's layout (invented demo values): site 0.425 um, row 3.825 um, rail
0.38 um (r = 0.19 um inside the cell at each edge), rail clearance c = 0.17 um, poly end cap
0.16 um, diffusion strip 0.36 um, edge margin 0.11 um, well spacing s = 0.56 um, n-well half
1.98 um (p-well half 3.825 - 1.98 = 1.845 um), n-well to n-well space 0.95 um, deep-n-well space
1.25 um; minimum gate length 0.12 um (core) and 0.35 um (io). The rules are those stated in
celllab/topologies/geometry.py (common practice, no source; docs/references.md [141], [142]).
"""

from __future__ import annotations

import copy
import math
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.cells import CellSpec, resolve, resolve_geometry
from celllab.cells.geometry import GeometryProblem
from celllab.deck import Deck
from celllab.errors import CellError
from celllab.topologies.geometry import device_band


def cell(topology: str = "nmos_inversion", **fields: Any) -> CellSpec:
    return CellSpec.model_validate({"name": "g", "topology": topology, "width_sites": 8, **fields})


def deck_with(deck: Deck, **layout: Any) -> Deck:
    """The deck with layout fields replaced (also non-numeric ones such as rail_layer)."""
    data = copy.deepcopy(deck.full_dump())
    data["layout"].update(layout)
    return Deck.model_validate(data)


def problem(spec: CellSpec, deck: Deck) -> GeometryProblem:
    with pytest.raises(GeometryProblem) as info:
        resolve_geometry(spec, deck)
    return info.value


# --- the row worked by hand: one 8-site, 2-finger cell of each kind -----------------------------
#
# Outline: 8 x 0.425 = 3.4 um wide, 3.825 um tall, 13.005 um^2.
# Gate length (every cell with the 0.11 um edge margin): L = (3.4 - 2 x 0.11 - 3 x 0.36)/2 = 1.05 um.
# Core row, p-well half (NMOS): band 1.845 - 0.19 - 0.17 - 0.56/2 = 1.205 um; W = 1.205 - 2 x 0.16
#   = 0.885 um; gate area 2 x 1.05 x 0.885 = 1.8585 um^2.
# Core row, n-well half (PMOS): band 1.98 - 0.19 - 0.17 - 0.28 = 1.34 um; W = 1.02 um; gate area
#   2 x 1.05 x 1.02 = 2.142 um^2.
# Tied CMOS and cross-coupled pair in a core row: both halves, 2 x 1.05 x (0.885 + 1.02) = 4.0005 um^2.
# Open region, one NMOS: band 3.825 - 2 x (0.19 + 0.17) = 3.105 um; W = 2.785 um; gate area
#   2 x 1.05 x 2.785 = 5.8485 um^2.
# Open region, pair: each (3.105 - 0.56)/2 = 1.2725 um; W = 0.9525 um each; the same 4.0005 um^2 as
#   in the core row (the two halves add up to the same height whatever the split).

ROW_BY_HAND = [
    # topology, placement, gate_width_um (first device), pmos_gate_width_um, gate_area_um2, devices
    ("nmos_inversion", "core_row", 0.885, 0.0, 1.8585, 1),
    ("pmos_inversion", "core_row", 1.02, 0.0, 2.142, 1),
    ("tied_cmos", "core_row", 0.885, 1.02, 4.0005, 2),
    ("cross_coupled", "core_row", 0.885, 1.02, 4.0005, 2),
    ("nmos_inversion", "open_region", 2.785, 0.0, 5.8485, 1),
    ("cross_coupled", "open_region", 0.9525, 0.9525, 4.0005, 2),
]


@pytest.mark.parametrize(("topology", "placement", "w_first", "w_pmos", "area", "devices"), ROW_BY_HAND)
def test_row_geometry_by_hand(lumen130: Deck, topology: str, placement: str, w_first: float, w_pmos: float,
                              area: float, devices: int) -> None:
    # Source: hand arithmetic above (rules of celllab/topologies/geometry.py, [CP]); rel 1e-12
    geo = resolve_geometry(cell(topology, width_sites=8, fingers=2, placement=placement), lumen130)
    assert (geo.cell_width_um, geo.cell_height_um, geo.area_um2) == pytest.approx((3.4, 3.825, 13.005), rel=1e-12)
    assert geo.placement == placement
    assert geo.gate_length_um == pytest.approx(1.05, rel=1e-12)
    assert geo.gate_width_um == pytest.approx(w_first, rel=1e-12)
    assert geo.pmos_gate_width_um == pytest.approx(w_pmos, rel=1e-12, abs=1e-15)
    assert geo.gate_area_um2 == pytest.approx(area, rel=1e-12)
    assert geo.devices == devices and geo.diffusion_strips == 3


def test_core_row_nmos_and_pmos_use_only_their_half(lumen130: Deck) -> None:
    nmos = resolve_geometry(cell("nmos_inversion"), lumen130)
    pmos = resolve_geometry(cell("pmos_inversion"), lumen130)
    assert nmos.device_region == "p-well half" and pmos.device_region == "n-well half"
    # the halves plus the rails, clearances, well spacing and end caps make up the row
    lay = lumen130.layout
    used = (nmos.gate_width_um + pmos.gate_width_um + 4 * lay.poly_endcap_um + 2 * lay.rail_width_um / 2
            + 2 * lay.rail_clearance_um + lay.well_spacing_um)
    assert used == pytest.approx(lay.row_height_um, rel=1e-12)
    # the split moves width from one half to the other, one for one
    moved = deck_with(lumen130, nwell_height_um=1.90)
    assert resolve_geometry(cell("nmos_inversion"), moved).gate_width_um == pytest.approx(0.885 + 0.08, rel=1e-12)
    assert resolve_geometry(cell("pmos_inversion"), moved).gate_width_um == pytest.approx(1.02 - 0.08, rel=1e-12)
    # without nwell_height_um the row splits in the middle: (3.825/2 - 0.19 - 0.17 - 0.28) - 0.32 = 0.9525
    middle = deck_with(lumen130, nwell_height_um=None)
    assert resolve_geometry(cell("nmos_inversion"), middle).gate_width_um == pytest.approx(0.9525, rel=1e-12)


def test_accumulation_wells_by_hand(lumen130: Deck) -> None:
    # n-well on the ground rail, core row: keep = 0.95 + 0.28 = 1.23 um from the power-rail and side
    # edges; band 3.825 - (0.19 + 0.17) - 1.23 = 2.235 um, W = 1.915 um; 16 sites = 6.8 um:
    # L = (6.8 - 2 x 1.23 - 3 x 0.36)/2 = 1.63 um. Source: hand arithmetic ([CP] rules); rel 1e-12
    acc_n = resolve_geometry(cell("accumulation", width_sites=16, fingers=2), lumen130)
    assert (acc_n.gate_width_um, acc_n.gate_length_um) == pytest.approx((1.915, 1.63), rel=1e-12)
    # isolated p-well (deep n-well), core row: 1.25 um from the ground-rail and side edges, the
    # rail rule (0.36 um) at the power-rail edge: band 3.825 - 1.25 - 0.36 = 2.215 um, W = 1.895 um;
    # L = (6.8 - 2.5 - 1.08)/2 = 1.61 um
    acc_p = resolve_geometry(cell("accumulation", width_sites=16, fingers=2, accumulation_well="p"), lumen130)
    assert (acc_p.gate_width_um, acc_p.gate_length_um) == pytest.approx((1.895, 1.61), rel=1e-12)
    # open region: the n-well island needs no spacing (W = 2.785 um as an NMOS); the deep n-well
    # keeps 1.25 um on all sides: band 3.825 - 2.5 = 1.325 um, W = 1.005 um
    open_n = resolve_geometry(cell("accumulation", width_sites=16, fingers=2, placement="open_region"), lumen130)
    open_p = resolve_geometry(cell("accumulation", width_sites=16, fingers=2, placement="open_region",
                                   accumulation_well="p"), lumen130)
    assert open_n.gate_width_um == pytest.approx(2.785, rel=1e-12)
    assert open_p.gate_width_um == pytest.approx(1.005, rel=1e-12)
    assert open_p.gate_length_um == pytest.approx(1.61, rel=1e-12)


@pytest.mark.parametrize(("well", "missing", "placement"), [
    ("n", "nwell_to_nwell_space_um", "core_row"),
    ("p", "deep_nwell_space_um", "core_row"),
    ("p", "deep_nwell_space_um", "open_region"),
])
def test_spacing_the_deck_does_not_give_refuses_the_cell(lumen130: Deck, well: str, missing: str,
                                                         placement: str) -> None:
    bare = deck_with(lumen130, **{missing: None})
    err = problem(cell("accumulation", width_sites=16, accumulation_well=well, placement=placement), bare)
    assert err.field == "placement" and missing in err.message
    # cells that do not need it are unaffected
    assert resolve_geometry(cell("nmos_inversion"), bare).gate_width_um == pytest.approx(0.885, rel=1e-12)


def test_mos_mom_device_follows_its_half(lumen130: Deck) -> None:
    under = {d: resolve_geometry(cell("mos_mom", mos_device=d, mom_top="M3"), lumen130).gate_width_um
             for d in ("nmos", "pmos")}
    assert under == pytest.approx({"nmos": 0.885, "pmos": 1.02}, rel=1e-12)


def test_device_band_names_no_rule_for_an_unknown_role(lumen130: Deck) -> None:
    with pytest.raises(ValueError, match="no band rule"):
        device_band(cell(), lumen130, "bipolar")


def test_rows_add_gate_width(lumen130: Deck) -> None:
    one = resolve_geometry(cell(height_rows=1), lumen130)
    three = resolve_geometry(cell(height_rows=3), lumen130)
    assert three.gate_width_um == pytest.approx(3 * one.gate_width_um)
    assert three.cell_height_um == pytest.approx(3 * 3.825)


def test_explicit_gate_length_and_width(lumen130: Deck) -> None:
    # 4 x 0.5 um gates + 5 x 0.36 um strips + 2 x 0.11 um margins = 4.02 um <= 16 x 0.425 = 6.8 um
    geo = resolve_geometry(cell(width_sites=16, fingers=4, gate_length_um=0.5, gate_width_um=0.8), lumen130)
    assert geo.gate_length_um == 0.5
    assert geo.gate_width_um == 0.8
    assert geo.gate_area_um2 == pytest.approx(4 * 0.5 * 0.8)
    # the full p-well half is allowed exactly
    assert resolve_geometry(cell(gate_width_um=0.885), lumen130).gate_width_um == 0.885
    # both devices of a tied cell take an explicit width
    tied = resolve_geometry(cell("tied_cmos", gate_width_um=0.5), lumen130)
    assert (tied.gate_width_um, tied.pmos_gate_width_um) == (0.5, 0.5)


def test_devices_wider_than_the_cell(lumen130: Deck) -> None:
    err = problem(cell(width_sites=4, fingers=2, gate_length_um=0.5), lumen130)
    assert err.field == "gate_length_um"
    # need 2 x 0.5 + 3 x 0.36 + 2 x 0.11 = 2.3 um; the cell is 4 x 0.425 = 1.7 um
    assert "devices wider than the cell" in err.message
    assert "2.3 um" in err.message and "1.7 um" in err.message


def test_fingers_that_do_not_fit(lumen130: Deck) -> None:
    err = problem(cell(width_sites=4, fingers=4), lumen130)
    assert err.field == "fingers"
    # L = (1.7 - 0.22 - 5 x 0.36) / 4 = -0.08 um, below 0.12 um
    assert "-0.08 um" in err.message and "0.12 um" in err.message


def test_derived_length_below_the_minimum(lumen130: Deck) -> None:
    # 3 fingers in 4 sites: L = (1.7 - 0.22 - 4 x 0.36)/3 = 0.0133 um < 0.12 um
    assert problem(cell(width_sites=4, fingers=3), lumen130).field == "fingers"
    # 2 fingers: L = (1.7 - 0.22 - 1.08)/2 = 0.2 um, fits
    assert resolve_geometry(cell(width_sites=4, fingers=2), lumen130).gate_length_um == pytest.approx(0.2)


def test_gate_length_minimum_depends_on_the_oxide(lumen130: Deck) -> None:
    assert resolve_geometry(cell(gate_length_um=0.3), lumen130).gate_length_um == 0.3
    err = problem(cell(gate_length_um=0.3, oxide="io"), lumen130)
    assert err.field == "gate_length_um" and "0.35 um" in err.message
    assert problem(cell(gate_length_um=0.1), lumen130).field == "gate_length_um"


def test_gate_width_larger_than_the_half(lumen130: Deck) -> None:
    err = problem(cell(gate_width_um=0.9), lumen130)
    assert err.field == "gate_width_um"
    assert "at most 0.885 um per row" in err.message
    # the PMOS half is taller; a tied cell is bound by the smaller half
    assert resolve_geometry(cell("pmos_inversion", gate_width_um=1.0), lumen130).gate_width_um == 1.0
    assert "0.885 um" in problem(cell("tied_cmos", gate_width_um=1.0), lumen130).message
    # an open-region NMOS has the whole row: 2.785 um
    assert "2.785 um" in problem(cell(gate_width_um=3.0, placement="open_region"), lumen130).message


def test_row_too_short_for_a_device(lumen130: Deck) -> None:
    squat = deck_with(lumen130, poly_endcap_um=1.5)       # 1.205 - 2 x 1.5 < 0
    assert problem(cell(), squat).field == "height_rows"
    # the p-well half runs out first: 1.205 - 2 x 0.62 < 0 while the n-well half keeps 1.34 - 1.24 = 0.1
    tight = deck_with(lumen130, poly_endcap_um=0.62)
    assert resolve_geometry(cell("pmos_inversion"), tight).gate_width_um == pytest.approx(0.1)
    err = problem(cell("tied_cmos"), tight)
    assert err.field == "height_rows" and "p-well half" in err.message
    # ... and the whole row of an open region still has room: 3.105 - 1.24 = 1.865
    assert resolve_geometry(cell(placement="open_region"), tight).gate_width_um == pytest.approx(1.865)


def test_oxide_missing_from_the_deck(lumen130: Deck) -> None:
    data = lumen130.full_dump()
    del data["oxides"]["io"]
    core_only = Deck.model_validate(data)
    err = problem(cell(oxide="io"), core_only)
    assert err.field == "oxide" and "allowed: core" in err.message


def test_rail_missing_from_the_deck(lumen130: Deck) -> None:
    err = problem(cell(rail="analog"), lumen130)
    assert err.field == "rail" and "allowed: core, io" in err.message
    data = lumen130.full_dump()
    data["supplies"]["named"] = {"analog": {"voltage_V": 1.5, "power_net": "AVDD", "ground_net": "AVSS"}}
    with_analog = Deck.model_validate(data)
    assert resolve_geometry(cell(rail="analog"), with_analog).gate_width_um == pytest.approx(0.885)


def test_resolve_turns_problems_into_cell_errors(lumen130: Deck) -> None:
    with pytest.raises(CellError) as info:
        resolve(cell(width_sites=4, fingers=4), lumen130)
    (p,) = info.value.problems
    assert (p.file, p.field, p.value) == ("g", "fingers", 4)


@settings(max_examples=60, deadline=None)
@given(st.integers(4, 200), st.integers(1, 3), st.integers(1, 4),
       st.sampled_from(["nmos_inversion", "cross_coupled", "tied_cmos", "accumulation"]),
       st.sampled_from(["core_row", "open_region"]))
def test_derived_gates_fill_the_width(lumen130: Deck, width: int, rows: int, fingers: int,
                                      topology: str, placement: str) -> None:
    deck = lumen130
    lay = deck.layout
    spec = cell(topology, width_sites=width, height_rows=rows, fingers=fingers, placement=placement)
    try:
        geo = resolve_geometry(spec, deck)
    except GeometryProblem as err:
        assert err.field == "fingers"
        return
    role = "acc_n" if topology == "accumulation" else "nmos"
    margin = device_band(spec, deck, role).side_margin_um
    used = 2 * margin + fingers * geo.gate_length_um + (fingers + 1) * lay.diffusion_strip_um
    assert used == pytest.approx(geo.cell_width_um, rel=1e-12)
    assert geo.gate_length_um >= deck.oxides["core"].min_gate_length_um
    assert 0 < geo.gate_area_um2 < geo.area_um2


# --- MOM fingers ------------------------------------------------------------------------------

def test_mom_default_layers_and_counts(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom", width_sites=8), lumen130)
    # rails on M1: bottom defaults to M2, top to two layers above it
    assert [m.name for m in geo.mom_layers] == ["M2", "M3", "M4"]
    m2 = geo.mom_layers[0]
    assert (m2.finger_width_um, m2.finger_space_um) == (0.2, 0.21)
    # count = floor((3.4 - 0.21) / (0.2 + 0.21)) = floor(7.78) = 7
    assert m2.finger_count == 7
    # length = 3.825 - 2 x 0.2 - 0.21 = 3.215 um
    assert m2.finger_length_um == pytest.approx(3.215)
    assert (m2.thickness_um, m2.height_um, m2.ild_eps_r, m2.sheet_ohm_per_sq, m2.via_below_ohm) == \
        pytest.approx((0.35, 1.25, 3.6, 0.07, 6.0))
    assert geo.mom_plate_area_um2 == pytest.approx(geo.area_um2)
    assert geo.devices == 0 and geo.gate_area_um2 == 0


def test_mom_thick_layer_by_hand(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom", width_sites=8, height_rows=2, mom_bottom="M5", mom_top="M5"), lumen130)
    (m5,) = geo.mom_layers
    # floor((3.4 - 0.46) / 0.90) = floor(3.267) = 3; length 7.65 - 0.88 - 0.46 = 6.31 um
    assert m5.finger_count == 3
    assert m5.finger_length_um == pytest.approx(6.31)


def test_mom_explicit_finger_pitch(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom", mom_top="M3", finger_width_um=0.3, finger_space_um=0.3), lumen130)
    # floor((3.4 - 0.3) / 0.6) = floor(5.167) = 5 on both layers
    assert [m.finger_count for m in geo.mom_layers] == [5, 5]


@pytest.mark.parametrize(("bottom", "layers"), [
    ("M2", ["M2", "M3", "M4"]),
    ("M4", ["M4", "M5"]),          # the default top stops at the top of the stack
    ("M5", ["M5"]),
])
def test_mom_default_top(lumen130: Deck, bottom: str, layers: list[str]) -> None:
    geo = resolve_geometry(cell("mom", mom_bottom=bottom), lumen130)
    assert [m.name for m in geo.mom_layers] == layers


def test_mom_bottom_follows_the_rail_layer(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom"), deck_with(lumen130, rail_layer="M2"))
    assert [m.name for m in geo.mom_layers] == ["M3", "M4", "M5"]
    err = problem(cell("mom"), deck_with(lumen130, rail_layer="M5"))
    assert err.field == "mom_bottom" and "no metal layer above the rail layer" in err.message


@pytest.mark.parametrize(("fields", "field", "says"), [
    ({"mom_top": "M9"}, "mom_top", "allowed: M1, M2, M3, M4, M5"),
    ({"mom_bottom": "M0"}, "mom_bottom", "allowed: M1, M2, M3, M4, M5"),
    ({"mom_bottom": "M1"}, "mom_bottom", "must be above the rail layer M1; allowed: M2, M3, M4, M5"),
    ({"mom_bottom": "M4", "mom_top": "M3"}, "mom_top", "must not be below mom_bottom M4"),
    ({"finger_width_um": 0.1}, "finger_width_um", "below M2 minimum width 0.2 um"),
    ({"finger_space_um": 0.2}, "finger_space_um", "below M2 minimum space 0.21 um"),
    ({"width_sites": 2}, "width_sites", "too narrow for two M2 fingers"),
])
def test_mom_problems(lumen130: Deck, fields: dict[str, Any], field: str, says: str) -> None:
    err = problem(cell("mom", **fields), lumen130)
    assert err.field == field
    assert says in err.message


def test_mom_narrowest_cell(lumen130: Deck) -> None:
    # 3 sites = 1.275 um: floor((1.275 - 0.21)/0.41) = floor(2.6) = 2 fingers, the minimum
    assert resolve_geometry(cell("mom", width_sites=3, mom_top="M2"), lumen130).mom_layers[0].finger_count == 2


def test_mos_mom_has_both_parts(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mos_mom", width_sites=8, fingers=2, mom_top="M3"), lumen130)
    assert geo.devices == 1 and geo.gate_length_um == pytest.approx(1.05)
    assert [m.name for m in geo.mom_layers] == ["M2", "M3"]


@settings(max_examples=60, deadline=None)
@given(st.integers(3, 300))
def test_mom_finger_count_follows_the_pitch_rule(lumen130: Deck, width: int) -> None:
    deck = lumen130
    geo = resolve_geometry(cell("mom", width_sites=width), deck)
    wider = resolve_geometry(cell("mom", width_sites=width + 1), deck)
    for layer, more in zip(geo.mom_layers, wider.mom_layers):
        pitch = layer.finger_width_um + layer.finger_space_um
        # the fingers plus one space fit, one more finger does not
        assert layer.finger_count * pitch + layer.finger_space_um <= geo.cell_width_um + 1e-9
        assert (layer.finger_count + 1) * pitch + layer.finger_space_um > geo.cell_width_um
        assert more.finger_count >= layer.finger_count
        assert layer.finger_count == math.floor((geo.cell_width_um - layer.finger_space_um) / pitch)
