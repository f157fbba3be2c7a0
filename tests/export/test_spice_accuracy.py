"""The SPICE export's R-C ladders follow the accuracy asked, or say they are coarser.

References: the exact impedance of a uniform RC line (hyperbolic cotangent form, as the
nodal solver stamps it) and ngspice (Debian) AC analysis of the exported subcircuit.
"""

from __future__ import annotations

import re
from dataclasses import replace

import numpy as np
import pytest

from celllab.export.spice import (
    DEFAULT_ACCURACY,
    LADDER_ERROR_PER_X,
    auto_segments,
    ladder_deviation,
    render_spice_subckt,
    spice_name,
)
from celllab.physics.netlist import Element, Netlist, ladder_expansion, solve_impedance
from celllab.records import FrequencyResponse

from .test_spice import needs_ngspice, simulate_port_impedance

F_MAX = 1e11


def long_line() -> Netlist:
    """An invented long, resistive gate line: omega R C ~ 6e4 at 100 GHz (needs ~1 500 segments)."""
    return Netlist(
        "long",
        (
            Element("R", "rsd", "vdd", "a", 5.0),
            Element("RCLINE", "channel", "a", "vss", 2e4, c_total=5e-12, contacted_ends=1),
        ),
        ("vdd", "vss"),
    )


def long_cell(make_cell):
    netlist = long_line()
    freq = np.logspace(6, 11, 41)
    z = solve_impedance(netlist, freq)[0]
    cell = make_cell("mos")
    first = replace(cell.corners[0], response=FrequencyResponse(freq, z))
    return replace(cell, corners=[first], netlist={first.corner: netlist})


@pytest.mark.parametrize("ends", [1, 2])
@pytest.mark.parametrize("n", [4, 16, 64])
def test_error_per_x_bounds_the_ladder(ends, n):
    # Source: exact uniform RC line impedance (Z0 coth(gamma l), stamped by the nodal solver)
    # against its midpoint ladder: |dZ/Z| <= LADDER_ERROR_PER_X * omega R C / N^2 for x <= 0.2.
    net = Netlist("t", (Element("RCLINE", "ch", "a", "b", 100.0, c_total=1e-13,
                                contacted_ends=ends),), ("a", "b"))
    x = np.array([0.002, 0.01, 0.03, 0.07, 0.15, 0.2])
    freq = x * n * n / (100.0 * 1e-13) / (2 * np.pi)
    exact = solve_impedance(net, freq)[0]
    ladder = solve_impedance(ladder_expansion(net, n), freq)[0]
    assert np.all(np.abs(ladder / exact - 1) <= LADDER_ERROR_PER_X * x)


@pytest.mark.parametrize("accuracy", [0.02, 0.005, 0.001])
def test_segments_follow_the_accuracy(accuracy):
    net = long_line()
    n = auto_segments(net, F_MAX, accuracy)
    assert ladder_deviation(net, F_MAX, n) <= accuracy < ladder_deviation(net, F_MAX, n - 1)


def test_default_accuracy_needs_more_than_a_thousand_segments(make_cell):
    text = render_spice_subckt(long_cell(make_cell))
    n = sum(1 for ln in text.splitlines() if ln.startswith("Cchannel_c"))
    assert n == auto_segments(long_line(), F_MAX) > 1000
    assert "COARSER" not in text


def test_segment_limit_is_reported(make_cell):
    text = render_spice_subckt(long_cell(make_cell), max_segments=100)
    assert sum(1 for ln in text.splitlines() if ln.startswith("Cchannel_c")) == 100
    flat = " ".join(ln.lstrip("* ") for ln in text.splitlines() if ln.startswith("*"))
    assert "COARSER" in flat and f"{100 * DEFAULT_ACCURACY:.3g} % asked" in flat


def test_accuracy_must_be_positive():
    with pytest.raises(ValueError, match="accuracy"):
        auto_segments(long_line(), F_MAX, 0.0)


@needs_ngspice
@pytest.mark.parametrize("accuracy", [None, 0.01])
def test_ngspice_within_two_percent_of_the_line(tmp_path, make_cell, accuracy):
    # Source: ngspice AC analysis of the exported subcircuit vs the tool's Z(f) of the exact
    # line; the export must hold 2 % at every swept frequency up to 100 GHz.
    cell = long_cell(make_cell)
    library_file = tmp_path / "long.lib"
    library_file.write_text(render_spice_subckt(cell, accuracy=accuracy))
    freq, z_spice = simulate_port_impedance(tmp_path, library_file, spice_name(cell.name),
                                            "dec 10 1e6 1e11")
    z_tool = solve_impedance(long_line(), freq)[0]
    assert np.max(np.abs(z_spice / z_tool - 1)) <= 0.02


@needs_ngspice
def test_ngspice_coarse_export_within_its_stated_deviation(tmp_path, make_cell):
    # Source: ngspice AC; a ladder capped at 300 segments deviates by no more than the header says.
    cell = long_cell(make_cell)
    text = render_spice_subckt(cell, max_segments=300)
    stated = float(re.search(r"line (\S+) % at", " ".join(text.split("\n* "))).group(1)) / 100
    library_file = tmp_path / "coarse.lib"
    library_file.write_text(text)
    freq, z_spice = simulate_port_impedance(tmp_path, library_file, spice_name(cell.name),
                                            "dec 10 1e6 1e11")
    z_tool = solve_impedance(long_line(), freq)[0]
    assert DEFAULT_ACCURACY < np.max(np.abs(z_spice / z_tool - 1)) <= stated
