"""The cross-coupled pair uses the tied device's charge and mobility model at its own bias."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.cells import CellSpec, resolve
from celllab.characterization.mos import characterize_mos
from celllab.characterization.params import CornerSet
from celllab.engine import FREQ_HZ
from celllab.physics import cross_coupled as pair
from celllab.topologies import common
from celllab.topologies.cross_coupled import evaluate


def _pair_group(deck, corners):
    spec = CellSpec(name="x", topology="cross_coupled", oxide="core", width_sites=16, fingers=2)
    geos = [resolve(spec, deck)]
    return [spec], geos, evaluate(deck, corners, [spec], geos, FREQ_HZ)


@pytest.mark.parametrize("role, element", [("nmos", "mn_channel"), ("pmos", "mp_channel")])
def test_pair_channel_resistance_equals_the_tied_device_at_the_rail(lumen130, role, element) -> None:
    # Source: definition. The pair's devices sit at V_GS = VDD - (leakage x R_on) and V_DS ~ 0,
    # the terminal voltages of the same device tied to the rails, so the same charge-sheet
    # channel model gives the same R: the pair's netlist resistance equals R_channel of a tied
    # device of the same geometry at V_GS = VDD. rel 1e-4 (the leakage shifts the gate bias by
    # uV to mV out of VDD - V_T ~ 0.9 V).
    corners = CornerSet.from_deck(lumen130)
    cells, geos, group = _pair_group(lumen130, corners)
    geo = common.mos_geometry(cells, geos, device=role if role == "pmos" else "first")
    oxides = common.oxides_of(cells)
    rail = common.supply(corners, common.rails_of(cells))
    tied = characterize_mos(corners, oxides, np.array([role]), geo, rail)
    r_pair = np.asarray(group.netlist.element(element).value, dtype=float)
    np.testing.assert_allclose(r_pair, tied.r_channel.reshape(-1), rtol=1e-4)
    # and not the square-law value 1 / (mu Cox W/L (V_GS - V_T)), which reads about a quarter low
    # on this thin oxide (poly depletion and the charge centroid take their share of V_GS - V_T)
    vth = np.abs(corners.device_table(oxides, np.array([role]), "vth_V"))
    r_level1 = tied.r_channel * tied.v_ov / (rail - vth)
    assert np.all(r_pair > 1.1 * r_level1.reshape(-1))


def test_pair_esr_is_the_distributed_pair_of_the_tied_channel_resistances(lumen130) -> None:
    # Source: docs/references.md [50] (topology) with the low-frequency dissipation of the
    # through-line pair (pair_esr_low_frequency_distributed, itself checked against the nodal
    # solver); channel, gate and contact resistances from the tied-device model; rel 2e-3
    # (overlap capacitance changes the current split slightly)
    corners = CornerSet.from_deck(lumen130)
    cells, geos, group = _pair_group(lumen130, corners)
    oxides = common.oxides_of(cells)
    rail = common.supply(corners, common.rails_of(cells))
    n = characterize_mos(corners, oxides, np.array(["nmos"]), common.mos_geometry(cells, geos), rail)
    p = characterize_mos(corners, oxides, np.array(["pmos"]), common.mos_geometry(cells, geos, device="pmos"), rail)
    expected = pair.pair_esr_low_frequency_distributed(
        n.r_channel, p.r_channel, n.c_gate, p.c_gate, n.r_gate + n.r_access, p.r_gate + p.r_access)
    np.testing.assert_allclose(group.summary["esr_lf_ohm"], expected, rtol=2e-3)


def test_pair_cv_curve_reads_the_pmos_backwards(lumen130) -> None:
    # Source: definition of the bias axis. Against the rail voltage v the pair's NMOS sees
    # V_GB ~ +v and its PMOS V_GB ~ -v (both gates sit within the leakage drop of the opposite
    # rail): at v = +V_supply the curve is the tied NMOS at +V plus the tied PMOS at -V, and the
    # operating point lies on it within the uV-mV node shift (rel 1e-3); at -v the mirror image.
    corners = CornerSet.from_deck(lumen130, ["typ_25C"])
    cells, geos, group = _pair_group(lumen130, corners)
    oxides = common.oxides_of(cells)
    rail = common.supply(corners, common.rails_of(cells))
    n = characterize_mos(corners, oxides, np.array(["nmos"]), common.mos_geometry(cells, geos), rail)
    p = characterize_mos(corners, oxides, np.array(["pmos"]), common.mos_geometry(cells, geos, device="pmos"), rail)
    bias, cap = group.cv_bias[0, 0], group.cv_cap[0, 0]
    v = float(rail[0, 0])
    for sign in (1.0, -1.0):
        expected = np.interp(sign * v, n.cv_bias[0, 0], n.cv_cap[0, 0]) + np.interp(-sign * v, p.cv_bias[0, 0],
                                                                                    p.cv_cap[0, 0])
        assert np.interp(sign * v, bias, cap) == pytest.approx(expected, rel=1e-9)
    assert np.interp(v, bias, cap) == pytest.approx(float(group.cv_operating_F[0, 0]), rel=1e-3)
