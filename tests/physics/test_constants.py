"""Material constants and temperature-dependent silicon quantities."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import constants as c


def test_pinned_material_inputs() -> None:
    # Source: docs/references.md [2] pinned inputs (Sze & Ng 2007 tables; Altermatt 2003); exact
    assert c.EPS_R_SIO2 == 3.9
    assert c.EPS_R_SI == 11.7
    assert c.N_I_300K == 9.65e15


@pytest.mark.parametrize(
    ("temperature", "expected"),
    [
        (300.0, 0.025852),  # Source: docs/references.md [1] [DF] kT/q = 25.852 mV; rel 2e-5
        (300.15, 0.025865),  # Source: docs/references.md [1] [DF] 25.865 mV; rel 2e-5
    ],
)
def test_thermal_voltage(temperature: float, expected: float) -> None:
    assert c.thermal_voltage(temperature) == pytest.approx(expected, rel=2e-5)


def test_bandgap_at_300K() -> None:
    # Source: docs/references.md [3] [DF], Varshni/Thurmond Eg(300 K) = 1.1245 eV; abs 1e-4 eV
    assert c.bandgap_eV(300.0) == pytest.approx(1.1245, abs=1e-4)


def test_bandgap_at_0K_is_eg0() -> None:
    # Source: Varshni form Eg(0) = Eg0 = 1.17 eV (Thurmond 1975 in Sze & Ng 2007); exact
    assert c.bandgap_eV(0.0) == pytest.approx(1.17, rel=1e-12)


def test_intrinsic_density_anchor() -> None:
    # Source: docs/references.md [2] n_i(300 K) = 9.65e9 cm^-3; rel 1e-12
    assert c.intrinsic_density(300.0) == pytest.approx(9.65e15, rel=1e-12)


def test_intrinsic_density_law() -> None:
    # Source: Sze & Ng 2007 eq. 1.22, n_i ~ T^1.5 exp(-Eg/2kT), recomputed here; rel 1e-12
    t = 350.0
    expected = (
        9.65e15
        * (t / 300) ** 1.5
        * np.exp(
            c.bandgap_eV(300.0) / (2 * c.thermal_voltage(300.0))
            - c.bandgap_eV(t) / (2 * c.thermal_voltage(t))
        )
    )
    assert c.intrinsic_density(t) == pytest.approx(expected, rel=1e-12)


def test_intrinsic_density_at_400K_order() -> None:
    # Source: from memory, n_i(400 K) of Si is a few 1e12 cm^-3 (Sze & Ng 2007 fig. 1.16); 1e12-1e13
    assert 1e18 < c.intrinsic_density(400.0) < 1e19


@given(st.floats(200.0, 500.0), st.floats(1.0, 50.0))
def test_intrinsic_density_rises_with_temperature(t: float, dt: float) -> None:
    # Source: Sze & Ng 2007 ch. 1, n_i increases monotonically with T; property
    assert c.intrinsic_density(t + dt) > c.intrinsic_density(t)


def test_broadcasting() -> None:
    t = np.array([[250.0], [300.0]])
    assert c.intrinsic_density(t).shape == (2, 1)
    assert c.bandgap_eV(np.array([300.0, 400.0])).shape == (2,)
