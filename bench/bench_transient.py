"""Transient solver throughput against ngspice on the same circuits, in one run.

Cases: (1) a linear supply network (R-L source, on-die decap with ESR and a distributed line)
loaded by a current ramp, many variants; (2) an HBM event on a tied decap cell of the lumen130
demo deck (variants x corners) with the rail clamp; (3) the same on the cross-coupled pair (square-law
channels, nonlinear). Our solver runs every row in one call; ngspice runs the same rendered
circuit (B-sources for the nonlinear laws) one row at a time, batch mode, process start included
and also reported without it (a 1-step run's time subtracted).
Reported: rows x steps per second for each, and the ratio.

A second table times the HBM and CDM events of every lumen130 demo cell of a topology (all
corners, as the catalog build runs them) with the stage Newton on the nonlinear unknowns
(`_System.newton_reduced`, the default where the nonlinear elements touch few unknowns) against
the full-system chord iteration (`_System.use_reduced = False`) in the same run, and the
largest difference of their peak oxide voltages; then the cross-coupled pair's events with its
chord matrix as a bordered band against the dense inverse (`_System.use_band = False`).
Run:  .venv/bin/python bench/bench_transient.py   (prints a table; not a test)
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))  # the ngspice renderer is a test helper

from physics.ngspice_util import render_transient  # noqa: E402

from celllab.cells import load_cells  # noqa: E402
from celllab.characterization.esd_events import EsdEvent, RailProtection, event_circuit  # noqa: E402
from celllab.deck import load_deck  # noqa: E402
from celllab.fill_risk import gather  # noqa: E402
from celllab.physics import transient as tr  # noqa: E402
from celllab.physics.netlist import Element, Netlist  # noqa: E402


def _ngspice_seconds(lines: list[str], ic: dict[str, float], t_stop: float, h: float) -> tuple[float, float]:
    """(seconds for the full run, seconds for a one-step run) of one circuit in ngspice -b."""
    ic_text = " ".join(f"v({n})={v:.12e}" for n, v in ic.items() if v)
    times = []
    for stop in (t_stop, h):
        deck = "\n".join(["bench", ".options rshunt=1e12 reltol=1e-4", *lines,
                          *([f".ic {ic_text}"] if ic_text else []), ".control",
                          f"tran {h:.6e} {stop:.6e} 0 {h:.6e} uic", "quit", ".endc", ".end", ""])
        with tempfile.TemporaryDirectory() as tmp:
            (Path(tmp) / "b.cir").write_text(deck)
            t0 = time.perf_counter()
            subprocess.run(["ngspice", "-b", "b.cir"], cwd=tmp, capture_output=True, check=True)
            times.append(time.perf_counter() - t0)
    return times[0], times[1]


def _pdn(n_var: int) -> tuple[Netlist, list[tr.Source], np.ndarray]:
    rng = np.random.default_rng(1)
    c = rng.uniform(1e-9, 5e-9, n_var)
    net = Netlist("pdn", (Element("R", "rs", "sup", "a", 0.05), Element("L", "ls", "a", "vdd", 1e-9),
                          Element("R", "esr", "vdd", "m", 0.02),
                          Element("RCLINE", "line", "m", "gnd", 2.0, c)), ("vdd", "gnd"))
    load = tr.pwl([0.0, 1e-9, 3e-9, 4e-9], [0.0, 0.5, 0.5, 0.0])
    sources: list[tr.Source] = [tr.VoltageSource("vs", "sup", "gnd", tr.constant(1.0)),
                                tr.CurrentSource("iload", "vdd", "gnd", load)]
    return net, sources, tr.piecewise_grid([(1e-9, 1e-11), (3e-9, 1e-11), (4e-9, 1e-11), (40e-9, 5e-11)])


def _case_pdn(n_var: int) -> tuple[str, int, int, float, float, float]:
    net, sources, grid = _pdn(n_var)
    t0 = time.perf_counter()
    res = tr.simulate(net, sources, t_points=grid, probes=["v(vdd)"], initial="dc", n_segments=8)
    ours = time.perf_counter() - t0
    one = Netlist("pdn", tuple(el.variant(0) for el in net.elements), net.ports)
    lines = render_transient(tr.expand(one, (), res.n_segments), 0, "gnd")
    lines += ["vs sup 0 dc 1", "iload vdd 0 pwl(0 0 1e-9 0.5 3e-9 0.5 4e-9 0)"]
    full, start = _ngspice_seconds(lines, {}, grid[-1], 1e-11)
    return "linear supply network", n_var, grid.size - 1, ours, full, start


def _case_esd(topology: str, n_cells: int) -> tuple[str, int, int, float, float, float]:
    deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
    cells = [c for c in load_cells(ROOT / "process_decks" / "cells" / "lumen130_cells.toml", deck)
             if c.topology == topology and c.oxide == "core"][:n_cells]
    (g,) = [x for x in gather(deck, cells) if len(x.cells) == len(cells)][:1]
    event = EsdEvent("hbm", 2000.0)
    from celllab.characterization.esd_events import simulate_event

    t0 = time.perf_counter()
    res = simulate_event(g.netlist, event, g.protection, g.oxides, g.v_bd_pulse, channels=g.channels,
                         extra_elements=g.extra_elements)
    ours = time.perf_counter() - t0
    prot = RailProtection(*(float(np.asarray(getattr(g.protection, f)).reshape(-1)[0])
                            for f in ("v_on", "r_on", "t_response", "v_diode", "c_rail", "v_supply", "r_diode")))

    def first(v: object) -> object:
        return None if v is None else float(np.asarray(v).reshape(-1)[0])

    channels = tuple(tr.DistributedChannel(c.line, c.polarity, first(c.beta), first(c.v_threshold),  # type: ignore[arg-type]
                                           c.body, first(c.c_body), first(c.v_flatband))  # type: ignore[arg-type]
                     for c in g.channels)
    circuit = event_circuit(g.netlist.variant(0), event, prot, g.oxides, float(g.v_bd_pulse[0]),
                            channels=channels, extra_elements=tuple(e.variant(0) for e in g.extra_elements))
    lines = render_transient(tr.expand(circuit.netlist, circuit.nonlinear, circuit.n_segments), 0,
                             circuit.ground)
    ic = {k: float(np.asarray(v).reshape(-1)[0]) for k, v in circuit.initial_voltages.items()}
    h = float(np.min(np.diff(circuit.t_points)))
    full, start = _ngspice_seconds(lines, ic, float(circuit.t_points[-1]), h)
    return f"HBM on {topology}", res.rail_V.shape[0], res.t.size - 1, ours, full, start


def _events_seconds(topology: str, reduced: bool, band: bool = True
                    ) -> tuple[float, int, np.ndarray]:
    """Seconds for the catalog's HBM and CDM events (`cell_risk.catalog_figures`, the coarse
    grid, with the broken-oxide DC point) of the demo cells of ``topology``, all corners."""
    from celllab.characterization.cell_risk import catalog_figures

    deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
    cells = [c for c in load_cells(ROOT / "process_decks" / "cells" / "lumen130_cells.toml", deck)
             if c.topology == topology]
    groups = gather(deck, cells)
    events = (EsdEvent("hbm", deck.esd.hbm_V), EsdEvent("cdm", deck.esd.cdm_V))
    tr._System.use_reduced = reduced
    tr._System.use_band = band
    peaks, rows = [], 0
    t0 = time.perf_counter()
    try:
        for g in groups:
            risk = catalog_figures(g, *events)
            peaks += [risk.hbm.peak_oxide_V.reshape(-1), risk.cdm.peak_oxide_V.reshape(-1)]
            rows += g.supply.size
    finally:
        tr._System.use_reduced = True
        tr._System.use_band = True
    return time.perf_counter() - t0, rows, np.concatenate(peaks)


def paths() -> None:
    print(f"{'HBM + CDM events':<20} {'rows':>5} {'reduced s':>10} {'full s':>8} {'speed-up':>9} "
          f"{'max rel diff of peak V_ox':>26}")
    for topology in ("nmos_inversion", "tied_cmos", "mos_mom"):
        fast, rows, p_fast = _events_seconds(topology, True)
        full, _, p_full = _events_seconds(topology, False)
        ok = np.isfinite(p_full) & (p_full != 0)
        diff = float(np.max(np.abs(p_fast[ok] - p_full[ok]) / np.abs(p_full[ok]), initial=0.0))
        print(f"{topology:<20} {rows:>5} {fast:>10.2f} {full:>8.2f} {full / fast:>9.1f} "
              f"{diff:>26.1e}")
    print("reduced: stage Newton on the nonlinear unknowns; full: full-system chord iteration "
          "(same run, same circuits)\n")
    band, rows, p_band = _events_seconds("cross_coupled", True)
    dense, _, p_dense = _events_seconds("cross_coupled", True, band=False)
    ok = np.isfinite(p_dense) & (p_dense != 0)
    diff = float(np.max(np.abs(p_band[ok] - p_dense[ok]) / np.abs(p_dense[ok]), initial=0.0))
    print(f"{'HBM + CDM events':<20} {'rows':>5} {'band s':>10} {'dense s':>8} {'speed-up':>9} "
          f"{'max rel diff of peak V_ox':>26}")
    print(f"{'cross_coupled':<20} {rows:>5} {band:>10.2f} {dense:>8.2f} {dense / band:>9.1f} "
          f"{diff:>26.1e}")
    print("band: the pair's chord matrix as a bordered band LU (`_BorderedBand`); dense: "
          "batched dense inverse (same run)\n")


def main() -> None:
    paths()
    if shutil.which("ngspice") is None:
        print("ngspice not found: nothing to compare against")
        return
    cases = [_case_pdn(200), _case_esd("nmos_inversion", 20), _case_esd("cross_coupled", 8)]
    print(f"{'case':<24} {'rows':>5} {'steps':>6} {'ours s':>8} {'ours row*step/s':>16} "
          f"{'ngspice s/row':>14} {'(no start)':>11} {'ratio':>7} {'(no start)':>11}")
    for name, rows, steps, ours, full, start in cases:
        ours_rate = rows * steps / ours
        spice_rate = steps / full
        spice_rate_run = steps / max(full - start, 1e-6)
        print(f"{name:<24} {rows:>5} {steps:>6} {ours:>8.2f} {ours_rate:>16.0f} {full:>14.3f} "
              f"{full - start:>11.3f} {ours_rate / spice_rate:>7.1f} {ours_rate / spice_rate_run:>11.1f}")
    print("ratio: our rows x steps per second over ngspice's (one row per ngspice run; ngspice "
          "picks its own steps under the same maximum step)")


if __name__ == "__main__":
    main()
