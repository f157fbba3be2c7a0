"""SPICE subcircuit export, simulated by ngspice and compared with the tool's own solver."""

from __future__ import annotations

import math
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.export import CAUTION
from celllab.export.spice import (
    LADDER_X_MAX,
    auto_segments,
    metric_model_netlist,
    render_spice_library,
    render_spice_subckt,
    spice_name,
    spice_number,
    stored_circuits,
    write_spice,
)
from celllab.physics.netlist import Element, Netlist, solve_impedance

NGSPICE = shutil.which("ngspice")
needs_ngspice = pytest.mark.skipif(
    NGSPICE is None, reason="ngspice not found on PATH (Debian package 'ngspice')"
)
NUMBER = re.compile(r"^-?\d(\.\d+)?e-?\d+$")


def run_ngspice(tmp_path: Path, body: str, vectors: list[str], analysis: str) -> np.ndarray:
    """Run ``ngspice -b`` on a deck; return the wrdata table (freq, re, im per vector)."""
    out = tmp_path / "wrdata.txt"
    deck = tmp_path / "check.cir"
    deck.write_text(
        "celllab export check\n"
        f"{body}\n"
        ".control\nset wr_singlescale\n"
        f"{analysis}\nwrdata {out.name} {' '.join(vectors)}\n.endc\n.end\n"
    )
    proc = subprocess.run(
        [NGSPICE, "-b", deck.name],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    log = proc.stdout + proc.stderr
    assert out.exists(), log
    assert "error" not in log.lower(), log
    table = np.atleast_2d(np.loadtxt(out))
    assert table.shape[1] == 1 + 2 * len(vectors), log
    return table


def simulate_port_impedance(
    tmp_path: Path, library_file: Path, subckt: str, sweep: str = "dec 10 1e6 1e11"
) -> tuple:
    body = f".include {library_file.name}\nX1 port 0 {subckt}\nI1 0 port AC 1"
    table = run_ngspice(tmp_path, body, ["v(port)"], f"ac {sweep}")
    return table[:, 0], table[:, 1] + 1j * table[:, 2]


@needs_ngspice
@pytest.mark.parametrize("corner", ["typ_25C", "slow_125C"])
@pytest.mark.parametrize("index", [0, 1, 2], ids=["mos_rcline_L", "cross_coupled", "mom_zero_R"])
def test_ngspice_reproduces_the_circuit_impedance(tmp_path, library, deck_name, index, corner):
    # Source: ngspice (Debian) AC analysis with a 1 A AC current into the port, V = Z,
    # against celllab.physics.netlist.solve_impedance (exact RC lines) on the same Netlist;
    # |Z_spice / Z - 1| <= 1 %, which bounds |Z| to 1 % and the phase to 0.01 rad.
    cell = library[index]
    library_file = write_spice(tmp_path / "cells.lib", [cell], deck_name, corner)
    freq, z_spice = simulate_port_impedance(tmp_path, library_file, spice_name(cell.name))
    assert freq[0] == pytest.approx(1e6) and freq[-1] == pytest.approx(1e11)
    z_tool = solve_impedance(stored_circuits(cell)[corner], freq)[0]
    error = np.abs(z_spice / z_tool - 1.0)
    assert error.max() <= 0.01, f"worst at {freq[error.argmax()]:.3g} Hz: {error.max():.3%}"
    # the same sweep points as the stored response: the export reproduces it too
    np.testing.assert_allclose(freq, cell.corner(corner).response.freq_Hz, rtol=1e-6)
    assert np.abs(z_spice / cell.corner(corner).response.z_ohm - 1).max() <= 0.01


def _cell_with(make_cell, netlist: Netlist, name: str = "HOSTILE"):
    cell = make_cell("mom", name=name)
    cell.netlist = netlist
    return cell


@needs_ngspice
def test_ngspice_number_reading(tmp_path):
    # Source: docs/references.md [121] [DF] (SPICE2 / ngspice manual scale suffixes): '1MEG' -> 1e6,
    # '1M' -> 1e-3 (milli), '1F' -> 1e-15; and our exponent format is read as intended.
    values = [1e6, 1e-3, 1e-15, 2.5e-12, 123.456, 4.7e9, 0.1, 33.0]
    texts = ["1MEG", "1M", "1F", "1FF", "10u"] + [spice_number(v) for v in values]
    expected = [1e6, 1e-3, 1e-15, 1e-15, 1e-5] + values
    lines = []
    for k, text in enumerate(texts):
        lines += [f"R{k} n{k} 0 {text}", f"I{k} 0 n{k} AC 1"]
    table = run_ngspice(
        tmp_path, "\n".join(lines), [f"v(n{k})" for k in range(len(texts))], "ac lin 1 1e3 1e3"
    )
    read = table[0, 1::2]
    np.testing.assert_allclose(read, expected, rtol=1e-7)


def test_hostile_names_are_renamed(make_cell):
    netlist = Netlist(
        "hostile",
        (
            Element("R", "a.b", "vdd", "0", 3.0),
            Element("C", "c-1", "0", "vss", 40e-15),
            Element("R", "r2", "vdd", "GND", 7.0),
            Element("C", "c2", "GND", "vss", 25e-15),
        ),
    )
    text = render_spice_subckt(_cell_with(make_cell, netlist))
    nodes = set()
    for line in text.splitlines():
        if line[:1].upper() in "RCLV" and not line.startswith("*"):
            nodes.update(line.split()[1:3])
    assert not nodes & {"0", "gnd", "GND"}
    assert {"vdd", "vss"} <= nodes


@needs_ngspice
def test_ngspice_after_renaming(tmp_path, make_cell):
    # Source: ngspice AC vs solve_impedance on the same Netlist; 1 %.
    netlist = Netlist(
        "hostile",
        (
            Element("R", "a.b", "vdd", "0", 3.0),
            Element("C", "c-1", "0", "vss", 40e-15),
            Element("R", "r2", "vdd", "gnd", 7.0),
            Element("C", "c2", "gnd", "vss", 25e-15),
            Element("C", "open", "gnd", "vss", 0.0),
        ),
    )
    cell = _cell_with(make_cell, netlist, name="9 bad name")
    library_file = write_spice(tmp_path / "h.lib", [cell])
    freq, z_spice = simulate_port_impedance(tmp_path, library_file, spice_name(cell.name))
    z_tool = solve_impedance(netlist, freq)[0]
    assert np.abs(z_spice / z_tool - 1).max() <= 0.01


def test_header_comments(library, deck_name):
    cell = library[0]
    corner = cell.corners[1].corner
    text = render_spice_subckt(cell, corner, deck_name=deck_name, model_version="m-9.9")
    header = []
    for line in text.splitlines():
        if line.startswith(".subckt"):
            break
        assert line.startswith("*"), line
        header.append(line[1:].strip())
    joined = " ".join(header)
    assert f"deck: {deck_name}" in joined
    assert f"corner {corner}" in joined
    assert "model version: m-9.9" in joined
    assert "estimate" in joined
    assert " ".join(CAUTION.split()) in joined
    assert max(len(line) for line in text.splitlines() if line.startswith("*")) <= 100


def test_subckt_structure(library):
    for cell in library:
        text = render_spice_subckt(cell)
        lines = [line for line in text.splitlines() if not line.startswith("*")]
        name = spice_name(cell.name)
        assert lines[0] == f".subckt {name} vdd vss"
        assert lines[-1] == f".ends {name}"
        names = [line.split()[0].lower() for line in lines[1:-1]]
        assert len(names) == len(set(names))
        for line in lines[1:-1]:
            fields = line.split()
            assert fields[0][0] in "RCLV" and len(fields) == 4, line
            assert NUMBER.match(fields[3]) or fields[3] == "0", line


def test_ladder_length_follows_the_rule(library):
    # Common practice, no source: N from omega_max R C / N^2 <= 0.03 (the ladder's own
    # error is then ~0.2 %, see the ngspice checks above).
    cell = library[0]
    netlist = stored_circuits(cell)["typ_25C"]
    line = netlist.element("channel")
    n = auto_segments(netlist, 1e11)
    x = 2 * math.pi * 1e11 * line.value * line.c_total
    assert x / n**2 <= LADDER_X_MAX < x / (n - 1) ** 2 or n == 4
    text = render_spice_subckt(cell, n_segments=7)
    assert sum(1 for ln in text.splitlines() if ln.startswith("Cchannel_c")) == 7


def test_zero_values(make_cell):
    netlist = Netlist(
        "z",
        (
            Element("R", "short", "vdd", "a", 0.0),
            Element("L", "none", "a", "b", 0.0),
            Element("C", "cap", "b", "vss", 1e-13),
            Element("C", "empty", "b", "vss", 0.0),
        ),
    )
    text = render_spice_subckt(_cell_with(make_cell, netlist))
    body = [ln for ln in text.splitlines() if not ln.startswith(("*", "."))]
    assert [ln.split()[0][0] for ln in body] == ["V", "V", "C"]


def test_multi_variant_netlists_are_refused(make_cell):
    netlist = Netlist("two", (Element("C", "c", "vdd", "vss", np.array([1e-15, 2e-15])),))
    with pytest.raises(ValueError, match="variants"):
        render_spice_subckt(_cell_with(make_cell, netlist))


def test_library_names_are_unique(make_cell):
    cells = [
        make_cell("mom", name="a.b"),
        make_cell("mom", name="a-b"),
        make_cell("mom", name="A_B"),
    ]
    text = render_spice_library(cells, "deck")
    names = [ln.split()[1] for ln in text.splitlines() if ln.startswith(".subckt")]
    assert len({n.lower() for n in names}) == 3
    assert ".end\n" not in text


@pytest.mark.parametrize(
    ("text", "expected"),
    [("ND_W2", "ND_W2"), ("XCP.4x2-core", "XCP_4x2_core"), ("9lives", "c_9lives"), ("", "x")],
)
def test_spice_name(text, expected):
    assert spice_name(text) == expected


@pytest.mark.parametrize(
    ("value", "text"),
    [(1.234e-15, "1.234e-15"), (1e6, "1e6"), (1e-3, "1e-3"), (0.0, "0e0"), (-2.5e-12, "-2.5e-12")],
)
def test_spice_number_examples(value, text):
    assert spice_number(value) == text


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_spice_number_is_plain_and_exact(value):
    # Source: Python float(); a plain exponent float carries no SPICE scale suffix.
    text = spice_number(value)
    assert NUMBER.match(text), text
    assert float(text) == value


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_spice_number_refuses_non_finite(value):
    with pytest.raises(ValueError):
        spice_number(value)


def test_one_circuit_is_matched_to_its_corner(make_cell):
    # A single Netlist (not a mapping) is labelled with the corner whose Z(f) it reproduces.
    cell = make_cell("mos")
    cell.netlist = stored_circuits(cell)["slow_125C"]
    text = render_spice_subckt(cell, "fast_m40C")
    assert "circuit corner: slow_125C (reproduces its stored Z(f))" in text
    assert "corner fast_m40C (T = -40 degC" in text


def test_per_corner_circuits(make_cell):
    # A mapping corner -> Netlist: the chosen corner's own circuit is exported.
    cell = make_cell("mom")
    text = render_spice_subckt(cell, "slow_125C")
    assert "circuit corner: slow_125C" in text
    deviation = re.search(r"max \|dZ/Z\| = (\S+) %", text)
    assert deviation is not None and float(deviation.group(1)) < 1e-9
    assert "Resr n_b n_c 2.7e0" in text
    assert "Resr n_b n_c 2e0" in render_spice_subckt(cell, "typ_25C")
    with pytest.raises(KeyError):
        render_spice_subckt(cell, "no_such_corner")


def test_metric_model_without_a_stored_circuit(make_cell):
    # Source: series R-L-C impedance Z = R + j w L + 1/(j w C) (circuit theory textbook
    # formula); rel 1e-9. The metrics below describe the MOM cell's circuit exactly.
    cell = make_cell("mom")
    typ = cell.corners[0]
    typ.metrics.update(cap_fF=50.0, esr_ohm=2.0, esl_pH=3.0, leakage_nA=math.nan)
    cell.netlist = None
    model = metric_model_netlist(cell)
    w = 2 * np.pi * typ.response.freq_Hz
    expected = 2.0 + 1j * w * 3e-12 + 1.0 / (1j * w * 50e-15)
    np.testing.assert_allclose(solve_impedance(model, typ.response.freq_Hz)[0], expected, rtol=1e-9)
    text = render_spice_subckt(cell)
    header = " ".join(ln[1:].strip() for ln in text.splitlines() if ln.startswith("*"))
    assert "metric model of cell" in header
    assert "circuit corner: none stored" in header
    assert "not the cell's equivalent circuit" in header
    body = [ln.split()[0][0] for ln in text.splitlines() if not ln.startswith(("*", "."))]
    assert body == ["L", "R", "C"]


def test_metric_model_needs_a_capacitance(make_cell):
    cell = make_cell("mom")
    cell.netlist = None
    cell.corners[0].metrics["cap_fF"] = math.nan
    with pytest.raises(ValueError, match="cap_fF"):
        render_spice_subckt(cell)


@needs_ngspice
def test_ngspice_on_engine_cells(tmp_path, deck_dir, lumen130):
    # Source: ngspice AC vs solve_impedance on circuits the engine builds for the invented
    # lumen130 demo deck, one cell per topology; 1 %.
    engine = pytest.importorskip("celllab.engine")
    from celllab.cells import load_cells

    specs = load_cells(deck_dir / "cells" / "lumen130_cells.toml", lumen130)
    first: dict[str, object] = {}
    for spec in specs:
        first.setdefault(spec.topology, spec)
    run = engine.characterize(lumen130, list(first.values()))
    assert {c.topology for c in run.cells} == set(first)
    for cell in run.cells:
        for corner, netlist in stored_circuits(cell).items():
            library_file = write_spice(tmp_path / "engine.lib", [cell], run.deck_name, corner, force=True)
            band = cell.corner(corner).response.freq_Hz  # the ladder is sized to the deck's band
            freq, z_spice = simulate_port_impedance(
                tmp_path, library_file, spice_name(cell.name), f"dec 10 {band[0]:.6e} {band[-1]:.6e}"
            )
            z_tool = solve_impedance(netlist, freq)[0]
            error = np.abs(z_spice / z_tool - 1.0)
            assert error.max() <= 0.01, (cell.topology, corner, float(error.max()))


def test_header_marks_a_lower_bound(make_cell):
    # a self-resonance not found below the lumped limit is stored as a bound (srf_is_bound) and
    # the file header says so, as every other view does
    cell = make_cell("mom")
    cell.corners[0].metrics.update(srf_GHz=1500.0, srf_is_bound=1.0)
    text = render_spice_subckt(cell, cell.corners[0].corner)
    assert "srf_GHz = ≥1500 GHz" in text
    cell.corners[0].metrics.update(srf_is_bound=0.0)
    assert "srf_GHz = 1500 GHz" in render_spice_subckt(cell, cell.corners[0].corner)
