"""Geometry rules: outline, rails, end caps, fingers, derived gate length, MOM fingers.

Hand arithmetic uses lumen130's layout: site 0.41 um, row 3.69 um, rail 0.41 um, rail clearance
0.20 um, poly end cap 0.18 um, diffusion strip 0.34 um, edge margin 0.10 um, well spacing 0.60 um;
minimum gate length 0.12 um (core) and 0.35 um (io).
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


def cell(topology: str = "nmos_inversion", **fields: Any) -> CellSpec:
    return CellSpec.model_validate({"name": "g", "topology": topology, "width_sites": 8, **fields})


def deck_with(deck: Deck, **layout: Any) -> Deck:
    """The deck with layout fields replaced (also non-numeric ones such as rail_layer)."""
    data = copy.deepcopy(deck.model_dump(mode="json"))
    data["layout"].update(layout)
    return Deck.model_validate(data)


def problem(spec: CellSpec, deck: Deck) -> GeometryProblem:
    with pytest.raises(GeometryProblem) as info:
        resolve_geometry(spec, deck)
    return info.value


# --- outline and MOS devices ------------------------------------------------------------------

def test_nmos_by_hand(lumen130: Deck) -> None:
    geo = resolve_geometry(cell(width_sites=8, fingers=2), lumen130)
    # outline: 8 x 0.41 = 3.28 um wide, 1 x 3.69 um tall, 12.1032 um^2
    assert geo.cell_width_um == pytest.approx(3.28)
    assert geo.cell_height_um == pytest.approx(3.69)
    assert geo.area_um2 == pytest.approx(12.1032)
    # active height 3.69 - 0.41 - 2 x 0.20 = 2.88; minus two end caps 2 x 0.18 -> W = 2.52 um
    assert geo.gate_width_um == pytest.approx(2.52)
    # L = (3.28 - 2 x 0.10 - 3 x 0.34) / 2 = 2.06 / 2 = 1.03 um
    assert geo.gate_length_um == pytest.approx(1.03)
    assert geo.diffusion_strips == 3
    assert geo.devices == 1 and geo.fingers == 2
    # 1 device x 2 fingers x 1.03 um x 2.52 um = 5.1912 um^2
    assert geo.gate_area_um2 == pytest.approx(5.1912)
    assert geo.mom_layers == []


def test_cross_coupled_by_hand(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("cross_coupled", width_sites=8, height_rows=2, fingers=1), lumen130)
    # each device: (2.88 - 0.60)/2 - 2 x 0.18 = 0.78 um per row, 2 rows -> 1.56 um
    assert geo.gate_width_um == pytest.approx(1.56)
    # L = 3.28 - 0.20 - 2 x 0.34 = 2.40 um
    assert geo.gate_length_um == pytest.approx(2.40)
    assert geo.devices == 2
    # 2 devices x 1 finger x 2.40 x 1.56 = 7.488 um^2
    assert geo.gate_area_um2 == pytest.approx(7.488)
    assert geo.area_um2 == pytest.approx(3.28 * 7.38)


@pytest.mark.parametrize("topology", ["pmos_inversion", "accumulation", "mos_mom"])
def test_single_device_topologies_share_the_nmos_rule(lumen130: Deck, topology: str) -> None:
    ref = resolve_geometry(cell(width_sites=8, fingers=2), lumen130)
    geo = resolve_geometry(cell(topology, width_sites=8, fingers=2), lumen130)
    assert (geo.devices, geo.gate_length_um, geo.gate_width_um) == (1, ref.gate_length_um, ref.gate_width_um)


def test_rows_add_gate_width(lumen130: Deck) -> None:
    one = resolve_geometry(cell(height_rows=1), lumen130)
    three = resolve_geometry(cell(height_rows=3), lumen130)
    assert three.gate_width_um == pytest.approx(3 * one.gate_width_um)
    assert three.cell_height_um == pytest.approx(3 * 3.69)


def test_explicit_gate_length_and_width(lumen130: Deck) -> None:
    # 4 x 0.5 um gates + 5 x 0.34 um strips + 2 x 0.10 um margins = 3.9 um <= 16 x 0.41 = 6.56 um
    geo = resolve_geometry(cell(width_sites=16, fingers=4, gate_length_um=0.5, gate_width_um=1.0), lumen130)
    assert geo.gate_length_um == 0.5
    assert geo.gate_width_um == 1.0
    assert geo.gate_area_um2 == pytest.approx(4 * 0.5 * 1.0)
    # the full row height is allowed exactly
    assert resolve_geometry(cell(gate_width_um=2.52), lumen130).gate_width_um == 2.52


def test_devices_wider_than_the_cell(lumen130: Deck) -> None:
    err = problem(cell(width_sites=4, fingers=2, gate_length_um=0.5), lumen130)
    assert err.field == "gate_length_um"
    # need 2 x 0.5 + 3 x 0.34 + 2 x 0.10 = 2.22 um; the cell is 4 x 0.41 = 1.64 um
    assert "devices wider than the cell" in err.message
    assert "2.22 um" in err.message and "1.64 um" in err.message


def test_fingers_that_do_not_fit(lumen130: Deck) -> None:
    err = problem(cell(width_sites=4, fingers=4), lumen130)
    assert err.field == "fingers"
    # L = (1.64 - 0.20 - 5 x 0.34) / 4 = -0.065 um, below 0.12 um
    assert "-0.065 um" in err.message and "0.12 um" in err.message


def test_derived_length_below_the_minimum(lumen130: Deck) -> None:
    # 3 fingers in 4 sites: L = (1.64 - 0.20 - 4 x 0.34)/3 = 0.0267 um < 0.12 um
    assert problem(cell(width_sites=4, fingers=3), lumen130).field == "fingers"
    # 2 fingers: L = (1.64 - 0.20 - 1.02)/2 = 0.21 um, fits
    assert resolve_geometry(cell(width_sites=4, fingers=2), lumen130).gate_length_um == pytest.approx(0.21)


def test_gate_length_minimum_depends_on_the_oxide(lumen130: Deck) -> None:
    assert resolve_geometry(cell(gate_length_um=0.3), lumen130).gate_length_um == 0.3
    err = problem(cell(gate_length_um=0.3, oxide="io"), lumen130)
    assert err.field == "gate_length_um" and "0.35 um" in err.message
    assert problem(cell(gate_length_um=0.1), lumen130).field == "gate_length_um"


def test_gate_width_larger_than_the_row(lumen130: Deck) -> None:
    err = problem(cell(gate_width_um=2.6), lumen130)
    assert err.field == "gate_width_um"
    assert "at most 2.52 um per row" in err.message
    # cross-coupled devices share the row: at most 0.78 um each
    assert "0.78 um" in problem(cell("cross_coupled", gate_width_um=1.0), lumen130).message


def test_row_too_short_for_a_device(lumen130: Deck) -> None:
    squat = deck_with(lumen130, poly_endcap_um=1.5)       # 2.88 - 2 x 1.5 < 0
    assert problem(cell(), squat).field == "height_rows"
    # cross-coupled runs out first: (2.88 - 0.60)/2 - 2 x 0.6 < 0 while 2.88 - 1.2 > 0
    tight = deck_with(lumen130, poly_endcap_um=0.6)
    assert resolve_geometry(cell(), tight).gate_width_um == pytest.approx(1.68)
    assert problem(cell("cross_coupled"), tight).field == "height_rows"


def test_oxide_missing_from_the_deck(lumen130: Deck) -> None:
    data = lumen130.model_dump(mode="json")
    del data["oxides"]["io"]
    core_only = Deck.model_validate(data)
    err = problem(cell(oxide="io"), core_only)
    assert err.field == "oxide" and "allowed: core" in err.message


def test_resolve_turns_problems_into_cell_errors(lumen130: Deck) -> None:
    with pytest.raises(CellError) as info:
        resolve(cell(width_sites=4, fingers=4), lumen130)
    (p,) = info.value.problems
    assert (p.file, p.field, p.value) == ("g", "fingers", 4)


@settings(max_examples=60, deadline=None)
@given(st.integers(4, 200), st.integers(1, 3), st.integers(1, 4),
       st.sampled_from(["nmos_inversion", "cross_coupled", "accumulation"]))
def test_derived_gates_fill_the_width(lumen130: Deck, width: int, rows: int, fingers: int,
                                      topology: str) -> None:
    deck = lumen130
    lay = deck.layout
    spec = cell(topology, width_sites=width, height_rows=rows, fingers=fingers)
    try:
        geo = resolve_geometry(spec, deck)
    except GeometryProblem as err:
        assert err.field == "fingers"
        return
    used = 2 * lay.edge_margin_um + fingers * geo.gate_length_um + (fingers + 1) * lay.diffusion_strip_um
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
    # count = floor((3.28 - 0.21) / (0.2 + 0.21)) = floor(7.488) = 7
    assert m2.finger_count == 7
    # length = 3.69 - 2 x 0.2 - 0.21 = 3.08 um
    assert m2.finger_length_um == pytest.approx(3.08)
    assert (m2.thickness_um, m2.height_um, m2.ild_eps_r, m2.sheet_ohm_per_sq, m2.via_below_ohm) == \
        pytest.approx((0.35, 1.25, 3.6, 0.07, 6.0))
    assert geo.mom_plate_area_um2 == pytest.approx(geo.area_um2)
    assert geo.devices == 0 and geo.gate_area_um2 == 0


def test_mom_thick_layer_by_hand(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom", width_sites=8, height_rows=2, mom_bottom="M5", mom_top="M5"), lumen130)
    (m5,) = geo.mom_layers
    # floor((3.28 - 0.46) / 0.90) = floor(3.133) = 3; length 7.38 - 0.88 - 0.46 = 6.04 um
    assert m5.finger_count == 3
    assert m5.finger_length_um == pytest.approx(6.04)


def test_mom_explicit_finger_pitch(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mom", mom_top="M3", finger_width_um=0.3, finger_space_um=0.3), lumen130)
    # floor((3.28 - 0.3) / 0.6) = floor(4.967) = 4 on both layers
    assert [m.finger_count for m in geo.mom_layers] == [4, 4]


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
    # 3 sites = 1.23 um: floor((1.23 - 0.21)/0.41) = 2 fingers, the minimum
    assert resolve_geometry(cell("mom", width_sites=3, mom_top="M2"), lumen130).mom_layers[0].finger_count == 2


def test_mos_mom_has_both_parts(lumen130: Deck) -> None:
    geo = resolve_geometry(cell("mos_mom", width_sites=8, fingers=2, mom_top="M3"), lumen130)
    assert geo.devices == 1 and geo.gate_length_um == pytest.approx(1.03)
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
