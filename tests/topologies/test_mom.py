"""MOM cells over corners: the back end of each corner's deck, resistances at its temperature."""

from __future__ import annotations

import copy
from typing import Any

import pytest

from celllab.cells import CellSpec, resolve_geometry
from celllab.deck import Deck, parse_deck
from celllab.engine import characterize


def _two_temperatures(base: Deck, metal_ppm: float, via_ppm: float) -> Deck:
    """``base`` with a reference corner at 25 degC and a hot one at 125 degC that change nothing
    else, and the given metal / via temperature coefficients (all others zero)."""
    data: dict[str, Any] = copy.deepcopy(base.full_dump())
    data["corners"] = {"ref_25C": {"temperature_C": 25.0}, "hot_125C": {"temperature_C": 125.0}}
    data["resistance_tempco"] = {"metal_sheet_ppm_per_K": metal_ppm, "via_ppm_per_K": via_ppm}
    return parse_deck(data)


ONE_LAYER = dict(name="m2", topology="mom", width_sites=16, mom_bottom="M2", mom_top="M2")


def test_hot_corner_raises_esr_by_the_tcr_law(lumen130: Deck) -> None:
    # Metal and vias with the same coefficient: every resistance of the cell grows by
    # 1 + alpha (T - T0) = 1 + 3000e-6 x 100 = 1.3 and the capacitance does not move, so the ESR
    # grows by exactly 1.3. Source: docs/references.md [140] [DF]; rel 1e-9
    deck = _two_temperatures(lumen130, 3000.0, 3000.0)
    cells = [CellSpec(**ONE_LAYER), CellSpec(name="m24", topology="mom", width_sites=16, mom_top="M4")]
    run = characterize(deck, cells)
    for cell in run.cells:
        ref, hot = (c.metrics for c in cell.corners)
        assert hot["esr_ohm"] == pytest.approx(1.3 * ref["esr_ohm"], rel=1e-9)
        assert hot["cap_fF"] == pytest.approx(ref["cap_fF"], rel=1e-12)


def test_one_layer_esr_by_hand_and_its_parts_at_their_own_coefficients(lumen130: Deck) -> None:
    # One M2 layer, 16 sites = 6.8 um: N = floor((6.8 - 0.21)/0.41) = 16 fingers of w = 0.2 um,
    # l = 3.825 - 0.4 - 0.21 = 3.215 um. Finger R_f = 0.07 x 3.215/0.2 = 1.12525 ohm; line R =
    # R_f (4N - 6)/(N - 1)^2 = 1.12525 x 58/225 = 0.290065 ohm (docs/references.md [41]); via R =
    # 4 x 6 ohm / 16 = 1.5 ohm (the M2 via stack to the M1 rails, celllab/topologies/mom.py).
    # ESR_lf = R_line/3 + R_via = 1.596688 ohm at 25 degC.
    # At 125 degC with 3300 ppm/K on metal and 1700 ppm/K on vias: 0.290065 x 1.33 / 3 + 1.5 x 1.17
    # = 0.128596 + 1.755 = 1.883596 ohm. Source: docs/references.md [140], [41] [DF]; rel 1e-3
    # (Re Z read at the sweep's first frequency)
    deck = _two_temperatures(lumen130, 3300.0, 1700.0)
    geo = resolve_geometry(CellSpec(**ONE_LAYER), deck)
    (m2,) = geo.mom_layers
    assert (m2.finger_count, m2.finger_length_um) == (16, pytest.approx(3.215, rel=1e-12))
    ref, hot = (c.metrics for c in characterize(deck, [CellSpec(**ONE_LAYER)]).cells[0].corners)
    assert ref["esr_ohm"] == pytest.approx(1.596688, rel=1e-3)
    assert hot["esr_ohm"] == pytest.approx(1.883596, rel=1e-3)


def test_corner_back_end_moves_the_capacitance(lumen130: Deck) -> None:
    # Thicker metal and wider printed lines (narrower gaps) raise the lateral coupling eps t / s:
    # a corner with M2 20 % thicker and +20 nm printed width (gap 210 -> 190 nm) must give more C,
    # by less than the sidewall term's own factor 1.2 x 210/190 = 1.326 (the face terms move less).
    # Source: sidewall parallel-plate term eps t / s, docs/references.md [60] [DF]
    data = copy.deepcopy(lumen130.full_dump())
    data["corners"] = {"typ": {"temperature_C": 25.0},
                       "thick": {"temperature_C": 25.0, "scale": {"metals[1].thickness_nm": 1.2},
                                 "set": {"metals[1].width_bias_nm": 20.0}}}
    deck = parse_deck(data)
    typ, thick = (c.metrics["cap_fF"] for c in characterize(deck, [CellSpec(**ONE_LAYER)]).cells[0].corners)
    assert 1.0 < thick / typ < 1.2 * 210 / 190
