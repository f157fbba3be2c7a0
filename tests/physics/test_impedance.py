"""Figures of merit from Z(f) against closed forms of the series RLC and the RC line."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from celllab.physics import impedance as imp
from celllab.physics.distributed_rc import rc_line_impedance
from celllab.physics.netlist import Element, Netlist, solve_impedance

R = np.array([0.2, 1.0])
L = np.array([2e-11, 5e-11])
C = np.array([1e-12, 4e-12])
F = np.geomspace(1e6, 1e12, 301)
W = 2 * np.pi * F


def _series_rlc() -> np.ndarray:
    return R[:, None] + 1j * W * L[:, None] + 1 / (1j * W * C[:, None])


def test_summary_of_series_rlc() -> None:
    # Source: series RLC: C_eff(f -> 0) = C, ESR = R, f_srf = 1/(2 pi sqrt(L C)), ESL = L
    # (definitions; the omega^2 interpolation and the top-point ESL are exact here); rel 1e-6
    s = imp.summarize(F, _series_rlc(), esr_freqs_Hz=(1e8, 1e10))
    np.testing.assert_allclose(s["c_lf_F"], C / (1 - (W[0] ** 2) * L * C), rtol=1e-12)
    np.testing.assert_allclose(s["esr_lf_ohm"], R, rtol=1e-12)
    np.testing.assert_allclose(s["esr_at_ohm"], np.stack([R, R], axis=1), rtol=1e-12)
    np.testing.assert_allclose(s["srf_Hz"], 1 / (2 * np.pi * np.sqrt(L * C)), rtol=1e-9)
    np.testing.assert_allclose(s["esl_H"], L, rtol=1e-6)
    np.testing.assert_allclose(s["tau_s"], s["c_lf_F"] * R, rtol=1e-12)
    # C_eff = C/(1 - omega^2 L C) falls to C/sqrt(2) only past resonance, where it is negative:
    # the first crossing is the sign change at the SRF
    np.testing.assert_allclose(s["bandwidth_Hz"], s["srf_Hz"], rtol=1e-2)


def test_crossings_outside_the_sweep() -> None:
    z = _series_rlc()
    low = F[:10]  # far below resonance: never inductive, C_eff never drops
    assert np.all(np.isinf(imp.self_resonance(low, z[:, :10])))
    assert np.all(np.isnan(imp.esl_estimate(low, z[:, :10])))
    assert np.all(np.isinf(imp.usable_bandwidth(low, imp.effective_capacitance(low, z[:, :10]), C)))
    high = F[-10:]  # above resonance from the first point
    assert np.all(np.isnan(imp.self_resonance(high, z[:, -10:])))
    ceff_high = imp.effective_capacitance(high, z[:, -10:])
    assert np.all(np.isnan(imp.usable_bandwidth(high, ceff_high, C)))


@pytest.mark.parametrize(("ends", "x_c"), [(1, 4.7526), (2, 19.010)])
def test_bandwidth_of_rc_line(ends: int, x_c: float) -> None:
    # Source: docs/references.md [43] [DF]: C_eff = C/sqrt(2) at omega R C = 4.7526 / 19.010;
    # dense-grid interpolation rel 1e-3, bisection rel 1e-4 (limited by the quoted digits)
    r, c = np.array([100.0, 400.0]), 1e-12
    f = np.geomspace(1e7, 1e13, 2001)
    z = rc_line_impedance(r[:, None], c, 2 * np.pi * f, ends)  # type: ignore[arg-type]
    bw = imp.usable_bandwidth(f, imp.effective_capacitance(f, z), np.full(2, c))
    np.testing.assert_allclose(bw, x_c / (2 * np.pi * r * c), rtol=1e-3)
    nl = Netlist("l", (Element("RCLINE", "ch", "vss", "vdd", r, c, contacted_ends=ends),))  # type: ignore[arg-type]
    bis = imp.bandwidth_by_bisection(lambda fr: solve_impedance(nl, fr), np.full(2, c), 1e7, 1e13)
    np.testing.assert_allclose(bis, x_c / (2 * np.pi * r * c), rtol=1e-4)


def test_bisection_matches_brentq() -> None:
    # Source: scipy brentq on the same C_eff(f) (independent root finder); rel 1e-9
    r, c = 123.0, 2.5e-12

    def gap(f: float) -> float:
        z = rc_line_impedance(r, c, 2 * np.pi * f)
        return float(-1 / (2 * np.pi * f * z.imag) / c - 0.5)

    nl = Netlist("l", (Element("RCLINE", "ch", "vss", "vdd", [r], c),))
    bis = imp.bandwidth_by_bisection(
        lambda fr: solve_impedance(nl, fr), [c], 1e6, 1e13, fraction=0.5
    )
    assert bis[0] == pytest.approx(brentq(gap, 1e6, 1e13, rtol=1e-13), rel=1e-9, abs=0)


def test_quality_factor_and_esr() -> None:
    z = np.array([1.0 - 2.0j, 3.0 - 3.0j])
    np.testing.assert_allclose(imp.quality_factor(z), [2.0, 1.0])
    np.testing.assert_allclose(imp.esr(z), [1.0, 3.0])


def test_esr_interpolated_on_log_frequency() -> None:
    # Source: linear interpolation in log f (definition); exact for Re Z linear in log f
    f = np.array([1e6, 1e7, 1e8])
    z = np.array([[3.0 + 0j, 2.0 + 0j, 1.0 + 0j]])
    np.testing.assert_allclose(imp.esr_at(f, z, [np.sqrt(10) * 1e6, 1e8]), [[2.5, 1.0]])
    assert np.isnan(imp.esr_at(f, z, [1e9])[0, 0])


# --- the upturn near resonance and figures above the sweep --------------------------------------


def test_loop_inductance_removed_from_c_eff() -> None:
    # Source: series R-L-C: -1/(omega Im Z) = C / (1 - omega^2 L C), rising toward resonance (the
    # upturn); with L removed it is C at every frequency below and above resonance; rel 1e-9
    raw = imp.effective_capacitance(F, _series_rlc())
    np.testing.assert_allclose(raw[:, :50], C[:, None] / (1 - W[:50] ** 2 * L[:, None] * C[:, None]), rtol=1e-9)
    assert np.all(np.diff(raw[:, :100], axis=1) > 0)
    np.testing.assert_allclose(imp.effective_capacitance(F, _series_rlc(), L), np.broadcast_to(C[:, None], raw.shape),
                               rtol=1e-9)
    # the usable bandwidth of an ideal series R-L-C then ends at its resonance, not before
    s = imp.summarize(F, _series_rlc(), series_inductance=L)
    assert np.all(np.isinf(s["bandwidth_rc_Hz"]))
    np.testing.assert_allclose(s["bandwidth_Hz"], 1 / (2 * np.pi * np.sqrt(L * C)), rtol=1e-9)


def _rlc_netlist() -> Netlist:
    return Netlist("rlc", (Element("R", "esr", "vdd", "a", R), Element("L", "l_loop", "a", "b", L),
                           Element("C", "c", "b", "vss", C)))


def test_srf_above_the_sweep_from_loop_l_and_c() -> None:
    # Source: series R-L-C resonance 1/(2 pi sqrt(L C)) (definition); the sweep stops a decade
    # below it and the circuit is searched above; rel 1e-9
    net = _rlc_netlist()
    srf = 1 / (2 * np.pi * np.sqrt(L * C))
    top = float(srf.min()) / 10
    out = imp.extend_beyond_sweep(lambda f: solve_impedance(net, f), top, C, L, [True, True], [False, False],
                                  np.full(2, 1e3 * top))
    np.testing.assert_allclose(out["srf_Hz"], srf, rtol=1e-9)
    assert np.all(np.isnan(out["bandwidth_rc_Hz"]))  # not asked for
    # a search that stops below the resonance finds none: the caller stores a bound
    short = imp.extend_beyond_sweep(lambda f: solve_impedance(net, f), top, C, L, [True, True], [True, True],
                                    np.array([srf[0] / 2, 1e3 * top]))
    assert np.isinf(short["srf_Hz"][0]) and short["srf_Hz"][1] == pytest.approx(srf[1], rel=1e-9)


@pytest.mark.parametrize(("ends", "x_c"), [(1, 4.7526), (2, 19.010)])
def test_rc_cutoff_above_the_sweep_of_a_line_with_loop_inductance(ends: int, x_c: float) -> None:
    # Source: docs/references.md [43] [DF]: the RC line's C_eff falls to C/sqrt(2) at omega R C =
    # 4.7526 / 19.010, here behind a loop inductance that is removed before the cutoff is read;
    # the sweep ends two decades below it; rel 1e-4 (quoted digits). The SRF of the same circuit
    # equals scipy brentq on Im Z of the nodal solution (independent root finder); rel 1e-9.
    r, c, l_loop = np.array([100.0, 400.0]), 1e-12, np.array([5e-12, 5e-12])
    net = Netlist("line", (Element("L", "l_loop", "vdd", "a", l_loop),
                           Element("RCLINE", "ch", "vss", "a", r, c, contacted_ends=ends)))  # type: ignore[arg-type]
    f_c = x_c / (2 * np.pi * r * c)
    top = float(f_c.min()) / 100
    out = imp.extend_beyond_sweep(lambda f: solve_impedance(net, f), top, np.full(2, c), l_loop,
                                  [True, True], [True, True], np.full(2, 1e5 * top))
    np.testing.assert_allclose(out["bandwidth_rc_Hz"], f_c, rtol=1e-4)
    assert np.all(np.isfinite(out["srf_Hz"]))
    for k in range(2):
        def im_z(f: float, k: int = k) -> float:
            return float(solve_impedance(net, [f])[k, 0].imag)
        grid = np.geomspace(top, 1e5 * top, 500)
        sign = np.sign([im_z(f) for f in grid])
        j = int(np.argmax(sign > 0))
        root = brentq(im_z, grid[j - 1], grid[j], rtol=1e-14)
        assert out["srf_Hz"][k] == pytest.approx(root, rel=1e-9)


def test_bandwidth_capped_at_the_srf() -> None:
    # Source: definition: above its self-resonance a decap is inductive, so the usable band ends there
    np.testing.assert_allclose(imp.capped_bandwidth([1e9, 5e9, np.inf, 2e9], [3e9, 4e9, 6e9, np.inf]),
                               [1e9, 4e9, 6e9, 2e9])


def test_searching_only_the_rows_asked_for_gives_each_row_the_same_result() -> None:
    # No outside source: an equivalence check of two ways to run the same search. With
    # ``impedance_rows`` only rows still searched are solved; each row's result is unchanged
    rng = np.random.default_rng(5)
    n = 12
    r, c, l_loop = rng.uniform(50, 500, n), rng.uniform(0.5e-12, 2e-12, n), rng.uniform(1e-12, 1e-11, n)
    net = Netlist("line", (Element("L", "l_loop", "vdd", "a", l_loop),
                           Element("RCLINE", "ch", "vss", "a", r, c, contacted_ends=2)))
    top = float((4.7526 / (2 * np.pi * r * c)).min()) / 100
    need_srf, need_bw = rng.random(n) < 0.5, rng.random(n) < 0.3
    need_srf[0], need_bw[1] = True, True
    search_top = np.where(rng.random(n) < 0.2, 2 * top, 1e5 * top)
    args = (top, c, l_loop, need_srf, need_bw, search_top)
    whole = imp.extend_beyond_sweep(lambda f: solve_impedance(net, f), *args)
    rows = imp.extend_beyond_sweep(lambda f: solve_impedance(net, f), *args,
                                   impedance_rows=lambda f, k: solve_impedance(net.take(k), f))
    for key in ("srf_Hz", "bandwidth_rc_Hz"):
        np.testing.assert_array_equal(rows[key], whole[key])
    assert np.isfinite(whole["srf_Hz"][0]) and np.isnan(whole["bandwidth_rc_Hz"][~need_bw]).all()
