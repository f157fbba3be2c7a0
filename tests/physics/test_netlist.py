"""Netlist structure and the nodal solver against closed forms."""

from __future__ import annotations

import functools
from collections.abc import Iterator

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.physics import netlist as netlist_module
from celllab.physics.distributed_rc import rc_line_impedance
from celllab.physics.netlist import Element, Netlist, ladder_expansion, parallel

F = np.geomspace(1e3, 1e12, 37)
W = 2 * np.pi * F
solve_impedance = netlist_module.solve_impedance


@pytest.fixture(autouse=True, scope="module", params=["auto", "nodal"])
def _solver(request: pytest.FixtureRequest) -> Iterator[str]:
    """Every check here runs twice: through the series-parallel reduction where a circuit has
    one ("auto", the default) and through nodal analysis alone ("nodal")."""
    global solve_impedance
    solve_impedance = functools.partial(netlist_module.solve_impedance, method=request.param)
    yield request.param
    solve_impedance = netlist_module.solve_impedance


def _line(r: object, c: object, ends: int = 1) -> Netlist:
    return Netlist("line", (Element("RCLINE", "ch", "vss", "vdd", r, c, contacted_ends=ends),))  # type: ignore[arg-type]


def test_series_rlc_closed_form() -> None:
    # Source: Z = R + j omega L + 1/(j omega C) (definition of the series RLC); rel 1e-9
    r = np.array([0.5, 2.0])
    nl = Netlist(
        "rlc",
        (
            Element("R", "r", "vdd", "a", r),
            Element("L", "l", "a", "b", 1e-10),
            Element("C", "c", "b", "vss", 1e-12),
        ),
    )
    z = solve_impedance(nl, F)
    expected = r[:, None] + 1j * W * 1e-10 + 1 / (1j * W * 1e-12)
    np.testing.assert_allclose(z, expected, rtol=1e-9)


@pytest.mark.parametrize("ends", [1, 2])
def test_rcline_element_is_the_closed_form(ends: int) -> None:
    # Source: rc_line_impedance (checked against the published line results); rel 1e-9
    r = np.array([10.0, 100.0, 1000.0])
    z = solve_impedance(_line(r, 1e-12, ends), F)
    np.testing.assert_allclose(z, rc_line_impedance(r[:, None], 1e-12, W, ends), rtol=1e-9)


def test_through_line_with_far_end_on_a_rail_is_both_ends_contacted() -> None:
    # Source: a line whose far end is tied to the same node is the ends = 2 case (definition);
    # rel 1e-9
    through = Netlist(
        "t",
        (
            Element("RCLINE", "ch", "vss", "vdd", 100.0, 1e-12, node_far="x"),
            Element("R", "tie", "x", "vss", 0.0),
        ),
    )
    np.testing.assert_allclose(
        solve_impedance(through, F), solve_impedance(_line(100.0, 1e-12, 2), F), rtol=1e-9
    )


@pytest.mark.parametrize("ends", [1, 2])
def test_ladder_converges_as_inverse_square(ends: int) -> None:
    # Source: midpoint discretization error ~ 1/N^2 (the open ladder's ESR is exactly
    # R (1/3 + 1/(6 N^2)), derived in ladder_expansion); rel 1e-9 on that ESR
    exact = solve_impedance(_line(100.0, 1e-12, ends), F[:20])
    errors = []
    for n in (8, 16, 32):
        z = solve_impedance(ladder_expansion(_line(100.0, 1e-12, ends), n), F[:20])
        errors.append(np.max(np.abs(z / exact - 1)))
    assert errors[0] / errors[1] == pytest.approx(4.0, rel=0.15, abs=0)
    assert errors[1] / errors[2] == pytest.approx(4.0, rel=0.15, abs=0)
    if ends == 1:
        z = solve_impedance(ladder_expansion(_line(100.0, 1e-12, 1), 5), [1.0])
        assert z[0, 0].real == pytest.approx(100.0 * (1 / 3 + 1 / 150), rel=1e-9, abs=0)


def test_ladder_expansion_structure() -> None:
    lad = ladder_expansion(_line(np.array([1.0, 2.0]), 1e-12), 4)
    kinds = [el.kind for el in lad]
    assert kinds.count("C") == 4 and kinds.count("R") == 4  # far end open: no last half R
    assert sum(float(el.value[1]) for el in lad if el.kind == "R") == pytest.approx(
        2 * 7 / 8, abs=0
    )
    assert set(lad.node_names()) == {"vdd", "vss", "ch_1", "ch_2", "ch_3", "ch_4"}


