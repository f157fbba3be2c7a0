"""The unchecked one-variant netlists (``Netlist.variant``) and variant subsets (``take``)
against the constructors' checked path.

No outside source applies: equivalence checks between two ways of building the same netlist.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from celllab.physics import circuits
from celllab.physics.netlist import Element, Netlist, solve_impedance


def _checked(net: Netlist, i: int) -> Netlist:
    """One variant built through the constructors and their checks (the reference)."""
    if not -net.n_variant <= i < net.n_variant:
        raise IndexError(i)

    def pick(v):  # type: ignore[no-untyped-def]
        arr = np.asarray(v, dtype=float)
        return float(arr) if arr.ndim == 0 else float(arr[i])

    return Netlist(net.name, tuple(replace(el, value=pick(el.value),
                                           c_total=None if el.c_total is None else pick(el.c_total))
                                   for el in net.elements), net.ports)


def _group(n: int = 5) -> Netlist:
    rng = np.random.default_rng(3)
    return Netlist("g", (
        Element("L", "l_loop", "vdd", "a", rng.uniform(1e-12, 1e-11, n)),
        Element("R", "r", "a", "b", np.float64(2.5)),  # a numpy scalar shared by all variants
        Element("RCLINE", "ch", "vss", "b", rng.uniform(10, 100, n), rng.uniform(1e-14, 1e-13, n), contacted_ends=2),
        Element("RCLINE", "thru", "b", "c", 7.0, rng.uniform(1e-14, 1e-13, n), node_far="vss"),
        Element("C", "c_ov", "b", "vss", 0.0),
    ))


@pytest.mark.parametrize("net", [_group(), circuits.mos_decap_circuit(
    c_gate=np.array([1e-13, 2e-13]), r_channel=np.array([50.0, 80.0]), r_gate=1.0, r_access=np.array([0.5, 0.7]),
    l_loop=2e-12, c_overlap=np.array([1e-15, 3e-15]), contacted_ends=1)])
def test_variant_equals_the_checked_variant(net: Netlist) -> None:
    for i in range(-net.n_variant, net.n_variant):
        fast, checked = net.variant(i), _checked(net, i)
        assert fast == checked and fast.n_variant == checked.n_variant == 1
        for a, b in zip(fast.elements, checked.elements):
            assert a.__dict__ == b.__dict__
            assert all(type(v) is type(w) for v, w in zip(a.__dict__.values(), b.__dict__.values()))
    with pytest.raises(IndexError):
        net.variant(net.n_variant)


def test_a_variant_of_a_bad_index_is_refused_and_the_skipped_checks_are_real() -> None:
    net = _group(3)
    with pytest.raises(IndexError):
        net.variant(-4)
    # what variant skips: the constructor refuses a bad value (here changed after its checks)
    bad = Netlist("bad", (Element("C", "c", "vdd", "vss", np.array([1.0, 2.0])),))
    object.__setattr__(bad.elements[0], "value", np.array([1.0, -2.0]))
    with pytest.raises(ValueError, match="must be finite"):
        _checked(bad, 1)


def test_take_gives_the_rows_of_the_whole() -> None:
    net = _group(6)
    rows = np.array([4, 1, 1, 5])
    f = np.geomspace(1e6, 1e12, 9)
    np.testing.assert_array_equal(solve_impedance(net.take(rows), f), solve_impedance(net, f)[rows])
    assert net.take(rows).variant(0) == net.variant(4)
