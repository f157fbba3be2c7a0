"""MOS electrostatics and quasi-static C-V.

The full C-V curve is checked against an independent 1-D finite-volume solution of the nonlinear
Poisson equation written below (it shares nothing with the module under test but scipy).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.typing import NDArray
from scipy.constants import e, epsilon_0, k, micro, nano
from scipy.linalg import solve_banded

from celllab.physics import mos_cv as m
from celllab.physics import oxide as o

T300 = 300.0
NA17 = 1e23  # 1e17 cm^-3
NI_1E10 = 1e16  # 1e10 cm^-3 (Sproul & Green), for the docs/references.md check values that use it
COX2 = o.oxide_capacitance_per_area(3.9, 2e-9)


# ------------------------------------------------------------------------------------------
# Check values (docs/references.md [20]-[23])


def test_fermi_potential() -> None:
    # Source: docs/references.md [20] [DF], N_A 1e17, n_i 1e10, 300 K -> 0.41669 V; rel 1e-4
    assert m.fermi_potential(NA17, T300, n_i=NI_1E10) == pytest.approx(0.41669, rel=1e-4)


def test_fermi_potential_default_n_i() -> None:
    # Source: docs/references.md [20] [DF], n_i = 9.65e9 -> 0.41761 V; rel 1e-4
    assert m.fermi_potential(NA17, T300) == pytest.approx(0.41761, rel=1e-4)


def test_max_depletion_width() -> None:
    # Source: docs/references.md [20] [DF], W_max = 0.1038 um; rel 2e-3
    assert m.max_depletion_width(NA17, T300, n_i=NI_1E10) / micro == pytest.approx(0.1038, rel=2e-3)


def test_low_doping_values() -> None:
    # Source: docs/references.md [20] [DF], N_A 1e16, n_i 1e10: phi_F 0.3572 V,
    # W_max 0.3039 um; rel 1e-3
    assert m.fermi_potential(1e22, T300, n_i=NI_1E10) == pytest.approx(0.3572, rel=1e-3)
    assert m.max_depletion_width(1e22, T300, n_i=NI_1E10) / micro == pytest.approx(0.3039, rel=1e-3)


def test_debye_length_and_flatband_capacitance() -> None:
    # Source: docs/references.md [20] [DF] L_D = 12.929 nm, C_s(FB) = 8.0126e-3 F/m^2; rel 1e-4
    assert m.debye_length(NA17, T300) / nano == pytest.approx(12.929, rel=1e-4)
    c_fb = m.semiconductor_capacitance_per_area(
        0.0, body_doping=NA17, body_type="p", temperature=T300
    )
    assert c_fb == pytest.approx(8.0126e-3, rel=1e-4)
    # the analytic formula just off flat band joins the limit (same source; rel 1e-5)
    c_near = m.semiconductor_capacitance_per_area(
        1e-5, body_doping=NA17, body_type="p", temperature=T300
    )
    assert c_near == pytest.approx(c_fb, rel=1e-3)


def test_sze_charge_at_two_phi_f() -> None:
    # Source: docs/references.md [21] [DF]: |Q_s(2 phi_F)| = sqrt(2 eps q N_A 2 phi_F); rel 2e-3
    two_phi = 2 * m.fermi_potential(NA17, T300, n_i=NI_1E10)
    q_s = m.surface_charge_per_area(
        two_phi, body_doping=NA17, body_type="p", temperature=T300, n_i=NI_1E10
    )
    q_dep = np.sqrt(2 * 11.7 * epsilon_0 * e * NA17 * two_phi)
    assert q_s < 0
    assert abs(q_s) == pytest.approx(q_dep, rel=2e-3)
    # Source: docs/references.md [21] [DF] |Q_s| = 1.6632e-3 C/m^2; rel 1e-3
    assert abs(q_s) == pytest.approx(1.6632e-3, rel=1e-3)


def test_lf_semiconductor_capacitance_at_two_phi_f() -> None:
    # Source: docs/references.md [21] [DF], LF C_s(2 phi_F) = 1.996e-3 F/m^2 vs
    # eps/W_max = 9.97e-4; rel 1e-3
    two_phi = 2 * m.fermi_potential(NA17, T300, n_i=NI_1E10)
    c_s = m.semiconductor_capacitance_per_area(
        two_phi, body_doping=NA17, body_type="p", temperature=T300, n_i=NI_1E10
    )
    assert c_s == pytest.approx(1.996e-3, rel=1e-3)
    c_dep = 11.7 * epsilon_0 / m.max_depletion_width(NA17, T300, n_i=NI_1E10)
    assert c_dep == pytest.approx(9.97e-4, rel=1e-3)


def test_threshold_above_flat_band() -> None:
    # Source: docs/references.md [22] [DF], V_T - V_FB = 0.9297 V (tox 2 nm, N_A 1e17); abs 1 mV
    vt = m.threshold_voltage(0.0, COX2, NA17, "p", T300, n_i=NI_1E10)
    assert vt == pytest.approx(0.9297, abs=1e-3)


def test_threshold_with_n_poly_gate() -> None:
    # Source: docs/references.md [22] [DF], n+ poly, Eg = 1.12 eV: V_FB = -0.977 V,
    # V_T = -0.047 V; abs 2 mV
    vfb = m.flatband_voltage("n+poly", NA17, "p", T300, n_i=NI_1E10, eg_eV=1.12)
    assert vfb == pytest.approx(-0.977, abs=2e-3)
    assert m.threshold_voltage(vfb, COX2, NA17, "p", T300, n_i=NI_1E10) == pytest.approx(
        -0.047, abs=2e-3
    )


def test_flatband_n_poly_on_n_well() -> None:
    # Source: docs/references.md [22], [24] [DF], n+ poly / n-well N_D 1e17: V_FB = -0.143 V;
    # abs 2 mV
    vfb = m.flatband_voltage("n+poly", NA17, "n", T300, n_i=NI_1E10, eg_eV=1.12)
    assert vfb == pytest.approx(-0.143, abs=2e-3)


def test_flatband_p_poly_mirror_and_oxide_charge() -> None:
    # Source: Sze & Ng 2007 §4.3.1, p+ poly on n-body = +(Eg/2 + phi_F); Q_f shifts by -Q_f/C_ox
    vfb_n = m.flatband_voltage("n+poly", NA17, "p", T300)
    vfb_p = m.flatband_voltage("p+poly", NA17, "n", T300)
    assert vfb_p == pytest.approx(-vfb_n, rel=1e-12)
    q_f = 5e10 * 1e4 * e  # 5e10 cm^-2 positive charges
    shifted = m.flatband_voltage("n+poly", NA17, "p", T300, oxide_charge=q_f, cox=COX2)
    assert shifted - vfb_n == pytest.approx(-q_f / COX2, rel=1e-12)


def test_flatband_metal_gate() -> None:
    # Source: Sze & Ng 2007 §4.3.1, phi_ms = Phi_m - (chi + Eg/2 + phi_F); rel 1e-12
    vfb = m.flatband_voltage(4.6, NA17, "p", T300)
    expected = 4.6 - (4.05 + 1.1245192307692307 / 2 + float(m.fermi_potential(NA17, T300)))
    assert vfb == pytest.approx(expected, rel=1e-12)


def test_flatband_rejects_unknown_gate() -> None:
    with pytest.raises(ValueError, match="n\\+poly"):
        m.flatband_voltage("tin", NA17, "p", T300)


def test_threshold_temperature_coefficient() -> None:
    # Source: docs/references.md [33] [DF], physics route (n+ poly, 1e17, 2 nm, n_i ~ T^1.5
    # exp(-Eg/2kT), Varshni Eg): dV_T/dT = -0.70 mV/K at 300 K; abs 0.05 mV/K
    def vt(temperature: float) -> float:
        vfb = m.flatband_voltage("n+poly", NA17, "p", temperature)
        return float(m.threshold_voltage(vfb, COX2, NA17, "p", temperature))

    slope = (vt(301.0) - vt(299.0)) / 2.0
    assert slope * 1e3 == pytest.approx(-0.70, abs=0.05)


def test_hf_min_capacitance() -> None:
    # Source: docs/references.md [23] [DF], tox 5 nm, n_i 9.65e9: C_min/C_ox = 0.1261; rel 1e-3
    cox = o.oxide_capacitance_per_area(3.9, 5e-9)
    assert m.hf_min_capacitance(cox, NA17, T300) / cox == pytest.approx(0.1261, rel=1e-3)


@pytest.mark.parametrize(
    ("vg", "psi_expected", "tol"),
    [
        (0.59, 0.418, 0.01),  # intrinsic surface, psi = phi_B
        (1.08, 0.837, 0.005),  # strong inversion, psi = 2 phi_B
    ],
)
def test_textbook_capacitor(vg: float, psi_expected: float, tol: float) -> None:
    # Source: docs/references.md [23] [DF] textbook case (eps_s 11.9, d = 5 nm, N_A 1e17,
    # n_i 9.65e9), depletion-approximation numbers; the exact charge differs by the -kT/q term,
    # hence abs tol
    psi = m.solve_surface_potential(
        vg,
        vfb=0.0,
        cox=o.oxide_capacitance_per_area(3.9, 5e-9),
        body_doping=NA17,
        body_type="p",
        temperature=T300,
        eps_r_si=11.9,
        centroid=False,
    )
    assert psi == pytest.approx(psi_expected, abs=tol)


# ------------------------------------------------------------------------------------------
# Independent numerical Poisson reference


def _graded_mesh(
    depth: float, h0: float = 5e-12, growth: float = 1.04, h_max: float = 2e-9
) -> NDArray[np.float64]:
    nodes = [0.0]
    h = h0
    while nodes[-1] < depth:
        nodes.append(nodes[-1] + h)
        h = min(h * growth, h_max)
    return np.array(nodes)


def _poisson_gate_charge(
    vg_minus_vfb: NDArray[np.float64],
    *,
    n_a: float,
    n_d: float,
    cox: float,
    temperature: float,
    n_i: float,
    eps_r_si: float = 11.7,
    minority: bool = True,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Finite-volume Newton solution of eps psi'' = -q (p - n + N_D - N_A), Boltzmann carriers,
    psi(depth) = 0, oxide as the Robin condition eps psi'(0) = -C_ox (V - psi(0)).
    ``minority=False`` leaves the minority carriers out of the charge (no contact supplies them:
    deep depletion). Returns (surface potential, gate charge per area) for each bias
    (continuation sweep)."""
    vt = k * temperature / e
    eps_s = eps_r_si * epsilon_0
    net = n_d - n_a
    majority = 0.5 * (abs(net) + np.sqrt(net**2 + 4 * n_i**2))  # no cancellation at high doping
    p0, n0 = (majority, n_i**2 / majority) if net < 0 else (n_i**2 / majority, majority)
    if not minority:
        p0, n0 = (p0, 0.0) if net < 0 else (0.0, n0)
    reach = 1.2 + (0.0 if minority else float(np.max(np.abs(vg_minus_vfb))))
    depth = 6 * np.sqrt(2 * eps_s * reach / (e * abs(net)))
    x = _graded_mesh(depth)
    hs = np.diff(x)
    size = len(x)
    vol = np.zeros(size)
    vol[:-1] += hs / 2
    vol[1:] += hs / 2
    q_out = np.zeros(len(vg_minus_vfb))
    psi_out = np.zeros(len(vg_minus_vfb))
    # continuation: each polarity swept outward from flat band
    for branch in (np.flatnonzero(vg_minus_vfb >= 0), np.flatnonzero(vg_minus_vfb < 0)):
        psi = np.zeros(size)
        for idx in branch[np.argsort(np.abs(vg_minus_vfb[branch]))]:
            v = vg_minus_vfb[idx]
            for _ in range(300):
                ex, ey = np.exp(-psi / vt), np.exp(psi / vt)
                rho = e * (p0 * (ex - 1) - n0 * (ey - 1))
                d_rho = -e * (p0 * ex + n0 * ey) / vt
                flux = eps_s * np.diff(psi) / hs
                res = np.zeros(size)
                res[1:-1] = flux[1:] - flux[:-1] + rho[1:-1] * vol[1:-1]
                res[0] = flux[0] + cox * (v - psi[0]) + rho[0] * vol[0]
                res[-1] = psi[-1]
                bands = np.zeros((3, size))  # (upper, main, lower) diagonals
                bands[0, 1:] = eps_s / hs
                bands[1, 1:-1] = -eps_s / hs[1:] - eps_s / hs[:-1] + d_rho[1:-1] * vol[1:-1]
                bands[1, 0] = -eps_s / hs[0] - cox + d_rho[0] * vol[0]
                bands[1, -1] = 1.0
                bands[2, :-2] = eps_s / hs[:-1]
                step = np.clip(solve_banded((1, 1), bands, -res), -5 * vt, 5 * vt)
                psi = psi + step
                if np.max(np.abs(step)) < 1e-13:
                    break
            psi_out[idx] = psi[0]
            q_out[idx] = cox * (v - psi[0])
    return psi_out, q_out


