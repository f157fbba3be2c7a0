"""Oxide capacitance, EOT, poly depletion and centroid."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.constants import epsilon_0, femto, micro, nano

from celllab.physics import oxide as o


@pytest.mark.parametrize(
    ("t_ox_nm", "fF_per_um2", "rel"),
    [
        (2.0, 17.2657, 1e-5),  # Source: docs/references.md [10] [DF]; rel 1e-5 (6 digits given)
        (1.0, 34.531, 2e-5),  # Source: docs/references.md [10] [DF]; rel 2e-5 (5 digits given)
        (10.0, 3.4531, 2e-5),  # Source: docs/references.md [10] [DF]; rel 2e-5 (5 digits given)
    ],
)
def test_oxide_capacitance(t_ox_nm: float, fF_per_um2: float, rel: float) -> None:
    c = o.oxide_capacitance_per_area(3.9, t_ox_nm * nano)
    assert c * micro**2 / femto == pytest.approx(fF_per_um2, rel=rel)


def test_oxide_capacitance_exact_value() -> None:
    # Source: eps0 * 3.9 / 2 nm with CODATA eps0 (docs/references.md [1]: rel >= 1e-9 on eps0 terms)
    c = o.oxide_capacitance_per_area(3.9, 2e-9)
    assert c == pytest.approx(1.72657e-2, rel=1e-5)
    assert c == pytest.approx(epsilon_0 * 3.9 / 2e-9, rel=1e-9)


@pytest.mark.parametrize(
    ("layers_nm", "k", "eot_nm"),
    [
        ([0.5, 2.0], [3.9, 20.0], 0.890),  # Source: docs/references.md [11] [DF]; abs 1e-9 nm
        ([3.0], [20.0], 0.585),  # Source: docs/references.md [11] [DF]; abs 1e-9 nm
    ],
)
def test_equivalent_oxide_thickness(layers_nm: list[float], k: list[float], eot_nm: float) -> None:
    eot = o.equivalent_oxide_thickness(np.array(layers_nm) * nano, k)
    assert eot / nano == pytest.approx(eot_nm, abs=1e-9)


def test_eot_broadcasts_over_variants() -> None:
    t = np.array([[0.5, 2.0], [0.5, 3.0]]) * nano
    eot = o.equivalent_oxide_thickness(t, np.array([3.9, 20.0]))
    assert eot.shape == (2,)
    assert eot[1] / nano == pytest.approx(0.5 + 3.0 * 3.9 / 20.0, rel=1e-12)


def test_centroid_bsim4_check() -> None:
    # Source: docs/references.md [13] [DF] BSIM4 X_DC, TOXP = 2 nm, numerator 2.2 V -> 0.4421 nm;
    # rel 1e-4 numerator Vgsteff + 4(VTH0-VFB-Phi_s) = 1.0 + 4 * 0.3 = 2.2 V
    x = o.centroid_distance(1.0, 0.3, 2e-9)
    assert x / nano == pytest.approx(0.4421, rel=1e-4)
    # Source: docs/references.md [13] [DF] Delta t = (3.9/11.7) X_DC = 0.1474 nm; rel 1e-3
    assert (3.9 / 11.7) * x / nano == pytest.approx(0.1474, rel=1e-3)


def test_centroid_zero_field_limit() -> None:
    # Source: BSIM4 manual X_DC form, zero argument -> ADOS * 1.9 nm; exact
    assert o.centroid_distance(0.0, 0.0, 2e-9) == pytest.approx(1.9e-9, rel=1e-12)


def test_poly_depletion_worked_example() -> None:
    # Source: docs/references.md [12] [DF] |Q_gate| = 1.893e-2 C/m^2, N_poly = 1e20 cm^-3:
    # W_p = 1.181 nm, Delta t_poly = 0.394 nm; rel 1e-3
    w = o.poly_depletion_width(1.893e-2, 1e26)
    assert w / nano == pytest.approx(1.181, rel=1e-3)
    assert (3.9 / 11.7) * w / nano == pytest.approx(0.394, rel=1e-3)
    c_poly = o.poly_depletion_capacitance(1.893e-2, 1e26)
    assert c_poly == pytest.approx(11.7 * epsilon_0 / w, rel=1e-12)


def test_poly_depletion_metal_gate_is_transparent() -> None:
    # Source: definition, a metal gate has no depletion layer; exact
    assert np.isinf(o.poly_depletion_capacitance(1e-2, np.inf))
    assert o.poly_depletion_voltage(1e-2, np.inf) == 0.0


def test_poly_depletion_voltage_consistent_with_width() -> None:
    # Source: depletion approximation V = q N W^2 / (2 eps) (Taur & Ning 2009 §2.3); rel 1e-12
    q_g, n_g = 2e-2, 5e25
    w = o.poly_depletion_width(q_g, n_g)
    expected = 1.602176634e-19 * n_g * w**2 / (2 * 11.7 * epsilon_0)
    assert o.poly_depletion_voltage(q_g, n_g) == pytest.approx(expected, rel=1e-12)


def test_series_and_cet() -> None:
    # Source: series plates 1/C = sum 1/C_i, CET = 3.9 eps0 / C (Taur & Ning 2009 §2.4); rel 1e-12
    cox = o.oxide_capacitance_per_area(3.9, 2e-9)
    c_cen = o.centroid_capacitance_per_area(1e-9)
    total = o.series_capacitance(cox, c_cen, np.inf)
    assert o.capacitance_equivalent_thickness(total) == pytest.approx(
        2e-9 + 1e-9 * 3.9 / 11.7, rel=1e-12
    )


def test_oxide_field() -> None:
    # Source: uniform field V/t; 1 V over 2 nm = 5 MV/cm; exact
    assert o.oxide_field(1.0, 2e-9) == pytest.approx(5e8, rel=1e-15)


@given(st.floats(0.5, 20.0), st.floats(0.01, 10.0), st.floats(1.0, 40.0))
def test_capacitance_falls_as_oxide_thickens(t_nm: float, dt_nm: float, eps_r: float) -> None:
    # Source: C = eps/t (parallel plate); property
    assert o.oxide_capacitance_per_area(
        eps_r, (t_nm + dt_nm) * nano
    ) < o.oxide_capacitance_per_area(eps_r, t_nm * nano)


@given(st.floats(0.0, 5.0), st.floats(0.0, 1.0), st.floats(0.8, 10.0))
def test_centroid_bounded_and_decreasing(v_gst: float, v_dep: float, toxp_nm: float) -> None:
    # Source: BSIM4 X_DC form, 0 < X_DC <= 1.9 nm and decreasing in the field argument; property
    x1 = o.centroid_distance(v_gst, v_dep, toxp_nm * nano)
    x2 = o.centroid_distance(v_gst + 0.1, v_dep, toxp_nm * nano)
    assert 0.0 < x2 < x1 <= 1.9e-9 * (1 + 1e-12)
