"""The analysed band per deck; SRF and bandwidth above it from the circuit, or stored as bounds."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from celllab.catalog import open_catalog
from celllab.cells import CellSpec, resolve
from celllab.cli.main import main
from celllab.engine import characterize, sweep_frequencies
from celllab.physics.netlist import solve_impedance
from celllab.records import corner_metrics
from celllab.topologies import common
from celllab.units import from_si, to_si


def test_sweep_is_the_decks_band(lumen130) -> None:
    # Source: the deck's [analysis] block (lumen130: 0.1 MHz to 20 GHz, 20 per decade)
    band = lumen130.analysis
    f = sweep_frequencies(band)
    assert f[0] == pytest.approx(to_si(band.f_min_MHz, "MHz"), rel=1e-12)
    assert f[-1] == pytest.approx(to_si(band.f_max_GHz, "GHz"), rel=1e-12)
    assert len(f) == round(math.log10(f[-1] / f[0]) * band.points_per_decade) + 1
    run = characterize(lumen130, [CellSpec(name="n", topology="nmos_inversion", oxide="core", width_sites=8,
                                           fingers=2)], corners=["typ_25C"])
    np.testing.assert_array_equal(run.cells[0].corners[0].response.freq_Hz, f)


def test_srf_above_the_band_is_the_circuits_resonance(lumen130) -> None:
    # Source: scipy brentq on Im Z of the cell's own stored equivalent circuit (nodal solution):
    # the SRF above the band is that root, flagged as beyond the band, not a bound; rel 1e-6
    spec = CellSpec(name="n", topology="nmos_inversion", oxide="core", width_sites=16, fingers=4)
    cell = characterize(lumen130, [spec], corners=["typ_25C"]).cells[0]
    corner = cell.corners[0]
    srf = to_si(corner.metrics["srf_GHz"], "GHz")
    assert srf > corner.response.freq_Hz[-1] and corner.metrics["srf_is_bound"] == 0.0
    assert any(f.startswith("srf_beyond_band") for f in corner.flags)
    net = cell.netlist["typ_25C"]
    root = brentq(lambda f: float(solve_impedance(net, [f])[0, 0].imag), srf / 1.5, srf * 1.5, rtol=1e-14)
    assert srf == pytest.approx(root, rel=1e-6)
    # the usable bandwidth never exceeds the SRF, and C_eff of the RC network (loop inductance
    # removed) has fallen to C/sqrt(2) there unless the SRF came first
    assert corner.metrics["bandwidth_GHz"] <= corner.metrics["srf_GHz"] * (1 + 1e-12)


def test_no_resonance_below_the_lumped_limit_is_a_bound(lumen130) -> None:
    # Source: definition of the bound: where Im Z stays capacitive up to the frequency at which
    # the cell is a tenth of a wavelength (common.lumped_limit), that frequency is stored with
    # srf_is_bound = 1 and flagged; checked on a dense grid of the stored circuit
    spec = CellSpec(name="x", topology="cross_coupled", oxide="core", width_sites=32, fingers=1)
    geo = resolve(spec, lumen130)
    cell = characterize(lumen130, [spec], corners=["typ_25C"]).cells[0]
    m, flags = cell.corners[0].metrics, cell.corners[0].flags
    limit = float(common.lumped_limit(lumen130, [geo])[0])
    assert m["srf_is_bound"] == 1.0
    assert to_si(m["srf_GHz"], "GHz") == pytest.approx(limit, rel=1e-12)
    assert any(f.startswith("srf_is_bound") for f in flags)
    grid = np.geomspace(cell.corners[0].response.freq_Hz[-1], limit, 200)
    assert np.all(solve_impedance(cell.netlist["typ_25C"], grid)[0].imag < 0)
    # a 10 um cell in eps_r 3.9 at a tenth of a wavelength: 1.5 THz [DF]
    assert from_si(3e8 / (10 * math.sqrt(3.9) * 10e-6), "GHz") == pytest.approx(1519, rel=1e-3)


def test_bounds_filter_and_show_marked(lumen130, tmp_path, capsys) -> None:
    specs = [CellSpec(name="x", topology="cross_coupled", oxide="core", width_sites=32, fingers=1),
             CellSpec(name="n", topology="nmos_inversion", oxide="core", width_sites=16, fingers=4)]
    run = characterize(lumen130, specs)
    path = tmp_path / "cat.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(run)
        bounded = {r["name"] for r in cat.query(corner=None, where="srf_is_bound")}
        assert bounded == {"x"}
        assert {r["name"] for r in cat.query(corner=None, where="not srf_is_bound")} == {"n"}
        # worst/best rows: the flag of the corner that gives the extreme (same rule in Python)
        for kind in ("worst", "best"):
            for row in cat.query(corner=kind):
                cell = next(c for c in run.cells if c.name == row["name"])
                twin = corner_metrics(cell, kind)
                assert row["srf_GHz"] == pytest.approx(twin["srf_GHz"], rel=1e-12)
                assert row["srf_is_bound"] == twin["srf_is_bound"]
    assert main(["rank", "--catalog", str(path), "--columns", "name,srf_GHz,srf_is_bound", "--corner", "typ_25C"]) == 0
    out = capsys.readouterr().out
    line_x = next(line for line in out.splitlines() if line.startswith("x "))
    line_n = next(line for line in out.splitlines() if line.startswith("n "))
    assert "≥" in line_x and "≥" not in line_n
    # the flag is a filter of the command line too: bounds left out of a ranking by srf_GHz
    assert main(["rank", "--catalog", str(path), "--columns", "name,srf_GHz", "--corner", "typ_25C",
                 "--where", "not srf_is_bound"]) == 0
    names = [line.split()[0] for line in capsys.readouterr().out.splitlines() if line[:2] in ("x ", "n ")]
    assert names == ["n"]
    assert main(["show", "--catalog", str(path), "x"]) == 0
    shown = capsys.readouterr().out
    assert "analysed band" in shown and "≥" in next(line for line in shown.splitlines() if line.startswith("srf_GHz"))