@pytest.mark.parametrize(
    ("body_type", "doping", "t_ox"),
    [("p", 1e23, 2e-9), ("n", 1e22, 5e-9)],
)
def test_cv_curve_matches_numerical_poisson(body_type: str, doping: float, t_ox: float) -> None:
    # Source: independent finite-volume 1-D Poisson solution above (scipy.linalg.solve_banded),
    # quasi-static C = dQ_gate/dVg by central difference (2 mV); metal gate, no centroid, so both
    # sides solve the same classical problem. Tolerance 3 % outside depletion, 0.5 % everywhere.
    cox = float(o.oxide_capacitance_per_area(3.9, t_ox))
    n_i = 9.65e15
    n_a, n_d = (doping, 0.0) if body_type == "p" else (0.0, doping)
    sign = 1.0 if body_type == "p" else -1.0
    vt_rel = float(m.threshold_voltage(0.0, cox, doping, body_type, T300))
    v = np.linspace(-2.0, 3.0, 41) * sign * (1.0 if t_ox < 3e-9 else 1.6)
    dv = 2e-3
    _, q_plus = _poisson_gate_charge(v + dv, n_a=n_a, n_d=n_d, cox=cox, temperature=T300, n_i=n_i)
    _, q_minus = _poisson_gate_charge(v - dv, n_a=n_a, n_d=n_d, cox=cox, temperature=T300, n_i=n_i)
    psi_ref, q_ref = _poisson_gate_charge(v, n_a=n_a, n_d=n_d, cox=cox, temperature=T300, n_i=n_i)
    c_ref = (q_plus - q_minus) / (2 * dv)
    op = m.mos_operating_point(
        v,
        vfb=0.0,
        cox=cox,
        body_doping=doping,
        body_type=body_type,
        temperature=T300,
        n_i=n_i,
        centroid=False,
    )
    accumulation = sign * v < -0.3
    inversion = sign * (v - vt_rel) > 0.3
    outside = accumulation | inversion
    assert outside.sum() > 20
    np.testing.assert_allclose(op.capacitance[outside], c_ref[outside], rtol=0.03)
    np.testing.assert_allclose(op.capacitance, c_ref, rtol=5e-3)
    np.testing.assert_allclose(op.psi_s, psi_ref, rtol=1e-3, atol=1e-4)
    np.testing.assert_allclose(op.q_gate, q_ref, rtol=1e-3, atol=1e-7)


