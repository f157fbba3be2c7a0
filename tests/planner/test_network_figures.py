"""evaluate_network on the demo block: every corner evaluated, each figure at its own worst
corner, the damping trade consistent, emission ordered as expected; the report renders."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.export.network_report import render_network_html
from celllab.planner.network_figures import NetworkFigures, evaluate_network

from .network_demo import demo_network


@pytest.fixture(scope="module")
def figures(lumen_catalog: Catalog) -> NetworkFigures:
    network, goals = demo_network(lumen_catalog)
    return evaluate_network(network, goals)


def test_every_corner_and_region(figures: NetworkFigures, lumen_catalog: Catalog) -> None:
    assert figures.corners == tuple(lumen_catalog.corners("lumen130"))
    assert figures.z.shape == (len(figures.corners), figures.freq.size, 2, 2)
    for k, reg in enumerate(figures.regions):
        assert set(reg.per_corner_resonances) == set(figures.corners)
        assert any(t.kind == "peak" for t in reg.resonances)
        if reg.check is None:  # the quiet pad ring: no target of its own
            assert figures.regions[k].target == np.inf and reg.check_corner == "-"
            continue
        # policy: the target check at the corner where |Z| / Z_target is worst
        mag = np.abs(figures.z[:, :, k, k])
        inside = (figures.freq >= reg.band[0]) & (figures.freq <= reg.band[1])
        worst = np.max(np.where(inside, mag, 0), axis=1)  # grid, then the refined peaks
        for c, corner in enumerate(figures.corners):
            for r in reg.per_corner_resonances[corner]:
                if r.kind == "peak" and reg.band[0] <= r.frequency <= reg.band[1]:
                    worst[c] = max(worst[c], r.magnitude)
        assert reg.check_corner == figures.corners[int(np.argmax(worst))]
        assert reg.check.worst_ratio == pytest.approx(worst.max() / reg.target, rel=1e-12)
        # each resonance at the corner where its |Z| is highest
        for track in reg.resonances:
            assert track.magnitude == max(r.magnitude for r in track.per_corner.values())
            assert track.per_corner[track.corner].magnitude == track.magnitude
    # the droop figures at their own worst corners, the quiet region's too
    for reg in figures.regions:
        for name in ("first_droop", "worst_droop", "ringing_q"):
            value, corner = reg.droop[name]
            assert corner in figures.corners and np.isfinite(value)


def test_damping_trade(figures: NetworkFigures) -> None:
    trade = figures.damping
    assert trade is not None and figures.damping_ac_power is not None
    assert np.all(trade.ir_drop_after <= trade.ir_drop_limit * (1 + 1e-6))
    assert trade.objective_after <= trade.objective_before + 1e-12
    assert np.all(trade.resistance >= 0)
    assert np.all(figures.damping_ac_power >= 0)
    for reg in figures.regions:
        assert reg.droop_after  # the droop with the resistors was run too


def test_cell_damping_terms(figures: NetworkFigures) -> None:
    for reg in figures.regions:
        for d in reg.cell_damping:
            # score g/(w0 C) of a cell whose circuit is ESR-C-like stays below 1/2 (x/(1+x^2))
            assert 0 <= d.score <= 0.5 + 1e-9
            assert d.total_conductance == pytest.approx(d.count * d.conductance, rel=1e-12)


def test_emission_bands(figures: NetworkFigures) -> None:
    assert set(figures.emission) == {"plan", "no on-die decap", "naive fill"}
    for band in figures.emission_bands:
        # taking the on-die decap away lets more of the harmonics out (common practice, no
        # source); the naive fill may land either way (its resonance moves), so only its
        # bookkeeping is checked
        assert band.change_dB["no on-die decap"] > 0
        assert band.change_dB["naive fill"] == pytest.approx(
            band.level_dBuV["naive fill"] - band.level_dBuV["plan"], rel=1e-12)


def test_report_renders(figures: NetworkFigures) -> None:
    page = render_network_html(figures, "dsp_core supply network (invented demo)")
    assert page.count("<svg") == 3
    assert "entrance resistors" in page and "mac_array" in page and "pad_ring" in page
    assert "Quiet region" in page
