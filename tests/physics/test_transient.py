"""Transient solver: closed-form step responses, ngspice .tran of the same circuits, nonlinear
elements against ngspice (B-sources written from the same laws, and level-1 MOSFETs), and the
solver's invariants."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.physics import transient as tr
from celllab.physics.netlist import Element, Netlist

from .ngspice_util import (
    dc_operating_point,
    render_rlc,
    render_transient,
    require_ngspice,
    transient,
)


def _rc(r: object, c: object) -> Netlist:
    return Netlist("rc", (Element("R", "r", "inp", "out", r), Element("C", "c", "out", "gnd", c)),
                   ("inp", "gnd"))


def _rlc(r: float, ell: float, c: float) -> Netlist:
    return Netlist("rlc", (Element("R", "r", "inp", "a", r), Element("L", "l", "a", "b", ell),
                           Element("C", "c", "b", "gnd", c)), ("inp", "gnd"))


STEP = tr.VoltageSource("vin", "inp", "gnd", tr.constant(1.0))


# --- closed forms --------------------------------------------------------------------------


def test_rc_step_matches_exponential_for_every_variant() -> None:
    # Source: first-order RC step response v = 1 - exp(-t / RC) (any circuits text); abs 1e-4
    r = np.array([500.0, 1e3, 4e3])
    res = tr.simulate(_rc(r, 1e-12), [STEP], t_stop=8e-9, dt=2e-11, probes=["v(out)", "i(vin)"])
    exact = 1.0 - np.exp(-res.t / (r[:, None] * 1e-12))
    np.testing.assert_allclose(res.probes["v(out)"], exact, atol=1e-4)
    # the source delivers v/R at t = 0+ (SPICE sign: current into the source's + node)
    np.testing.assert_allclose(res.probes["i(vin)"][:, 0], -1.0 / r, rtol=1e-6)


def test_series_rlc_step_matches_underdamped_closed_form() -> None:
    # Source: series RLC step response across C, v = 1 - e^(-a t)(cos wd t + a/wd sin wd t),
    # a = R/2L, wd = sqrt(1/LC - a^2) (second-order step response, any circuits text); abs 1e-3
    r, ell, c = 20.0, 10e-9, 1e-12
    res = tr.simulate(_rlc(r, ell, c), [STEP], t_stop=3e-9, dt=2e-12, probes=["v(b)", "i(l)"])
    a = r / (2 * ell)
    wd = np.sqrt(1 / (ell * c) - a * a)
    t = res.t
    v = 1 - np.exp(-a * t) * (np.cos(wd * t) + a / wd * np.sin(wd * t))
    i = np.exp(-a * t) * np.sin(wd * t) / (wd * ell)
    np.testing.assert_allclose(res.probes["v(b)"][0], v, atol=1e-3)
    np.testing.assert_allclose(res.probes["i(l)"][0], i, atol=1e-3 * np.max(i))


def test_current_source_into_rc_matches_closed_form() -> None:
    # Source: a current step I into R || C gives v = -I R (1 - exp(-t/RC)) at the node it draws
    # from (the SPICE sign convention); abs 1e-4 V
    net = Netlist("p", (Element("R", "r", "n", "gnd", 10.0), Element("C", "c", "n", "gnd", 1e-10)),
                  ("n", "gnd"))
    load = tr.CurrentSource("iload", "n", "gnd", tr.constant(0.01))
    res = tr.simulate(net, [load], t_stop=5e-9, dt=1e-11, probes=["v(n)"])
    np.testing.assert_allclose(res.probes["v(n)"][0], -0.1 * (1 - np.exp(-res.t / 1e-9)),
                               atol=1e-4)


def test_stiff_rc_under_long_steps_does_not_ring() -> None:
    # L-stability of TR-BDF2 (Hosea & Shampine 1996): with h = 100 tau the response must
    # approach 1 without overshoot or sign changes (plain trapezoidal integration rings here)
    res = tr.simulate(_rc(10.0, 1e-15, ), [STEP], t_stop=1e-12, dt=1e-14, probes=["v(out)"])
    v = res.probes["v(out)"][0]
    assert np.all(v[1:] <= 1.0 + 1e-9) and np.all(np.diff(v[1:]) >= -1e-9)
    assert v[-1] == pytest.approx(1.0, abs=1e-6)


def test_refining_the_step_converges_at_second_order() -> None:
    # Source: TR-BDF2 is second-order accurate (Bank et al., IEEE TCAD 4(4):436, 1985); the error
    # of the RLC response at a fixed time falls ~4x when the step halves (3x to 5x accepted)
    exact_t = 1e-9
    r, ell, c = 20.0, 10e-9, 1e-12
    a = r / (2 * ell)
    wd = np.sqrt(1 / (ell * c) - a * a)
    exact = 1 - np.exp(-a * exact_t) * (np.cos(wd * exact_t) + a / wd * np.sin(wd * exact_t))
    errors = []
    for dt in (2e-11, 1e-11):
        res = tr.simulate(_rlc(r, ell, c), [STEP], t_stop=exact_t, dt=dt, probes=["v(b)"])
        errors.append(abs(res.probes["v(b)"][0, -1] - exact))
    assert 3.0 < errors[0] / errors[1] < 5.0


# --- against ngspice -----------------------------------------------------------------------


def _compare(t_ref: np.ndarray, v_ref: np.ndarray, t: np.ndarray, v: np.ndarray, rel: float) -> None:
    """ngspice's (finer, adaptive) points interpolated onto our grid; error relative to the peak."""
    inside = (t >= t_ref[0]) & (t <= t_ref[-1])
    ref = np.interp(t[inside], t_ref, v_ref)
    scale = np.max(np.abs(v_ref))
    error = np.max(np.abs(v[inside] - ref))
    assert error <= rel * scale, error / scale


