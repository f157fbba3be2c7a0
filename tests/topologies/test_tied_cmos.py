"""The tied CMOS decap: an NMOS on the p-well half and a PMOS on the n-well half of a core row.

Its devices are the same as those of a one-device NMOS cell and a one-device PMOS cell of the same
outline (same bands, same gate columns), so the tied cell is those two circuits in parallel.
"""

from __future__ import annotations

import numpy as np
import pytest

from celllab.cells import CellSpec, resolve_geometry
from celllab.deck import Deck
from celllab.engine import characterize
from celllab.topologies import REGISTRY


def _spec(topology: str, **fields: object) -> CellSpec:
    return CellSpec.model_validate({"name": topology, "topology": topology, "width_sites": 16, "fingers": 2,
                                    **fields})


@pytest.fixture(scope="module")
def trio(lumen130: Deck) -> dict[str, object]:
    run = characterize(lumen130, [_spec("tied_cmos"), _spec("nmos_inversion"), _spec("pmos_inversion"),
                                  _spec("cross_coupled")])
    return {c.topology: c for c in run.cells}


def test_declaration() -> None:
    tied = REGISTRY["tied_cmos"]
    assert not tied.esd_safe                     # both gate oxides sit across the rails
    assert {"gate_length_um", "gate_width_um", "placement"} <= tied.fields
    assert "accumulation_well" not in tied.fields and "mom_top" not in tied.fields


def test_geometry_is_the_two_halves_and_the_pairs(lumen130: Deck) -> None:
    tied = resolve_geometry(_spec("tied_cmos"), lumen130)
    nmos = resolve_geometry(_spec("nmos_inversion"), lumen130)
    pmos = resolve_geometry(_spec("pmos_inversion"), lumen130)
    pair = resolve_geometry(_spec("cross_coupled"), lumen130)
    assert (tied.gate_width_um, tied.pmos_gate_width_um) == (nmos.gate_width_um, pmos.gate_width_um)
    assert tied.gate_area_um2 == pytest.approx(nmos.gate_area_um2 + pmos.gate_area_um2, rel=1e-12)
    # the ESD-safe pair costs no gate area against the tied cell in the same footprint
    assert pair.gate_area_um2 == pytest.approx(tied.gate_area_um2, rel=1e-12)


def test_tied_cell_is_the_nmos_and_pmos_cells_in_parallel(trio: dict[str, object]) -> None:
    tied, nmos, pmos = trio["tied_cmos"], trio["nmos_inversion"], trio["pmos_inversion"]
    for t, n, p in zip(tied.corners, nmos.corners, pmos.corners):   # type: ignore[attr-defined]
        tm, nm, pm = t.metrics, n.metrics, p.metrics
        # parallel capacitances add; the series loop inductance shifts C_eff at 100 kHz by
        # (omega^2 L C) ~ 1e-14 (definitions, docs/references.md [44]); rel 1e-6
        assert tm["cap_fF"] == pytest.approx(nm["cap_fF"] + pm["cap_fF"], rel=1e-6)
        assert tm["cap_ox_fF"] == pytest.approx(nm["cap_ox_fF"] + pm["cap_ox_fF"], rel=1e-12)
        # low-frequency ESR of parallel RC one-ports: sum R_i C_i^2 / (sum C_i)^2
        # (docs/references.md [44] [DF]); rel 1e-4 (the solver reads Re Z at the sweep's first points)
        expected = (nm["esr_ohm"] * nm["cap_fF"] ** 2 + pm["esr_ohm"] * pm["cap_fF"] ** 2) \
            / (nm["cap_fF"] + pm["cap_fF"]) ** 2
        assert tm["esr_ohm"] == pytest.approx(expected, rel=1e-4)
        # gate currents of the two oxides add; the row's n-well half is the same junction under
        # all three core-row cells (topologies.wells), so it is counted once
        assert tm["gate_leakage_nA"] == pytest.approx(nm["gate_leakage_nA"] + pm["gate_leakage_nA"], rel=1e-12)
        assert tm["junction_leakage_nA"] == pytest.approx(nm["junction_leakage_nA"], rel=1e-12)
        assert tm["junction_leakage_nA"] == pytest.approx(pm["junction_leakage_nA"], rel=1e-12)
        assert t.supply_V == n.supply_V == p.supply_V


def test_cv_curve_reads_the_pmos_backwards(trio: dict[str, object]) -> None:
    # Against the rail voltage v the NMOS sees V_GB = +v and the PMOS V_GB = -v: at v = +V_supply
    # the curve is the sum of both operating points (definition of the bias axis); rel 1e-9
    tied, nmos, pmos = trio["tied_cmos"], trio["nmos_inversion"], trio["pmos_inversion"]
    for t, n, p in zip(tied.corners, nmos.corners, pmos.corners):   # type: ignore[attr-defined]
        assert t.cv.operating_cap_F == pytest.approx(n.cv.operating_cap_F + p.cv.operating_cap_F, rel=1e-12)
        at_supply = np.interp(t.supply_V, t.cv.bias_V, t.cv.cap_F)
        assert at_supply == pytest.approx(t.cv.operating_cap_F, rel=1e-9)
        # mirror image: the tied curve at -v is the NMOS at -v plus the PMOS at +v
        mirror = np.interp(-t.supply_V, n.cv.bias_V, n.cv.cap_F) + np.interp(t.supply_V, p.cv.bias_V, p.cv.cap_F)
        assert np.interp(-t.supply_V, t.cv.bias_V, t.cv.cap_F) == pytest.approx(mirror, rel=1e-9)


def test_open_region_tied_cell_splits_the_row_in_the_middle(lumen130: Deck) -> None:
    # open region: each device (3.105 - 0.56)/2 - 2 x 0.16 = 0.9525 um (celllab/topologies/geometry.py, [CP])
    geo = resolve_geometry(_spec("tied_cmos", placement="open_region"), lumen130)
    assert geo.gate_width_um == geo.pmos_gate_width_um == pytest.approx(0.9525, rel=1e-12)
    assert geo.device_region == "p-well half (open region) + n-well half (open region)"
