"""Transient solver: the Newton iteration on the nonlinear unknowns alone against the
full-system iteration, and an exact linear DC point."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from celllab.physics import transient as tr
from celllab.physics.netlist import Element, Netlist

# Newton tolerance 1e-8 + 1e-6 |x| per iteration: the two paths agree to a few times that
TOL = 2e-5


def _clamped_rail(n_var: int = 4) -> tuple[Netlist, list[tr.Source], list[tr.Nonlinear]]:
    """A driven rail with a clamp, a distributed line and a series R-L: few nonlinear unknowns
    (vdd, the clamp state) among many linear ones (ladder nodes, branch currents)."""
    rng = np.random.default_rng(7)
    c_line = rng.uniform(5e-12, 40e-12, n_var)
    net = Netlist("rail", (Element("R", "rs", "inp", "a", 50.0),
                           Element("L", "ls", "a", "vdd", 2e-9),
                           Element("C", "crail", "vdd", "vss", 10e-12),
                           Element("RCLINE", "line", "vdd", "vss", rng.uniform(5.0, 50.0, n_var),
                                   c_line)), ("vdd", "vss"))
    clamp = tr.RailClamp("clamp", "vdd", "vss", v_on=rng.uniform(2.5, 4.0, n_var), r_on=2.0,
                         t_response=rng.uniform(0.2e-9, 1e-9, n_var), v_diode=0.7)
    drive = tr.VoltageSource("vin", "inp", "vss", tr.pwl([0, 2e-9, 6e-9, 8e-9, 12e-9],
                                                         [0, 20.0, 20.0, -20.0, -20.0]))
    return net, [drive], [clamp]


def _run(net: Netlist, sources: list[tr.Source], nonlinear: list[tr.Nonlinear],
         reduced: bool, monkeypatch: pytest.MonkeyPatch) -> tr.TransientResult:
    monkeypatch.setattr(tr._System, "use_reduced", reduced)
    grid = tr.piecewise_grid([(4e-9, 10e-12), (16e-9, 40e-12)])
    return tr.simulate(net, sources, t_points=grid, nonlinear=nonlinear, ground="vss",
                       n_segments=16, probes=["v(vdd)", "i(clamp)", "s(clamp)", "vc(line)",
                                              "i(ls)"])


def _worst_difference(a: tr.TransientResult, b: tr.TransientResult) -> float:
    return max(float(np.max(np.abs(a.probes[k] - b.probes[k])
                            / np.max(np.abs(b.probes[k]), axis=1, keepdims=True)))
               for k in b.probes)


def test_reduced_newton_equals_full_system_newton(monkeypatch: pytest.MonkeyPatch) -> None:
    """Equivalence check (fast path vs reference path): the stage Newton on the nonlinear
    unknowns (Schur complement, `_System.stage_operators` and `_System.newton_z`) against the
    full-system chord iteration (`_System.newton`) on the same clamp circuit; every probe within
    2e-5 of its peak (a few Newton tolerances)."""
    calls = []
    original = tr._System.newton_z

    def spy(self: tr._System, *args: object, **kwargs: object) -> object:
        calls.append(self.p)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(tr._System, "newton_z", spy)
    net, sources, nonlinear = _clamped_rail()
    fast = _run(net, sources, nonlinear, True, monkeypatch)
    assert calls and max(calls) == 2  # vdd and the clamp state; the ladder stays linear
    n_fast = len(calls)
    reference = _run(net, sources, nonlinear, False, monkeypatch)
    assert len(calls) == n_fast  # the reference run never took the reduced path
    assert np.all(fast.converged) and np.all(reference.converged)
    assert np.max(np.abs(reference.probes["i(clamp)"])) > 0.2  # the clamp conducted
    assert _worst_difference(fast, reference) < TOL


def test_equivalence_check_sees_a_perturbed_reduction(monkeypatch: pytest.MonkeyPatch) -> None:
    """Equivalence check of the check above: the same comparison fails when the reduced
    path's coupling V = M^-1 U is off by 1e-3."""
    original = tr._System.stage_operators

    def perturbed(self: tr._System, h: float) -> tr._StageOperators:
        ops = original(self, h)
        return dataclasses.replace(ops, V=ops.V * (1 + 1e-3), W=ops.W * (1 + 1e-3))

    net, sources, nonlinear = _clamped_rail()
    reference = _run(net, sources, nonlinear, False, monkeypatch)
    monkeypatch.setattr(tr._System, "stage_operators", perturbed)
    fast = _run(net, sources, nonlinear, True, monkeypatch)
    assert _worst_difference(fast, reference) > TOL


def test_reduced_newton_with_a_supplied_law_equals_full(monkeypatch: pytest.MonkeyPatch) -> None:
    """Equivalence check (fast path vs reference path) with a supplied law, which is always
    evaluated for every variant while the others leave the iteration one by one."""
    net, sources, nonlinear = _clamped_rail(3)
    g = np.array([1e-3, 5e-3, 2e-2])

    def law(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        assert v.shape == (3,)  # every variant, always
        return g * v * np.abs(v), 2 * g * np.abs(v)

    extra = [*nonlinear, tr.NonlinearConductance("q", "vdd", "vss", law)]
    fast = _run(net, sources, extra, True, monkeypatch)
    reference = _run(net, sources, extra, False, monkeypatch)
    assert _worst_difference(fast, reference) < TOL


def test_linear_dc_point_far_from_the_guess_is_exact() -> None:
    # A 10 V source across a 1 k / 3 k divider: v(mid) = 7.5 V and 2.5 mA (voltage divider,
    # docs/references.md [45] nodal analysis); rel 1e-7 (gmin = 1e-12 S on every node adds
    # ~2e-11 A). The node-voltage update limit of the nonlinear DC Newton must not cut a linear
    # solve short.
    net = Netlist("div", (Element("R", "r1", "inp", "mid", 1e3),
                          Element("R", "r2", "mid", "gnd", 3e3)), ("inp", "gnd"))
    src = tr.VoltageSource("vin", "inp", "gnd", tr.constant(10.0))
    op, ok = tr.operating_point_status(net, [src])
    assert ok.all()
    assert float(op["mid"][0]) == pytest.approx(7.5, rel=1e-7)
    assert float(op["i(vin)"][0]) == pytest.approx(-2.5e-3, rel=1e-7)
