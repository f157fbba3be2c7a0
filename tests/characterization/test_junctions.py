"""Well-junction leakage of decap cells: which roles bias a junction, outline, densities, flags."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.cells import CellSpec, resolve
from celllab.characterization.junctions import junction_leakage
from celllab.characterization.params import CornerSet
from celllab.engine import characterize
from celllab.physics import leakage
from celllab.topologies.wells import BOTH_TYPES, biased_wells
from celllab.units import to_si


def _geo(deck, topology="pmos_inversion", **kw):
    spec = CellSpec(name="j", topology=topology, oxide="core", width_sites=16, fingers=2, **kw)
    return spec, resolve(spec, deck)


def test_core_row_cell_leaks_through_the_row_nwell_half_at_the_reference_temperature(lumen130) -> None:
    # Source: definition (docs/references.md [74]): I = J_A A + J_P P at T_ref, saturated at the
    # supply; worked by hand from the rule of topologies.wells: a core-row cell holds the row's
    # n-well half on the power rail, W x h_n per row, and only the n/p boundary (W per row) is
    # perimeter; lumen130: 0.6 fA/um^2, 0.3 fA/um; rel 1e-9
    spec, geo = _geo(lumen130)
    kinds, area, perimeter = biased_wells(lumen130, [spec], [geo], ["pmos"])
    assert kinds[0] == "nwell"
    w_um, h_n_um = geo.cell_width_um, lumen130.layout.nwell_half_um
    assert area[0, 0] == pytest.approx(w_um * h_n_um * 1e-12, rel=1e-12)
    assert perimeter[0, 0] == pytest.approx(w_um * 1e-6, rel=1e-12)
    corners = CornerSet.from_deck(lumen130, ["typ_25C"])
    current, flags = junction_leakage(corners, kinds, area, perimeter, np.array([[1.2]]))
    expected = 0.6e-15 * w_um * h_n_um + 0.3e-15 * w_um
    assert current[0, 0] == pytest.approx(expected, rel=1e-9)
    assert flags == [[[]]]
    # the NMOS on the p-well half leaves the same n-well half to its well: same junction
    nmos_spec, nmos_geo = _geo(lumen130, topology="nmos_inversion")
    assert biased_wells(lumen130, [nmos_spec], [nmos_geo], ["nmos"])[1][0, 0] == pytest.approx(area[0, 0])


def test_junctions_by_device_and_placement(lumen130) -> None:
    # Source: rule table of topologies.wells, worked by hand: in an open region an NMOS (p-well =
    # substrate on VSS) biases no junction and a PMOS n-well covers the outline (perimeter
    # 2 (W + H)); an n-well accumulation cap (n-well on VSS) biases none; the deep n-well of a
    # p-well accumulation cap covers the outline; the pair's and tied cell's n-well half in a
    # core row is W h_n per row with W per row of perimeter
    open_n, open_n_geo = _geo(lumen130, topology="nmos_inversion", placement="open_region")
    open_p, open_p_geo = _geo(lumen130, placement="open_region")
    acc_n, acc_n_geo = _geo(lumen130, topology="accumulation", placement="open_region")
    kinds, area, perimeter = biased_wells(lumen130, [open_n, open_p, acc_n], [open_n_geo, open_p_geo, acc_n_geo],
                                          ["nmos", "pmos", "acc_n"])
    assert list(kinds) == ["", "nwell", ""]
    assert area[0, 0] == 0.0 and area[2, 0] == 0.0
    w, h = open_p_geo.cell_width_um * 1e-6, open_p_geo.cell_height_um * 1e-6
    assert area[1, 0] == pytest.approx(w * h, rel=1e-12)
    assert perimeter[1, 0] == pytest.approx(2 * (w + h), rel=1e-12)
    kinds, area, perimeter = biased_wells(lumen130, [open_p], [open_p_geo], ["acc_p"])
    assert kinds[0] == "deep_nwell" and perimeter[0, 0] == pytest.approx(2 * (w + h), rel=1e-12)
    corners = CornerSet.from_deck(lumen130, ["typ_25C", "slow_125C"])
    current, _ = junction_leakage(corners, np.array(["", "nwell"]), np.array([[0.0], [w * h]]),
                                  np.array([[0.0], [2 * (w + h)]]), np.full((2, 2), 1.2))
    assert np.all(current[0] == 0.0) and np.all(current[1] > 0.0)
    for topology in ("cross_coupled", "tied_cmos"):
        spec, geo = _geo(lumen130, topology=topology, height_rows=2)
        kinds, area, perimeter = biased_wells(lumen130, [spec], [geo], [BOTH_TYPES])
        assert kinds[0] == "nwell"
        assert area[0, 0] == pytest.approx(geo.cell_width_um * lumen130.layout.nwell_half_um * 2 * 1e-12, rel=1e-12)
        assert perimeter[0, 0] == pytest.approx(geo.cell_width_um * 2 * 1e-6, rel=1e-12)


def test_junction_leakage_follows_the_bsim4_temperature_law(lumen130) -> None:
    # Source: docs/references.md [74], the deck's XTI 3 and N 2: I(125 degC)/I(25 degC) equals
    # junction_saturation_scale (checked against ngspice BSIM4 in tests/physics); rel 1e-6 (the
    # bias factor 1 - exp(-V/(N kT/q)) differs by ~1e-7 between the corners)
    spec, geo = _geo(lumen130)
    corners = CornerSet.from_deck(lumen130, ["typ_25C", "slow_125C"])
    kinds, area, perimeter = biased_wells(lumen130, [spec], [geo], ["pmos"])
    current, _ = junction_leakage(corners, kinds, area, perimeter, np.array([[1.2, 1.08]]))
    scale = leakage.junction_saturation_scale(398.15, 298.15, 3.0, 2.0)
    assert current[0, 1] / current[0, 0] == pytest.approx(float(scale), rel=1e-6)


def test_missing_densities_are_flagged_not_zero(lumen130) -> None:
    deck = lumen130.model_copy(update={"junctions": lumen130.junctions.model_copy(update={"nwell": None})})
    corners = CornerSet.from_deck(deck, ["typ_25C"])
    spec, geo = _geo(deck)
    current, flags = junction_leakage(corners, *biased_wells(deck, [spec], [geo], ["pmos"]), np.array([[1.2]]))
    assert np.isnan(current[0, 0])
    assert flags[0][0][0].startswith("junction_leakage_not_modelled")
    run = characterize(deck, [spec], corners=["typ_25C"])
    m = run.cells[0].corners[0].metrics
    assert np.isnan(m["junction_leakage_nA"]) and m["leakage_nA"] == pytest.approx(m["gate_leakage_nA"], rel=1e-12)
    assert any(f.startswith("junction_leakage_not_modelled") for f in run.cells[0].corners[0].flags)


def test_catalog_leakage_is_gate_plus_junction(lumen130) -> None:
    # Source: definition of the leakage_nA column; rel 1e-12. On the thick I/O oxide at 125 degC
    # the well junction, not the gate, sets a PMOS cell's leakage (docs/references.md [74], [CP]).
    cells = [CellSpec(name=f"{t}{o}", topology=t, oxide=o, width_sites=16, fingers=2)
             for t in ("pmos_inversion", "nmos_inversion") for o in ("core", "io")]
    run = characterize(lumen130, cells, corners=["typ_25C", "slow_125C"])
    for cell in run.cells:
        for corner in cell.corners:
            m = corner.metrics
            assert m["leakage_nA"] == pytest.approx(m["gate_leakage_nA"] + m["junction_leakage_nA"], rel=1e-12)
    io_pmos = run.cells[1].corner("slow_125C").metrics
    assert io_pmos["junction_leakage_nA"] > 10 * io_pmos["gate_leakage_nA"]
    # a core-row NMOS leaves the row's n-well half to its well, which still leaks
    assert run.cells[2].corner("typ_25C").metrics["junction_leakage_nA"] > 0.0
    assert to_si(io_pmos["leakage_nA"], "nA") > 0.0
