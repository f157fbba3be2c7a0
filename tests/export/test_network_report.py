"""Network report files: Touchstone Z-matrices read back by scikit-rf, CSV read back, the
HTML fragment's content and cautions, atomic writing."""

from __future__ import annotations

import csv
import html
import io
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from celllab.physics.netlist import Element, Netlist
from celllab.planner.network import (
    FillEntry,
    GridLink,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    analysis_frequencies,
    build_network,
)
from celllab.planner.network_figures import NetworkFigures, NetworkGoals, evaluate_network
from celllab.planner.waveforms import Activity

skrf = pytest.importorskip("skrf")

from celllab.export.network_report import (  # noqa: E402
    NETWORK_CAUTION,
    render_droop_csv,
    render_network_html,
    render_z_csv,
    render_z_touchstone,
    write_network_files,
)


def _cell(c: float, esr: float) -> dict[str, Netlist]:
    def nl(scale: float) -> Netlist:
        return Netlist("rc", (Element("R", "esr", "vdd", "x", esr),
                              Element("C", "c", "x", "vss", c * scale)))

    return {"typ": nl(1.0), "slow": nl(0.9)}


def _figures(n_regions: int, droop: bool = True) -> NetworkFigures:
    names = ["alpha", "beta", "gamma"][:n_regions]
    act = Activity(peak_current=0.1, rise_time=2e-10, clock_frequency=1e8,
                   charge_per_cycle=1e-10)
    supply = SupplyNetwork(1.0, 0.01, 1e-9,
                           {n: RegionPath(0.002 * (k + 1), 1e-11) for k, n in enumerate(names)},
                           links=(GridLink(names[0], names[-1], 0.01, 1e-11),)
                           if n_regions > 1 else ())
    regions = [RegionLoad(n, [FillEntry("rc", _cell(1e-12, 500.0 * (k + 1)), 20000)], 1e-9, 0.05,
                          act) for k, n in enumerate(names)]
    goals = NetworkGoals(0.05, 0.02, analysis_frequencies(1e5, 1e10, 20), droop=droop)
    return evaluate_network(build_network(supply, regions), goals)


@pytest.mark.parametrize("n_regions", [1, 2, 3])
def test_touchstone_z_matrix_reads_back(n_regions: int, tmp_path: Path) -> None:
    # Source: scikit-rf's Touchstone reader (v1.1 N-port, Z normalized to R = 1 ohm); rel 1e-9
    figures = _figures(n_regions, droop=False)
    for c, corner in enumerate(figures.corners):
        path = tmp_path / f"z_{corner}.s{n_regions}p"
        path.write_text(render_z_touchstone(figures, corner))
        net = skrf.Network(str(path))
        np.testing.assert_allclose(net.f, figures.freq, rtol=1e-10)
        np.testing.assert_allclose(net.z, figures.z[c], rtol=1e-9, atol=1e-15)
    text = render_z_touchstone(figures, "typ")
    assert "CAUTION" in text and "port 1: region alpha" in text
    with pytest.raises(ValueError, match="corner"):
        render_z_touchstone(figures, "hot")


def test_z_csv_reads_back() -> None:
    figures = _figures(2, droop=False)
    text = render_z_csv(figures)
    assert text.startswith("# celllab") and "CAUTION" in text
    rows = list(csv.DictReader(io.StringIO("\n".join(
        line for line in text.splitlines() if not line.startswith("#")))))
    assert len(rows) == 2 * 2 * 2 * figures.freq.size  # observed x driven x corners x f
    sel = [r for r in rows if r["observed_region"] == "beta" and r["driven_region"] == "alpha"
           and r["corner"] == "slow"]
    z = np.array([complex(float(r["z_real_ohm"]), float(r["z_imag_ohm"])) for r in sel])
    np.testing.assert_array_equal(z, figures.z[1, :, 1, 0])  # round-trip numbers
    assert sel[0]["target_ohm"] == ""
    diag = [r for r in rows if r["observed_region"] == r["driven_region"] == "alpha"]
    assert float(diag[0]["target_ohm"]) == pytest.approx(figures.regions[0].target, rel=1e-15)


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.svgs = 0

    def handle_starttag(self, tag: str, attrs: object) -> None:
        if tag not in ("br", "meta", "img", "path", "use", "rect", "line", "circle", "stop"):
            self.stack.append(tag)
        self.svgs += tag == "svg"

    def handle_startendtag(self, tag: str, attrs: object) -> None:
        self.svgs += tag == "svg"

    def handle_endtag(self, tag: str) -> None:
        if tag in ("path", "use", "rect", "line", "circle", "stop"):
            return
        assert self.stack and self.stack[-1] == tag, (tag, self.stack[-5:])
        self.stack.pop()


def test_html_fragment_and_files(tmp_path: Path) -> None:
    figures = _figures(2)
    page = render_network_html(figures, "Demo")
    parser = _Tags()
    parser.feed(page)
    assert parser.stack == []  # every element closed
    assert parser.svgs == 3  # impedance, droop, emission
    assert page.count(html.escape(NETWORK_CAUTION)) >= 2  # top and bottom
    for text in ("region alpha", "region beta", "each figure at its own worst corner",
                 "dBuV", "first droop", "resonances"):
        assert text in page, text
    droop_text = render_droop_csv(figures)
    header = [line for line in droop_text.splitlines() if not line.startswith("#")][0]
    assert header.split(",")[:3] == ["t_s", "current_A_alpha", "droop_V_alpha_typ"]
    written = write_network_files(figures, tmp_path / "out", "dsp")
    assert sorted(p.name for p in written) == sorted(
        ["dsp_z.csv", "dsp_typ.s2p", "dsp_slow.s2p", "dsp_droop.csv", "dsp.html"])
    assert not list((tmp_path / "out").glob(".*tmp"))  # no temporary files left
    with pytest.raises(ValueError, match="no droop run"):
        render_droop_csv(_figures(1, droop=False))
