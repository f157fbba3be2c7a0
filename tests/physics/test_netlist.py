"""Netlist structure and the nodal solver against closed forms."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.physics.distributed_rc import rc_line_impedance
from celllab.physics.netlist import Element, Netlist, ladder_expansion, parallel, solve_impedance

F = np.geomspace(1e3, 1e12, 37)
W = 2 * np.pi * F


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
