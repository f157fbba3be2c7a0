"""Gate and contact resistances of MOS devices follow each corner's temperature (first-order TCR)."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from celllab.cells import CellSpec, resolve_geometry
from celllab.characterization.mos import characterize_mos
from celllab.characterization.params import CornerSet
from celllab.deck import Deck, parse_deck
from celllab.topologies.common import mos_geometry


def test_gate_and_contact_resistance_at_a_hot_and_a_cold_corner(lumen130: Deck) -> None:
    # R(T) = R(T0) (1 + alpha (T - T0)), T0 = 25 degC: gate sheet 2800 ppm/K, contacts 1500 ppm/K.
    # At 125 degC: 1.28 and 1.15; at -40 degC: 1 - 2800e-6 x 65 = 0.818 and 1 - 1500e-6 x 65 = 0.9025.
    # The distributed gate resistance is proportional to the sheet resistance and the access
    # resistance to the contact resistance (geometry unchanged). Source: docs/references.md [140]
    # [DF]; rel 1e-12
    data = copy.deepcopy(lumen130.full_dump())
    data["corners"] = {"ref": {"temperature_C": 25.0}, "hot": {"temperature_C": 125.0},
                       "cold": {"temperature_C": -40.0}}
    data["resistance_tempco"] = {"gate_sheet_ppm_per_K": 2800.0, "contact_ppm_per_K": 1500.0}
    deck = parse_deck(data)
    spec = CellSpec(name="n", topology="nmos_inversion", width_sites=16, fingers=2)
    geo = mos_geometry([spec], [resolve_geometry(spec, deck)])
    corners = CornerSet.from_deck(deck)
    res = characterize_mos(corners, np.array(["core"]), np.array(["nmos"]), geo, np.full((1, 3), 1.2))
    assert res.r_gate[0, 1] / res.r_gate[0, 0] == pytest.approx(1.28, rel=1e-12)
    assert res.r_gate[0, 2] / res.r_gate[0, 0] == pytest.approx(0.818, rel=1e-12)
    assert res.r_access[0, 1] / res.r_access[0, 0] == pytest.approx(1.15, rel=1e-12)
    assert res.r_access[0, 2] / res.r_access[0, 0] == pytest.approx(0.9025, rel=1e-12)