@pytest.mark.parametrize(("body_type", "doping", "t_ox"), [("n", 3e23, 2e-9), ("p", 1e23, 5e-9)])
def test_deep_depletion_matches_numerical_poisson_without_minority_carriers(
    body_type: str, doping: float, t_ox: float
) -> None:
    # Source: the independent finite-volume 1-D Poisson solution above with the minority
    # carriers left out of the charge (majority-carrier contacts only), C = dQ_gate/dVg by central
    # difference (2 mV); metal gate, no centroid. From flat band toward inversion, 3 V deep;
    # rel 5e-3 on C, 1e-3 on psi_s and Q_gate.
    cox = float(o.oxide_capacitance_per_area(3.9, t_ox))
    n_i = 9.65e15
    n_a, n_d = (doping, 0.0) if body_type == "p" else (0.0, doping)
    sign = 1.0 if body_type == "p" else -1.0
    v = sign * np.linspace(0.05, 3.0, 25)
    dv = 2e-3
    kw = dict(n_a=n_a, n_d=n_d, cox=cox, temperature=T300, n_i=n_i, minority=False)
    _, q_plus = _poisson_gate_charge(v + dv, **kw)  # type: ignore[arg-type]
    _, q_minus = _poisson_gate_charge(v - dv, **kw)  # type: ignore[arg-type]
    psi_ref, q_ref = _poisson_gate_charge(v, **kw)  # type: ignore[arg-type]
    c_ref = (q_plus - q_minus) / (2 * dv)
    common = dict(vfb=0.0, cox=cox, body_doping=doping, body_type=body_type, temperature=T300,
                  n_i=n_i, centroid=False)
    deep = m.mos_operating_point(v, minority_carriers=False, **common)  # type: ignore[arg-type]
    np.testing.assert_allclose(deep.capacitance, c_ref, rtol=5e-3)
    np.testing.assert_allclose(deep.psi_s, psi_ref, rtol=1e-3, atol=1e-4)
    np.testing.assert_allclose(deep.q_gate, q_ref, rtol=1e-3, atol=1e-7)
    assert np.all(deep.q_mobile == 0.0)
    # past threshold it falls below the high-frequency minimum (no inversion layer ever forms),
    # while the quasi-static curve with minority carriers recovers toward C_ox
    vt_rel = float(m.threshold_voltage(0.0, cox, doping, body_type, T300, n_i=n_i))
    beyond = sign * (v - vt_rel) > 0.5
    assert beyond.sum() >= 5
    c_min = float(m.hf_min_capacitance(cox, doping, T300, n_i=n_i))
    assert np.all(deep.capacitance[beyond] < c_min)
    inverted = m.mos_operating_point(v, **common)  # type: ignore[arg-type]
    assert np.all(inverted.capacitance[beyond] > 0.5 * cox)