def test_low_frequency_precision() -> None:
    # Source: ESR of an RC line with series R is R_s + R/3 at any omega R C << 1 (closed form);
    # rel 1e-9 even where Re Z is 1e-11 of |Z|
    nl = Netlist(
        "p",
        (Element("R", "rs", "vdd", "g", 7.0), Element("RCLINE", "ch", "vss", "g", 100.0, 1e-12)),
    )
    z = solve_impedance(nl, [1e-3, 1.0, 1e3])
    np.testing.assert_allclose(z.real, 7.0 + 100.0 / 3, rtol=1e-9)


def test_zero_resistance_in_some_variants_is_a_short() -> None:
    # Source: a zero resistor is a short (definition); rel 1e-12
    nl = Netlist(
        "z", (Element("R", "r", "vdd", "a", [0.0, 5.0]), Element("C", "c", "a", "vss", 1e-12))
    )
    z = solve_impedance(nl, F)
    np.testing.assert_allclose(z[0], 1 / (1j * W * 1e-12), rtol=1e-12)
    np.testing.assert_allclose(z[1], 5.0 + 1 / (1j * W * 1e-12), rtol=1e-12)


def test_variant_values_are_floats_and_solve_the_same() -> None:
    nl = _line(np.array([10.0, 20.0, 30.0]), np.array([1e-12, 2e-12, 3e-12]))
    one = nl.variant(1)
    assert isinstance(one.elements[0].value, float) and one.elements[0].value == 20.0
    assert one.n_variant == 1
    np.testing.assert_allclose(solve_impedance(one, F)[0], solve_impedance(nl, F)[1], rtol=1e-12)
    with pytest.raises(IndexError):
        nl.variant(3)


def test_parallel_copies_divide_impedance() -> None:
    # Source: m identical one-ports in parallel have Z/m (definition); rel 1e-9
    nl = Netlist(
        "c",
        (
            Element("L", "l", "vdd", "a", 1e-11),
            Element("R", "r", "a", "g", 3.0),
            Element("RCLINE", "ch", "vss", "g", 50.0, 1e-12, contacted_ends=2),
        ),
    )
    m = np.array([1.0, 4.0])
    np.testing.assert_allclose(
        solve_impedance(nl.parallel_copies(m), F), solve_impedance(nl, F) / m[:, None], rtol=1e-9
    )


def test_with_values_and_scaled() -> None:
    nl = _line(100.0, 1e-12)
    assert nl.with_values({"ch": (50.0, 2e-12)}).element("ch").c_total == 2e-12
    scaled = nl.scaled({"ch": (2.0, 3.0)}).element("ch")
    assert (scaled.value, scaled.c_total) == (200.0, pytest.approx(3e-12, abs=0))
    assert nl.scaled({"ch": 0.5}).element("ch").value == 50.0
    with pytest.raises(KeyError, match="nope"):
        nl.scaled({"nope": 1.0})


def test_parallel_join_adds_admittances() -> None:
    # Source: parts in parallel behind a series element: Z = Z_s + (1/Z1 + 1/Z2)^-1; rel 1e-9
    a = Netlist("a", (Element("C", "c", "vdd", "vss", 1e-12),))
    b = _line(100.0, 2e-12)
    joined = parallel("j", (a, b), (Element("L", "l", "vdd", "j_in", 1e-11),))
    za, zb = solve_impedance(a, F), solve_impedance(b, F)
    np.testing.assert_allclose(
        solve_impedance(joined, F), 1j * W * 1e-11 + za * zb / (za + zb), rtol=1e-9
    )
    assert {el.name for el in joined} == {"l", "a_c", "line_ch"}


def test_per_variant_frequencies() -> None:
    nl = Netlist("c", (Element("C", "c", "vdd", "vss", [1e-12, 2e-12]),))
    f = np.array([[1e6], [2e6]])
    expected = 1 / (1j * 2 * np.pi * np.array([1e6, 2e6]) * np.array([1e-12, 2e-12]))
    np.testing.assert_allclose(solve_impedance(nl, f)[:, 0], expected, rtol=1e-12)


