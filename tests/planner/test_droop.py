"""Droop in time: the transient solver on lumped tanks against closed forms, and on the demo
network against an ngspice transient analysis of the same network."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from physics.ngspice_util import run_deck  # tests/physics (rootdir on sys.path)

from celllab.catalog import Catalog
from celllab.physics import transient as tr
from celllab.physics.netlist import Element, Netlist
from celllab.planner.droop import droop_figures, droop_grid, simulate_droop
from celllab.planner.network import (
    FillEntry,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    build_network,
    region_node,
)
from celllab.planner.waveforms import Activity

from .network_demo import demo_network, spice_network

L, C = 1e-9, 100e-9
Z0, W0 = np.sqrt(L / C), 1 / np.sqrt(L * C)
CAP = {"typ": Netlist("c", (Element("C", "c", "vdd", "vss", C / 1000),))}


def _tank(r_series: float, act: Activity):  # type: ignore[no-untyped-def]
    supply = SupplyNetwork(1.0, 0.0, L, {"die": RegionPath(r_series, 0.0)})
    return build_network(supply, [RegionLoad("die", [FillEntry("c", CAP, 1000)], 0.0, 0.0, act)])


def test_first_droop_of_a_lossless_tank() -> None:
    # Source: undamped L-C driven by a current step: v = I Z0 sin(w0 t) (second-order ODE);
    # a linear ramp of t_r leaves an oscillation of I Z0 |sinc(w0 t_r / 2)| (Duhamel's
    # integral of the step response, derived), first maximum at t_r/2 + pi/(2 w0).
    # 0.2 % on the droop, 0.5 % on its time
    rise = 2 * np.pi / W0 / 50
    act = Activity(peak_current=0.5, rise_time=rise, step_delay=0.0)
    net = _tank(0.0, act)
    grid = tr.piecewise_grid([(3 * np.pi / W0, rise / 20)])
    fig = droop_figures(simulate_droop(net, grid, W0 / (2 * np.pi)), [act])
    x = W0 * rise / 2
    assert fig.first_droop[0, 0] == pytest.approx(0.5 * Z0 * np.sin(x) / x, rel=2e-3)
    assert fig.first_droop_time[0, 0] == pytest.approx(rise / 2 + np.pi / (2 * W0), rel=5e-3)


@pytest.mark.parametrize("r_series", [0.01, 0.02])
def test_ringing_of_a_damped_tank(r_series: float) -> None:
    # Source: (R + sL) || 1/(sC) has poles s^2 + (R/L) s + 1/(LC): zeta = (R/2) sqrt(C/L),
    # Q = 1/(2 zeta) = Z0/R, ringing at w0 sqrt(1 - zeta^2); its step response settles at I R
    # (second-order system theory). 1 % on frequency and Q, 0.5 % on the settled droop
    act = Activity(peak_current=0.2, rise_time=1e-10, step_delay=1e-9)
    net = _tank(r_series, act)
    zeta = r_series / 2 * np.sqrt(C / L)
    f_ring = W0 * np.sqrt(1 - zeta ** 2) / (2 * np.pi)
    grid, truncated = droop_grid([act], f_ring, 12 * (Z0 / r_series) / (np.pi * f_ring))
    assert not truncated
    fig = droop_figures(simulate_droop(net, grid, f_ring), [act])
    assert fig.ringing_frequency[0, 0] == pytest.approx(f_ring, rel=0.01)
    assert fig.ringing_q[0, 0] == pytest.approx(Z0 / r_series, rel=0.01)
    assert fig.settled_droop[0, 0] == pytest.approx(0.2 * r_series, rel=5e-3)
    # settling to 2 % of the first excursion: the envelope exp(-zeta w0 t) reaches 2 % after
    # ln(50)/(zeta w0) (within the ring period it is sampled at)
    expected = np.log(50) / (zeta * W0)
    assert fig.settling_time[0, 0] == pytest.approx(expected, abs=1.5 / f_ring)


def test_clock_and_samples_stimuli_run() -> None:
    clock = Activity(peak_current=0.2, rise_time=1e-9, clock_frequency=5e7,
                     charge_per_cycle=2e-9, stimulus="clock")
    net = _tank(0.1, clock)  # Q = 1: the ring decays with tau = 2Q/w0 = 20 ns
    grid, truncated = droop_grid([clock], 16e6, 3e-7)
    assert not truncated
    fig = droop_figures(simulate_droop(net, grid, 16e6), [clock])
    # settled (mean over the last clock period) = I_avg x R: 100 mA x 0.1 ohm (Ohm's law, the
    # capacitor carries no average current); 1 %
    assert fig.settled_droop[0, 0] == pytest.approx(0.1 * 0.1, rel=0.01)
    assert fig.worst_droop[0, 0] > fig.settled_droop[0, 0]
    assert np.isnan(fig.ringing_q[0, 0])  # not computed for clocks
    assert fig.settling_time[0, 0] < 3e-7
    t = np.array([0.0, 1e-9, 1.2e-9, 3e-9, 4e-9])
    samples = Activity(peak_current=0.1, rise_time=1e-10, stimulus="samples",
                       samples=(t, np.array([0.0, 0.0, 0.1, 0.1, 0.05])))
    net = _tank(0.1, samples)
    grid, _ = droop_grid([samples], 16e6, 5e-7)
    fig = droop_figures(simulate_droop(net, grid, 16e6), [samples])
    assert fig.settled_droop[0, 0] == pytest.approx(0.05 * 0.1, rel=0.01)  # held last sample


def test_demo_droop_matches_ngspice(lumen_catalog: Catalog, tmp_path: Path) -> None:
    # Source: ngspice .tran of the same network (each fill cell its exported SPICE
    # subcircuit, m = count; PWL current sources), the same figures read from both
    # waveforms; 3 % on first droop, its time, overshoot, ringing frequency and Q
    net, _ = demo_network(lumen_catalog)
    corner = "slow_125C"
    c = net.corners.index(corner)
    acts = net.activities
    grid = tr.piecewise_grid([(2e-9, 30e-12), (60e-9, 100e-12), (150e-9, 200e-12)])
    run = simulate_droop(net, grid, 80e6)
    ours = droop_figures(run, acts)
    lines = spice_network(net, lumen_catalog, corner)
    for r in net.regions:
        a = r.activity
        if a is None:
            continue
        lines.append(f"I{r.name} {region_node(r.name)} 0 PWL(0 0 {a.step_delay:.9e} 0 "
                     f"{a.step_delay + a.rise_time:.9e} {a.peak_current:.9e})")
    probes = " ".join(f"v({region_node(r.name)})" for r in net.regions)
    deck = "\n".join(["droop", ".options rshunt=1e15", *lines, ".control",
                      "tran 10p 150n 0 20p", f"wrdata tran.txt {probes}", "quit", ".endc",
                      ".end", ""])
    run_deck(deck, tmp_path, "tran")
    data = np.loadtxt(tmp_path / "tran.txt")
    droop = np.stack([-np.interp(grid, data[:, 0], data[:, 1 + 2 * k])
                      for k in range(len(net.regions))], axis=-1)[None]
    theirs = droop_figures(replace(run, droop=droop, corners=(corner,)), acts)
    for name in ("first_droop", "first_droop_time", "overshoot", "ringing_frequency",
                 "ringing_q"):
        np.testing.assert_allclose(getattr(ours, name)[c], getattr(theirs, name)[0], rtol=0.03,
                                   err_msg=name)
