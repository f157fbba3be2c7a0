"""Partial and loop inductance against handbook values and direct numerical integration."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import mu_0, nano
from scipy.integrate import dblquad, quad

from celllab.physics import inductance as ind


@pytest.mark.parametrize(("hf", "expected_nH"), [(False, 0.865), (True, 0.815)])
def test_bond_wire(hf: bool, expected_nH: float) -> None:
    # Source: docs/references.md [64] [DF] (Grover 1946; Rosa 1908): l = 1 mm, r = 12.5 um ->
    # 0.865 nH (uniform current) / 0.815 nH (surface current); abs 0.5 pH (quoted digits)
    l_w = ind.wire_self_inductance(1e-3, 12.5e-6, high_frequency=hf)
    assert l_w / nano == pytest.approx(expected_nH, abs=5e-4)


@pytest.mark.parametrize("d_over_l", [0.01, 0.3, 2.0])
def test_filament_mutual_against_neumann_integral(d_over_l: float) -> None:
    # Source: Neumann's formula M = mu0/(4 pi) double integral dl.dl'/r, integrated with scipy
    # quad over one filament after the inner integral in closed form; rel 1e-8
    length, d = 1e-4, d_over_l * 1e-4

    def inner(x: float) -> float:  # integral over the other filament of 1/r
        return float(np.arcsinh((length - x) / d) + np.arcsinh(x / d))

    numeric = mu_0 / (4 * np.pi) * quad(inner, 0.0, length, epsabs=0, epsrel=1e-12)[0]
    assert ind.filament_mutual_inductance(length, d) == pytest.approx(numeric, rel=1e-8, abs=0)


def _cross_section_average(length: float, width: float, thickness: float, offset: float) -> float:
    """Mean filament mutual inductance over point pairs of two w x t cross-sections whose
    centres are ``offset`` apart along the width (offset 0: the bar's own self inductance)."""

    def tri(u: float, span: float) -> float:  # density of the difference of two uniforms
        return max(span - abs(u), 0.0) / span**2

    def integrand(v: float, u: float) -> float:
        dist = np.hypot(u, v)
        return (
            tri(u - offset, width)
            * tri(v, thickness)
            * ind.filament_mutual_inductance(length, dist)
        )

    if offset == 0.0:  # symmetric: one quadrant, so no node sits on the log singularity
        val, _ = dblquad(integrand, 0.0, width, 0.0, thickness, epsabs=0, epsrel=1e-7)
        return 4.0 * float(val)
    val, _ = dblquad(
        integrand, offset - width, offset + width, -thickness, thickness, epsabs=0, epsrel=1e-7
    )
    return float(val)


def test_bar_self_inductance_against_numerical_average() -> None:
    # Source: partial self inductance = filament mutual inductance averaged over the cross-
    # section (Ruehli 1972, uniform current), by scipy dblquad; rel 0.5 %
    length, width, thickness = 100e-6, 2e-6, 0.5e-6
    numeric = _cross_section_average(length, width, thickness, 0.0)
    assert ind.bar_self_inductance(length, width, thickness) == pytest.approx(
        numeric, rel=5e-3, abs=0
    )


@pytest.mark.parametrize("separation_over_width", [1.05, 1.5, 3.0, 10.0])
def test_loop_inductance_against_numerical_average(separation_over_width: float) -> None:
    # Source: L_loop = 2 (L_self - M) with both terms from the cross-section averages above
    # (scipy dblquad); rel 0.5 %
    length, width, thickness = 50e-6, 1e-6, 0.3e-6
    sep = separation_over_width * width
    numeric = 2 * (
        _cross_section_average(length, width, thickness, 0.0)
        - _cross_section_average(length, width, thickness, sep)
    )
    assert ind.loop_inductance(length, width, sep, thickness) == pytest.approx(
        numeric, rel=5e-3, abs=0
    )


@pytest.mark.parametrize(
    ("width", "thickness", "offset"),
    [(1.0, 0.3, 0.0), (1.0, 1.0, 0.0), (1.0, 0.3, 1.0), (2.0, 0.5, 3.0)],
)
def test_rectangle_gmd_against_quadrature(width: float, thickness: float, offset: float) -> None:
    # Source: ln GMD = mean of ln r over point pairs (Grover 1946), by scipy dblquad over the
    # triangular difference densities; rel 1e-8. Self GMD also vs Grover's 0.2235 (w + t), 0.5 %
    def tri(u: float, span: float) -> float:
        return max(span - abs(u), 0.0) / span**2

    def integrand(v: float, u: float) -> float:
        return tri(u - offset, width) * tri(v, thickness) * 0.5 * np.log(u * u + v * v)

    if offset == 0.0:
        mean_log = 4 * dblquad(integrand, 0, width, 0, thickness, epsabs=0, epsrel=1e-11)[0]
    else:
        mean_log = dblquad(
            integrand, offset - width, offset + width, -thickness, thickness, epsabs=0, epsrel=1e-11
        )[0]
    gmd = ind.rectangle_gmd(width, thickness, offset)
    assert np.log(gmd) == pytest.approx(mean_log, rel=1e-8, abs=1e-10)
    if offset == 0.0:
        assert gmd == pytest.approx(0.2235 * (width + thickness), rel=5e-3, abs=0)


def test_loop_inductance_grows_with_separation_and_length() -> None:
    # common practice, no source: a wider loop or a longer one has more inductance
    base = ind.loop_inductance(20e-6, 1e-6, 3e-6, 0.3e-6)
    assert ind.loop_inductance(20e-6, 1e-6, 6e-6, 0.3e-6) > base
    assert ind.loop_inductance(40e-6, 1e-6, 3e-6, 0.3e-6) > base
    assert ind.loop_inductance(20e-6, 2e-6, 3e-6, 0.3e-6) < base
