"""Series-parallel reduction: which circuits reduce, and the impedance it gives.

The reduced impedance is checked against closed forms (docs/references.md [47]) and, as an
equivalence check, against the nodal solver (`solve_impedance(method="nodal")`, itself checked
against closed forms in test_netlist.py and against ngspice in test_rc_ngspice.py) on every
topology circuit of the demo decks and on random series-parallel circuits.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.physics import circuits
from celllab.physics.netlist import Element, Netlist, solve_impedance
from celllab.physics.series_parallel import reduction_plan

ROOT = Path(__file__).resolve().parents[2]
F = np.geomspace(1e3, 1e12, 61)
W = 2 * np.pi * F


def _assert_same(z: np.ndarray, ref: np.ndarray) -> None:
    """Equal to rounding: the complex value, and the real part to its own size (the ESR of a
    mostly capacitive impedance is a tiny part of |Z|)."""
    np.testing.assert_allclose(z, ref, rtol=1e-9, atol=0)
    np.testing.assert_allclose(z.real, ref.real, rtol=1e-7, atol=0)


def test_parallel_rlc_tank_closed_form() -> None:
    # Source: docs/references.md [47]: parallel R, L, C: Y = 1/R + 1/(j w L) + j w C; at
    # w0 = 1/sqrt(L C) the reactances cancel and Z = R exactly (textbook); rel 1e-9
    r, l_h, c_f = 50.0, 1e-9, 1e-12
    nl = Netlist("tank", (Element("R", "r", "vdd", "vss", r), Element("L", "l", "vdd", "vss", l_h),
                          Element("C", "c", "vdd", "vss", c_f)))
    plan = reduction_plan(nl)
    assert plan is not None and [op for op, _, _ in plan.steps] == ["parallel", "parallel"]
    z = solve_impedance(nl, F)
    np.testing.assert_allclose(z[0], 1 / (1 / r + 1 / (1j * W * l_h) + 1j * W * c_f), rtol=1e-9)
    f0 = 1 / (2 * np.pi * np.sqrt(l_h * c_f))
    assert solve_impedance(nl, [f0])[0, 0] == pytest.approx(r, rel=1e-9)


def test_series_rc_ladder_reduces_and_keeps_its_esr() -> None:
    # Source: docs/references.md [47]: R1 + (R2 + 1/(j w C2)) || 1/(j w C1) written out by hand;
    # rel 1e-9, real part (the ESR, ~1e-9 of |Z| at 1 kHz) rel 1e-7
    r1, r2, c1, c2 = 2.0, 30.0, 1e-13, 4e-12
    nl = Netlist("ladder", (Element("R", "r1", "vdd", "a", r1), Element("C", "c1", "a", "vss", c1),
                            Element("R", "r2", "a", "b", r2), Element("C", "c2", "b", "vss", c2)))
    branch = r2 + 1 / (1j * W * c2)
    expected = r1 + 1 / (1j * W * c1 + 1 / branch)
    _assert_same(solve_impedance(nl, F)[0], expected)


def test_bridge_and_through_line_do_not_reduce() -> None:
    # a Wheatstone bridge is the smallest two-terminal circuit that is not series-parallel
    bridge = Netlist("bridge", (
        Element("R", "r1", "vdd", "a", 1.0), Element("R", "r2", "vdd", "b", 2.0),
        Element("R", "r3", "a", "vss", 3.0), Element("R", "r4", "b", "vss", 4.0),
        Element("C", "c5", "a", "b", 1e-12)))
    assert reduction_plan(bridge) is None
    through = Netlist("through", (Element("RCLINE", "ch", "vdd", "vss", 10.0, 1e-12, node_far="x"),
                                  Element("R", "r", "x", "vss", 1.0)))
    assert reduction_plan(through) is None
    # the nodal solver answers them (same call)
    _assert_same(solve_impedance(bridge, F), solve_impedance(bridge, F, method="nodal"))


def test_hanging_element_carries_no_current() -> None:
    # an element from an internal node that nothing else touches is dropped (no current)
    nl = Netlist("stub", (Element("R", "r", "vdd", "a", 5.0), Element("C", "c", "a", "vss", 1e-12),
                          Element("C", "stub", "a", "dead", 1e-12)))
    plan = reduction_plan(nl)
    assert plan is not None
    _assert_same(solve_impedance(nl, F)[0], 5.0 + 1 / (1j * W * 1e-12))


def test_zero_values_fall_back_to_the_nodal_solve() -> None:
    # a zero R (short) or zero C (open) in one variant: that variant is solved by nodal analysis
    nl = Netlist("mixed", (Element("R", "r", "vdd", "a", np.array([0.0, 1.0, 2.0])),
                           Element("C", "c", "a", "vss", np.array([1e-12, 1e-12, 2e-12])),
                           Element("C", "c2", "vdd", "a", np.array([1e-13, 0.0, 1e-13]))))
    _assert_same(solve_impedance(nl, F), solve_impedance(nl, F, method="nodal"))


def _topology_circuits() -> list[Netlist]:
    """One circuit of each builder, with per-variant values spread over decades."""
    v = np.array([0.3, 1.0, 7.0])
    return [
        circuits.mos_decap_circuit(2e-12 * v, 120.0 * v, 4.0, 1.5 * v, 2e-11, 1e-14 * v, contacted_ends=1),
        circuits.mos_decap_circuit(2e-12 * v, 120.0, 4.0 * v, 1.5, 2e-11 * v, 1e-14, contacted_ends=2),
        circuits.mom_circuit(1e-13 * v, 3.0 * v, 0.5, 1e-11),
        circuits.mom_circuit(np.stack([1e-13 * v, 2e-13 * v**2]), np.stack([3.0 + 0 * v, 5.0 * v]),
                             np.array([[0.5], [0.7]]), 1e-11),
        circuits.mos_mom_stack_circuit(2e-12 * v, 120.0, 1e-13 * v, 3.0 * v, 4.0, 1.5, 1e-14, 2, 0.5, 2e-11 * v),
        circuits.tied_cmos_circuit(
            circuits.mos_decap_circuit(2e-12, 100.0 * v, 2.0, name="n"),
            circuits.mos_decap_circuit(1e-12 * v, 300.0, name="p"),
            1e-11),
    ]


@pytest.mark.parametrize("net", _topology_circuits(), ids=lambda n: n.name)
def test_topology_circuits_reduce_and_equal_the_nodal_solve(net: Netlist) -> None:
    """Equivalence check: the reduction against the nodal solver on each builder's circuit."""
    assert reduction_plan(net) is not None
    _assert_same(solve_impedance(net, F), solve_impedance(net, F, method="nodal"))


