"""Transient solver: the bordered-band chord solve of large ladder circuits (the cross-coupled
pair's two channel ladders) against the dense batched inverse."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from celllab.physics import transient as tr
from celllab.physics.circuits import cross_coupled_circuit
from celllab.physics.netlist import Element, Netlist

# Newton tolerance 1e-8 + 1e-6 |x| per iteration: the two paths agree to a few times that
TOL = 2e-5
# Source: docs/references.md [133] (numpy.linalg.solve: LAPACK dgesv, dense LU with partial
# pivoting) on the same matrices; rel 1e-9 of the largest component (round-off only)
SOLVE_RTOL = 1e-9


def _pair(n_var: int = 3) -> tuple[Netlist, list[tr.Source], list[tr.Nonlinear]]:
    """A cross-coupled pair (both channels as gate-controlled ladders with body paths) behind a
    rail clamp, driven through a resistor by a fast pulse (invented values)."""
    rng = np.random.default_rng(11)
    core = cross_coupled_circuit(rng.uniform(20e-15, 80e-15, n_var),
                                 rng.uniform(20e-15, 80e-15, n_var), rng.uniform(2e3, 8e3, n_var),
                                 rng.uniform(3e3, 9e3, n_var), 200.0, 200.0, 50e-12, 2e-15, 2e-15)
    net = Netlist("pair", (*core.elements, Element("R", "r_src", "inp", "vdd", 20.0),
                           Element("C", "c_rail", "vdd", "vss", 5e-15)), ("vdd", "vss"))
    beta_n = 1.0 / (rng.uniform(2e3, 8e3, n_var) * 0.8)
    beta_p = 1.0 / (rng.uniform(3e3, 9e3, n_var) * 0.8)
    nonlinear: list[tr.Nonlinear] = [
        tr.RailClamp("clamp", "vdd", "vss", v_on=rng.uniform(3.0, 4.0, n_var), r_on=3.0,
                     t_response=0.3e-9, v_diode=0.7),
        tr.DistributedChannel("mn_channel", "n", beta_n, 0.35, body="vss", c_body=10e-15,
                              v_flatband=-0.9),
        tr.DistributedChannel("mp_channel", "p", beta_p, 0.35, body="top", c_body=10e-15,
                              v_flatband=0.9)]
    drive = tr.VoltageSource("vin", "inp", "vss", tr.pwl([0, 0.2e-9, 1e-9, 1.2e-9, 3e-9],
                                                         [0, 8.0, 8.0, -3.0, 0.0]))
    return net, [drive], nonlinear


def _run(band: bool, monkeypatch: pytest.MonkeyPatch) -> tr.TransientResult:
    monkeypatch.setattr(tr._System, "use_band", band)
    net, sources, nonlinear = _pair()
    grid = tr.piecewise_grid([(1.5e-9, 5e-12), (3e-9, 20e-12)])
    return tr.simulate(net, sources, t_points=grid, nonlinear=nonlinear, ground="vss",
                       n_segments=16, probes=["v(vdd)", "v(x)", "v(y)", "i(clamp)",
                                              "vc(mn_channel)", "vc(mp_channel)"])


def _system() -> tr._System:
    net, sources, nonlinear = _pair()
    system, _, _ = tr._prepare(net, sources, nonlinear, "vss", 16, 5e-12, tr.GMIN_S)
    return system


def _chord_matrices(system: tr._System, seed: int) -> np.ndarray:
    """M + df/dx of the pair at random node voltages (k, n, n), dense."""
    rng = np.random.default_rng(seed)
    x = rng.uniform(-3.0, 3.0, (system.n_var, system.n))
    _, grads, _ = system.evaluate(x)
    M = system.matrices(5e-12)[0]
    J = np.zeros((system.n_var, system.n + 1, system.n + 1))
    J[:, : system.n, : system.n] = M
    for plus, sign in ((system.plus, 1.0), (system.minus, -1.0)):
        np.add.at(J, (slice(None), np.repeat(plus, 3), system.controls.reshape(-1)),  # type: ignore[arg-type]  # numpy stubs
                  sign * grads.reshape(system.n_var, -1))
    return J[:, : system.n, : system.n]


def test_pair_pattern_is_a_bordered_band() -> None:
    system = _system()
    band = system.band_plan()
    assert band is not None
    labels = {system.labels[i] for i in band.border}
    assert {"gn", "gp"} <= labels and band.border.size <= 4  # the gate plates (and the source)
    assert band.kl + band.ku <= 4


def _factored() -> tuple[Any, Any, Any, np.ndarray, np.ndarray]:
    """(system, band plan, its factors, right-hand sides r, numpy.linalg.solve of J x = r)."""
    system = _system()
    band = system.band_plan()
    assert band is not None
    J = _chord_matrices(system, 1)
    r = np.random.default_rng(2).standard_normal((system.n_var, system.n))
    reference = np.linalg.solve(J, r[:, :, None])[:, :, 0]
    return system, band, band.factor(J), r, reference


def test_band_solve_equals_dense_solve() -> None:
    """Equivalence check (fast path vs reference path): J^-1 r from the bordered-band factors
    (`_BorderedBand.factor`, `_band_solve`) against numpy.linalg.solve on the same chord
    matrices, for every variant and for a subset of rows; round-off only."""
    _, band, fac, r, reference = _factored()
    assert not np.any(fac.bad)
    got = tr._band_solve(band, fac, None, r)
    assert np.max(np.abs(got - reference)) < SOLVE_RTOL * np.max(np.abs(reference))
    rows = np.array([2, 0])
    sub = tr._band_solve(band, fac, rows, r[rows])
    assert np.max(np.abs(sub - reference[rows])) < SOLVE_RTOL * np.max(np.abs(reference))


def test_band_solve_check_sees_a_perturbed_factor() -> None:
    """Equivalence check of the check above: a Schur complement off by 1e-6 fails it."""
    _, band, fac, r, reference = _factored()
    fac.S_inv *= 1 + 1e-6
    got = tr._band_solve(band, fac, None, r)
    assert np.max(np.abs(got - reference)) > SOLVE_RTOL * np.max(np.abs(reference))


def test_zero_band_pivot_falls_back_to_the_dense_inverse() -> None:
    """A variant whose inner block is singular (one ladder row reaches only the border) is
    solved with the dense inverse; same J^-1 r as numpy.linalg.solve."""
    system = _system()
    band = system.band_plan()
    assert band is not None
    J = _chord_matrices(system, 3)
    row = band.inner[5]
    J[1, row, band.inner] = 0.0
    J[1, row, band.border] = 1e-3
    r = np.random.default_rng(4).standard_normal((system.n_var, system.n))
    reference = np.linalg.solve(J, r[:, :, None])[:, :, 0]
    chord = system._band_chord(5e-12, band, J, None)
    assert chord.bad.tolist() == [False, True, False]
    got = tr._band_solve(band, chord, None, r)
    assert np.max(np.abs(got - reference)) < SOLVE_RTOL * np.max(np.abs(reference))


def test_band_chord_transient_equals_dense_chord_transient(monkeypatch: pytest.MonkeyPatch) -> None:
    """Equivalence check (fast path vs reference path): the pair's transient with the
    bordered-band chord solve against the dense batched inverse (`_System.use_band = False`):
    the same chord iteration, so the same split steps and every probe within 2e-5 of its peak
    (a few Newton tolerances)."""
    calls: list[int] = []
    original = tr._band_solve

    def spy(*args: object) -> object:
        calls.append(1)
        return original(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(tr, "_band_solve", spy)
    fast = _run(True, monkeypatch)
    assert calls  # the band path ran
    n_fast = len(calls)
    reference = _run(False, monkeypatch)
    assert len(calls) == n_fast  # the reference run never took it
    assert np.all(fast.converged) and np.all(reference.converged)
    assert fast.split_steps == reference.split_steps
    assert np.max(np.abs(reference.probes["i(clamp)"])) > 0.1  # the clamp conducted
    worst = max(float(np.max(np.abs(fast.probes[k] - reference.probes[k])
                             / np.max(np.abs(reference.probes[k]), axis=1, keepdims=True)))
                for k in reference.probes)
    assert worst < TOL
