"""Loading decks from TOML: demo decks, content hash, corners, what-if changes, line lookup."""

from __future__ import annotations

import hashlib
import json
import re
import tomllib
from pathlib import Path
from typing import Any

import pytest

from celllab.deck import Deck, load_deck, load_decks, numeric_paths, parse_deck
from celllab.deck.load import find_line
from celllab.errors import DeckError


def _split(path: str) -> list[str]:
    return [p for p in re.split(r"[.\[\]]", path) if p]


def _value(data: Any, path: str) -> Any:
    for part in _split(path):
        data = data[int(part)] if isinstance(data, list) else data[part]
    return data


# --- demo decks -----------------------------------------------------------------------------

def test_every_demo_deck_loads(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck_file, _ = demo_deck_paths[demo_deck_name]
    deck = load_deck(deck_file)
    assert deck.name == demo_deck_name == deck_file.stem
    assert deck.process.invented is True
    assert {"typ_25C", "slow_125C", "fast_m40C"} <= set(deck.corners)
    for corner in deck.corners:
        assert isinstance(deck.at_corner(corner), Deck)


def test_load_decks_reads_several(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    decks = load_decks(p for p, _ in demo_deck_paths.values())
    assert [d.name for d in decks] == list(demo_deck_paths)


def test_load_decks_reports_every_bad_file(tmp_path: Path, lumen130_path: Path) -> None:
    text = lumen130_path.read_text(encoding="utf-8")
    bad_a = tmp_path / "a.toml"
    bad_a.write_text(text.replace("t_ox_nm = 2.2", "t_ox_nm = -2.2"), encoding="utf-8")
    bad_b = tmp_path / "b.toml"
    bad_b.write_text(text.replace("core_V = 1.2", "core_V = 0.1"), encoding="utf-8")
    with pytest.raises(DeckError) as info:
        load_decks([bad_a, lumen130_path, bad_b])
    files = {p.file for p in info.value.problems}
    assert files == {str(bad_a), str(bad_b)}


def test_parse_deck_from_data(lumen130_path: Path, lumen130: Deck) -> None:
    data = tomllib.loads(lumen130_path.read_text(encoding="utf-8"))
    assert parse_deck(data) == lumen130
    data["supplies"]["io_V"] = "high"
    with pytest.raises(DeckError) as info:
        parse_deck(data)
    assert info.value.problems[0].file == "<deck>"
    assert info.value.problems[0].field == "supplies.io_V"


# --- content hash ------------------------------------------------------------------------------

def test_hash_is_sha256_of_the_canonical_json(lumen130: Deck) -> None:
    # the documented provenance key: first 16 hex of SHA-256 over sorted, compact JSON
    canonical = json.dumps(lumen130.model_dump(mode="json"), sort_keys=True, separators=(",", ":"))
    assert lumen130.content_hash == hashlib.sha256(canonical.encode()).hexdigest()[:16]
    assert re.fullmatch(r"[0-9a-f]{16}", lumen130.content_hash)


def test_hash_is_stable_across_loads_and_formatting(tmp_path: Path, lumen130_path: Path, lumen130: Deck) -> None:
    assert load_deck(lumen130_path).content_hash == lumen130.content_hash
    text = lumen130_path.read_text(encoding="utf-8")
    # comments dropped, blank lines doubled, an integer written as a float: same parameters
    reformatted = "\n".join(line.split("#", 1)[0].rstrip() for line in text.splitlines())
    reformatted = reformatted.replace("\n\n", "\n\n\n").replace("node_nm = 130", "node_nm = 130.0")
    assert reformatted != text
    other = tmp_path / "reformatted.toml"
    other.write_text(reformatted, encoding="utf-8")
    assert load_deck(other).content_hash == lumen130.content_hash


def test_hash_changes_when_a_value_changes(tmp_path: Path, lumen130_path: Path, lumen130: Deck) -> None:
    text = lumen130_path.read_text(encoding="utf-8")
    edited = tmp_path / "edited.toml"
    edited.write_text(text.replace("t_ox_nm = 2.2", "t_ox_nm = 2.3"), encoding="utf-8")
    assert load_deck(edited).content_hash != lumen130.content_hash
    assert lumen130.with_changes({"oxides.core.t_ox_nm": 2.3}).content_hash == load_deck(edited).content_hash
    # a corner table is a parameter too
    edited.write_text(text.replace("supply_scale = 0.90", "supply_scale = 0.91"), encoding="utf-8")
    assert load_deck(edited).content_hash != lumen130.content_hash


def test_demo_decks_have_distinct_hashes(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    hashes = {load_deck(p).content_hash for p, _ in demo_deck_paths.values()}
    assert len(hashes) == len(demo_deck_paths)


# --- corners ------------------------------------------------------------------------------------

def _tcr_factor(raw: dict[str, Any], path: str, temperature_C: float) -> float:
    """1 + alpha (T - T0) of the resistance at ``path``, read from the deck file itself.

    Source: the first-order resistivity law, docs/references.md [140] [DF].
    """
    tc = raw.get("resistance_tempco", {})
    kind = {"resistances.gate_sheet_ohm_per_sq": "gate_sheet", "resistances.diffusion_sheet_ohm_per_sq":
            "diffusion_sheet", "resistances.contact_ohm": "contact", "wells.nwell_sheet_ohm_per_sq": "well_sheet",
            "wells.pwell_sheet_ohm_per_sq": "well_sheet"}.get(path)
    if path.startswith("metals["):
        kind = {"sheet_ohm_per_sq": "metal_sheet", "via_below_ohm": "via"}.get(path.split(".")[-1])
    ppm = tc.get(f"{kind}_ppm_per_K", 0.0) if kind else 0.0
    t0 = tc.get("reference_temperature_C", raw.get("reference_temperature_C", 25.0))
    return 1.0 + ppm * 1e-6 * (temperature_C - t0)


def test_corners_apply_set_scale_supply_scale_and_resistance_tempco(
        demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck_file, _ = demo_deck_paths[demo_deck_name]
    raw = tomllib.loads(deck_file.read_text(encoding="utf-8"))   # expected values from the file itself
    deck = load_deck(deck_file)
    base = deck.full_dump()
    for name, corner in raw["corners"].items():
        at = deck.at_corner(name).full_dump()
        tcr = lambda path, t=corner["temperature_C"]: _tcr_factor(raw, path, t)  # noqa: E731
        touched = set(corner.get("set", {})) | set(corner.get("scale", {}))
        for path, value in corner.get("set", {}).items():
            assert _value(at, path) == pytest.approx(value * tcr(path), rel=1e-12), (name, path)
        for path, factor in corner.get("scale", {}).items():
            assert _value(at, path) == pytest.approx(_value(base, path) * factor * tcr(path), rel=1e-12), (name, path)
        supply_scale = corner.get("supply_scale", 1.0)
        rails = ["supplies.core_V", "supplies.io_V",
                 *(f"supplies.named.{n}.voltage_V" for n in raw["supplies"].get("named", {}))]
        for path in rails:
            assert _value(at, path) == pytest.approx(_value(base, path) * supply_scale, rel=1e-12)
            touched.add(path)
        for path in numeric_paths(deck):
            if path not in touched:
                assert _value(at, path) == pytest.approx(_value(base, path) * tcr(path), rel=1e-12), (name, path)


def test_hot_corner_raises_every_resistance_by_its_coefficient(lumen130: Deck) -> None:
    # lumen130 gives gate sheet 8 ohm/sq at 25 degC with 2800 ppm/K; the leaky corner at 125 degC
    # sets nothing on it: 8 x (1 + 2800e-6 x 100) = 10.24 ohm/sq. Contacts: 12 ohm, 1500 ppm/K ->
    # 12 x 1.15 = 13.8 ohm. Source: docs/references.md [140] [DF]; rel 1e-12
    hot = lumen130.at_corner("leaky_125C")
    assert hot.resistances.gate_sheet_ohm_per_sq == pytest.approx(10.24, rel=1e-12)
    assert hot.resistances.contact_ohm == pytest.approx(13.8, rel=1e-12)
    # a cold corner lowers them: -40 degC, M2 sheet 0.07 ohm/sq x 0.9434 (corner scale) x
    # (1 - 3300e-6 x 65) = 0.07 x 0.9434 x 0.7855
    cold = lumen130.at_corner("fast_m40C")
    assert cold.metals[1].sheet_ohm_per_sq == pytest.approx(0.07 * 0.9434 * 0.7855, rel=1e-12)
    # the deck at its reference temperature is unchanged
    assert lumen130.at_corner("typ_25C").resistances == lumen130.resistances


def test_tempco_that_would_make_a_resistance_negative_is_refused(lumen130: Deck) -> None:
    data = lumen130.full_dump()
    data["resistance_tempco"]["contact_ppm_per_K"] = -5000.0    # 1 - 5000e-6 x 100 = 0.5 at 125 degC: fine
    parse_deck(data)
    data["corners"]["fast_m40C"]["temperature_C"] = -55.0
    data["resistance_tempco"]["well_sheet_ppm_per_K"] = 15000.0  # 1 + 15000e-6 x (-80) = -0.2 at -55 degC
    with pytest.raises(DeckError) as info:
        parse_deck(data)
    (problem,) = info.value.problems
    assert problem.field == "resistance_tempco.well_sheet_ppm_per_K"
    assert "fast_m40C" in problem.message and "-0.2" in problem.message


def test_lumen130_slow_corner_by_hand(lumen130: Deck) -> None:
    slow = lumen130.at_corner("slow_125C")
    assert slow.oxides["core"].nmos.vth_V == 0.38                     # set
    assert slow.oxides["core"].t_ox_nm == pytest.approx(2.2 * 1.04)   # scale: 2.288 nm
    assert slow.supplies.core_V == pytest.approx(1.08)                # 1.2 V x 0.90
    assert slow.supplies.io_V == pytest.approx(2.97)                  # 3.3 V x 0.90
    assert slow.corners == lumen130.corners                           # temperature is the engine's job
    assert lumen130.oxides["core"].t_ox_nm == 2.2                     # the original is untouched


def test_supply_scale_multiplies_an_explicit_supply_scale(lumen130_path: Path) -> None:
    data = tomllib.loads(lumen130_path.read_text(encoding="utf-8"))
    data["corners"]["hot"] = {"temperature_C": 100, "supply_scale": 1.1, "scale": {"supplies.core_V": 1.05}}
    deck = parse_deck(data)
    assert deck.at_corner("hot").supplies.core_V == pytest.approx(1.2 * 1.05 * 1.1, rel=1e-12)
    assert deck.at_corner("hot").supplies.io_V == pytest.approx(3.3 * 1.1, rel=1e-12)


def test_corner_paths_may_index_the_metal_list(lumen130_path: Path) -> None:
    data = tomllib.loads(lumen130_path.read_text(encoding="utf-8"))
    data["corners"]["thick"] = {"temperature_C": 25, "scale": {"metals[1].thickness_nm": 1.1},
                                "set": {"metals.2.ild_eps_r": 3.8}}
    deck = parse_deck(data).at_corner("thick")
    assert deck.metals[1].thickness_nm == pytest.approx(385.0)
    assert deck.metals[2].ild_eps_r == 3.8


def test_unknown_corner_lists_the_corners(lumen130: Deck) -> None:
    with pytest.raises(DeckError) as info:
        lumen130.at_corner("slow_150C")
    message = str(info.value)
    assert "unknown corner" in message
    for name in lumen130.corners:
        assert name in message


# --- what-if changes ------------------------------------------------------------------------------

def test_with_changes_sets_values_and_keeps_the_original(lumen130: Deck) -> None:
    changed = lumen130.with_changes({"oxides.core.t_ox_nm": 2.0, "metals[0].thickness_nm": 320,
                                     "metals.1.min_space_nm": 220})
    assert changed.oxides["core"].t_ox_nm == 2.0
    assert changed.metals[0].thickness_nm == 320
    assert changed.metals[1].min_space_nm == 220
    assert lumen130.oxides["core"].t_ox_nm == 2.2
    assert lumen130.with_changes({}) == lumen130


def test_with_changes_rejects_an_unknown_path_with_a_suggestion(lumen130: Deck) -> None:
    with pytest.raises(DeckError) as info:
        lumen130.with_changes({"oxides.core.tox_nm": 2.0}, source="what-if panel")
    (problem,) = info.value.problems
    assert problem.file == "what-if panel"
    assert problem.field == "oxides.core.tox_nm"
    assert "not a deck parameter" in problem.message
    assert "did you mean 'oxides.core.t_ox_nm'?" in problem.message


@pytest.mark.parametrize(("changes", "field", "says"), [
    ({"process.name": 3.0}, "process.name", "not a numeric deck parameter"),
    ({"process.invented": 0.0}, "process.invented", "not a numeric deck parameter"),
    ({"metals[7].thickness_nm": 300}, "metals[7].thickness_nm", "not a deck parameter"),
    ({"oxides.core.t_ox_nm": "thin"}, "oxides.core.t_ox_nm", "must be a number"),
    ({"oxides.core.t_ox_nm": -1.0}, "oxides.core.t_ox_nm", "must be >= 0.3"),
    ({"supplies.io_V": 1.0}, "supplies.io_V", "must be at least core_V"),
])
def test_with_changes_rejects_bad_changes(lumen130: Deck, changes: dict[str, Any], field: str, says: str) -> None:
    with pytest.raises(DeckError) as info:
        lumen130.with_changes(changes)
    assert any(p.field == field and says in p.message for p in info.value.problems), str(info.value)


def test_with_changes_reports_every_bad_path_at_once(lumen130: Deck) -> None:
    with pytest.raises(DeckError) as info:
        lumen130.with_changes({"layout.site_widht_um": 0.5, "wells.nwel_doping_cm3": 1e17})
    assert [p.field for p in info.value.problems] == ["layout.site_widht_um", "wells.nwel_doping_cm3"]
    assert "did you mean 'layout.site_width_um'?" in info.value.problems[0].message
    assert "did you mean 'wells.nwell_doping_cm3'?" in info.value.problems[1].message


# --- line lookup -------------------------------------------------------------------------------------

SAMPLE = """\
# comment line
top = 1

[process]
name = "x"   # trailing comment
node_nm = 40

[oxides.core]
t_ox_nm = 2.0

[oxides.core.nmos]
vth_V = 0.3

[[metals]]
name = "M1"
thickness_nm = 100

[[metals]]
name = "M2"
thickness_nm = 200

[corners.slow]
scale = { "oxides.core.t_ox_nm" = 1.03 }
"""


@pytest.mark.parametrize(("path", "line"), [
    (["top"], 2),
    (["process", "node_nm"], 6),
    (["oxides", "core", "t_ox_nm"], 9),
    (["oxides", "core", "nmos", "vth_V"], 12),
    (["metals", 0, "thickness_nm"], 16),
    (["metals", 1, "thickness_nm"], 20),
    (["metals", 1], 18),
    (["oxides", "core", "nmos"], 11),
    (["corners", "slow", "scale"], 23),
    (["process", "missing_key"], None),
    (["nowhere"], None),
    ([], None),
])
def test_find_line(path: list[Any], line: int | None) -> None:
    assert find_line(SAMPLE, path) == line


def test_find_line_in_a_demo_deck(lumen130_path: Path) -> None:
    text = lumen130_path.read_text(encoding="utf-8")
    lines = text.splitlines()
    # independent count: the line of the first 'rail_layer' after the [layout] header
    start = lines.index("[layout]")
    expected = next(i for i in range(start, len(lines)) if lines[i].startswith("rail_layer")) + 1
    assert find_line(text, ["layout", "rail_layer"]) == expected
    fifth_metal = [i for i, s in enumerate(lines, start=1) if s == "[[metals]]"][4]
    assert find_line(text, ["metals", 4, "name"]) == fifth_metal + 1
    assert find_line(None, ["layout"]) is None


def test_problems_carry_the_line_of_the_bad_value(tmp_path: Path, lumen130_path: Path) -> None:
    text = lumen130_path.read_text(encoding="utf-8").replace("rail_clearance_um = 0.17", "rail_clearance_um = -0.2")
    bad = tmp_path / "bad.toml"
    bad.write_text(text, encoding="utf-8")
    with pytest.raises(DeckError) as info:
        load_deck(bad)
    (problem,) = info.value.problems
    assert problem.line == text.splitlines().index("rail_clearance_um = -0.2") + 1
    assert str(problem).startswith(f"{bad}:{problem.line}: layout.rail_clearance_um = -0.2 -> ")
