"""Block files: the demo blocks load; every bad input is a located PlanError (file, line,
field, value, what is allowed), never a traceback, and ``celllab plan`` exits 2 writing
nothing."""

from __future__ import annotations

import tomllib
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

from celllab.catalog import Catalog
from celllab.cli.main import main
from celllab.errors import PlanError
from celllab.planner import load_block, plan_block

from . import DECK, NETWORK, IdealCell, block_text, synthetic_catalog, toml_text

REPO = Path(__file__).resolve().parents[2]
BLOCKS = REPO / "process_decks" / "blocks"


@pytest.fixture(scope="module")
def catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    path = tmp_path_factory.mktemp("blocks") / "cat.sqlite"
    cells = [IdealCell("ideal_a", 1000.0, esr_ohm=50.0, leakage_nA=0.5, width_sites=4),
             IdealCell("ideal_b", 300.0, esr_ohm=20.0, width_sites=2, esd_safe=False)]
    return synthetic_catalog(path, cells)


@pytest.mark.parametrize("name", ["lumen130_dsp", "quill28hk_soc"])
def test_demo_blocks_load_and_are_marked_invented(name: str) -> None:
    path = BLOCKS / f"{name}.toml"
    block = load_block(path)
    assert block.block.deck == name.split("_")[0]
    assert path.read_text().startswith("# INVENTED DEMO DATA")
    assert block.region and all(r.row_gaps or r.open_slots for r in block.region)


def test_demo_inventory_mixes_corners_spacers_and_a_filler_histogram() -> None:
    # Source: the demo scenario: two regions, one ESD-safe-only; corner cells, two spacer
    # widths and a histogram of filler widths
    block = load_block(BLOCKS / "lumen130_dsp.toml")
    assert len(block.region) == 2 and sum(r.esd_safe_only for r in block.region) == 1
    slots = [s for r in block.region for s in r.open_slots]
    assert any(s.role == "corner" for s in slots)
    assert len({s.width_um for s in slots if s.role == "spacer"}) == 2
    fillers = [g for r in block.region for g in r.row_gaps if g.role == "filler"]
    assert max(len(g.width_sites) for g in fillers) >= 8


def test_network_table_is_validated_with_the_block(tmp_path: Path) -> None:
    # Source: the block-file contract: [network] is read into the supply-network model with
    # the block, and an unknown key is a located error naming the allowed keys
    path = tmp_path / "b.toml"
    path.write_text(block_text(network=NETWORK))
    block = load_block(path)
    assert block.network is not None and set(block.network.regions) == {"core"}
    assert block.network.ir_drop_limit_mV == 20.0
    path.write_text(block_text() + "\n[network]\ngrid = { mesh_um = 50 }\n")
    with pytest.raises(PlanError) as info:
        load_block(path)
    problems = {p.field: p for p in info.value.problems}
    assert "network.grid" in problems and "ir_drop_limit_mV" in problems["network.grid"].message
    assert problems["network.grid"].line is not None


