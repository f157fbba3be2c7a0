"""Block files: the demo blocks load; every bad input is a located PlanError, not a traceback.

Each bad case is checked through the library (PlanError, field, line, message) and through
``celllab plan`` (exit 2, the problem on stderr naming file:line and field, no traceback).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

from celllab.catalog import Catalog
from celllab.cli.main import main
from celllab.errors import PlanError
from celllab.planner import load_block, plan_block

from . import DECK, IdealCell, block_text, synthetic_catalog

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
    assert block.fill.max_kinds >= 1 and block.block.empty_sites > 0
    assert path.read_text().startswith("# INVENTED DEMO DATA")


def test_defaults_and_supply_from_deck(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "b.toml"
    path.write_text(block_text(block_supply_V=None, fill_corner=None, fill_max_kinds=None,
                               fill_where=None, fill_require_esd_safe=None))
    block = load_block(path)
    assert block.block.supply_V is None
    assert (block.fill.corner, block.fill.max_kinds, block.fill.where) == ("worst", 3, "")
    plan = plan_block(block, catalog)
    assert plan.supply == 1.0  # the deck's supplies.core_V


def test_require_esd_safe_excludes_cells(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "b.toml"
    path.write_text(block_text(fill_require_esd_safe=True))
    plan = plan_block(load_block(path), catalog)
    assert [c.name for c in plan.cells] == ["ideal_a"]
    assert plan.excluded == {"not esd_safe": 1}


@dataclass(frozen=True)
class Bad:
    text: Callable[[], str]
    field: str
    message: str
    line: int | None  # expected line in the file (None: not checked)
    needs_catalog: bool = False


def _sub(old: str, new: str) -> Callable[[], str]:
    def make() -> str:
        text = block_text()
        assert text.count(old) == 1, old
        return text.replace(old, new)
    return make


def _line_of(key: str) -> int:
    return next(i for i, line in enumerate(block_text().splitlines(), 1) if line.startswith(key))


BAD = {
    "toml_syntax": Bad(_sub("activity = 1.0", "activity = = 1.0"), "", "TOML syntax error",
                       _line_of("activity")),
    "missing_field": Bad(lambda: block_text(block_clock_GHz=None), "block.clock_GHz",
                         "required field is missing", _line_of("[block]")),
    "typo_field": Bad(_sub("activity = 1.0", "activty = 1.0"), "block.activty",
                      "did you mean 'activity'", _line_of("activity")),
    "negative_sites": Bad(lambda: block_text(block_empty_sites=-5), "block.empty_sites",
                          "greater than 0", _line_of("empty_sites")),
    "activity_above_one": Bad(lambda: block_text(block_activity=1.5), "block.activity",
                              "less than or equal to 1", _line_of("activity")),
    "zero_ripple": Bad(lambda: block_text(block_ripple_fraction=0.0), "block.ripple_fraction",
                       "greater than 0", _line_of("ripple_fraction")),
    "text_for_number": Bad(lambda: block_text(block_ripple_fraction="5%"),
                           "block.ripple_fraction", "valid number", _line_of("ripple_fraction")),
    "float_for_count": Bad(lambda: block_text(block_row_sites=1000.5), "block.row_sites",
                           "valid integer", _line_of("row_sites")),
    "zero_kinds": Bad(lambda: block_text(fill_max_kinds=0), "fill.max_kinds",
                      "greater than or equal to 1", _line_of("max_kinds")),
    "unknown_table": Bad(_sub("[fill]", "[fil]"), "fil", "did you mean 'fill'", None),
    "unknown_deck": Bad(lambda: block_text(block_deck="invented_pdm"), "block.deck",
                        f"allowed: {DECK}. Did you mean '{DECK}'", _line_of("deck"), True),
    "unknown_corner": Bad(lambda: block_text(fill_corner="slow_125"), "fill.corner",
                          "Did you mean 'slow_125C'", _line_of("corner"), True),
    "bad_filter": Bad(lambda: block_text(fill_where="cap_fd > 10"), "fill.where",
                      "did you mean 'cap_fF'", _line_of("where"), True),
    "no_candidates": Bad(lambda: block_text(fill_where="cap_fF > 1e6"), "fill.where",
                         "no cell of deck", _line_of("where"), True),
    "too_narrow_rows": Bad(lambda: block_text(block_row_sites=1), "fill.where",
                           "2 wider than a row", _line_of("where"), True),
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
    path = tmp_path / "bad.toml"
    path.write_text(bad.text())
    err = _problems(path, catalog, bad.needs_catalog)
    matching = [p for p in err.problems if p.field == bad.field]
    assert matching, [str(p) for p in err.problems]
    p = matching[0]
    assert p.file == str(path)
    assert bad.message in p.message, p.message
    if bad.line is not None:
        assert p.line == bad.line
    assert str(path) in str(err)

    code = main(["plan", str(path), "--catalog", str(catalog.path)])
    out, errout = capsys.readouterr()
    assert code == 2 and out == ""
    assert "Traceback" not in errout
    where = f"{path}:{bad.line}" if bad.line is not None else str(path)
    assert where in errout and bad.field in errout


def test_all_problems_reported_at_once(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(block_text(block_activity=0.0, block_clock_GHz=-1.0, fill_max_kinds=0))
    err = _problems(path, catalog, False)
    assert {p.field for p in err.problems} == {"block.activity", "block.clock_GHz",
                                               "fill.max_kinds"}


def test_missing_file_and_missing_supply(tmp_path: Path) -> None:
    err = _problems(tmp_path / "nope.toml", None, False)  # type: ignore[arg-type]
    assert "file not found" in str(err)
    cat = synthetic_catalog(tmp_path / "nosupply.sqlite", [IdealCell("ideal_a", 100.0)],
                            supply_V=None)
    path = tmp_path / "b.toml"
    path.write_text(block_text(block_supply_V=None))
    err = _problems(path, cat, True)
    assert err.problems[0].field == "block.supply_V" and "stores no core supply" in str(err)


def test_missing_catalog_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "b.toml"
    path.write_text(block_text())
    code = main(["plan", str(path), "--catalog", str(tmp_path / "absent.sqlite")])
    _, errout = capsys.readouterr()
    assert code == 2 and "no catalog here" in errout and "Traceback" not in errout
    assert not (tmp_path / "absent.sqlite").exists()


def test_no_cell_fits_leaves_intrinsic_decap(tmp_path: Path, catalog: Catalog,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    # Source: the problem statement: every cell leaks, the budget is 0 -> an empty fill; the
    # die keeps the intrinsic decap of the non-switching logic (activity 0.5)
    path = tmp_path / "b.toml"
    path.write_text(block_text(block_leakage_budget_uA=0.0, block_activity=0.5,
                               fill_where="name = 'ideal_a'"))
    plan = plan_block(load_block(path), catalog)
    assert plan.cells == [] and plan.fill_capacitance == 0.0 and plan.intrinsic_capacitance > 0
    assert plan.to_dict()["leakage_nA_per_nF"] is None
    assert main(["plan", str(path), "--catalog", str(catalog.path), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["cells"] == []
    assert main(["plan", str(path), "--catalog", str(catalog.path)]) == 0
    assert "No cell fits" in capsys.readouterr().out


def test_no_capacitance_at_all_is_a_located_error(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "b.toml"
    path.write_text(block_text(block_leakage_budget_uA=0.0, block_activity=1.0,
                               fill_where="name = 'ideal_a'"))
    err = _problems(path, catalog, True)
    assert err.problems[0].field == "block.leakage_budget_uA"
    assert "no capacitance" in err.problems[0].message
