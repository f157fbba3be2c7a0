"""Damping: the entrance-resistor optimizer on lumped tanks against closed forms, the IR-drop
limit, and the fill's conductance at resonance as a linear term."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.physics.netlist import Element, Netlist
from celllab.planner.damping import (
    conductance_needed,
    damping_score,
    match_ratio,
    resonance_conductance,
    size_entrance_resistors,
    worst_peaks,
)
from celllab.planner.network import (
    FillEntry,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    analysis_frequencies,
    build_network,
)
from celllab.planner.resonance import find_resonances
from celllab.planner.waveforms import Activity

F = analysis_frequencies(1e5, 1e10, 40)
L, C, N = 1e-9, 100e-9, 100_000  # 1 nH package, 100 nF of 1 pF cells
Z0 = np.sqrt(L / C)  # 0.1 ohm
F0 = 1 / (2 * np.pi * np.sqrt(L * C))
BAND = [(1e5, 1e10)]


def _cell(esr: float, c: float = C / N) -> dict[str, Netlist]:
    elements = (Element("R", "esr", "vdd", "x", esr), Element("C", "c", "x", "vss", c)) \
        if esr > 0 else (Element("C", "c", "vdd", "vss", c),)
    return {"typ": Netlist("rc", elements)}


def _tank(cell_esr: float, average_current: float = 0.01, r_pkg: float = 0.0):  # type: ignore[no-untyped-def]
    act = Activity(peak_current=0.1, rise_time=1e-10, average_current=average_current)
    supply = SupplyNetwork(1.0, r_pkg, L, {"die": RegionPath(0.0, 0.0)})
    return build_network(supply, [RegionLoad("die", [FillEntry("rc", _cell(cell_esr), N)],
                                             0.0, 0.0, act)])


def test_optimal_entrance_resistance_of_a_matched_tank_is_sqrt_l_over_c() -> None:
    # Source: P. Larsson, IEEE TCAS-I 45(8):849, 1998: with the decap's series resistance at
    # sqrt(L/C), a series R = sqrt(L/C) in the inductive branch makes |Z| = sqrt(L/C) flat,
    # the lowest peak possible (|Z| -> the decap ESR at high f). Optimizer within 10 %; the
    # peak it reaches within 1 %
    net = _tank(cell_esr=Z0 * N)
    trade = size_entrance_resistors(net, F, [0.2], BAND, ir_drop_limit=1.0)
    assert trade.resistance[0] == pytest.approx(Z0, rel=0.10)
    assert trade.peak_after.magnitude[0] == pytest.approx(Z0, rel=0.01)
    # before: only the decap branch damped; by duality with the case below (R in the inductive
    # branch alone) its peak is Z0 / sqrt(2 sqrt(3) - 3) (derived there); rel 1e-3
    assert trade.peak_before.magnitude[0] == pytest.approx(Z0 / np.sqrt(2 * np.sqrt(3) - 3),
                                                           rel=1e-3)
    # the peak with R = sqrt(L/C) exactly: flat at Z0 (the formula); rel 1e-6 on the grid
    z = net.z_matrix(F, entrance=[Z0])[0, :, 0, 0]
    np.testing.assert_allclose(np.abs(z), Z0, rtol=1e-6)


def test_optimal_entrance_resistance_of_a_lossless_decap() -> None:
    # Closed form derived here (no published source): every (R + jwL) || 1/(jwC) curve passes
    # through |Z| = sqrt(2) Z0 at w = w0 / sqrt(2) (|Z|^2/Z0^2 = (r^2 + u)/((1-u)^2 + r^2 u) is
    # 2 at u = (w/w0)^2 = 1/2 for every r), so the lowest peak is sqrt(2) Z0, reached when the
    # maximum sits there: R = sqrt(3/2) Z0. With R = Z0 the peak is Z0 / sqrt(2 sqrt(3) - 3).
    net = _tank(cell_esr=0.0)
    trade = size_entrance_resistors(net, F, [0.2], BAND, ir_drop_limit=1.0)
    assert trade.resistance[0] == pytest.approx(np.sqrt(1.5) * Z0, rel=0.10)
    assert trade.peak_after.magnitude[0] == pytest.approx(np.sqrt(2) * Z0, rel=0.01)
    at_z0 = worst_peaks(net, F, [0.2], BAND, entrance=[Z0])
    assert at_z0.magnitude[0] == pytest.approx(Z0 / np.sqrt(2 * np.sqrt(3) - 3), rel=1e-3)
    # Larsson's rule of thumb R ~ sqrt(L/C): the optimum is within 25 % of it here
    assert trade.resistance[0] == pytest.approx(Z0, rel=0.25)


def test_ir_drop_limit_caps_the_resistor() -> None:
    # Source: Ohm's law: 0.1 A through the resistor may drop 2 mV -> R <= 20 mohm (package
    # resistance 0); the peak keeps falling with R up to ~Z0, so the limit is active; 1 %
    net = _tank(cell_esr=Z0 * N, average_current=0.1)
    trade = size_entrance_resistors(net, F, [0.2], BAND, ir_drop_limit=2e-3)
    assert trade.resistance[0] == pytest.approx(0.02, rel=0.01)
    assert trade.ir_drop_after[0] <= 2e-3 * (1 + 1e-6)
    assert trade.power[0] == pytest.approx(0.1 ** 2 * trade.resistance[0], rel=1e-9)
    assert trade.peak_after.magnitude[0] < trade.peak_before.magnitude[0]
    # already over the limit without any resistor: reported, resistors left as given
    over = _tank(cell_esr=Z0 * N, average_current=0.1, r_pkg=0.05)
    stuck = size_entrance_resistors(over, F, [0.2], BAND, ir_drop_limit=2e-3)
    assert stuck.resistance[0] == 0.0 and "exceeds the limit" in stuck.message


def test_match_ratio_is_esr_over_z0_for_any_count() -> None:
    # Source: algebra of N copies: (ESR/N) / sqrt(L/(N C)) = 2 pi f0 ESR C with
    # f0 = 1/(2 pi sqrt(L N C)); rel 1e-12
    esr, c_cell = 500.0, 2e-12
    for n in (1e3, 1e5):
        f0 = 1 / (2 * np.pi * np.sqrt(L * n * c_cell))
        assert match_ratio(esr, c_cell, f0) == pytest.approx(
            (esr / n) / np.sqrt(L / (n * c_cell)), rel=1e-12)


def test_damping_score_of_a_series_rc_cell() -> None:
    # Source: Re Y of a series R-C at w: w^2 C^2 R / (1 + (w R C)^2), so g / (w C) = x / (1 + x^2)
    # with x = w R C, largest (1/2) at x = 1; rel 1e-9
    c_cell = 1e-12
    esr = np.array([1e2, 1e3, 1e4])
    circuits = [_cell(r, c_cell)["typ"] for r in esr]
    f0 = 1 / (2 * np.pi * 1e3 * c_cell)  # x = 1 for the middle cell
    g = resonance_conductance(circuits, f0)
    x = match_ratio(esr, c_cell, f0)
    np.testing.assert_allclose(damping_score(g, c_cell, f0), x / (1 + x ** 2), rtol=1e-9)
    assert damping_score(g, c_cell, f0)[1] == pytest.approx(0.5, rel=1e-9)


def test_peak_is_one_over_the_parallel_conductance() -> None:
    # Source: near a high-Q resonance series losses act as parallel conductances
    # (G = R_s / |X|^2 at resonance), so |Z|max ~ 1 / (sum_i n_i g_i + R_pkg C / L): the
    # linear term a fill optimizer can use; within 3 % at Q ~ 10 (exact peak from the network)
    esr_cells, counts = [2000.0, 20000.0], [60_000, 40_000]
    act = Activity(peak_current=0.1, rise_time=1e-10)
    supply = SupplyNetwork(1.0, 0.002, L, {"die": RegionPath(0.0, 0.0)})
    fill = [FillEntry(f"c{k}", _cell(r), n) for k, (r, n) in enumerate(zip(esr_cells, counts))]
    net = build_network(supply, [RegionLoad("die", fill, 0.0, 0.0, act)])
    z = net.z_matrix(F)

    def evaluate(points: np.ndarray) -> np.ndarray:
        return np.abs(net.z_matrix(points)[..., 0, 0])[:, None, :]

    (peak,) = [r for r in find_resonances(F, np.abs(z[..., 0, 0])[:, None, :], evaluate)[0][0]
               if r.kind == "peak"]
    g = resonance_conductance([e.circuits["typ"] for e in fill], peak.frequency)
    g_total = float(np.dot(counts, g)) + 0.002 * C / L
    assert peak.magnitude == pytest.approx(1 / g_total, rel=0.03)
    # the conductance the fill still needs to meet a target of half that peak
    need = conductance_needed(0.5 * peak.magnitude, 0.002 * C / L)
    assert need == pytest.approx(2 / peak.magnitude - 0.002 * C / L, rel=1e-12)
