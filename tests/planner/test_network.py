"""The block supply network: structure and input checks, the reduced solve against the whole
netlist, closed forms of small networks, and ngspice AC analysis of the demo network."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from physics.ngspice_util import run_deck  # tests/physics (rootdir on sys.path)

from celllab.catalog import Catalog
from celllab.physics.netlist import Element, Netlist, solve_z_matrix
from celllab.planner.network import (
    BlockNetwork,
    FillEntry,
    GridLink,
    OffChipDecap,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    analysis_frequencies,
    build_network,
    region_node,
)
from celllab.planner.waveforms import Activity

from .network_demo import demo_network, spice_network

STEP = Activity(peak_current=0.1, rise_time=100e-12)
F = analysis_frequencies(1e5, 1e10, 20)


def _cap_cell(c: float, esr: float = 0.0) -> dict[str, Netlist]:
    elements = [Element("C", "c", "vdd" if esr == 0 else "x", "vss", c)]
    if esr:
        elements.append(Element("R", "esr", "vdd", "x", esr))
    return {"typ": Netlist("cap", tuple(elements)), "slow": Netlist("cap", tuple(
        Element(e.kind, e.name, e.node_a, e.node_b, e.value * (0.9 if e.kind == "C" else 1.2))
        for e in elements))}


def _two_regions(link: bool = True) -> BlockNetwork:
    supply = SupplyNetwork(
        1.0, 0.01, 1e-9, {"a": RegionPath(0.002, 10e-12), "b": RegionPath(0.004, 20e-12, 0.05)},
        board_resistance=0.001, board_inductance=1e-9, offchip_decap=OffChipDecap(1e-6, 0.01, 1e-10),
        links=(GridLink("a", "b", 0.01, 5e-12),) if link else ())
    regions = [RegionLoad("a", [FillEntry("c1", _cap_cell(1e-12, 50.0), 1000)], 1e-9, 0.02, STEP),
               RegionLoad("b", [FillEntry("c2", _cap_cell(2e-12), 500),
                                FillEntry("c1", _cap_cell(1e-12, 50.0), 300)], 0.0, 0.0, STEP)]
    return build_network(supply, regions)


def test_reduced_solve_equals_the_whole_netlist() -> None:
    # Source: a one-port reduced to its admittance is exact (Norton); the whole netlist with
    # every fill element in place, solved by the same MNA; rel 1e-9
    net = _two_regions()
    reduced = net.z_matrix(F)
    whole = solve_z_matrix(net.netlist(), F, net.region_nodes)
    assert net.corners == ("typ", "slow")
    np.testing.assert_allclose(reduced, whole, rtol=1e-9)
    np.testing.assert_allclose(reduced[..., 0, 1], reduced[..., 1, 0], rtol=1e-9)  # reciprocity


def test_lone_region_is_the_series_path_closed_form() -> None:
    # Source: series/parallel impedance algebra of the drawn topology; rel 1e-9
    supply = SupplyNetwork(1.0, 0.01, 1e-9, {"a": RegionPath(0.002, 10e-12, 0.03)})
    net = build_network(supply, [RegionLoad("a", [FillEntry("c", _cap_cell(1e-12), 1000)],
                                            2e-9, 0.05, STEP)])
    w = 2 * np.pi * F
    z_path = 0.01 + 1j * w * 1e-9 + 0.03 + 0.002 + 1j * w * 10e-12
    y_node = 1j * w * 1e-12 * np.array([[1000], [900]]) + 1 / (0.05 + 1 / (1j * w * 2e-9))
    expected = 1 / (1 / z_path + y_node)
    np.testing.assert_allclose(net.z_matrix(F)[..., 0, 0], expected, rtol=1e-9)
    # package current per ampere drawn: the path's share of the current; -> 1 at low f
    h = net.package_transfer(F)[..., 0]
    np.testing.assert_allclose(h, (1 / z_path) / (1 / z_path + y_node), rtol=1e-9)


def test_dc_state_is_ohms_law() -> None:
    # Source: Ohm's law on the series path (capacitors open, inductors short); rel 1e-9
    supply = SupplyNetwork(1.0, 0.01, 1e-9, {"a": RegionPath(0.002, 1e-11, 0.03),
                                             "b": RegionPath(0.005, 1e-11)})
    act = Activity(peak_current=0.2, rise_time=1e-10, average_current=0.1)
    net = build_network(supply, [RegionLoad("a", [], 1e-9, 0.0, act),
                                 RegionLoad("b", [], 1e-9, 0.0, STEP)])
    dc = net.dc_state()
    total = 0.1 + 0.1  # b: a step without a clock holds base + peak
    np.testing.assert_allclose(dc.drop, [0.01 * total + 0.032 * 0.1, 0.01 * total + 0.005 * 0.1],
                               rtol=1e-9)
    np.testing.assert_allclose(dc.entrance_current, [0.1, 0.1], rtol=1e-9)
    np.testing.assert_allclose(dc.entrance_power, [0.1 ** 2 * 0.03, 0.0], rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(net.dc_state([0.0, 0.1]).entrance_power, [0.0, 0.1 ** 2 * 0.1],
                               rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize(("change", "message"), [
    ("missing path", "without a path"),
    ("extra path", "not loaded"),
    ("corner", "no circuit for corner"),
    ("duplicate", "duplicate region"),
])
def test_inconsistent_inputs_are_named(change: str, message: str) -> None:
    paths = {"a": RegionPath(0.0, 1e-11), "b": RegionPath(0.0, 1e-11)}
    regions = [RegionLoad("a", [FillEntry("c", _cap_cell(1e-12), 10)], 0.0, 0.0, STEP),
               RegionLoad("b", [], 1e-9, 0.0, STEP)]
    if change == "missing path":
        paths.pop("b")
    elif change == "extra path":
        paths["c"] = RegionPath(0.0, 1e-11)
    elif change == "corner":
        regions[1] = RegionLoad("b", [FillEntry("d", {"typ": _cap_cell(1e-12)["typ"]}, 5)],
                                0.0, 0.0, STEP)
    else:
        regions.append(regions[0])
    supply = SupplyNetwork(1.0, 0.0, 1e-9, paths)
    with pytest.raises(ValueError, match=message):
        build_network(supply, regions, corners=("typ", "slow"))
    if change == "corner":  # by default the corners every cell has
        assert build_network(supply, regions).corners == ("typ",)


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"package_inductance": -1e-9}, "package_inductance"),
    ({"offchip_decap": OffChipDecap(1e-6)}, "board path"),
    ({"links": (GridLink("a", "zz", 0.01),)}, "no region 'zz'"),
])
def test_bad_supply_network_values(kwargs: dict[str, object], message: str) -> None:
    base: dict[str, object] = {"supply_voltage": 1.0, "package_resistance": 0.01,
                               "package_inductance": 1e-9, "paths": {"a": RegionPath(0.0, 0.0)}}
    with pytest.raises(ValueError, match=message):
        SupplyNetwork(**(base | kwargs))  # type: ignore[arg-type]


# ----------------------------------------------------------------- the demo network, ngspice


def test_demo_network_is_built_from_catalog_circuits(lumen_catalog: Catalog) -> None:
    net, _ = demo_network(lumen_catalog)
    assert net.region_names == ("mac_array", "pad_ring")
    assert net.regions[1].activity is None  # the quiet pad ring
    assert net.corners == tuple(lumen_catalog.corners("lumen130"))
    # the fill admittance at low frequency is count x each cell's stored capacitance; the
    # catalog's cap_fF is the same circuit's low-frequency C (rel 2 %: it is read at the
    # catalog's own sweep start, not at 100 kHz)
    y = net.fill_admittance(np.array([1e5]))
    for region in net.regions:
        c_fill = sum(e.count * lumen_catalog.cell(e.cell, deck="lumen130").corner(
            net.corners[0]).metrics["cap_fF"] * 1e-15 for e in region.fill)
        assert np.imag(y[region.name][0, 0]) / (2 * np.pi * 1e5) == pytest.approx(c_fill, rel=0.02)


def _ngspice_ac(lines: list[str], drive: str, observe: list[str], workdir: Path,
                sweep: str) -> tuple[np.ndarray, np.ndarray]:
    deck = "\n".join(["supply network", ".options rshunt=1e15", *lines,
                      f"Itest 0 {drive} dc 0 ac 1", ".control", sweep,
                      "wrdata zout.txt " + " ".join(observe), "quit", ".endc", ".end", ""])
    run_deck(deck, workdir, "ac")
    data = np.loadtxt(workdir / "zout.txt")
    return data[:, 0], data[:, 1::3] + 1j * data[:, 2::3]


@pytest.mark.parametrize("corner", ["typ_25C", "fast_m40C"])
def test_demo_z_matrix_matches_ngspice(lumen_catalog: Catalog, corner: str,
                                       tmp_path: Path) -> None:
    # Source: ngspice AC analysis of the same network, each fill cell as its exported SPICE
    # subcircuit with m = count (RC lines as ladders); 1 %
    net, _ = demo_network(lumen_catalog)
    c = net.corners.index(corner)
    lines = spice_network(net, lumen_catalog, corner)
    for j, drive in enumerate(net.regions):
        node = region_node(drive.name)
        observe = [f"v({region_node(r.name)})" for r in net.regions]
        f, z_spice = _ngspice_ac(lines, node, observe, tmp_path, "ac dec 20 1e5 1e10")
        z = net.z_matrix(f)[c, :, :, j]
        deviation = np.abs(z / z_spice - 1)
        assert deviation.max() < 0.01, (
            f"drive {drive.name}: max |dZ/Z| {deviation.max():.3g} at "
            f"{f[np.unravel_index(deviation.argmax(), deviation.shape)[0]]:.3g} Hz")


def test_package_current_transfer_matches_ngspice(lumen_catalog: Catalog,
                                                  tmp_path: Path) -> None:
    # Source: ngspice AC, current through a 0 V source in series with the package loop per
    # ampere drawn at the region node, with the 1 ohm probe in the loop and without; 1 %
    net, _ = demo_network(lumen_catalog)
    corner = "slow_125C"
    c = net.corners.index(corner)
    for probe in (0.0, 1.0):
        lines = spice_network(net, lumen_catalog, corner, probe=probe)
        # split the package inductor's ring end through a sensing source
        lines = [ln.replace(" ring ", " ring_sense ", 1) if ln.startswith("Lpkg_l ") else ln
                 for ln in lines]
        lines.append("Vsense ring_sense ring 0")
        for j, region in enumerate(net.regions):
            node = region_node(region.name)
            # the test source pushes 1 A into the node (the region drawing -1 A); the sensed
            # current flows board -> ring, i.e. into the chip
            f, _ = _ngspice_ac(lines, node, [f"v({node})"], tmp_path, "ac dec 10 1e5 1e9")
            deck = (tmp_path / "ac.cir").read_text().replace(f"wrdata zout.txt v({node})",
                                                             "wrdata iout.txt i(vsense)")
            (tmp_path / "ac.cir").write_text(deck)
            run_deck(deck, tmp_path, "ac")
            data = np.loadtxt(tmp_path / "iout.txt")
            i_spice = -(data[:, 1] + 1j * data[:, 2])
            h = net.package_transfer(f, probe=probe)[c, :, j]
            np.testing.assert_allclose(h, i_spice, rtol=0.01)
            assert abs(h[0]) == pytest.approx(1.0, rel=1e-3)  # all of it at 100 kHz