def test_rc_and_rlc_step_against_ngspice(tmp_path: Path) -> None:
    # Source: ngspice .tran of the same circuits (PWL step, uic); 1 % of the peak
    require_ngspice()
    step = tr.VoltageSource("vin", "inp", "gnd", tr.pwl([0.0, 1e-12], [0.0, 1.0]))
    for net, probe, t_stop in ((_rc(1e3, 1e-12), "v(out)", 5e-9), (_rlc(20.0, 10e-9, 1e-12), "v(b)",
                                                                   3e-9)):
        res = tr.simulate(net, [step], t_stop=t_stop, dt=2e-12, probes=[probe])
        lines = [*render_rlc(net), "vin inp 0 pwl(0 0 1e-12 1)"]
        t_ref, v_ref = transient(lines, [probe], tmp_path, t_stop, 2e-12)
        _compare(t_ref, v_ref[:, 0], res.t, res.probes[probe][0], 0.01)


def test_distributed_line_against_fine_ngspice_ladder(tmp_path: Path) -> None:
    # Source: ngspice .tran of a 200-segment midpoint ladder of the same RC line driven through
    # 50 ohm; the solver expands the line by its own accuracy rule; 1 % of the peak
    require_ngspice()
    r_line, c_line = 2e3, 1e-12
    net = Netlist("line", (Element("R", "rs", "inp", "a", 50.0),
                           Element("RCLINE", "ln", "a", "gnd", r_line, c_line)), ("inp", "gnd"))
    step = tr.VoltageSource("vin", "inp", "gnd", tr.pwl([0.0, 1e-11], [0.0, 1.0]))
    res = tr.simulate(net, [step], t_stop=4e-9, dt=1e-11, probes=["v(a)", "vc(ln)"])
    assert res.n_segments >= 2 and not res.segments_capped
    n = 200
    lines = ["vin inp 0 pwl(0 0 1e-11 1)", "rs inp a 50", f"ra a m1 {r_line / (2 * n):.12e}"]
    for k in range(1, n + 1):
        lines.append(f"cm{k} m{k} 0 {c_line / n:.12e}")
        if k < n:
            lines.append(f"rm{k} m{k} m{k + 1} {r_line / n:.12e}")
    t_ref, v_ref = transient(lines, ["v(a)", f"v(m{n})"], tmp_path, 4e-9, 1e-11)
    _compare(t_ref, v_ref[:, 0], res.t, res.probes["v(a)"][0], 0.01)
    # a line charged from its fed end holds its highest voltage next to that end, so the worst
    # segment (plate at ground minus line) follows -v(a); the far end lags behind
    assert res.probes["vc(ln)"][0, -1] == pytest.approx(-v_ref[-1, 0], rel=0.01)
    assert v_ref[-1, 1] < v_ref[-1, 0]


