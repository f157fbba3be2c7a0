"""Netlist solver and the exact RC-line element against ngspice AC analyses.

Every deck drives the port with a 1 A AC current source, so the printed node voltage is the
impedance (ngspice manual, AC analysis; docs/references.md [130]). Ladders in the first two tests
are written here as text, independently of `ladder_expansion`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.physics.circuits import mom_circuit, mos_decap_circuit
from celllab.physics.netlist import Element, Netlist, ladder_expansion, solve_impedance

from .ngspice_util import ac_impedance, render_rlc, require_ngspice


def _l_section_ladder(r: float, c: float, n: int) -> tuple[list[str], Netlist]:
    """Plain N-section ladder (series R/N then shunt C/N) as deck lines and as a Netlist."""
    lines, elements = [], []
    for k in range(n):
        a, b = ("in" if k == 0 else f"n{k}"), f"n{k + 1}"
        lines += [f"r{k} {a} {b} {r / n:.12e}", f"c{k} {b} 0 {c / n:.12e}"]
        elements += [Element("R", f"r{k}", a, b, r / n), Element("C", f"c{k}", b, "gnd", c / n)]
    return lines, Netlist("ladder", tuple(elements), ("in", "gnd"))


def _midpoint_ladder(r: float, c: float, n: int, both_ends: bool) -> list[str]:
    """Deck lines of a fine midpoint ladder approximating the continuous line."""
    lines = [f"ra in m1 {r / (2 * n):.12e}"]
    for k in range(1, n + 1):
        lines.append(f"cm{k} m{k} 0 {c / n:.12e}")
        if k < n:
            lines.append(f"rm{k} m{k} m{k + 1} {r / n:.12e}")
    if both_ends:
        lines.append(f"rb m{n} in {r / (2 * n):.12e}")
    return lines


def test_solver_against_ngspice_ladder(tmp_path: Path) -> None:
    # Source: ngspice AC of the same 12-section R-C ladder; 1 %
    require_ngspice()
    lines, nl = _l_section_ladder(600.0, 2e-12, 12)
    f, z_spice = ac_impedance(lines, "in", tmp_path, 1e6, 1e11, 8)
    z = solve_impedance(nl, f)[0]
    np.testing.assert_allclose(z, z_spice, rtol=1e-2)


@pytest.mark.parametrize("both_ends", [False, True])
def test_exact_line_against_fine_ngspice_ladder(tmp_path: Path, both_ends: bool) -> None:
    # Source: ngspice AC of a 200-segment midpoint ladder (discretization error ~ 1/N^2) over
    # omega R C = 0.01 ... 1000; 1 %
    require_ngspice()
    r, c = 500.0, 1e-12
    f_lo, f_hi = 0.01 / (2 * np.pi * r * c), 1e3 / (2 * np.pi * r * c)
    f, z_spice = ac_impedance(_midpoint_ladder(r, c, 200, both_ends), "in", tmp_path, f_lo, f_hi)
    line = Netlist(
        "line",
        (Element("RCLINE", "ch", "vss", "vdd", r, c, contacted_ends=2 if both_ends else 1),),
    )
    z = solve_impedance(line, f)[0]
    np.testing.assert_allclose(z.real, z_spice.real, rtol=1e-2)
    np.testing.assert_allclose(z.imag, z_spice.imag, rtol=1e-2)


def test_mos_decap_circuit_against_ngspice(tmp_path: Path) -> None:
    # Source: ngspice AC of the 80-segment expansion of the full MOS decap circuit; 1 %
    require_ngspice()
    nl = mos_decap_circuit(
        c_gate=5e-12,
        r_channel=240.0,
        r_gate=6.0,
        r_access=3.0,
        l_loop=15e-12,
        c_overlap=0.4e-12,
        contacted_ends=2,
    )
    f, z_spice = ac_impedance(render_rlc(ladder_expansion(nl, 80)), "vdd", tmp_path, 1e6, 3e10)
    z = solve_impedance(nl, f)[0]
    np.testing.assert_allclose(np.abs(z), np.abs(z_spice), rtol=1e-2)
    np.testing.assert_allclose(z.real, z_spice.real, rtol=1e-2)


def test_per_layer_mom_circuit_against_ngspice(tmp_path: Path) -> None:
    # Source: ngspice AC of the 40-segment expansion of a three-branch MOM circuit; 1 %
    require_ngspice()
    nl = mom_circuit(
        c_mom=np.array([[1e-12], [2e-12], [0.5e-12]]),
        r_fingers=np.array([[30.0], [12.0], [60.0]]),
        r_vias=np.array([[1.0], [2.0], [0.5]]),
        l_loop=10e-12,
    )
    f, z_spice = ac_impedance(render_rlc(ladder_expansion(nl, 40)), "vdd", tmp_path, 1e7, 5e10)
    z = solve_impedance(nl, f)[0]
    np.testing.assert_allclose(np.abs(z), np.abs(z_spice), rtol=1e-2)
    np.testing.assert_allclose(z.real, z_spice.real, rtol=1e-2)
