"""The topology registry: built-in declarations, and a topology added by one module alone.

``toy_plate`` below is a test-only topology (a metal plate over a thin dielectric, invented
numbers). Registering it is all it takes for cell validation, geometry, the engine, the filter
language and the what-if field list to know it; nothing else is edited.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterator, Sequence
from typing import Any

import numpy as np
import pytest
from scipy.constants import epsilon_0, femto, giga, micro, nano, pico

from celllab.catalog import open_catalog
from celllab.catalog.filters import FilterSyntaxError, compile_filter, describe_language
from celllab.cells import GEOMETRY_FIELDS, CellSpec, parse_cells, resolve_geometry
from celllab.deck import Deck
from celllab.engine import characterize
from celllab.errors import CellError
from celllab.physics.netlist import Element, Netlist
from celllab.topologies import REGISTRY, Topology, common
from celllab.topologies.geometry import OUTLINE_FIELDS, Geometry
from celllab.tui.screens.whatif import relevant_fields

# Invented toy values (not from any process).
TOY_EPS_R = 7.0
TOY_GAP_M = 40 * nano
TOY_R_OHM = 0.8
TOY_L_H = 12 * pico


def _plate(spec: Any, deck: Any, geo: Geometry) -> None:
    geo.mom_plate_area_um2 = geo.area_um2


def _evaluate(deck: Any, corners: Any, cells: Sequence[Any], geos: Sequence[Any],
              freq: np.ndarray) -> common.GroupResult:
    n_v, n_c = len(cells), len(corners.names)
    area_m2 = np.array([g.area_um2 for g in geos])[:, None] * micro**2
    cap = np.broadcast_to(epsilon_0 * TOY_EPS_R * area_m2 / TOY_GAP_M, (n_v, n_c))
    net = Netlist("toy_plate", (
        Element("R", "esr", "vdd", "a", TOY_R_OHM),
        Element("L", "l_loop", "a", "b", TOY_L_H),
        Element("C", "plate", "b", "vss", common.flat(cap, n_v, n_c)),
    ), ("vdd", "vss"))
    sol = common.solve(net, freq, n_v, n_c)
    zero, nan = np.zeros((n_v, n_c)), np.full((n_v, n_c), np.nan)
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary, cap_ox_F=cap.copy(),
        gate_leakage_A=zero, junction_leakage_A=zero, e_ox_V_per_m=zero, tddb_rate_per_s_m2=nan, vbd_pulse_V=nan,
        supply_V=common.supply(corners, common.oxides_of(cells)), netlist=net,
        flags=[[[] for _ in range(n_c)] for _ in range(n_v)], notes=["toy plate"])


TOY = Topology(name="toy_plate", description="test-only metal plate", esd_safe=True, fields=OUTLINE_FIELDS,
               geometry=_plate, evaluate=_evaluate)


@pytest.fixture
def toy() -> Iterator[Topology]:
    REGISTRY.register(TOY)
    try:
        yield TOY
    finally:
        REGISTRY.unregister(TOY.name)


# --- the built-in declarations -------------------------------------------------------------------

def test_built_in_topologies_in_listing_order() -> None:
    assert REGISTRY.names() == ("nmos_inversion", "pmos_inversion", "accumulation", "tied_cmos", "cross_coupled",
                                "mom", "mos_mom")
    # contract: no gate tied directly to a rail in cross_coupled and mom cells
    assert REGISTRY.esd_safe_names() == {"cross_coupled", "mom"}


@pytest.mark.parametrize("name", REGISTRY.names())
def test_declared_fields_are_cell_fields(name: str) -> None:
    topology = REGISTRY[name]
    assert topology.fields <= set(GEOMETRY_FIELDS)
    assert {"width_sites", "height_rows"} <= topology.fields
    assert topology.description


def test_field_users_follow_the_declarations() -> None:
    assert REGISTRY.users_of("mom_top") == ("mom", "mos_mom")
    assert REGISTRY.users_of("accumulation_well") == ("accumulation",)
    assert "mom" not in REGISTRY.users_of("gate_length_um")


def test_what_if_fields_per_topology() -> None:
    fields = list(GEOMETRY_FIELDS)
    assert "gate_length_um" not in relevant_fields("mom", fields)
    assert "mom_top" not in relevant_fields("nmos_inversion", fields)
    assert "accumulation_well" in relevant_fields("accumulation", fields)
    assert "accumulation_well" not in relevant_fields("pmos_inversion", fields)
    assert {"mos_device", "mom_top", "gate_length_um"} <= set(relevant_fields("mos_mom", fields))


def test_registering_twice_is_refused() -> None:
    with pytest.raises(ValueError, match="already registered"):
        REGISTRY.register(REGISTRY["mom"])


# --- a topology added in one place ---------------------------------------------------------------

def test_toy_topology_is_validated_from_the_registry(toy: Topology) -> None:
    spec = CellSpec(name="t", topology="toy_plate", width_sites=8)
    assert spec.esd_safe
    with pytest.raises(ValueError, match="gate_length_um applies to .* cells only, not toy_plate"):
        CellSpec(name="t", topology="toy_plate", width_sites=8, gate_length_um=0.5)
    specs = parse_cells({"family": [{"name": "tp", "topology": "toy_plate", "width_sites": [4, 8]}]})
    assert [s.name for s in specs] == ["tp-w4-h1", "tp-w8-h1"]
    with pytest.raises(CellError) as err:
        parse_cells({"cell": [{"name": "x", "topology": "toy_plat", "width_sites": 4}]})
    assert "toy_plate" in str(err.value) and "did you mean 'toy_plate'" in str(err.value).lower()
    assert relevant_fields("toy_plate", list(GEOMETRY_FIELDS)) == ["width_sites", "height_rows", "placement",
                                                                   "fingers"]


def test_placements_are_declared_per_topology(toy: Topology) -> None:
    # every built-in topology may sit in a core row or an open region
    assert all(REGISTRY.placements_of(n) == ("core_row", "open_region") for n in REGISTRY if n != "toy_plate")
    ring_only = dataclasses.replace(TOY, placements=frozenset({"open_region"}))
    REGISTRY.register(ring_only, replace=True)
    try:
        assert CellSpec(name="t", topology="toy_plate", width_sites=8, placement="open_region").placement == \
            "open_region"
        with pytest.raises(CellError) as err:
            parse_cells({"cell": [{"name": "t", "topology": "toy_plate", "width_sites": 8}]})
        (problem,) = err.value.problems
        assert "placement 'core_row' is not allowed for toy_plate cells; allowed: open_region" in problem.message
    finally:
        REGISTRY.register(TOY, replace=True)


def test_toy_topology_unknown_once_removed(toy: Topology) -> None:
    REGISTRY.unregister("toy_plate")
    with pytest.raises(ValueError, match="Input should be"):
        CellSpec(name="t", topology="toy_plate", width_sites=8)
    REGISTRY.register(TOY)  # the fixture removes it again


def test_toy_topology_runs_through_the_engine(toy: Topology, lumen130: Deck) -> None:
    spec = CellSpec(name="t", topology="toy_plate", width_sites=8, height_rows=2)
    geo = resolve_geometry(spec, lumen130)
    run = characterize(lumen130, [spec, CellSpec(name="n", topology="nmos_inversion", width_sites=8)])
    cell = run.cells[0]
    assert cell.topology == "toy_plate" and cell.esd_safe and run.cells[1].topology == "nmos_inversion"
    c_plate = epsilon_0 * TOY_EPS_R * geo.area_um2 * micro**2 / TOY_GAP_M
    for corner in cell.corners:
        m = corner.metrics
        # Source: parallel-plate capacitor C = eps0 eps_r A / d (any electrostatics text); the
        # series L shifts C_eff at 100 kHz by (omega^2 L C) ~ 1e-14; rel 1e-6
        assert m["cap_fF"] == pytest.approx(c_plate / femto, rel=1e-6)
        # Series R-L-C: Re Z = R at every frequency; the ESL metric reads the loop inductor; rel 1e-9
        assert m["esr_ohm"] == pytest.approx(TOY_R_OHM, rel=1e-9)
        assert m["esl_pH"] == pytest.approx(TOY_L_H / pico, rel=1e-9)
        # Source: series resonance f0 = 1 / (2 pi sqrt(L C)) (Thomson formula); 2 % (20 points
        # per decade, interpolated on log f)
        f0 = 1 / (2 * math.pi * math.sqrt(TOY_L_H * c_plate))
        assert m["srf_GHz"] * giga == pytest.approx(f0, rel=0.02)


def test_toy_topology_in_the_filter_language(toy: Topology, lumen130: Deck, tmp_path) -> None:
    sql, params = compile_filter("topology = toy_plate")
    assert params == ["toy_plate"]
    with pytest.raises(FilterSyntaxError, match="did you mean 'toy_plate'"):
        compile_filter("topology = toy_plat")
    assert "toy_plate" in describe_language()
    run = characterize(lumen130, [CellSpec(name="t", topology="toy_plate", width_sites=8)], corners=["typ_25C"])
    with open_catalog(tmp_path / "toy.sqlite") as catalog:
        catalog.store_run(run)
        rows = catalog.query(where="topology = toy_plate and esd_safe")
    assert [r["name"] for r in rows] == ["t"]