def test_current_source_drive_against_ngspice(tmp_path: Path) -> None:
    # A supply network (source R-L into an on-die C with ESR) loaded by a current ramp, the
    # droop use; Source: ngspice .tran of the same circuit; 1 % of the peak droop
    require_ngspice()
    net = Netlist("pdn", (Element("R", "rs", "sup", "a", 0.05), Element("L", "ls", "a", "vdd", 1e-9),
                          Element("R", "esr", "vdd", "m", 0.02), Element("C", "cd", "m", "gnd", 2e-9)),
                  ("vdd", "gnd"))
    times, amps = [0.0, 1e-9, 3e-9, 4e-9], [0.0, 0.5, 0.5, 0.0]
    sources = [tr.VoltageSource("vs", "sup", "gnd", tr.constant(1.0)),
               tr.CurrentSource("iload", "vdd", "gnd", tr.pwl(times, amps))]
    res = tr.simulate(net, sources, t_stop=20e-9, dt=1e-11, probes=["v(vdd)"], initial="dc")
    lines = [*render_rlc(net), "vs sup 0 dc 1", "iload vdd 0 pwl(0 0 1e-9 0.5 3e-9 0.5 4e-9 0)"]
    t_ref, v_ref = transient(lines, ["v(vdd)"], tmp_path, 20e-9, 1e-11,
                             initial={"sup": 1.0, "a": 1.0, "vdd": 1.0, "m": 1.0})
    droop_ref = 1.0 - v_ref[:, 0]
    _compare(t_ref, droop_ref, res.t, 1.0 - res.probes["v(vdd)"][0], 0.01)