def test_deep_depletion_worked_example() -> None:
    # Source: docs/references.md [25] [DF], depletion approximation with no inversion charge:
    # N = 1e17 cm^-3, t_ox = 2 nm, |V_G - V_FB| = 0.5 / 1.0 / 2.0 V -> C/C_ox = 0.07441 / 0.05269 /
    # 0.03728. The exact charge includes the -kT/q of the mobile-majority tail, so rel 3 %.
    cox = float(o.oxide_capacitance_per_area(3.9, 2e-9))
    op = m.mos_operating_point(np.array([0.5, 1.0, 2.0]), vfb=0.0, cox=cox, body_doping=1e23,
                               body_type="p", temperature=T300, centroid=False,
                               minority_carriers=False)
    np.testing.assert_allclose(op.capacitance / cox, [0.07441, 0.05269, 0.03728], rtol=0.03)


# ------------------------------------------------------------------------------------------
# Shape of the C-V curve


def _cv(vg: NDArray[np.float64] | float, **kw: object) -> m.MosOperatingPoint:
    params: dict[str, object] = {
        "vfb": -0.98,
        "cox": COX2,
        "body_doping": NA17,
        "body_type": "p",
        "temperature": T300,
    }
    params.update(kw)
    return m.mos_operating_point(vg, **params)  # type: ignore[arg-type]


