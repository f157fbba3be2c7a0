"""Resonance finding and the target check against closed forms of lumped RLC circuits."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.planner.network import analysis_frequencies
from celllab.planner.resonance import (
    BAND_EDGE_FACTOR,
    activity_band_edge,
    check_target,
    find_resonances,
)

F = analysis_frequencies(1e5, 1e10, 40)
L, C = 1e-9, 100e-9
F0 = 1 / (2 * np.pi * np.sqrt(L * C))  # 15.915 MHz
Z0 = np.sqrt(L / C)  # 0.1 ohm


def _parallel(r: float):  # type: ignore[no-untyped-def]
    def evaluate(points: np.ndarray) -> np.ndarray:
        w = 2 * np.pi * points
        return np.abs(1 / (1 / r + 1 / (1j * w * L) + 1j * w * C))[:, None, :]

    return evaluate


@pytest.mark.parametrize("r", [10.0, 1.0, 0.5, 0.12, 0.05])
def test_parallel_rlc_peak(r: float) -> None:
    # Source: parallel RLC resonance (J. W. Nilsson, S. A. Riedel, Electric Circuits):
    # f0 = 1/(2 pi sqrt(LC)), |Z|max = R at f0, bandwidth f0/Q with Q = R sqrt(C/L);
    # rel 1e-5 on f0 and |Z|, 1e-4 on Q (refinement on the exact curve)
    ev = _parallel(r)
    res = find_resonances(F, ev(F[None, :]), ev)[0][0]
    assert len(res) == 1
    peak = res[0]
    assert peak.kind == "peak" and peak.q_method == "-3 dB width"
    assert peak.frequency == pytest.approx(F0, rel=1e-5)
    assert peak.magnitude == pytest.approx(r, rel=1e-5)
    assert peak.q == pytest.approx(r / Z0, rel=1e-4)


def test_series_rlc_dip() -> None:
    # Source: series RLC resonance (Nilsson & Riedel): |Z|min = R at f0, Q = Z0 / R from the
    # +3 dB width; rel 1e-5 / 1e-4
    def ev(points: np.ndarray) -> np.ndarray:
        w = 2 * np.pi * points
        return np.abs(0.01 + 1j * w * L + 1 / (1j * w * C))[:, None, :]

    (dip,) = find_resonances(F, ev(F[None, :]), ev)[0][0]
    assert dip.kind == "dip"
    assert dip.frequency == pytest.approx(F0, rel=1e-5)
    assert dip.magnitude == pytest.approx(0.01, rel=1e-5)
    assert dip.q == pytest.approx(Z0 / 0.01, rel=1e-4)


def test_every_resonance_of_every_curve_is_found() -> None:
    # Two tanks in series (impedances add): peaks at both tank frequencies, a dip between;
    # groups x members evaluated at per-group frequencies. Source: closed-form tank frequencies
    # (the tanks are 40x apart, so each peak sits within 0.1 % of its own tank's f0)
    def ev(points: np.ndarray) -> np.ndarray:
        w = 2 * np.pi * points
        out = []
        for scale in (1.0, 1.5):
            z1 = 1 / (1 / 2.0 + 1 / (1j * w * L) + 1j * w * C * scale)
            z2 = 1 / (1 / 1.0 + 1 / (1j * w * L / 40) + 1j * w * C / 40)
            out.append(np.abs(z1 + z2))
        return np.stack(out, axis=1)

    grid = np.broadcast_to(F, (2, F.size))
    found = find_resonances(F, ev(grid), ev)
    for k, per_member in enumerate(found):
        for scale, res in zip((1.0, 1.5), per_member):
            peaks = [r for r in res if r.kind == "peak"]
            assert [r.kind for r in res] == ["peak", "dip", "peak"], (k, res)
            f1 = 1 / (2 * np.pi * np.sqrt(L * C * scale))
            f2 = 1 / (2 * np.pi * np.sqrt(L / 40 * C / 40))
            assert peaks[0].frequency == pytest.approx(f1, rel=1e-3)
            assert peaks[1].frequency == pytest.approx(f2, rel=1e-3)


def test_without_an_evaluator_the_grid_is_interpolated() -> None:
    # the same parallel tank, refinement on the sampled curve only: f0 within the grid
    # spacing (10^(1/40) = 6 %), |Z| within 2 %
    (peak,) = find_resonances(F, _parallel(1.0)(F[None, :]))[0][0]
    assert peak.frequency == pytest.approx(F0, rel=0.06)
    assert peak.magnitude == pytest.approx(1.0, rel=0.02)


def test_a_flat_curve_has_no_resonance() -> None:
    # constant-resistance network: R_L = R_C = sqrt(L/C) gives |Z| = Z0 at every frequency
    # (P. Larsson, IEEE TCAS-I 45(8), 1998); no extremum may be reported
    w = 2 * np.pi * F
    zl, zc = Z0 + 1j * w * L, Z0 + 1 / (1j * w * C)
    mag = np.abs(zl * zc / (zl + zc))
    np.testing.assert_allclose(mag, Z0, rtol=1e-9)
    assert find_resonances(F, mag[None, None, :]) == [[[]]]


def test_target_check_over_a_band() -> None:
    ev = _parallel(1.0)
    res = find_resonances(F, ev(F[None, :]), ev)[0][0]
    mag = ev(F[None, :])[0, 0]
    # Source: the definition |Z| / Z_target; the refined peak counts (exact 1.0 / 0.25)
    check = check_target(F, mag, 0.25, (1e5, 1e9), res)
    assert check.worst_ratio == pytest.approx(4.0, rel=1e-5)
    assert check.worst_frequency == pytest.approx(F0, rel=1e-5)
    assert not check.passes
    lo, hi = check.exceed_bands[0]
    # |Z| > 0.25 where Q |x - 1/x| < sqrt(15): from the parallel RLC form; grid resolution
    assert lo < F0 < hi
    assert lo == pytest.approx(F0 * (np.sqrt(15 / 400 + 1) - np.sqrt(15 / 400)), rel=0.07)
    # a band below the resonance sees only the low-frequency |Z|
    low = check_target(F, mag, 0.25, (1e5, 1e6), res)
    assert low.passes and low.worst_frequency == pytest.approx(1e6, rel=1e-9)


def test_band_edge_rule() -> None:
    # 0.35 / t_rise (common practice, from memory): 350 ps -> 1 GHz; the faster edge counts
    assert BAND_EDGE_FACTOR == 0.35
    assert activity_band_edge(350e-12) == pytest.approx(1e9, rel=1e-12)
    assert activity_band_edge(700e-12, 350e-12) == pytest.approx(1e9, rel=1e-12)