def test_clamp_circuit_against_ngspice(tmp_path: Path) -> None:
    # A rail clamp with activation delay and reverse diode, a rail capacitance and a driven
    # source resistance; Source: ngspice .tran with B-sources written from the RailClamp law; 1 %
    require_ngspice()
    net = Netlist("rail", (Element("R", "rs", "inp", "vdd", 50.0),
                           Element("C", "crail", "vdd", "vss", 20e-12)), ("vdd", "vss"))
    clamp = tr.RailClamp("clamp", "vdd", "vss", v_on=3.0, r_on=2.0, t_response=1e-9, v_diode=0.7)
    drive = tr.VoltageSource("vin", "inp", "vss", tr.pwl([0, 2e-9, 6e-9, 8e-9, 12e-9],
                                                         [0, 20.0, 20.0, -20.0, -20.0]))
    res = tr.simulate(net, [drive], t_stop=16e-9, dt=5e-12, nonlinear=[clamp],
                      probes=["v(vdd)", "i(clamp)", "s(clamp)"], ground="vss")
    expanded = tr.expand(net, [clamp], 1)
    lines = [*render_transient(expanded, 0, "vss"),
             "vin inp 0 pwl(0 0 2e-9 20 6e-9 20 8e-9 -20 12e-9 -20)"]
    t_ref, v_ref = transient(lines, ["v(vdd)", "v(s_clamp)"], tmp_path, 16e-9, 5e-12)
    _compare(t_ref, v_ref[:, 0], res.t, res.probes["v(vdd)"][0], 0.01)
    _compare(t_ref, v_ref[:, 1], res.t, res.probes["s(clamp)"][0], 0.01)
    assert np.max(res.probes["i(clamp)"]) > 0.3 and np.min(res.probes["i(clamp)"]) < -0.1


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_square_law_channel_dc_matches_ngspice_level1(tmp_path: Path, polarity: str) -> None:
    # Source: ngspice level-1 MOSFET (Shichman-Hodges, LAMBDA = 0, GAMMA = 0) of KP W/L = beta;
    # drain currents over triode and saturation, both channel orientations; rel 1e-6 + 1 nA
    require_ngspice()
    beta, vt = 2e-3, 0.4
    s = 1.0 if polarity == "n" else -1.0
    vg = s * 1.2
    results = []
    for vd in (0.1, 0.4, 0.8, 1.5):
        net = Netlist("m", (Element("R", "rd", "dd", "d", 1e-6), Element("R", "rg", "gg", "g", 1e-6)),
                      ("dd", "gg"))
        ch = tr.SquareLawChannel("m1", "d", "gnd", "g", polarity, beta, vt)  # type: ignore[arg-type]
        op = tr.operating_point(net, [tr.VoltageSource("vd", "dd", "gnd", tr.constant(s * vd)),
                                      tr.VoltageSource("vg", "gg", "gnd", tr.constant(vg))], [ch],
                                ground="gnd")
        results.append(-float(op["i(vd)"][0]))
    kind = "nmos" if polarity == "n" else "pmos"
    lines = [f".model mod {kind} level=1 vto={s * vt:g} kp={beta:g} lambda=0 gamma=0",
             "m1 d g 0 0 mod w=1 l=1", f"vg g 0 dc {vg:g}", "vd d 0 dc 0"]
    for vd, ours in zip((0.1, 0.4, 0.8, 1.5), results):
        lines[-1] = f"vd d 0 dc {s * vd:g}"
        (ref,) = dc_operating_point(lines, ["-i(vd)"], tmp_path)
        assert ours == pytest.approx(ref, rel=1e-6, abs=1e-9)
    mag = np.abs(results)
    assert mag[0] < mag[1] < mag[2] == pytest.approx(mag[3])  # triode, then saturation


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 12), st.floats(0.05, 2.0), st.floats(0.0, 2.0))
def test_distributed_channel_dc_equals_lumped_square_law(n: int, vd: float, vg_over: float) -> None:
    # A chain of square-law segments with beta / l_k is exactly one square-law channel in DC
    # (the gradual-channel integral telescopes); rel 1e-6
    beta, vt = 1e-3, 0.3
    line = Element("RCLINE", "ch", "s", "g", 100.0, 1e-15, node_far="d")
    net = Netlist("ch", (line, Element("R", "rd", "dd", "d", 1e-6), Element("R", "rg", "gg", "g", 1e-6)),
                  ("d", "s"))
    srcs = [tr.VoltageSource("vd", "dd", "s", tr.constant(vd)),
            tr.VoltageSource("vg", "gg", "s", tr.constant(vt + vg_over))]
    op = tr.operating_point(net, srcs, [tr.DistributedChannel("ch", "n", beta, vt)], n_segments=n)
    vov = vg_over
    vds = min(vd, vov)
    expected = beta * (vov * vds - vds * vds / 2)
    assert -float(op["i(vd)"][0]) == pytest.approx(expected, rel=1e-6, abs=1e-10)


# --- invariants and errors -----------------------------------------------------------------


def test_variants_are_independent() -> None:
    r = np.array([100.0, 900.0])
    c = np.array([3e-12, 1e-12])
    both = tr.simulate(_rc(r, c), [STEP], t_stop=2e-9, dt=1e-11, probes=["v(out)"])
    for k in range(2):
        one = tr.simulate(_rc(r[k], c[k]), [STEP], t_stop=2e-9, dt=1e-11, probes=["v(out)"])
        np.testing.assert_allclose(both.probes["v(out)"][k], one.probes["v(out)"][0], atol=1e-12)


