"""TDDB statistics, acceleration, lifetime and FIT."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.constants import hour

from celllab.physics import tddb


def test_area_scaling_check_value() -> None:
    # Source: docs/references.md [82] [DF], beta 1.5, A_test/A_chip = 1e-4 -> 2.1544e-3; rel 1e-4
    assert tddb.area_scaled_eta(1.0, 1e-4, 1.0, 1.5) == pytest.approx(2.1544e-3, rel=1e-4)


def test_area_scaling_percentile_equivalence() -> None:
    # Source: docs/references.md [82], 1 - F2 = (1 - F1)^(A2/A1) is the same law as eta
    # scaling; rel 1e-9
    eta, beta, a1, a2, t = 1e8, 1.5, 1e-10, 1e-6, 3e5
    f1 = tddb.weibull_cdf(t, eta, beta)
    f2 = tddb.area_scaled_fraction(f1, a1, a2)
    assert f2 == pytest.approx(
        tddb.weibull_cdf(t, tddb.area_scaled_eta(eta, a1, a2, beta), beta), rel=1e-9
    )
    # Source: docs/references.md [82] [DF] F = 1e-4 percentile factor 2.1544e-3; rel 1e-4
    p_test = tddb.weibull_percentile(1e-4, 1.0, 1.5)
    p_chip = tddb.weibull_percentile(1e-4, tddb.area_scaled_eta(1.0, 1e-4, 1.0, 1.5), 1.5)
    assert p_chip / p_test == pytest.approx(2.1544e-3, rel=1e-4)


def test_weibull_relations() -> None:
    # Source: docs/references.md [81] Weibull identities; exact
    eta, beta = 1e7, 1.3
    assert tddb.weibull_cdf(eta, eta, beta) == pytest.approx(1 - np.exp(-1), rel=1e-12)
    t = tddb.weibull_percentile(0.01, eta, beta)
    assert tddb.weibull_cdf(t, eta, beta) == pytest.approx(0.01, rel=1e-12)
    assert tddb.weibit(0.01) == pytest.approx(beta * np.log(t) - beta * np.log(eta), rel=1e-12)
    assert tddb.weibull_hazard(eta, eta, beta) == pytest.approx(beta / eta, rel=1e-12)


@pytest.mark.parametrize(
    ("n", "expected"),
    [
        (44, 1.7592e13),  # Source: docs/references.md [83] [DF]; rel 1e-4
        (40, 1.0995e12),  # Source: docs/references.md [83] [DF]; rel 1e-4
        (48, 2.8147e14),  # Source: docs/references.md [83] [DF]; rel 1e-4
    ],
)
def test_power_law_acceleration(n: int, expected: float) -> None:
    assert tddb.voltage_acceleration(2.0, 1.0, model="power", exponent=n) == pytest.approx(
        expected, rel=1e-4
    )


def test_field_models() -> None:
    # Source: McPherson & Mogul 1998 (E), Schuegraf & Hu 1994 (1/E) forms; exact arithmetic
    t_ox = 2e-9
    af_e = tddb.voltage_acceleration(2.0, 1.0, model="e", exponent=1e-8, t_ox=t_ox)
    assert af_e == pytest.approx(np.exp(1e-8 * (1.0 / t_ox)), rel=1e-12)
    af_g = tddb.voltage_acceleration(2.0, 1.0, model="inverse_e", exponent=3.5e9, t_ox=t_ox)
    assert af_g == pytest.approx(np.exp(3.5e9 * (t_ox / 1.0 - t_ox / 2.0)), rel=1e-12)
    with pytest.raises(ValueError, match="t_ox"):
        tddb.voltage_acceleration(2.0, 1.0, model="e", exponent=1e-8)
    with pytest.raises(ValueError, match="model"):
        tddb.voltage_acceleration(2.0, 1.0, model="cubic", exponent=1.0)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("t_use_C", "expected"),
    [
        (105.0, 2.942),  # Source: docs/references.md [84] [DF], Ea 0.7 eV; rel 1e-3
        (85.0, 9.763),  # Source: docs/references.md [84] [DF], Ea 0.7 eV; rel 1e-3
    ],
)
def test_arrhenius(t_use_C: float, expected: float) -> None:
    af = tddb.temperature_acceleration(125.0 + 273.15, t_use_C + 273.15, 0.7)
    assert af == pytest.approx(expected, rel=1e-3)


@pytest.mark.parametrize(
    ("failures", "confidence", "expected"),
    [
        (0, 0.6, 916.29),  # Source: docs/references.md [85] [DF]; rel 1e-4
        (0, 0.9, 2302.6),  # Source: docs/references.md [85] [DF]; rel 1e-4
        (1, 0.6, 2022.3),  # Source: docs/references.md [85] [DF]; rel 1e-4
    ],
)
def test_fit_chi_square(failures: int, confidence: float, expected: float) -> None:
    # N = 1000 devices, t = 1000 h, AF = 1
    fit = tddb.fit_upper_bound(failures, 1000, 1000 * hour, confidence)
    assert fit == pytest.approx(expected, rel=1e-4)


def test_time_to_failure_chain() -> None:
    # Source: docs/references.md [80] chain eta_use = eta_ref (A_ref/A)^(1/beta) AF_V AF_T
    # (rel 1e-12)
    kw = {
        "eta_ref_s": 1e4,
        "area_ref": 1e-10,
        "v_ref": 2.0,
        "t_ref_K": 398.15,
        "beta": 1.5,
        "model": "power",
        "exponent": 44.0,
        "ea_eV": 0.7,
    }
    t = tddb.time_to_failure(1e-4, 1e-6, 1.0, 378.15, **kw)  # type: ignore[arg-type]
    eta = (
        1e4
        * (1e-10 / 1e-6) ** (1 / 1.5)
        * 2.0**44
        * tddb.temperature_acceleration(398.15, 378.15, 0.7)
    )
    assert t == pytest.approx(eta * (-np.log1p(-1e-4)) ** (1 / 1.5), rel=1e-12)
    # at the reference conditions the chain reduces to the reference percentile
    t_ref = tddb.time_to_failure(0.632, 1e-10, 2.0, 398.15, **kw)  # type: ignore[arg-type]
    assert t_ref == pytest.approx(tddb.weibull_percentile(0.632, 1e4, 1.5), rel=1e-12)


@given(st.floats(1e-8, 0.5), st.floats(1e-12, 1e-4), st.floats(2.0, 1e4))
def test_larger_area_fails_sooner(fraction: float, area: float, scale: float) -> None:
    # Source: weakest-link area scaling (Degraeve et al. 1998); property
    kw = {
        "eta_ref_s": 1e6,
        "area_ref": 1e-10,
        "v_ref": 2.0,
        "t_ref_K": 398.15,
        "beta": 1.5,
        "model": "power",
        "exponent": 40.0,
        "ea_eV": 0.6,
    }
    t1 = tddb.time_to_failure(fraction, area, 1.0, 358.15, **kw)  # type: ignore[arg-type]
    t2 = tddb.time_to_failure(fraction, area * scale, 1.0, 358.15, **kw)  # type: ignore[arg-type]
    assert t2 < t1


def test_fit_from_lifetime() -> None:
    # Source: definition FIT = failures per 1e9 device-hours; exponential case beta = 1 gives
    # F/t ~ 1/eta for t << eta; rel 1e-3
    eta = 1e12 * hour
    assert tddb.fit_from_lifetime(eta, 1.0, 1e3 * hour) == pytest.approx(1e9 / 1e12, rel=1e-3)


# --- whole-fill wear-out ---------------------------------------------------------------------

from scipy.stats import weibull_min  # noqa: E402


@pytest.mark.parametrize(("eta", "beta"), [(3e5, 1.6), (1e9, 1.2), (2e4, 3.2)])
def test_weibull_against_scipy(eta: float, beta: float) -> None:
    # Source: scipy.stats.weibull_min(c = beta, scale = eta): cdf, ppf and the characteristic life
    # (63.2 % point); rel 1e-10
    t = np.geomspace(eta * 1e-4, eta * 3, 25)
    np.testing.assert_allclose(tddb.weibull_cdf(t, eta, beta), weibull_min.cdf(t, beta, scale=eta), rtol=1e-10)
    q = np.array([1e-6, 1e-4, 0.01, 0.5, 0.9])
    np.testing.assert_allclose(tddb.weibull_percentile(q, eta, beta), weibull_min.ppf(q, beta, scale=eta),
                               rtol=1e-10)
    assert weibull_min.ppf(1 - np.exp(-1), beta, scale=eta) == pytest.approx(eta, rel=1e-10)


def test_area_law_worked_case() -> None:
    # Worked case: 100 x the area at beta = 1.5 divides t63 by 100^(1/1.5) = 21.54 (weakest-link
    # area scaling, Degraeve et al. 1998); rel 1e-4 against the number, 1e-10 against scipy
    beta, eta = 1.5, 1e6
    eta_big = tddb.area_scaled_eta(eta, 1.0, 100.0, beta)
    assert eta / eta_big == pytest.approx(21.544, rel=1e-4)
    # the 63 % point of the large area is where the small area's cumulative hazard reaches 1/100
    t63 = weibull_min.ppf(1 - np.exp(-1), beta, scale=eta_big)
    assert 100 * (t63 / eta) ** beta == pytest.approx(1.0, rel=1e-10)


def test_area_for_fraction_inverts_the_hazard() -> None:
    # A_max = -ln(1 - F) / h makes F exactly the target; rel 1e-12
    h = 2.5e3  # 1/m^2
    area = tddb.area_for_fraction(10e-6, h)
    assert tddb.fraction_from_hazard(area * h) == pytest.approx(10e-6, rel=1e-12)


@given(st.floats(1e-9, 1e-3), st.floats(1.0, 100.0))
def test_fraction_is_additive_in_hazard(h1: float, h2: float) -> None:
    # two oxides fail independently: survival multiplies, hazards add (weakest link)
    f = tddb.fraction_from_hazard(h1 + h2 * 1e-6)
    assert 1 - f == pytest.approx((1 - tddb.fraction_from_hazard(h1)) * (1 - tddb.fraction_from_hazard(h2 * 1e-6)),
                                  rel=1e-12)


def test_fit_definition() -> None:
    # Source: JEDEC JESD85, 1 FIT = 1 failure per 1e9 device-hours: 100 ppm failing over 10 years
    # (87 660 h) is 1e-4 / 87660 * 1e9 = 1.1408 FIT; rel 1e-4
    assert tddb.average_fit(1e-4, 10 * 365.25 * 24 * hour) == pytest.approx(1.1408, rel=1e-4)
    # and 1000 devices with one failure in 1e6 device-hours -> 1000 FIT
    assert tddb.average_fit(1e-3, 1e6 / 1e3 * hour) == pytest.approx(1000.0, rel=1e-12)
