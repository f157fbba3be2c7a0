"""Gate leakage per carrier and temperature, and the catalog's TDDB rate, from a deck at its corners."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from celllab.characterization.oxide_stress import gate_leakage_density, tddb_failure_rate_per_area
from celllab.characterization.params import CornerSet
from celllab.deck import load_deck
from celllab.deck.schema import OxideFlavour
from celllab.physics import leakage
from celllab.units import from_si

CORE = np.array(["core"])


def test_holes_use_the_valence_band_parameters(lumen130) -> None:
    # Source: docs/references.md [71] (Lee & Hu 2001): PMOS inversion and p-type accumulation
    # tunnel holes (4.5 eV, 0.32 m0), NMOS and n-type accumulation electrons (3.1 eV, 0.40 m0);
    # at the same oxide voltage the ratio is the WKB ratio of the two carriers; rel 1e-12
    corners = CornerSet.from_deck(lumen130, ["typ_25C"])
    v_ox = np.array([[1.1]])
    j = {role: gate_leakage_density(corners, CORE, np.array([role]), v_ox, v_ox)[0, 0]
         for role in ("nmos", "pmos", "acc_n", "acc_p")}
    eot = lumen130.oxides["core"].eot_m
    expected = leakage.direct_tunneling_current_density(1.1, eot, 3.1, 0.40) / leakage.direct_tunneling_current_density(
        1.1, eot, 4.5, 0.32)
    assert j["nmos"] / j["pmos"] == pytest.approx(float(expected), rel=1e-12)
    assert j["acc_n"] == j["nmos"] and j["acc_p"] == j["pmos"]
    assert 3.0 < j["nmos"] / j["pmos"] < 100.0  # docs/references.md [71]: about a decade [FM window]


def test_gate_leakage_rises_with_temperature_at_the_stated_rate(lumen130) -> None:
    # Source: docs/references.md [73]: (T/T_ref)^2.5 at equal oxide voltage (BSIM-CMG IGT law);
    # 25 -> 125 degC: 2.0608; rel 1e-12 against the formula, 1e-4 against the worked value
    corners = CornerSet.from_deck(lumen130, ["typ_25C", "slow_125C"])
    v_ox = np.array([[1.0, 1.0]])
    j = gate_leakage_density(corners, CORE, np.array(["nmos"]), v_ox, v_ox)[0]
    # slow_125C also thickens the oxide (scale 1.04): compare at the hot corner's own EOT
    eot = np.array([d.oxides["core"].eot_m for d in corners.decks])
    wkb = leakage.direct_tunneling_current_density(1.0, eot, 3.1, 0.40)
    ratio = (j[1] / wkb[1]) / (j[0] / wkb[0])
    assert ratio == pytest.approx((398.15 / 298.15) ** 2.5, rel=1e-12)
    assert ratio == pytest.approx(2.0608, rel=1e-4)


def test_reference_model_holes(demo_deck_paths) -> None:
    # Source: definition of the reference model: at the reference thickness and voltage the hole
    # density is the deck's hole reference (quill28hk core: 0.12 vs 1.0 A/cm^2); without a hole
    # reference, the electron reference times the WKB hole/electron ratio; rel 1e-9
    deck = load_deck(demo_deck_paths["quill28hk"][0])
    corners = CornerSet.from_deck(deck, ["typ_25C"])
    v = np.array([[1.0]])
    jn, jp = (gate_leakage_density(corners, CORE, np.array([r]), v, v)[0, 0] for r in ("nmos", "pmos"))
    assert jp / jn == pytest.approx(0.12 / 1.0, rel=1e-9)
    core = deck.oxides["core"]
    no_hole_ref = core.model_copy(update={"tunnelling": core.tunnelling.model_copy(update={"hole_j_ref_A_per_cm2": None})})
    bare = CornerSet.from_deck(deck.model_copy(update={"oxides": {**deck.oxides, "core": no_hole_ref}}), ["typ_25C"])
    jn2, jp2 = (gate_leakage_density(bare, CORE, np.array([r]), v, v)[0, 0] for r in ("nmos", "pmos"))
    eot = deck.oxides["core"].eot_m
    wkb = leakage.direct_tunneling_current_density(1.0, eot, 4.5, 0.32) / leakage.direct_tunneling_current_density(
        1.0, eot, 3.1, 0.40)
    assert jn2 == pytest.approx(jn, rel=1e-12)
    assert jp2 / jn2 == pytest.approx(float(wkb), rel=1e-9)


def test_old_electron_fields_are_read_with_a_warning(lumen130) -> None:
    data = lumen130.oxides["core"].model_dump(mode="json")
    data.pop("tunnelling", None)  # left out of the canonical dump at its defaults
    data["leakage"].update(barrier_eV=3.0, mass_ratio=0.42)
    with pytest.warns(FutureWarning, match="leakage.barrier_eV is now tunnelling.electron_barrier_eV"):
        ox = OxideFlavour.model_validate(data)
    assert (ox.tunnelling.electron_barrier_eV, ox.tunnelling.electron_mass_ratio) == (3.0, 0.42)
    assert ox.tunnelling.hole_barrier_eV == 4.5
    data["tunnelling"] = {"electron_barrier_eV": 3.2}
    with warnings.catch_warnings(), pytest.raises(ValueError, match="disagree"):
        warnings.simplefilter("ignore", FutureWarning)
        OxideFlavour.model_validate(data)


def test_tddb_rate_per_area_worked_example(lumen130) -> None:
    # Source: docs/references.md [86] [DF]: beta 1.5, eta_ref 1e12 s at use conditions on
    # A_ref = 100 um^2; over 10 Julian years the average rate of 1 mm^2 is 639.52 FIT; rel 1e-4.
    # Use conditions = reference stress (typ_25C at the core supply), so no acceleration applies.
    deck = lumen130.with_changes({
        "oxides.core.reliability.weibull_beta": 1.5, "oxides.core.reliability.eta_ref_s": 1e12,
        "oxides.core.reliability.area_ref_um2": 100.0, "oxides.core.reliability.v_ref_V": 1.2,
        "oxides.core.reliability.t_ref_C": 25.0})
    corners = CornerSet.from_deck(deck, ["typ_25C"])
    rate = tddb_failure_rate_per_area(corners, CORE, np.array([[1.2]]))
    assert from_si(float(rate[0, 0]), "FIT/mm^2") == pytest.approx(639.52, rel=1e-4)
    # weakest link: the rate per area does not depend on how much area the cell has, and it
    # rises steeply with the gate voltage (power law n = 42 in this deck)
    hotter = tddb_failure_rate_per_area(corners, CORE, np.array([[1.32]]))
    assert hotter[0, 0] / rate[0, 0] == pytest.approx(1.1 ** (42 * 1.5), rel=1e-9)