def test_piecewise_grid_reuses_few_steps() -> None:
    grid = tr.piecewise_grid([(1e-9, 1e-11), (5e-9, 1e-10)])
    assert grid[0] == 0 and grid[-1] == pytest.approx(5e-9)
    assert len({float(f"{h:.9e}") for h in np.diff(grid)}) == 2
    res = tr.simulate(_rc(1e3, 1e-12), [STEP], t_points=grid, probes=["v(out)"])
    np.testing.assert_allclose(res.probes["v(out)"][0], 1 - np.exp(-grid / 1e-9), atol=2e-4)


@pytest.mark.parametrize(("kwargs", "message"), [
    (dict(t_stop=1e-9), "give t_points"),
    (dict(t_points=[1e-12, 2e-12]), "must start at 0"),
    (dict(t_stop=1e-9, dt=1e-11, probes=["v(nowhere)"]), "no node 'nowhere'"),
    (dict(t_stop=1e-9, dt=1e-11, probes=["q(out)"]), "write v(node)"),
    (dict(t_stop=1e-9, dt=1e-11, probes=["i(c)"]), "capacitor"),
    (dict(t_stop=1e-9, dt=1e-11, initial="warm"), "'zero' or 'dc'"),
    (dict(t_stop=1e-9, dt=1e-11, ground="earth"), "ground node 'earth'"),
])
def test_bad_arguments_say_what_is_allowed(kwargs: dict, message: str) -> None:
    with pytest.raises(ValueError, match=message.replace("(", r"\(").replace(")", r"\)")):
        tr.simulate(_rc(1e3, 1e-12), [STEP], **kwargs)


def test_distributed_channel_must_name_a_line() -> None:
    with pytest.raises(ValueError, match="not RCLINE"):
        tr.simulate(_rc(1e3, 1e-12), [STEP], t_stop=1e-9, dt=1e-11,
                    nonlinear=[tr.DistributedChannel("r", "n", 1e-3, 0.3)])


def test_supplied_law_matches_closed_form_dc_and_linear_twin() -> None:
    # A supplied I(V) = k v^2 (v > 0) fed from 1 V through R: k v^2 R + v - 1 = 0, so
    # v = (-1 + sqrt(1 + 4 k R)) / (2 k R) (quadratic formula); rel 1e-6 (the Newton tolerance)
    k, r = 2e-3, 500.0

    def law(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        vp = np.maximum(v, 0.0)
        return k * vp * vp, 2 * k * vp

    net = Netlist("q", (Element("R", "r", "inp", "a", r),), ("inp", "a"))
    nl = tr.NonlinearConductance("q", "a", "gnd", law)
    op = tr.operating_point(net, [STEP], [nl], ground="gnd")
    assert float(op["a"][0]) == pytest.approx((-1 + np.sqrt(1 + 4 * k * r)) / (2 * k * r), rel=1e-6)
    # a supplied linear law behaves exactly like the resistor it describes (transient)
    linear = tr.NonlinearConductance("g", "out", "gnd", lambda v: (v / 2e3, np.full_like(v, 1 / 2e3)))
    rc = _rc(1e3, 1e-12)
    with_r = Netlist("rc2", (*rc.elements, Element("R", "rl", "out", "gnd", 2e3)), rc.ports)
    a = tr.simulate(rc, [STEP], t_stop=3e-9, dt=1e-11, probes=["v(out)", "i(g)"], nonlinear=[linear])
    b = tr.simulate(with_r, [STEP], t_stop=3e-9, dt=1e-11, probes=["v(out)", "i(rl)"])
    np.testing.assert_allclose(a.probes["v(out)"], b.probes["v(out)"], atol=1e-7)
    np.testing.assert_allclose(a.probes["i(g)"], b.probes["i(rl)"], atol=1e-10)