def test_earlier_layout_gets_a_migration_message(tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    old = ("[block]\nname = \"b\"\ndeck = \"d\"\nempty_sites = 400000\nrow_sites = 1400\n"
           "leakage_budget_uA = 15\n\n[fill]\nwhere = \"\"\nmax_kinds = 3\n")
    path = tmp_path / "old.toml"
    path.write_text(old)
    with pytest.raises(PlanError) as info:
        load_block(path)
    problems = {p.field: p for p in info.value.problems}
    assert set(problems) == {"block.empty_sites", "block.row_sites", "block.leakage_budget_uA",
                             "fill"}
    assert problems["block.empty_sites"].line == 4
    assert "[[region.row_gaps]]" in problems["block.empty_sites"].message
    assert "leakage_uA under [budgets]" in problems["block.leakage_budget_uA"].message
    assert problems["fill"].line == 8
    assert main(["plan", str(path), "--catalog", str(tmp_path / "none.sqlite")]) == 2
    err = capsys.readouterr().err
    assert f"{path}:4: block.empty_sites = 400000" in err and "Traceback" not in err


@dataclass(frozen=True)
class Bad:
    text: Callable[[], str]
    field: str
    message: str
    line_of: str | None       # text of the line the problem must point at
    needs_catalog: bool = False


def _sub(old: str, new: str, **changes: object) -> Callable[[], str]:
    def make() -> str:
        text = block_text(**changes)
        assert text.count(old) == 1, old
        return text.replace(old, new)
    return make


def _two_regions(second: dict[str, object]) -> Callable[[], str]:
    def make() -> str:
        first = {"name": "core", "frequency_MHz": 100.0,
                 "row_gaps": [{"name": "fill", "width_sites": [4], "count": [10]}]}
        return block_text(region=[first, second])
    return make


GAPS = [{"name": "g", "width_sites": [4, 8], "count": [3, 1]}]
BAD = {
    "toml_syntax": Bad(_sub("activity = 1.0", "activity = = 1.0"), "", "TOML syntax error",
                       "activity = = 1.0"),
    "missing_field": Bad(lambda: block_text(block__clock_GHz=None), "block.clock_GHz",
                         "required field is missing", "[block]"),
    "typo_field": Bad(_sub("activity = 1.0", "activty = 1.0"), "block.activty",
                      "did you mean 'activity'", "activty = 1.0"),
    "typo_table": Bad(_sub("[budgets]", "[budget]"), "budget", "did you mean 'budgets'",
                      "[budget]"),
    "unknown_goal": Bad(lambda: block_text(objective__goal="max_cap"), "objective.goal",
                        "allowed: max_useful_cap or min_leakage", 'goal = "max_cap"'),
    "count_length": Bad(_two_regions({"name": "ring", "frequency_MHz": 50.0, "row_gaps": [
        {"name": "h", "width_sites": [4, 8], "count": [3]}]}), "region[1].row_gaps[0].count",
        "one count per width", "count = [3]"),
    "negative_width": Bad(_two_regions({"name": "ring", "row_gaps": [
        {"name": "h", "width_sites": [4, -8], "count": [3, 1]}]}),
        "region[1].row_gaps[0].width_sites[1]", "greater than or equal to 1",
        "width_sites = [4, -8]"),
    "repeated_width": Bad(_two_regions({"name": "ring", "row_gaps": [
        {"name": "h", "width_sites": [4, 4], "count": [3, 1]}]}),
        "region[1].row_gaps[0].width_sites", "distinct", "width_sites = [4, 4]"),
    "zero_slot_width": Bad(_two_regions({"name": "ring", "open_slots": [
        {"name": "c", "width_um": 0.0, "height_um": 5.0, "count": 2}]}),
        "region[1].open_slots[0].width_um", "greater than 0", "width_um = 0.0"),
    "bad_role": Bad(_two_regions({"name": "ring", "open_slots": [
        {"name": "c", "role": "pad", "width_um": 3.0, "height_um": 5.0, "count": 2}]}),
        "region[1].open_slots[0].role", "allowed: corner, spacer, filler or other",
        'role = "pad"'),
    "no_gaps": Bad(_two_regions({"name": "ring"}), "region[1]",
                   "at least one [[region.open_slots]] or [[region.row_gaps]]", None),
    "duplicate_region": Bad(_two_regions({"name": "core", "row_gaps": GAPS}),
                            "region[1].name", "must be unique", None),
    "quiet_with_activity": Bad(_two_regions({"name": "ring", "quiet": True,
                                             "charge_per_cycle_pC": 5.0, "row_gaps": GAPS}),
                               "region[1].charge_per_cycle_pC", "quiet region draws no",
                               "charge_per_cycle_pC = 5.0"),
    "two_activity_forms": Bad(_two_regions({"name": "ring", "charge_per_cycle_pC": 5.0,
                                            "switching_power_mW": 3.0, "clock_MHz": 100.0,
                                            "row_gaps": GAPS}),
                              "region[1].switching_power_mW", "one way only",
                              "switching_power_mW = 3.0"),
    # a charge with a pulse sets its flat top, but must hold at least the triangle's charge:
    # 3 mA x (10 + 10) ps / 2 = 0.03 pC
    "pulse_charge_below_triangle": Bad(_two_regions({"name": "ring",
                                                     "charge_per_cycle_pC": 0.01,
                                                     "peak_current_mA": 3.0,
                                                     "rise_time_ps": 10.0,
                                                     "row_gaps": GAPS}),
                                       "region[1].charge_per_cycle_pC", "at least 0.03 pC",
                                       "charge_per_cycle_pC = 0.01"),
    "power_without_clock": Bad(_two_regions({"name": "ring", "switching_power_mW": 5.0,
                                             "row_gaps": GAPS}),
                               "region[1].clock_MHz", "required with switching_power_mW",
                               None),
    "min_leakage_without_targets": Bad(
        lambda: block_text(objective__goal="min_leakage"), "objective.goal",
        "needs a target in at least one region", 'goal = "min_leakage"'),
    "negative_budget": Bad(lambda: block_text(budgets__leakage_uA=-1.0), "budgets.leakage_uA",
                           "greater than or equal to 0", "leakage_uA = -1.0"),
    "wearout_without_mission": Bad(
        lambda: block_text(budgets__wearout={"failure_ppm": 10.0}),
        "budgets.wearout.mission", "required field is missing", None),
    "unknown_deck": Bad(lambda: block_text(block__deck="invented_pdm"), "block.deck",
                        f"allowed: {DECK}. Did you mean '{DECK}'", 'deck = "invented_pdm"',
                        True),
    "unknown_corner": Bad(lambda: block_text(candidates__corner="slow_125"),
                          "candidates.corner", "Did you mean 'slow_125C'",
                          'corner = "slow_125"', True),
    "bad_filter": Bad(lambda: block_text(candidates__where="cap_fd > 10"), "candidates.where",
                      "did you mean 'cap_fF'", 'where = "cap_fd > 10"', True),
    "no_candidates": Bad(lambda: block_text(candidates__where="cap_fF > 1e6"),
                         "candidates.where", "no cell of deck", 'where = "cap_fF > 1e6"', True),
    "frequency_outside_sweep": Bad(lambda: block_text(region__0__frequency_MHz=1e5),
                                   "region[0].frequency_MHz", "outside the stored Z(f) sweeps",
                                   "frequency_MHz = 100000.0", True),
}


def _problems(path: Path, catalog: Catalog, needs_catalog: bool) -> PlanError:
    with pytest.raises(PlanError) as info:
        block = load_block(path)
        assert needs_catalog, "the file loaded but was expected to fail on its own"
        plan_block(block, catalog)
    return info.value


@pytest.mark.parametrize("case", list(BAD))
def test_bad_block_file_is_located(case: str, tmp_path: Path, catalog: Catalog,
                                   capsys: pytest.CaptureFixture[str]) -> None:
    bad = BAD[case]
    text = bad.text()
    path = tmp_path / "bad.toml"
    path.write_text(text)
    err = _problems(path, catalog, bad.needs_catalog)
    matching = [p for p in err.problems if p.field == bad.field]
    assert matching, [str(p) for p in err.problems]
    p = matching[0]
    assert p.file == str(path)
    assert bad.message in p.message, p.message
    line = None
    if bad.line_of is not None:
        line = text.splitlines().index(bad.line_of) + 1
        assert p.line == line
    assert str(path) in str(err)

    out_dir = tmp_path / "out"
    code = main(["plan", str(path), "--catalog", str(catalog.path), "--out", str(out_dir)])
    out, errout = capsys.readouterr()
    assert code == 2 and out == ""
    assert "Traceback" not in errout
    where = f"{path}:{line}" if line is not None else str(path)
    assert where in errout and bad.field in errout
    assert not out_dir.exists()  # nothing written


def test_all_problems_reported_at_once(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(block_text(block__activity=0.0, block__clock_GHz=-1.0,
                               budgets__max_kinds=0))
    err = _problems(path, catalog, False)
    assert {p.field for p in err.problems} == {"block.activity", "block.clock_GHz",
                                               "budgets.max_kinds"}


def test_missing_file_and_missing_catalog(tmp_path: Path,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(PlanError) as info:
        load_block(tmp_path / "nope.toml")
    assert "file not found" in str(info.value)
    path = tmp_path / "b.toml"
    path.write_text(block_text())
    code = main(["plan", str(path), "--catalog", str(tmp_path / "absent.sqlite")])
    _, errout = capsys.readouterr()
    assert code == 2 and "no catalog here" in errout and "Traceback" not in errout
    assert not (tmp_path / "absent.sqlite").exists()


def test_block_text_helper_round_trips() -> None:
    # Source: Python's tomllib reads what the test helper writes
    data = tomllib.loads(toml_text({"a": {"b": 1}, "r": [{"n": "x", "s": [{"k": 2}]}]}))
    assert data == {"a": {"b": 1}, "r": [{"n": "x", "s": [{"k": 2}]}]}
