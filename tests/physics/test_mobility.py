"""Mobility models and threshold temperature shift."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import mobility as mob


def test_theta_model_check() -> None:
    # Source: docs/references.md [31] [DF], mu0 400 cm^2/Vs, theta 0.5/V, V_ov 0.8 V ->
    # 285.7 cm^2/Vs; rel 1e-4
    mu = mob.effective_mobility(400e-4, 0.5, 0.8, 300.0, 300.0)
    assert mu / 1e-4 == pytest.approx(285.714, rel=1e-4)


def test_bsim_temperature_check_values() -> None:
    # Source: docs/references.md [33] [DF], 298.15 -> 398.15 K, UTE -1.5, KT1 -0.11 V:
    # mu ratio 0.64801, dV_T = -36.894 mV; rel 1e-4
    ratio = mob.temperature_scaled_mobility(1.0, 398.15, 298.15, -1.5)
    assert ratio == pytest.approx(0.64801, rel=1e-4)
    assert mob.threshold_shift(-0.11, 398.15, 298.15) * 1e3 == pytest.approx(-36.894, rel=1e-4)
    # effective_mobility carries the same temperature law at zero overdrive
    assert mob.effective_mobility(1.0, 0.3, 0.0, 398.15, 298.15) == pytest.approx(ratio, rel=1e-12)


def test_negative_overdrive_is_clipped() -> None:
    # Source: theta model is defined for V_ov >= 0 (strong inversion); API contract
    assert mob.effective_mobility(0.04, 0.5, -1.0, 300.0, 300.0) == pytest.approx(0.04, rel=1e-12)


def test_universal_mobility_structure() -> None:
    # Source: functional form of the Chen-Hu universal fit (coefficients from memory, so only the
    # structure is asserted): mu(0) = mu_max and mu(E_crit) = mu_max / 2; exact
    for carrier in ("electron", "hole"):
        mu0 = mob.universal_mobility(0.0, carrier)
        assert mob.universal_mobility(0.0, carrier, mu_max=0.05) == pytest.approx(0.05, rel=1e-12)
        e_c = 0.9e8 if carrier == "electron" else 0.45e8
        assert mob.universal_mobility(e_c, carrier) == pytest.approx(mu0 / 2, rel=1e-12)
    with pytest.raises(ValueError, match="carrier"):
        mob.universal_mobility(1e8, "ion")  # type: ignore[arg-type]


def test_effective_field_forms() -> None:
    # Source: docs/references.md [32] [DF of an FM formula], V_GS 1.0, V_T 0.3, T_ox 2 nm ->
    # 1.083 MV/cm (checks our arithmetic of the recalled form only); rel 1e-3
    e_eff = mob.effective_field_from_voltages(1.0, 0.3, 2e-9, "electron")
    assert e_eff / 1e8 == pytest.approx(1.0833, rel=1e-3)
    # Source: Takagi et al. 1994, E_eff = (Q_dep + eta Q_inv)/eps_si, eta 1/2 (n), 1/3 (p); rel 1e-12
    eps_si = 11.7 * 8.8541878188e-12
    assert mob.takagi_effective_field(1e-3, 6e-3, "electron") == pytest.approx(
        4e-3 / eps_si, rel=1e-9
    )
    assert mob.takagi_effective_field(1e-3, 6e-3, "hole") == pytest.approx(3e-3 / eps_si, rel=1e-9)


@given(st.floats(0.0, 3e8), st.floats(1e5, 1e8), st.sampled_from(["electron", "hole"]))
def test_universal_mobility_decreases_with_field(e_eff: float, de: float, carrier: str) -> None:
    # Source: Takagi et al. 1994, mobility degrades monotonically with effective field; property
    assert mob.universal_mobility(e_eff + de, carrier) < mob.universal_mobility(e_eff, carrier)  # type: ignore[arg-type]


@given(st.floats(0.0, 2.0), st.floats(0.01, 1.0), st.floats(250.0, 450.0))
def test_theta_mobility_bounded(v_ov: float, theta: float, temperature: float) -> None:
    # Source: theta model, 0 < mu_eff <= mu0 (T/T_ref)^UTE; property
    mu = mob.effective_mobility(0.03, theta, v_ov, temperature, 300.0)
    assert 0.0 < mu <= mob.temperature_scaled_mobility(0.03, temperature, 300.0) * (1 + 1e-12)


def test_broadcast() -> None:
    mu = mob.effective_mobility(np.array([[0.03], [0.04]]), 0.5, np.linspace(0, 1, 5), 300.0, 300.0)
    assert mu.shape == (2, 5)