def test_demo_deck_cells_equal_the_nodal_solve() -> None:
    """Equivalence check on every demo cell's circuit at every corner (the circuits the
    catalog is built from); the cross-coupled cell's three-terminal lines take the nodal path."""
    from celllab.cells import load_cells
    from celllab.deck import load_deck
    from celllab.engine import characterize

    deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
    cells = load_cells(ROOT / "process_decks" / "cells" / "lumen130_cells.toml", deck)
    run = characterize(deck, cells, esd=False)
    reduced = 0
    for cell in run.cells:
        for corner in cell.corners:
            net = cell.netlist[corner.corner]
            reduced += reduction_plan(net) is not None
            _assert_same(solve_impedance(net, F), solve_impedance(net, F, method="nodal"))
    assert reduced >= len(run.cells)  # most cells reduce


def _random_sp(draw: st.DrawFn, depth: int, a: str, b: str, counter: list[int]) -> list[Element]:
    """A random series-parallel circuit between nodes a and b."""
    choice = draw(st.sampled_from(["leaf", "leaf", "series", "parallel"])) if depth < 4 else "leaf"
    if choice == "leaf":
        counter[0] += 1
        kind = draw(st.sampled_from(["R", "C", "L", "RCLINE"]))
        value = draw(st.floats(1e-3, 1e3)) * {"R": 1.0, "C": 1e-12, "L": 1e-10, "RCLINE": 10.0}[kind]
        if kind == "RCLINE":
            return [Element(kind, f"e{counter[0]}", a, b, value, draw(st.floats(0.1, 10.0)) * 1e-12,
                            contacted_ends=draw(st.sampled_from([1, 2])))]
        return [Element(kind, f"e{counter[0]}", a, b, value)]
    if choice == "series":
        counter[0] += 1
        mid = f"n{counter[0]}"
        return _random_sp(draw, depth + 1, a, mid, counter) + _random_sp(draw, depth + 1, mid, b, counter)
    return _random_sp(draw, depth + 1, a, b, counter) + _random_sp(draw, depth + 1, a, b, counter)


@st.composite
def sp_netlists(draw: st.DrawFn) -> Netlist:
    return Netlist("random", tuple(_random_sp(draw, 0, "vdd", "vss", [0])))


@settings(max_examples=150, deadline=None)
@given(sp_netlists())
def test_random_series_parallel_circuits_equal_the_nodal_solve(net: Netlist) -> None:
    """Equivalence check on random series-parallel circuits of R, C, L and RC lines."""
    assert reduction_plan(net) is not None
    f = np.geomspace(1e3, 1e11, 17)
    z, ref = solve_impedance(net, f), solve_impedance(net, f, method="nodal")
    # the nodal solve's own rounding grows with the matrix's condition (values over 6 decades)
    np.testing.assert_allclose(z, ref, rtol=1e-7, atol=0)


def test_blocks_of_variants_give_the_values_of_one_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    """Equivalence check: the reduction evaluated a few variants at a time (`BLOCK_VALUES`)
    equals one pass over every variant, bit for bit (each value depends on its own row only);
    shared values, per-variant frequencies and a single-variant netlist included."""
    from celllab.physics import series_parallel

    nets = _topology_circuits()
    f_rows = np.geomspace(1e3, 1e12, 3 * 11).reshape(3, 11)
    one_pass = [solve_impedance(net, f) for net in nets for f in (F, f_rows)]
    one_pass.append(solve_impedance(nets[0].variant(1), F))
    monkeypatch.setattr(series_parallel, "BLOCK_VALUES", 1)  # one variant per block
    blocked = [solve_impedance(net, f) for net in nets for f in (F, f_rows)]
    blocked.append(solve_impedance(nets[0].variant(1), F))
    for a, b in zip(one_pass, blocked, strict=True):
        np.testing.assert_array_equal(a, b)
