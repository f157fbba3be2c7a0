"""The fill-level questions: wear-out of a fill, the affordable area, and ESD exposure with the
fill's capacitance on the rail."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.cells import CellSpec
from celllab.characterization.esd_events import EsdEvent
from celllab.deck import load_deck
from celllab.fill_risk import cell_oxide_risk, esd_exposure, fill_oxide_risk
from celllab.physics import tddb

DECK = load_deck(Path(__file__).resolve().parents[1] / "process_decks" / "quill28hk.toml")
TIED = CellSpec(name="tied", topology="nmos_inversion", oxide="core", width_sites=16, fingers=2)
PAIR = CellSpec(name="pair", topology="cross_coupled", oxide="core", width_sites=16, fingers=2)
MOM = CellSpec(name="mom", topology="mom", width_sites=16)
HBM = EsdEvent("hbm", 2000.0)


def test_fill_fraction_follows_the_weakest_link_law() -> None:
    # Weakest link: a fill of area A fails with F = 1 - exp(-A h); so 1 - F(10 A) = (1 - F(A))^10
    # (area scaling 1 - F2 = (1 - F1)^(A2/A1), Degraeve et al. 1998); rel 1e-9
    one = fill_oxide_risk(DECK, [TIED], 0.3, life_years=10, temperature_C=125)
    ten = fill_oxide_risk(DECK, [TIED], 3.0, life_years=10, temperature_C=125)
    f1, f10 = one.failure_ppm * 1e-6, ten.failure_ppm * 1e-6
    np.testing.assert_allclose(1 - f10, (1 - f1) ** 10, rtol=1e-9)
    # FIT = F x 1e9 / hours (JESD85)
    np.testing.assert_allclose(one.fit, tddb.average_fit(f1, one.mission.life_s), rtol=1e-12)
    assert one.mission.temperature_K == pytest.approx(398.15)


def test_affordable_area_reaches_exactly_the_target() -> None:
    risk = fill_oxide_risk(DECK, [TIED], 0.3, target_ppm=1.0, temperature_C=150)
    j = risk.corners.index(risk.worst_corner)
    at_limit = fill_oxide_risk(DECK, [TIED], float(risk.affordable_footprint_mm2[j]), target_ppm=1.0,
                               temperature_C=150)
    assert at_limit.failure_ppm[j] == pytest.approx(1.0, rel=1e-6)
    assert at_limit.within_target[j] or at_limit.failure_ppm[j] == pytest.approx(1.0)


def test_mixed_fill_adds_the_hazards_of_its_cells() -> None:
    # hazards add over cells: -ln(1 - F_mix) = -ln(1 - F_a) - ln(1 - F_b); rel 1e-9
    mix = fill_oxide_risk(DECK, [TIED, PAIR, MOM], {"tied": 0.2, "pair": 0.1, "mom": 0.05})
    a = fill_oxide_risk(DECK, [TIED], 0.2)
    b = fill_oxide_risk(DECK, [PAIR], 0.1)
    h = lambda r: -np.log1p(-r.failure_ppm * 1e-6)  # noqa: E731
    np.testing.assert_allclose(h(mix), h(a) + h(b), rtol=1e-9)
    assert "survives" in mix.summary() and "licensed practice" in mix.summary()


def test_cell_figures_per_corner() -> None:
    tied, pair, mom = cell_oxide_risk(DECK, [TIED, PAIR, MOM])
    assert len(tied.fit_per_mm2) == len(DECK.corners)
    assert np.all(tied.fit_per_mm2 > 0) and np.all(np.isnan(mom.fit_per_mm2))
    # per mm^2 of footprint = per mm^2 of gate x gate share of the footprint
    np.testing.assert_allclose(tied.fit_per_mm2_footprint,
                               tied.fit_per_mm2 * tied.gate_area_um2 / tied.cell_area_um2, rtol=1e-9)
    # the ESD-safe pair draws far less from a broken oxide than the tied cell
    assert np.all(pair.fault_current_mA < 0.2 * tied.fault_current_mA)


@pytest.mark.parametrize(("fill", "says"), [
    ({"nothing": 1.0}, "no cell"),
    ({"tied": -1.0}, "must be >= 0"),
    ({"tied": 0.0}, "at least one > 0"),
])
def test_bad_fill_is_refused(fill: dict, says: str) -> None:
    with pytest.raises(ValueError, match=says):
        fill_oxide_risk(DECK, [TIED], fill)


def test_single_area_needs_a_single_cell() -> None:
    with pytest.raises(ValueError, match="mapping"):
        fill_oxide_risk(DECK, [TIED, PAIR], 0.3)


def test_fill_capacitance_on_the_rail_lowers_the_hbm_peak() -> None:
    # more capacitance on the rail charges more slowly while the clamp responds: the peak can
    # only fall (and the tied oxide follows the rail)
    bare, = esd_exposure(DECK, [TIED], events=[HBM], corners=["typ_25C"])
    filled, = esd_exposure(DECK, [TIED], events=[HBM], corners=["typ_25C"], fill_mm2=1.0)
    assert filled.fill_capacitance_nF > 1.0
    assert filled.peak_rail_V[0, 0] <= bare.peak_rail_V[0, 0] + 1e-6
    assert filled.peak_oxide_V[0, 0] == pytest.approx(filled.peak_rail_V[0, 0], rel=1e-3)
    assert filled.margin[0, 0] == pytest.approx(filled.v_bd_pulse_V[0] / abs(filled.peak_oxide_V[0, 0]))
    assert "HBM +2000 V" in filled.summary()


def test_cell_without_gate_oxide_has_no_oxide_stress() -> None:
    mom, = esd_exposure(DECK, [MOM], events=[HBM], corners=["typ_25C"])
    assert np.isnan(mom.peak_oxide_V[0, 0]) and mom.margin[0, 0] == np.inf and mom.survives[0, 0]
    assert mom.notes[0][0] == "no gate oxide"


def test_events_must_be_events() -> None:
    with pytest.raises(ValueError, match="not an EsdEvent"):
        esd_exposure(DECK, [TIED], events=["hbm 2kV"])  # type: ignore[list-item]


def test_headline_names_the_worst_corner_only_where_corners_differ() -> None:
    """Wear-out reads the mission and the deck's nominal oxide: equal at every corner, so the
    headline says so instead of naming the first corner as "worst"; where the corners differ
    the worst one is named."""
    from dataclasses import replace

    risk = fill_oxide_risk(DECK, [TIED], 0.3, life_years=10, temperature_C=125)
    assert np.allclose(risk.failure_ppm, risk.failure_ppm[0])
    assert risk.corner_label == "every corner" and "every corner:" in risk.summary()
    ppm = np.array(risk.failure_ppm, dtype=float)
    ppm[-1] *= 2.0
    differing = replace(risk, failure_ppm=ppm, worst_corner=risk.corners[-1])
    assert differing.corner_label == f"worst corner {risk.corners[-1]}"
    assert f"worst corner {risk.corners[-1]}: " in differing.summary()
