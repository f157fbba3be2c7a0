"""The rail a cell decouples sets its characterization supply, independently of its oxide."""

from __future__ import annotations

import copy

import pytest

from celllab.cells import CellSpec
from celllab.deck import Deck, parse_deck
from celllab.engine import characterize


def _nmos(name: str, **fields: object) -> CellSpec:
    return CellSpec.model_validate({"name": name, "topology": "nmos_inversion", "width_sites": 16, "fingers": 1,
                                    **fields})


@pytest.fixture(scope="module")
def thick(lumen130: Deck) -> dict[str, object]:
    run = characterize(lumen130, [_nmos("on_io", oxide="io"), _nmos("on_core", oxide="io", rail="core"),
                                  _nmos("thin", oxide="core")])
    return {c.name: c for c in run.cells}


def test_supply_follows_the_rail_at_every_corner(thick: dict[str, object], lumen130: Deck) -> None:
    # lumen130: core 1.2 V, io 3.3 V, times each corner's supply_scale (deck file); rel 1e-12
    for name, rail in (("on_io", "io"), ("on_core", "core"), ("thin", "core")):
        cell = thick[name]
        assert (cell.oxide, cell.rail) == ("core" if name == "thin" else "io", rail)  # type: ignore[attr-defined]
        for corner in cell.corners:  # type: ignore[attr-defined]
            expected = lumen130.supply_for(rail) * lumen130.corners[corner.corner].supply_scale
            assert corner.supply_V == pytest.approx(expected, rel=1e-12)


def test_thick_oxide_on_the_core_rail_is_characterized_at_the_core_supply(thick: dict[str, object]) -> None:
    on_io, on_core = thick["on_io"], thick["on_core"]
    for io, core in zip(on_io.corners, on_core.corners):  # type: ignore[attr-defined]
        # same device, lower gate drive: less inversion charge, so a higher channel resistance and
        # ESR, and a lower oxide field. Inversion charge ~ Cox (V - Vt): (3.3 - 0.62)/(1.2 - 0.62)
        # = 4.6 x more at 3.3 V (level-1 estimate, docs/references.md [30] [DF]; 5.1 at the slow
        # corner's 0.9 x supplies). Poly depletion and the charge centroid cut the charge at low
        # drive further, the gate and contact terms do not scale: a window, not an equality.
        assert 1.5 < core.metrics["esr_ohm"] / io.metrics["esr_ohm"] < 8.0
        assert core.metrics["oxide_field_MV_per_cm"] < 0.5 * io.metrics["oxide_field_MV_per_cm"]
        assert core.metrics["leakage_nA"] < io.metrics["leakage_nA"]


def test_a_named_rail_of_the_deck(lumen130: Deck) -> None:
    data = copy.deepcopy(lumen130.full_dump())
    data["supplies"]["named"] = {"analog": {"voltage_V": 1.5, "power_net": "AVDD", "ground_net": "AVSS"}}
    deck = parse_deck(data)
    cell = characterize(deck, [_nmos("a", oxide="io", rail="analog")]).cells[0]
    assert cell.rail == "analog"
    for corner in cell.corners:
        # the corner's supply_scale moves the named rail too (deck file: 0.9, 1.1, 1.1); rel 1e-12
        assert corner.supply_V == pytest.approx(1.5 * deck.corners[corner.corner].supply_scale, rel=1e-12)


def test_named_rail_rules(lumen130: Deck) -> None:
    from celllab.errors import DeckError

    data = copy.deepcopy(lumen130.full_dump())
    data["supplies"]["named"] = {"core": {"voltage_V": 1.5, "power_net": "AVDD"},
                                 "pll": {"voltage_V": 1.8, "power_net": "VSS"}}
    with pytest.raises(DeckError) as info:
        parse_deck(data)
    fields = sorted(p.field for p in info.value.problems)
    assert fields == ["supplies.named.core", "supplies.named.pll.power_net"]
