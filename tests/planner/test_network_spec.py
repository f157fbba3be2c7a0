"""The [network] table of a block file: the demo blocks load and convert to SI (package,
supply, ripple and each region's current from the rest of the block file); every bad input
is a located PlanError naming file, line, field and what is allowed."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.errors import PlanError
from celllab.planner.block import load_block
from celllab.planner.network_spec import read_waveform_csv
from celllab.planner.sizing import region_need
from celllab.planner.supply import (
    block_network,
    network_goals,
    read_waveforms,
    region_activity,
    supply_network,
)

from .network_demo import BLOCK_TOML

GOOD = BLOCK_TOML.read_text()
QUILL = BLOCK_TOML.parent / "quill28hk_soc.toml"


def test_demo_table_loads_and_takes_the_rest_from_the_block() -> None:
    block = load_block(BLOCK_TOML)
    assert "INVENTED DEMO DATA" in GOOD and block.network is not None
    supply = supply_network(block, 1.2)
    assert supply.supply_voltage == 1.2
    # the package loop is the [block]'s, once
    assert supply.package_inductance == pytest.approx(0.8e-9, rel=1e-12)
    assert supply.package_resistance == pytest.approx(20e-3, rel=1e-12)
    assert supply.paths["mac_array"].grid_inductance == pytest.approx(15e-12, rel=1e-12)
    assert supply.offchip_decap is not None
    assert supply.offchip_decap.capacitance == pytest.approx(470e-9, rel=1e-12)
    assert supply.links[0].region_b == "pad_ring"
    mac, ring = block.region
    act = region_activity(mac, block.network.regions["mac_array"])
    assert region_activity(ring, block.network.regions["pad_ring"]) is None  # quiet
    assert act is not None and act.stimulus == "step"
    # the [[region]]'s pulse: 60 mA over 0.4 + 0.8 ns each 1/300 MHz: 10.8 mA on average
    assert act.peak_current == pytest.approx(0.06, rel=1e-12)
    assert act.mean_current() == pytest.approx(0.06 * 0.6e-9 * 300e6, rel=1e-12)
    goals = network_goals(block)
    assert goals.ir_drop_limit == {"mac_array": pytest.approx(0.015),
                                   "pad_ring": pytest.approx(0.015)}
    # ripple: the region's droop_fraction, else the block's ripple_fraction
    assert goals.ripple_fraction == {"mac_array": 0.05, "pad_ring": 0.05}
    assert goals.freq[0] == pytest.approx(1e5) and goals.freq[-1] == pytest.approx(1e10)
    # the region's own capacitance: the idle logic's decap (sizing) plus wells and wiring
    needs = [region_need(r, 1.2, 0.2e9, 0.05) for r in block.region]
    net = block_network(block, needs, 1.2, {}, {}, ["typ"])
    assert net.regions[0].intrinsic_capacitance == pytest.approx(needs[0].intrinsic + 1.4e-9,
                                                                 rel=1e-12)
    assert needs[0].intrinsic > 0 and needs[1].intrinsic == 0


def test_quill_demo_has_a_network_too() -> None:
    block = load_block(QUILL)
    assert block.network is not None and set(block.network.regions) == {"cores", "uncore"}
    cores = block.region[0]
    act = region_activity(cores, block.network.regions["cores"])
    assert act is not None and act.stimulus == "clock"
    # charge per cycle with a pulse: the flat top holds the rest of the 60 pC
    assert act.flat_top == pytest.approx(60e-12 / 0.4 - 0.5 * (80e-12 + 120e-12), rel=1e-12)


CASES: dict[str, tuple[str, str, str, str]] = {
    # name: (text to replace, replacement, field, message fragment)
    "typo": ("board_inductance_nH = 1.5", "board_inductanse_nH = 1.5",
             "network.board_inductanse_nH", "did you mean 'board_inductance_nH'"),
    "negative": ("grid_resistance_mohm = 4", "grid_resistance_mohm = -4",
                 "network.regions.mac_array.grid_resistance_mohm", ">= 0"),
    "stimulus": ('stimulus = "step"', 'stimulus = "stair"',
                 "network.regions.mac_array.stimulus", "step, clock or samples"),
    "link": ('regions = ["mac_array", "pad_ring"]', 'regions = ["mac_array", "pad_rign"]',
             "network.links[0].regions", "Did you mean 'pad_ring'"),
    "offchip": ("board_inductance_nH = 1.5", "board_inductance_nH = 0",
                "network.offchip_decap", "board path"),
    "unknown region": ("[network.regions.pad_ring]", "[network.regions.pad_rnig]",
                       "network.regions.pad_rnig", "Did you mean 'pad_ring'"),
    "charge": ("clock_MHz = 300 ", "clock_MHz = 300\ncharge_per_cycle_pC = 1 ",
               "region[0].charge_per_cycle_pC", "at least"),
    "period": ("clock_MHz = 300 ", "clock_MHz = 3000 ",
               "region[0].clock_MHz", "longer than a clock period"),
    "clock missing": ('stimulus = "step"', 'stimulus = "clock"',
                      "network.regions.mac_array.stimulus", "clock_MHz"),
    "samples": ('stimulus = "step"', 'stimulus = "samples"',
                "network.regions.mac_array.waveform_csv", "required"),
    "quiet driven": ("intrinsic_esr_mohm = 100", 'intrinsic_esr_mohm = 100\nstimulus = "step"',
                     "network.regions.pad_ring.stimulus", "only for a region that draws"),
    "damping goal": ('goal = "max_useful_cap"', 'goal = "min_leakage"',
                     "network.fill_damping_weight", "max_useful_cap"),
    "old activity": ('stimulus = "step"', 'stimulus = "step"\npeak_current_mA = 60',
                     "network.regions.mac_array.peak_current_mA", "unknown field"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_table_is_located(case: str, tmp_path: Path) -> None:
    old, new, field, fragment = CASES[case]
    assert old in GOOD, case
    text = GOOD.replace(old, new, 1)
    if case == "offchip":
        text = text.replace("board_resistance_mohm = 3", "board_resistance_mohm = 0", 1)
    if case == "clock missing":
        text = text.replace("clock_MHz = 300 ", "# no clock ", 1)
    path = tmp_path / "block.toml"
    path.write_text(text)
    with pytest.raises(PlanError) as info:
        load_block(path)
    problems = info.value.problems
    hit = [p for p in problems if p.field.startswith(field)]
    assert hit, [str(p) for p in problems]
    assert fragment.lower() in str(hit[0]).lower(), str(hit[0])
    assert hit[0].file == str(path) and hit[0].line is not None


def test_every_region_needs_a_path(tmp_path: Path) -> None:
    start = GOOD.index("[network.regions.pad_ring]")
    end = GOOD.index("[[network.links]]")
    path = tmp_path / "block.toml"
    path.write_text(GOOD[:start] + GOOD[end:].replace('"pad_ring"]', '"mac_array"]'))
    with pytest.raises(PlanError) as info:
        load_block(path)
    hit = [p for p in info.value.problems if p.field == "region[1].name"]
    assert hit and "[network.regions.pad_ring]" in hit[0].message and hit[0].line


def test_a_region_current_needs_a_pulse(tmp_path: Path) -> None:
    # the power form says how much charge, not the current's shape in time
    text = QUILL.read_text().replace("charge_per_cycle_pC = 60 ", "switching_power_mW = 90 ")
    text = text.replace("peak_current_mA = 400 ", "# ", 1).replace("rise_time_ps = 80",
                                                                     "# rise", 1)
    text = text.replace("fall_time_ps = 120", "# fall", 1)
    path = tmp_path / "block.toml"
    path.write_text(text)
    with pytest.raises(PlanError) as info:
        load_block(path)
    hit = [p for p in info.value.problems if p.field == "region[0]"]
    assert hit and "current pulse" in hit[0].message


def test_waveform_csv_relative_to_the_block_file(tmp_path: Path) -> None:
    (tmp_path / "waves").mkdir()
    (tmp_path / "waves" / "burst.csv").write_text("t_ns,i_mA\n0,0\n1.5,60\n3,0\n")
    text = GOOD.replace('stimulus = "step"',
                        'stimulus = "samples"\nwaveform_csv = "waves/burst.csv"')
    path = tmp_path / "block.toml"
    path.write_text(text)
    block = load_block(path)
    samples = read_waveforms(block)
    np.testing.assert_allclose(samples["mac_array"][0], [0.0, 1.5e-9, 3e-9], rtol=1e-12)
    act = region_activity(block.region[0], block.network.regions["mac_array"],  # type: ignore[union-attr]
                          samples["mac_array"])
    assert act is not None and act.stimulus == "samples"
    # longer than the region's clock period (300 MHz: 3.33 ns): located at the block field
    (tmp_path / "waves" / "burst.csv").write_text("t_ns,i_mA\n0,0\n1.5,60\n5,0\n")
    with pytest.raises(PlanError) as info:
        read_waveforms(block)
    assert info.value.problems[0].field == "network.regions.mac_array.waveform_csv"
    (tmp_path / "waves" / "burst.csv").write_text("t_ns,i_mA\n0,0\n1,x\n")
    with pytest.raises(PlanError, match="row 3.i_mA"):
        read_waveforms(block)


def test_waveform_csv(tmp_path: Path) -> None:
    path = tmp_path / "w.csv"
    path.write_text("# burst\nt_ns,i_mA\n0,0\n1.5,120\n3,40\n")
    t, i = read_waveform_csv(path)
    np.testing.assert_allclose(t, [0.0, 1.5e-9, 3e-9], rtol=1e-12)
    np.testing.assert_allclose(i, [0.0, 0.12, 0.04], rtol=1e-12)
    bad = {"t,i\n0,0\n1,1\n": "header", "t_ns,i_mA\n0,0\n1,x\n": "row 3.i_mA",
           "t_ns,i_mA\n0,0\n0,1\n": "row 3.t_ns", "t_ns,i_mA\n0,0\n": "at least two",
           "t_ns,i_mA\n0,0,1\n1,1\n": "two values"}
    for text, where in bad.items():
        path.write_text(text)
        with pytest.raises(PlanError) as info:
            read_waveform_csv(path)
        assert where in str(info.value) and str(path) in str(info.value), text
    with pytest.raises(PlanError, match="not found"):
        read_waveform_csv(tmp_path / "none.csv")