def test_accumulation_and_inversion_approach_cox_classical() -> None:
    # Source: Sze & Ng 2007 fig. 4.8 LF curve, C -> C_ox in accumulation and strong inversion;
    # classical metal-gate limit at |Vg - Vfb|, Vg - Vt = 2 V is within 5 % of C_ox
    vt = float(m.threshold_voltage(-0.98, COX2, NA17, "p", T300))
    op = _cv(np.array([-0.98 - 2.0, vt + 2.0]), centroid=False)
    assert np.all(op.capacitance / COX2 > 0.95)
    assert np.all(op.capacitance < COX2)


def test_cv_exact_series_identity_with_poly() -> None:
    # Source: Sze & Ng 2007 eq. 4.19 LF C_s (analytic) with C_poly = eps q N/|Q| (Taur & Ning
    # 2009 §2.3): 1/C = 1/C_ox + 1/C_poly + 1/C_s holds exactly without centroid; rel 1e-5
    vg = np.linspace(-3.0, 3.0, 61)
    op = _cv(vg, gate_doping=1e26, centroid=False)
    c_s = m.semiconductor_capacitance_per_area(
        op.psi_s, body_doping=NA17, body_type="p", temperature=T300
    )
    c_poly = np.where(op.q_gate > 0, o.poly_depletion_capacitance(op.q_gate, 1e26), np.inf)
    np.testing.assert_allclose(op.capacitance, o.series_capacitance(COX2, c_poly, c_s), rtol=1e-5)


