"""Supply-network analysis speed: a two-region block, 50 cell kinds, 4 corners, 200 frequencies.

Analysis = every region's Z-matrix over corners and frequencies, every resonance refined with
its Q, the target check, transfer peaks, the fill cells' damping terms and the emission
spectrum against no on-die decap (`evaluate_network` without droop in time or resistor
sizing, which are timed on their own lines). Reference in the same run: one
`solve_impedance` call of equal size, the whole network as one netlist (every cell's
elements in place, the 4 corners as variants, the same 200 frequencies), run once (it is
slow); and, for scale, one `solve_impedance` of a single cell's circuit over 50 x 4
variants and the 200 frequencies (the kernel the analysis calls per circuit structure).
Goal: analysis <= 1 s. Run:  .venv/bin/python bench/bench_network.py  (prints a table)
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from celllab.cells import load_cells
from celllab.deck import load_deck
from celllab.engine import characterize
from celllab.physics.netlist import Netlist, solve_impedance, stack_variants
from celllab.planner.network import (
    FillEntry,
    GridLink,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    build_network,
)
from celllab.planner.network_figures import NetworkGoals, evaluate_network
from celllab.planner.waveforms import Activity

ROOT = Path(__file__).resolve().parents[1]
N_KINDS, N_FREQ = 50, 200


def network():  # type: ignore[no-untyped-def]
    deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
    specs = load_cells(ROOT / "process_decks" / "cells" / "lumen130_cells.toml", deck)
    run = characterize(deck, specs[:N_KINDS])
    cells = run.cells[:N_KINDS]
    corners = run.corners
    assert len(cells) == N_KINDS and len(corners) == 4, (len(cells), corners)
    act = Activity(peak_current=0.15, rise_time=3e-10, clock_frequency=2e8,
                   charge_per_cycle=3e-10)
    fills = {"a": [FillEntry(c.name, dict(c.netlist), 400 + 37 * k)
                   for k, c in enumerate(cells[: N_KINDS // 2])],
             "b": [FillEntry(c.name, dict(c.netlist), 300 + 53 * k)
                   for k, c in enumerate(cells[N_KINDS // 2:])]}
    supply = SupplyNetwork(1.2, 0.02, 0.8e-9, {"a": RegionPath(0.004, 15e-12),
                                               "b": RegionPath(0.008, 30e-12)},
                           board_resistance=0.003, board_inductance=1.5e-9,
                           links=(GridLink("a", "b", 0.015, 25e-12),))
    regions = [RegionLoad(n, fills[n], 1e-9, 0.05, act) for n in ("a", "b")]
    return build_network(supply, regions, corners)


def best_of(fn, repeat: int = 3) -> float:  # type: ignore[no-untyped-def]
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    net = network()
    freq = np.geomspace(1e5, 1e10, N_FREQ)
    goals = NetworkGoals(0.05, 0.015, freq, droop=False)
    whole = net.netlist()
    flat = Netlist(whole.name, whole.elements, (net.region_nodes[0], "gnd"))

    def analysis() -> None:
        net._cache.clear()  # no help from an earlier run's fill admittances
        evaluate_network(net, goals)

    analysis()  # warm-up (imports)
    t0 = time.perf_counter()
    z_whole = solve_impedance(flat, freq)
    reference = time.perf_counter() - t0
    cell = next(iter(net.regions[0].fill[0].circuits.values()))
    kernel = stack_variants("kernel", [cell] * (N_KINDS * len(net.corners)))
    small = best_of(lambda: solve_impedance(kernel, freq))
    elapsed = best_of(analysis)
    agree = float(np.max(np.abs(net.z_matrix(freq)[..., 0, 0] / z_whole - 1)))
    t0 = time.perf_counter()
    evaluate_network(net, NetworkGoals(0.05, 0.015, freq, droop=False, size_entrance=True))
    sizing = time.perf_counter() - t0 - elapsed
    print(f"block: 2 regions, {N_KINDS} cell kinds, {len(net.corners)} corners, {N_FREQ} "
          f"frequencies; whole netlist {len(flat.elements)} elements")
    print(f"{'what':<52} {'s':>8} {'ratio':>8}")
    print(f"{'reference: one solve_impedance of the whole netlist':<52} {reference:>8.3f} "
          f"{1.0:>8.2f}")
    print(f"{'analysis (Z-matrix, resonances, targets, emission)':<52} {elapsed:>8.3f} "
          f"{elapsed / reference:>8.2f}")
    print(f"{'entrance-resistor sizing on top (COBYLA)':<52} {sizing:>8.3f} "
          f"{sizing / reference:>8.2f}")
    print(f"{'one cell circuit, 200 variants, 200 frequencies':<52} {small:>8.3f} "
          f"{small / reference:>8.2f}")
    print(f"analysis / one-cell kernel call: {elapsed / small:.1f}")
    print(f"goal: analysis <= 1 s -> {'met' if elapsed <= 1.0 else 'NOT met'}; "
          f"reduced vs whole-netlist Z agree to {agree:.1e}")


if __name__ == "__main__":
    main()