@pytest.mark.parametrize(
    ("build", "message"),
    [
        (lambda: Element("X", "x", "a", "b", 1.0), "kind"),  # type: ignore[arg-type]
        (lambda: Element("R", "r", "a", "a", 1.0), "both terminals"),
        (lambda: Element("C", "c", "a", "b", -1.0), ">= 0"),
        (lambda: Element("RCLINE", "l", "a", "b", 1.0), "c_total"),
        (lambda: Element("RCLINE", "l", "a", "b", 0.0, 1e-12, node_far="c"), "value > 0"),
        (lambda: Element("R", "r", "a", "b", 1.0, c_total=1.0), "RCLINE only"),
        (
            lambda: Netlist("n", (Element("R", "r", "vdd", "vss", 1.0),) * 2),
            "duplicate",
        ),
        (lambda: Netlist("n", (Element("R", "r", "vdd", "x", 1.0),)), "not connected"),
        (
            lambda: Netlist(
                "n",
                (
                    Element("R", "r", "vdd", "vss", [1.0, 2.0]),
                    Element("C", "c", "vdd", "vss", [1.0] * 3),
                ),
            ),
            "variant counts",
        ),
    ],
)
def test_bad_netlists_rejected(build: object, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        build()  # type: ignore[operator]


def test_bad_frequencies_rejected() -> None:
    with pytest.raises(ValueError, match="> 0"):
        solve_impedance(_line(1.0, 1e-12), [0.0, 1.0])


# ------------------------------------------------------------- transfer impedances, Z-matrix


def _tee() -> Netlist:
    """a -R1- m -R2- b, with C from m to ground and an L from b to ground."""
    return Netlist(
        "tee",
        (
            Element("R", "r1", "a", "m", 2.0),
            Element("R", "r2", "m", "b", 3.0),
            Element("C", "c", "m", "gnd", 1e-9),
            Element("L", "l", "b", "gnd", 1e-9),
        ),
        ports=("a", "gnd"),
    )


def test_z_matrix_of_a_tee_is_the_closed_form() -> None:
    # Source: two-port Z-parameters of a tee (circuit theory: Z11 = R1 + Zm, Z12 = Zm ...,
    # Zm = Z_C || (R2 + Z_L) seen from m); rel 1e-9
    from celllab.physics.netlist import solve_z_matrix

    z = solve_z_matrix(_tee(), F, ["a", "b"])[0]
    zc, zl = 1 / (1j * W * 1e-9), 1j * W * 1e-9
    z_mm = zc * (3.0 + zl) / (zc + 3.0 + zl)  # impedance at m (a open)
    z_bb = zl * (3.0 + zc) / (zl + 3.0 + zc)
    np.testing.assert_allclose(z[:, 0, 0], 2.0 + z_mm, rtol=1e-9)
    np.testing.assert_allclose(z[:, 1, 1], z_bb, rtol=1e-9)
    # transfer: 1 A into a -> V_m = Z_mm, V_b = V_m Z_L / (R2 + Z_L)
    np.testing.assert_allclose(z[:, 1, 0], z_mm * zl / (3.0 + zl), rtol=1e-9)
    # reciprocity (Z12 = Z21) of a passive RLC network; rel 1e-9
    np.testing.assert_allclose(z[:, 0, 1], z[:, 1, 0], rtol=1e-9)


def test_transfer_agrees_with_solve_impedance_and_reads_the_ground_as_zero() -> None:
    from celllab.physics.netlist import solve_transfer

    nl = _tee()
    t = solve_transfer(nl, F, ["a"], ["a", "m", "gnd"])
    np.testing.assert_allclose(t[:, :, 0, 0], solve_impedance(nl, F), rtol=1e-12)
    assert np.all(t[:, :, 2, 0] == 0)
    with pytest.raises(ValueError, match="no node"):
        solve_transfer(nl, F, ["nowhere"])


def test_shunt_admittance_is_the_embedded_sub_network() -> None:
    # Source: a two-terminal sub-network acts on the rest only through its admittance
    # (Thevenin/Norton); rel 1e-9 against the same network with the elements in place
    from celllab.physics.netlist import solve_z_matrix

    base = _tee()
    sub = Netlist("sub", (Element("R", "esr", "vdd", "x", 0.5), Element("C", "cx", "x", "vss", 2e-9)))
    embedded = Netlist(
        "tee_sub",
        (*base.elements, Element("R", "esr", "m", "x", 0.5), Element("C", "cx", "x", "gnd", 2e-9)),
        ports=("a", "gnd"),
    )
    y_sub = 1 / solve_impedance(sub, F)
    reduced = solve_z_matrix(base, F, ["a", "b", "m"], {"m": y_sub[0]})
    full = solve_z_matrix(embedded, F, ["a", "b", "m"])
    np.testing.assert_allclose(reduced, full, rtol=1e-9)


# ------------------------------------------------------------------- parallel copies, stacking


def _mixed_cell() -> Netlist:
    return Netlist(
        "cell",
        (
            Element("L", "esl", "vdd", "g_in", 7e-12),
            Element("R", "rg", "g_in", "g", 1.5),
            Element("RCLINE", "ch", "sd", "g", 800.0, 2e-13, contacted_ends=2),
            Element("RCLINE", "wire", "g", "vss", 40.0, 1e-15, node_far="t"),
            Element("C", "cov", "t", "sd", 3e-15),
            Element("R", "rsd", "sd", "vss", 6.0),
        ),
    )


@pytest.mark.parametrize("count", [1, 3, 250])
def test_scale_parallel_equals_explicit_copies(count: int) -> None:
    # Source: N identical one-ports in parallel have Z / N (circuit theory); checked against
    # the N copies joined explicitly by `parallel` (own internal nodes each); rel 1e-9
    from celllab.physics.netlist import scale_parallel

    cell = _mixed_cell()
    explicit = parallel("many", [replace_name(cell, f"k{i}") for i in range(min(count, 12))])
    scaled = scale_parallel(cell, count)
    z_cell = solve_impedance(cell, F)
    np.testing.assert_allclose(solve_impedance(scaled, F), z_cell / count, rtol=1e-9)
    if count <= 12:
        np.testing.assert_allclose(solve_impedance(explicit, F), z_cell / count, rtol=1e-9)
    assert scaled.element("esl").value == pytest.approx(7e-12 / count)
    assert scaled.element("ch").c_total == pytest.approx(2e-13 * count)
    assert scaled.element("cov").value == pytest.approx(3e-15 * count)


def replace_name(nl: Netlist, name: str) -> Netlist:
    return Netlist(name, nl.elements, nl.ports)


@pytest.mark.parametrize("bad", [0, -2, float("nan"), float("inf")])
def test_scale_parallel_rejects_non_positive_counts(bad: float) -> None:
    from celllab.physics.netlist import scale_parallel

    with pytest.raises(ValueError, match="count"):
        scale_parallel(_mixed_cell(), bad)


def test_stack_variants_keeps_each_netlist_as_a_variant() -> None:
    from celllab.physics.netlist import scale_parallel, stack_variants

    a, b = _mixed_cell(), scale_parallel(_mixed_cell(), 4)
    stacked = stack_variants("both", [a, b])
    assert stacked.n_variant == 2
    z = solve_impedance(stacked, F)
    np.testing.assert_allclose(z[0], solve_impedance(a, F)[0], rtol=1e-12)
    np.testing.assert_allclose(z[1], solve_impedance(b, F)[0], rtol=1e-12)
    other = Netlist("other", (Element("C", "c", "vdd", "vss", 1e-12),))
    with pytest.raises(ValueError, match="structure"):
        stack_variants("bad", [a, other])


@given(
    values=st.lists(st.floats(0.01, 100.0), min_size=6, max_size=6),
    freq=st.floats(1e3, 1e10),
)
@settings(max_examples=40, deadline=None)
def test_z_matrix_is_reciprocal_and_passive(values: list[float], freq: float) -> None:
    # Invariants of passive RLC networks (circuit theory): Z symmetric (reciprocity) and
    # Re Z_ii >= 0 (passivity); rel 1e-9
    from celllab.physics.netlist import solve_z_matrix

    r1, r2, r3, c1, c2, l1 = values
    nl = Netlist("mesh", (
        Element("R", "r1", "a", "b", r1), Element("R", "r2", "b", "c", r2),
        Element("R", "r3", "c", "gnd", r3), Element("C", "c1", "a", "gnd", c1 * 1e-12),
        Element("C", "c2", "b", "gnd", c2 * 1e-12), Element("L", "l1", "a", "c", l1 * 1e-10),
    ), ports=("a", "gnd"))
    z = solve_z_matrix(nl, [freq], ["a", "b", "c"])[0, 0]
    np.testing.assert_allclose(z, z.T, rtol=1e-9, atol=1e-12 * np.abs(z).max())
    assert np.all(np.diag(z).real >= -1e-12 * np.abs(z).max())