def test_cv_with_poly_and_centroid_bounded_by_series_estimates() -> None:
    # Source: series model of docs/references.md [14] (1/C = 1/C_ox + 1/C_poly + 1/C_cen + 1/C_s,
    # BSIM4 X_DC). The centroid shrinks as charge grows, so the exact C lies between the estimate
    # with the static X_DC (lower bound) and the estimate without centroid (upper bound),
    # within 6 %.
    vt = float(m.threshold_voltage(-0.98, COX2, NA17, "p", T300))
    vg = np.array([-0.98 - 2.0, -0.98 - 1.0, vt + 0.5, vt + 1.0, vt + 2.0])
    op = _cv(vg, gate_doping=1e26)
    c_s = m.semiconductor_capacitance_per_area(
        op.psi_s, body_doping=NA17, body_type="p", temperature=T300
    )
    inv = op.psi_s > 0
    c_poly = np.where(inv, o.poly_depletion_capacitance(op.q_gate, 1e26), np.inf)
    toxp = 3.9 * epsilon_0 / COX2
    x_dc = o.centroid_distance(op.q_mobile / COX2, np.where(inv, op.q_depletion / COX2, 0.0), toxp)
    lower = o.series_capacitance(COX2, c_poly, o.centroid_capacitance_per_area(x_dc), c_s)
    upper = o.series_capacitance(COX2, c_poly, c_s)
    assert np.all(op.capacitance >= lower)
    assert np.all(op.capacitance < upper)
    np.testing.assert_allclose(op.capacitance, lower, rtol=0.06)


def test_poly_depletion_lowers_inversion_only_for_opposite_gate() -> None:
    # Source: Taur & Ning 2009 §2.3, an n+ gate depletes when the p-body inverts and accumulates
    # (no drop) when the body accumulates; a same-type gate does the reverse
    vg = np.array([-3.0, 2.0])
    metal = _cv(vg).capacitance
    opposite = _cv(vg, gate_doping=1e26).capacitance
    same = _cv(vg, gate_doping=1e26, gate_type="p").capacitance
    assert opposite[0] == pytest.approx(metal[0], rel=1e-9)
    assert opposite[1] < 0.95 * metal[1]
    assert same[1] == pytest.approx(metal[1], rel=1e-9)
    assert same[0] < 0.97 * metal[0]


def test_centroid_lowers_capacitance_and_vanishes_at_flat_band() -> None:
    # Source: docs/references.md [14], C_cen in series lowers C in accumulation/inversion by ~5-10 %
    # at 2 nm; at flat band the mobile charge is zero so the correction is negligible (< 0.5 %)
    vg = np.array([-3.0, -0.98, 2.0])
    with_c = _cv(vg).capacitance
    without = _cv(vg, centroid=False).capacitance
    assert with_c[0] < 0.97 * without[0]
    assert with_c[2] < 0.97 * without[2]
    assert with_c[1] == pytest.approx(without[1], rel=5e-3)


def test_minimum_lies_between_flat_band_and_threshold() -> None:
    # Source: Sze & Ng 2007 fig. 4.8, the LF minimum sits in depletion / weak inversion
    vt = float(m.threshold_voltage(-0.98, COX2, NA17, "p", T300))
    vg = np.linspace(-3.0, 3.0, 601)
    for kw in ({"centroid": False}, {"gate_doping": 1e26}):
        c = _cv(vg, **kw).capacitance
        v_min = vg[np.argmin(c)]
        assert -0.98 < v_min < vt + 0.1
        assert c.min() < 0.2 * COX2


def test_capacitance_is_derivative_of_gate_charge() -> None:
    # Source: definition of quasi-static C = dQ_g/dVg (central difference, 0.1 mV); rel 1e-4
    vg = np.linspace(-2.5, 2.5, 26)
    dv = 1e-4
    kw = {"gate_doping": 1e26}
    q_p = _cv(vg + dv, **kw).q_gate
    q_m = _cv(vg - dv, **kw).q_gate
    np.testing.assert_allclose(_cv(vg, **kw).capacitance, (q_p - q_m) / (2 * dv), rtol=1e-4)


def test_charge_balance_and_mobile_charge() -> None:
    # Source: Gauss law, Q_gate = |Q_inv| + |Q_dep| in inversion and Q_gate = -|Q_acc| in
    # accumulation (classical, metal gate); Q_inv < C_ox (Vg - V_T) since psi_s keeps rising a
    # few kT/q above 2 phi_F (Taur & Ning 2009 §2.3); 0.55 x at 0.5 V overdrive, common practice
    vt = float(m.threshold_voltage(-0.98, COX2, NA17, "p", T300))
    vg = np.array([vt + 0.5, vt + 1.0, -3.0])
    op = _cv(vg, centroid=False)
    np.testing.assert_allclose(op.q_gate[:2], op.q_mobile[:2] + op.q_depletion[:2], rtol=1e-9)
    assert op.q_gate[2] == pytest.approx(-op.q_mobile[2], rel=1e-12)
    assert np.all(op.q_mobile[:2] < COX2 * (vg[:2] - vt))
    assert np.all(op.q_mobile[:2] > 0.55 * COX2 * (vg[:2] - vt))
    # mobile charge via the public wrapper, poly + centroid: still grows with gate voltage
    q_mob = m.mobile_charge_per_area(
        np.array([vt + 0.5, vt + 1.0]),
        vfb=-0.98,
        cox=COX2,
        body_doping=NA17,
        body_type="p",
        temperature=T300,
        gate_doping=1e26,
    )
    assert q_mob[1] > q_mob[0] > 0


