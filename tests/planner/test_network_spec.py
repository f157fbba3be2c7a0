"""The [network] table: the demo loads and converts to SI; every bad input is a located
PlanError naming file, line, field and what is allowed."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.errors import PlanError
from celllab.planner.network_spec import (
    load_network_spec,
    network_goals,
    read_waveform_csv,
    region_activity,
    region_loads,
    supply_network,
)

from .network_demo import NETWORK_TOML

GOOD = NETWORK_TOML.read_text()


def test_demo_table_loads_and_is_marked_invented() -> None:
    spec = load_network_spec(NETWORK_TOML).network
    assert "INVENTED DEMO DATA" in GOOD
    supply = supply_network(spec, 1.2)
    assert supply.supply_voltage == 1.2
    assert supply.package_inductance == pytest.approx(0.8e-9, rel=1e-12)
    assert supply.paths["mac_array"].grid_inductance == pytest.approx(15e-12, rel=1e-12)
    assert supply.offchip_decap is not None
    assert supply.offchip_decap.capacitance == pytest.approx(470e-9, rel=1e-12)
    assert supply.links[0].region_b == "pad_ring"
    act = region_activity(spec.regions["mac_array"])
    assert act is not None and region_activity(spec.regions["pad_ring"]) is None  # quiet
    # a triangle of 60 mA over 0.4 + 0.8 ns each 1/300 MHz: 0.06 x 0.6e-9 x 3e8 = 10.8 mA
    assert act.mean_current() == pytest.approx(0.06 * 0.6e-9 * 300e6, rel=1e-12)
    goals = network_goals(spec)
    assert goals.ir_drop_limit == {"mac_array": pytest.approx(0.015),
                                   "pad_ring": pytest.approx(0.015)}
    assert goals.freq[0] == pytest.approx(1e5) and goals.freq[-1] == pytest.approx(1e10)
    loads = region_loads(spec, {})
    assert [r.name for r in loads] == ["mac_array", "pad_ring"]
    assert loads[0].intrinsic_capacitance == pytest.approx(1.5e-9, rel=1e-12)
    with pytest.raises(ValueError, match="unknown region"):
        region_loads(spec, {"nope": []})
    with pytest.raises(ValueError, match="supply"):
        supply_network(spec)


CASES: dict[str, tuple[str, str, str, str]] = {
    # name: (text to replace, replacement, field, message fragment)
    "typo": ("package_inductance_nH = 0.8", "package_inductanse_nH = 0.8",
             "network.package_inductanse_nH", "did you mean 'package_inductance_nH'"),
    "negative": ("grid_resistance_mohm = 4", "grid_resistance_mohm = -4",
                 "network.regions.mac_array.grid_resistance_mohm", ">= 0"),
    "stimulus": ('stimulus = "step"', 'stimulus = "stair"',
                 "network.regions.mac_array.activity.stimulus", "allowed: step, clock or samples"),
    "link": ('regions = ["mac_array", "pad_ring"]', 'regions = ["mac_array", "pad_rign"]',
             "network.links[0].regions", "Did you mean 'pad_ring'"),
    "offchip": ("board_inductance_nH = 1.5", "board_inductance_nH = 0",
                "network.offchip_decap", "board path"),
    "charge": ("step_delay_ns = 1", "step_delay_ns = 1\ncharge_per_cycle_pC = 1",
               "network.regions.mac_array.activity.charge_per_cycle_pC", "at least"),
    "period": ("clock_MHz = 300  ", "clock_MHz = 3000  ",
               "network.regions.mac_array.activity.clock_MHz", "longer than a clock period"),
    "clock missing": ('stimulus = "step"', 'stimulus = "clock"',
                      "network.regions.mac_array.activity", "clock"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_table_is_located(case: str, tmp_path: Path) -> None:
    old, new, field, fragment = CASES[case]
    assert old in GOOD, case
    text = GOOD.replace(old, new, 1)
    if case == "offchip":
        text = text.replace("board_resistance_mohm = 3", "board_resistance_mohm = 0", 1)
    if case == "clock missing":
        text = text.replace("clock_MHz = 300  ", "# no clock  ", 1)
    path = tmp_path / "net.toml"
    path.write_text(text)
    with pytest.raises(PlanError) as info:
        load_network_spec(path)
    problems = info.value.problems
    hit = [p for p in problems if p.field.startswith(field)]
    assert hit, [str(p) for p in problems]
    assert fragment.lower() in str(hit[0]).lower(), str(hit[0])
    assert hit[0].file == str(path) and hit[0].line is not None


def test_missing_table_field_and_syntax(tmp_path: Path) -> None:
    path = tmp_path / "net.toml"
    path.write_text("[block]\nname = 'x'\n")
    with pytest.raises(PlanError, match="network -> required field is missing"):
        load_network_spec(path)
    path.write_text(GOOD.replace("package_inductance_nH = 0.8", ""))
    with pytest.raises(PlanError, match="package_inductance_nH -> required"):
        load_network_spec(path)
    path.write_text(GOOD.replace("[network.offchip_decap]", "[network.offchip_decap"))
    with pytest.raises(PlanError, match="TOML syntax error"):
        load_network_spec(path)
    with pytest.raises(PlanError, match="file not found"):
        load_network_spec(tmp_path / "none.toml")


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
