"""Block impedance: combining stored Z(f), the published PDN checks through the planner, and
ngspice AC analysis of the same package + die network."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.export.plan import render_impedance_csv, render_impedance_touchstone
from celllab.export.spice import render_spice_subckt, spice_name, spice_number
from celllab.planner import BlockPlan, load_block, plan_block
from celllab.planner.impedance import die_network
from celllab.records import FrequencyResponse

from . import IdealCell, block_text, synthetic_catalog

REPO = Path(__file__).resolve().parents[2]
NGSPICE = shutil.which("ngspice")


def _plan(tmp_path: Path, cells: list[IdealCell], **overrides: object) -> BlockPlan:
    catalog = synthetic_catalog(tmp_path / "cat.sqlite", cells)
    path = tmp_path / "block.toml"
    path.write_text(block_text(**overrides))
    return plan_block(load_block(path), catalog)


# ------------------------------------------------------------------ combining stored Z(f)


def test_worst_corner_is_the_lowest_capacitance(tmp_path: Path) -> None:
    # Source: the PDN_RESPONSE policy (the corner with the least cap_fF: slow_125C, x0.9)
    plan = _plan(tmp_path, [IdealCell("c", 100.0)], **ONE_ROW)
    assert plan.cells[0].z_corner == "slow_125C"
    plan = _plan(tmp_path / "named", [IdealCell("c", 100.0)], **ONE_ROW,
                 candidates__corner="fast_m40C")
    assert plan.cells[0].z_corner == "fast_m40C"


def test_die_network_adds_admittances_on_a_common_grid() -> None:
    # Source: parallel admittances add (circuit theory); ideal C has K = Y/(j w) = C exactly
    f1, f2 = np.logspace(5, 10, 51), np.logspace(6, 11, 37)
    c1, c2 = 2e-12, 5e-13
    responses = [FrequencyResponse(f1, 1 / (2j * np.pi * f1 * c1)),
                 FrequencyResponse(f2, 1 / (2j * np.pi * f2 * c2))]
    die = die_network(responses, [300, 1000], 1e-9)
    assert (die.f_min, die.f_max) == (1e6, 1e10)
    f = np.array([1.234e6, 5.5e7, 9.99e9])  # between stored points
    y = die.admittance(f)
    expected = 2j * np.pi * f * (300 * c1 + 1000 * c2 + 1e-9)
    np.testing.assert_allclose(y, expected, rtol=1e-12, atol=0)
    with pytest.raises(ValueError):
        die.admittance([1e11])


def test_no_cells_leaves_the_intrinsic_decap() -> None:
    die = die_network([FrequencyResponse(np.array([1e6, 1e7]), np.array([1j, 1j]))], [0], 2e-9)
    f = np.array([1e6, 1e8])
    z = die.block_impedance(f, 1e-9, 0.01)
    zl, zc = 0.01 + 2j * np.pi * f * 1e-9, 1 / (2j * np.pi * f * 2e-9)
    np.testing.assert_allclose(z, zl * zc / (zl + zc), rtol=1e-12, atol=0)


# ------------------------------------------------------- published PDN checks through plan_block

# 100000 one-site gaps filled with 1 pF cells (typ corner) = 100 nF; activity 1: no
# intrinsic decap
PF_CELL = {"name": "ideal_1pF", "cap_fF": 1000.0}
ONE_ROW = {"region": [{"name": "core", "frequency_MHz": 100.0, "row_gaps": [
    {"name": "fill", "width_sites": [1], "count": [100000]}]}], "block__activity": 1.0}
TYP = {**ONE_ROW, "candidates__corner": "typ_25C"}


def test_resonance_and_characteristic_impedance(tmp_path: Path) -> None:
    plan = _plan(tmp_path, [IdealCell(**PF_CELL)], **TYP)
    assert plan.cells[0].count == 100000
    assert plan.die_capacitance == pytest.approx(100e-9, rel=1e-12, abs=0)
    # Source: series resonance f0 = 1/(2 pi sqrt(LC)), 1 nH / 100 nF -> 15.915 MHz; rel 1e-6
    assert plan.pdn.f0 == pytest.approx(15.9155e6, rel=1e-5, abs=0)
    assert plan.pdn.f0 == pytest.approx(15915494.309, rel=1e-9, abs=0)
    # Source: characteristic impedance Z0 = sqrt(L/C) -> 0.1 ohm; rel 1e-9
    assert plan.pdn.z0 == pytest.approx(0.1, rel=1e-9, abs=0)


@pytest.mark.parametrize(("esr_ohm", "r_pkg_mohm", "peak_ohm"), [
    (0.0, 10.0, 1.0050),     # R_L = 10 mohm, R_C = 0
    (1000.0, 10.0, 0.5050),  # R_L = R_C = 10 mohm (1 kohm / 100000 cells)
])
def test_peak_impedance(tmp_path: Path, esr_ohm: float, r_pkg_mohm: float,
                        peak_ohm: float) -> None:
    # Source: exact |Z|max of (R_L + jwL) || (R_C + 1/(jwC)) (P. Larsson, IEEE TCAS-I 1998),
    # 1 nH / 100 nF; rel 1e-3 (sweep: fine grid between the stored points)
    plan = _plan(tmp_path, [IdealCell(**PF_CELL, esr_ohm=esr_ohm)], **TYP,
                 block__package_resistance_mohm=r_pkg_mohm)
    # R_C read back as Re Z_die(f0), interpolated between stored points: rel 1e-4
    assert plan.pdn.die_esr == pytest.approx(esr_ohm / 100000, rel=1e-4, abs=1e-12)
    assert plan.pdn.peak_impedance_tank == pytest.approx(peak_ohm, rel=1e-3, abs=0)
    assert plan.pdn.peak_impedance == pytest.approx(peak_ohm, rel=1e-3, abs=0)
    assert plan.pdn.peak_frequency == pytest.approx(15.9e6, rel=0.02, abs=0)


def test_critically_damped_network_is_flat(tmp_path: Path) -> None:
    # Source: P. Larsson, IEEE TCAS-I 1998: R_L = R_C = Z0 = 0.1 ohm -> |Z| = 0.1 ohm at
    # every frequency; rel 1e-6 at the stored frequencies, 1e-4 for the interpolated peak
    plan = _plan(tmp_path, [IdealCell(**PF_CELL, esr_ohm=10000.0)], **TYP,
                 block__package_resistance_mohm=100.0)
    _, z = plan.sweep()
    np.testing.assert_allclose(np.abs(z), 0.1, rtol=1e-6, atol=0)
    assert plan.pdn.peak_impedance == pytest.approx(0.1, rel=1e-4, abs=0)


def test_target_impedance_and_droop(tmp_path: Path) -> None:
    plan = _plan(tmp_path, [IdealCell(**PF_CELL)], **TYP, block__supply_V=1.0,
                 block__ripple_fraction=0.05, block__current_step_A=10.0)
    # Source: L. D. Smith et al., IEEE Trans. Adv. Packag. 1999: 1 V, 5 %, 10 A -> 5.0 mohm;
    # rel 1e-12
    assert plan.pdn.target_impedance == pytest.approx(5e-3, rel=1e-12, abs=0)
    assert not plan.pdn.below_target  # the 1.005 ohm peak is far above 5 mohm
    assert plan.pdn.worst_ratio == pytest.approx(plan.pdn.peak_impedance / 5e-3, rel=1e-9)
    plan = _plan(tmp_path / "one_amp", [IdealCell(**PF_CELL)], **TYP, block__current_step_A=1.0)
    # Source: step into a lossless L-C: dV = dI sqrt(L/C) at (pi/2) sqrt(LC); 1 A into
    # 1 nH / 100 nF -> 0.100 V at 15.71 ns; rel 1e-9
    assert plan.pdn.droop == pytest.approx(0.1, rel=1e-9, abs=0)
    assert plan.pdn.droop_time == pytest.approx(np.pi / 2 * 1e-8, rel=1e-9, abs=0)
    assert plan.pdn.droop_time == pytest.approx(15.71e-9, rel=1e-3, abs=0)


def test_below_target_when_damped_and_low(tmp_path: Path) -> None:
    # Source: Larsson 1998 / Smith et al. 1999: the flat 0.1 ohm network against 0.12 ohm
    plan = _plan(tmp_path, [IdealCell(**PF_CELL, esr_ohm=10000.0)], **TYP,
                 block__package_resistance_mohm=100.0, block__ripple_fraction=0.12,
                 block__current_step_A=1.0)
    assert plan.pdn.below_target and plan.pdn.worst_ratio == pytest.approx(0.1 / 0.12, rel=1e-4)


def test_charge_sizing(tmp_path: Path) -> None:
    plan = _plan(tmp_path, [IdealCell(**PF_CELL)], **TYP, block__switching_power_W=1.0,
                 block__supply_V=1.0, block__clock_GHz=1.0, block__ripple_fraction=0.1)
    # Source: P = alpha C V^2 f (Rabaey et al., "Digital Integrated Circuits", ch. 5):
    # alpha C = P/(V^2 f), 1 W, 1 V, 1 GHz -> 1 nF; rel 1e-12
    assert plan.switched_capacitance == pytest.approx(1e-9, rel=1e-12, abs=0)
    # Source: Dally & Poulton, "Digital Systems Engineering", 1998: C_dec = 9 C_sw, 10 % droop
    assert plan.rule_of_thumb_need == pytest.approx(9e-9, rel=1e-12, abs=0)
    assert plan.charge_sharing_need == pytest.approx(9e-9, rel=1e-12, abs=0)
    # activity 1: every gate switches, so no non-switching logic (common practice, no source)
    assert plan.intrinsic_capacitance == 0.0


def test_intrinsic_decap_adds_to_the_die(tmp_path: Path) -> None:
    # Chen & Ling DAC 1997 form (from memory): C_int = (1 - a) C_total with
    # C_total = P / (a V^2 f); only its consistency is checked here, not a published value
    plan = _plan(tmp_path, [IdealCell(**PF_CELL)], **TYP | {"block__activity": 0.2},
                 block__switching_power_W=1.0, block__supply_V=1.0, block__clock_GHz=1.0)
    c_total = plan.switched_capacitance / 0.2
    assert plan.intrinsic_capacitance == pytest.approx(0.8 * c_total, rel=1e-12, abs=0)
    assert plan.die_capacitance == pytest.approx(100e-9 + 4e-9, rel=1e-12, abs=0)
    assert plan.pdn.f0 == pytest.approx(1 / (2 * np.pi * np.sqrt(1e-9 * 104e-9)), rel=1e-12)


# ---------------------------------------------------------------------- exports


def test_touchstone_and_csv_read_back(tmp_path: Path) -> None:
    skrf = pytest.importorskip("skrf")
    plan = _plan(tmp_path, [IdealCell(**PF_CELL, esr_ohm=1000.0)], **TYP)
    freq, z = plan.sweep()
    path = tmp_path / "z.s1p"
    path.write_text(render_impedance_touchstone(plan, reference_ohm=50.0))
    # Source: scikit-rf's Touchstone reader (v1 Z data normalized to R); rel 1e-9
    net = skrf.Network(str(path))
    np.testing.assert_allclose(net.f, freq, rtol=1e-10)
    np.testing.assert_allclose(net.z[:, 0, 0], z, rtol=1e-9)
    text = render_impedance_csv(plan)
    body = [line for line in text.splitlines() if not line.startswith("#")]
    data = np.loadtxt(body[1:], delimiter=",")
    assert "freq_Hz,z_mag_ohm" in text and "CAUTION" in text
    np.testing.assert_array_equal(data[:, 0], freq)
    np.testing.assert_allclose(data[:, 1], np.abs(z), rtol=1e-14)


# -------------------------------------------------------------- demo catalog and ngspice


@pytest.fixture(scope="module", params=["worst", "fast_m40C"])
def demo_plan(request: pytest.FixtureRequest, demo_catalog: Catalog,
              tmp_path_factory: pytest.TempPathFactory) -> BlockPlan:
    """The lumen130 demo block, at its own corner ("worst") and at a named corner."""
    text = (REPO / "process_decks" / "blocks" / "lumen130_dsp.toml").read_text()
    assert text.count('corner = "worst"') == 1
    path = tmp_path_factory.mktemp("block") / "dsp.toml"
    path.write_text(text.replace('corner = "worst"', f'corner = "{request.param}"'))
    return plan_block(load_block(path), demo_catalog)


def test_demo_plan_is_consistent(demo_plan: BlockPlan, demo_catalog: Catalog) -> None:
    # Source: the problem statement (budgets) and the catalog's own records
    plan = demo_plan
    assert plan.cells and len(plan.cells) <= 4  # the block's max_kinds
    assert plan.leakage <= 15e-6 * (1 + 1e-9)       # its leakage_uA
    assert plan.fill_capacitance == pytest.approx(sum(c.count * c.cap for c in plan.cells),
                                                  rel=1e-12)
    for c in plan.cells:
        record = demo_catalog.cell(c.name, deck="lumen130")
        if plan.corner == "worst":
            used = min(record.corners, key=lambda k: k.metrics["cap_fF"])
        else:
            used = record.corner(plan.corner)
        assert c.z_corner == used.corner
        assert c.cap == pytest.approx(used.metrics["cap_fF"] * 1e-15, rel=1e-12)
    summary = plan.to_dict()["pdn"]
    assert summary["die_cap_nF"] == pytest.approx(summary["fill_cap_nF"]
                                                  + summary["intrinsic_cap_nF"], rel=1e-12)


def _ngspice_impedance(plan: BlockPlan, catalog: Catalog, workdir: Path, sweep: str
                       ) -> tuple[np.ndarray, np.ndarray]:
    """ngspice AC: 1 A into the die node, package R-L to the ideal supply (node 0)."""
    lines = ["block pdn impedance", ".options rshunt=1e15"]
    for i, c in enumerate(plan.cells):
        record = catalog.cell(c.name, deck=plan.deck)
        name = f"{spice_name(c.name)}_{i}"
        lines.append(render_spice_subckt(record, corner=c.z_corner, subckt_name=name))
        lines.append(f"X{i} die 0 {name} m={c.count}")
    if plan.intrinsic_capacitance > 0:
        lines.append(f"Cint die 0 {spice_number(plan.intrinsic_capacitance)}")
    lines += [
        f"Rpkg die pkg {spice_number(plan.r_pkg)}",
        f"Lpkg pkg 0 {spice_number(plan.l_pkg)}",
        "Itest 0 die dc 0 ac 1",
        ".control",
        sweep,
        "wrdata zout.txt v(die)",
        "quit",
        ".endc",
        ".end",
        "",
    ]
    (workdir / "pdn.cir").write_text("\n".join(lines))
    assert NGSPICE is not None
    proc = subprocess.run([NGSPICE, "-b", "pdn.cir"], cwd=workdir, capture_output=True,
                          text=True, timeout=120, check=False)
    if proc.returncode != 0 or re.search(r"^\s*error", proc.stdout + proc.stderr,
                                         re.MULTILINE | re.IGNORECASE):
        raise RuntimeError(f"ngspice failed:\n{proc.stdout}\n{proc.stderr}")
    data = np.loadtxt(workdir / "zout.txt")
    return data[:, 0], data[:, 1] + 1j * data[:, 2]


@pytest.mark.skipif(NGSPICE is None and not os.environ.get("CELLLAB_REQUIRE_NGSPICE"),
                    reason="ngspice binary not on PATH (Debian package ngspice)")
def test_block_impedance_matches_ngspice(demo_plan: BlockPlan, demo_catalog: Catalog,
                                         tmp_path: Path) -> None:
    # Source: ngspice AC analysis of package R-L || the chosen cells' SPICE subcircuits
    # (m = count) || C_intrinsic, 1 A AC into the die; 1 %
    plan = demo_plan
    f, z_spice = _ngspice_impedance(plan, demo_catalog, tmp_path, "ac dec 20 1e5 1e10")
    z_plan = plan.die.block_impedance(f, plan.l_pkg, plan.r_pkg)
    deviation = np.abs(z_plan / z_spice - 1)
    assert deviation.max() < 0.01, f"max |dZ/Z| {deviation.max():.3g} at {f[deviation.argmax()]:.3g} Hz"
    # the swept peak: a fine linear sweep around it, between the stored frequencies; 1 %
    f_peak = plan.pdn.peak_frequency
    f, z_spice = _ngspice_impedance(plan, demo_catalog, tmp_path,
                                    f"ac lin 401 {0.9 * f_peak:.6e} {1.1 * f_peak:.6e}")
    k = int(np.argmax(np.abs(z_spice)))
    assert 0 < k < f.size - 1  # a maximum inside the window
    assert plan.pdn.peak_impedance == pytest.approx(np.abs(z_spice[k]), rel=0.01)
    assert plan.pdn.peak_frequency == pytest.approx(f[k], rel=0.005)