def test_n_body_is_mirror_of_p_body() -> None:
    # Source: symmetry of the electrostatics under psi -> -psi, V -> -V with p <-> n; rel 1e-9
    vg = np.linspace(-3.0, 3.0, 31)
    p = _cv(vg, gate_doping=1e26)
    n = _cv(-vg, vfb=0.98, body_type="n", gate_doping=1e26)
    np.testing.assert_allclose(n.capacitance, p.capacitance, rtol=1e-9)
    np.testing.assert_allclose(n.psi_s, -p.psi_s, rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(n.q_gate, -p.q_gate, rtol=1e-9, atol=1e-18)


def test_metal_gate_spellings() -> None:
    # Source: API contract, np.inf, 0 and None all mean a metal gate
    vg = np.array([-2.0, 1.0])
    ref = _cv(vg, gate_doping=np.inf).capacitance
    np.testing.assert_array_equal(_cv(vg, gate_doping=0.0).capacitance, ref)
    np.testing.assert_array_equal(_cv(vg, gate_doping=None).capacitance, ref)


def test_broadcast_over_variants_corners_bias() -> None:
    # Source: API contract, (n_variant, n_corner, 1) parameters against (n_bias,) bias
    cox = o.oxide_capacitance_per_area(3.9, np.array([1.8e-9, 2.0e-9, 2.2e-9]))[:, None, None]
    temperature = np.array([233.15, 300.0, 398.15])[None, :, None]
    vg = np.linspace(-1.5, 1.5, 7)
    c = m.mos_capacitance_per_area(
        vg,
        vfb=-0.98,
        cox=cox,
        body_doping=NA17,
        body_type="p",
        temperature=temperature,
        gate_doping=1e26,
    )
    assert c.shape == (3, 3, 7)
    single = m.mos_capacitance_per_area(
        vg,
        vfb=-0.98,
        cox=cox[1, 0, 0],
        body_doping=NA17,
        body_type="p",
        temperature=temperature[0, 2, 0],
        gate_doping=1e26,
    )
    # the surface potential is a root found to 1e-11 kT/q, and a batch stops iterating when its
    # slowest member has converged, so a batched member may be one Newton step more exact than
    # the same case alone: equal to well inside 1e-9, not to the last bit
    np.testing.assert_allclose(c[1, 2], single, rtol=1e-9)


def test_body_type_array_and_validation() -> None:
    body = np.array(["p", "n"])[:, None]
    vfb = np.array([-0.98, 0.98])[:, None]
    vg = np.array([-2.0, 2.0]) * np.array([1.0, -1.0])[:, None]
    c = m.mos_capacitance_per_area(
        vg, vfb=vfb, cox=COX2, body_doping=NA17, body_type=body, temperature=T300
    )
    np.testing.assert_allclose(c[0], c[1], rtol=1e-9)
    with pytest.raises(ValueError, match="body_type"):
        m.mos_capacitance_per_area(
            1.0, vfb=0.0, cox=COX2, body_doping=NA17, body_type="x", temperature=T300
        )
    with pytest.raises(ValueError, match="gate_type"):
        m.mos_capacitance_per_area(
            1.0,
            vfb=0.0,
            cox=COX2,
            body_doping=NA17,
            body_type="p",
            temperature=T300,
            gate_type="metal",
        )


# ------------------------------------------------------------------------------------------
# Properties


@settings(max_examples=60, deadline=None)
@given(
    vg=st.floats(-4.0, 4.0),
    t_ox_nm=st.floats(1.0, 10.0),
    log_doping=st.floats(22.0, 24.5),
    temperature=st.floats(230.0, 420.0),
    body_type=st.sampled_from(["p", "n"]),
    poly=st.booleans(),
    centroid=st.booleans(),
)
def test_capacitance_positive_and_bounded_by_cox(
    vg: float,
    t_ox_nm: float,
    log_doping: float,
    temperature: float,
    body_type: str,
    poly: bool,
    centroid: bool,
) -> None:
    # Source: series-capacitor structure of the MOS stack (Sze & Ng 2007 §4.2); property
    cox = float(o.oxide_capacitance_per_area(3.9, t_ox_nm * nano))
    c = m.mos_capacitance_per_area(
        vg,
        vfb=0.0,
        cox=cox,
        body_doping=10**log_doping,
        body_type=body_type,
        temperature=temperature,
        gate_doping=1e26 if poly else np.inf,
        centroid=centroid,
    )
    assert 0.0 < c <= cox


@settings(max_examples=40, deadline=None)
@given(
    t_ox_nm=st.floats(1.2, 8.0),
    dt_nm=st.floats(0.1, 3.0),
    overdrive=st.floats(0.3, 2.0),
    accumulate=st.booleans(),
    poly=st.booleans(),
)
def test_capacitance_falls_as_oxide_thickens(
    t_ox_nm: float, dt_nm: float, overdrive: float, accumulate: bool, poly: bool
) -> None:
    # Source: Sze & Ng 2007 §4.2, C ~ C_ox in accumulation / strong inversion; property at a
    # bias beyond flat band or beyond the threshold of the thicker oxide
    c_thin = float(o.oxide_capacitance_per_area(3.9, t_ox_nm * nano))
    c_thick = float(o.oxide_capacitance_per_area(3.9, (t_ox_nm + dt_nm) * nano))
    vfb = -0.98
    if accumulate:
        vg = vfb - overdrive
    else:
        vg = float(m.threshold_voltage(vfb, c_thick, NA17, "p", T300)) + overdrive
    kw = {
        "vfb": vfb,
        "body_doping": NA17,
        "body_type": "p",
        "temperature": T300,
        "gate_doping": 1e26 if poly else np.inf,
    }
    assert m.mos_capacitance_per_area(vg, cox=c_thick, **kw) < m.mos_capacitance_per_area(  # type: ignore[arg-type]
        vg,
        cox=c_thin,
        **kw,  # type: ignore[arg-type]
    )


def test_depletion_capacitance_at_strong_inversion() -> None:
    # Source: eps_si / W_max with W_max = 0.1038 um at N_A = 1e17 cm^-3, n_i = 1e10 cm^-3, 300 K
    # (Sze & Ng 2007 eq. 4.31, computed value) -> 9.98e-4 F/m^2; rel 2e-3
    from celllab.physics.mos_cv import depletion_capacitance_per_area

    assert depletion_capacitance_per_area(1e23, 300.0, n_i=1e16) == pytest.approx(9.98e-4, rel=2e-3)


def test_junction_capacitance_one_sided_abrupt() -> None:
    # Source: C_j = sqrt(q eps_si N / (2 (V_bi + V_R - 2kT/q))), V_bi = kT/q ln(N N_D / n_i^2)
    # (Sze & Ng 2007 §2.3), evaluated by hand here for N = 1e17, N_D = 1e20 cm^-3, n_i = 1e10
    # cm^-3, 300 K: V_bi = 1.0119 V -> 9.296e-4 F/m^2 at 0 V, 5.295e-4 F/m^2 at 2 V; rel 1e-3
    from scipy.constants import e, epsilon_0, k

    from celllab.physics.mos_cv import junction_capacitance_per_area

    vt = k * 300.0 / e
    v_bi = vt * np.log(1e23 * 1e26 / 1e32)
    assert v_bi == pytest.approx(1.0119, rel=1e-3)
    for v_r in (0.0, 2.0):
        hand = np.sqrt(e * 11.7 * epsilon_0 * 1e23 / (2 * (v_bi + v_r - 2 * vt)))
        assert junction_capacitance_per_area(1e23, 300.0, 1e26, v_r, n_i=1e16) == pytest.approx(hand, rel=1e-9)
    assert junction_capacitance_per_area(1e23, 300.0, 1e26, n_i=1e16) == pytest.approx(9.296e-4, rel=1e-3)
    assert junction_capacitance_per_area(1e23, 300.0, 1e26, 2.0, n_i=1e16) == pytest.approx(5.295e-4, rel=1e-3)
