"""Liberty views read back by a general-purpose Liberty parser (``liberty-parser`` from PyPI).

Every check that reads a file goes through ``liberty.parser.parse_liberty``, which this project
did not write; the expected values come from the catalog (or the records) and the deck.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import pytest

from celllab.catalog import open_catalog
from celllab.cli.main import main
from celllab.deck import Deck, load_deck
from celllab.errors import ExportError
from celllab.export import CAUTION
from celllab.export.liberty import (
    USER_ATTRIBUTES,
    LeakageParts,
    cell_leakage_power_nW,
    leakage_parts,
    liberty_filename,
    render_liberty,
    write_liberty,
    write_liberty_set,
)
from celllab.records import CellResult

liberty_parser = pytest.importorskip("liberty.parser")

DECKS = ("lumen130", "tarn40lp", "quill28hk")
DATE = "2031-04-05"


def parse(text: str) -> Any:
    return liberty_parser.parse_liberty(text)


def plain(value: Any) -> Any:
    """A parsed value without the parser's string wrapper."""
    return getattr(value, "value", value)


@pytest.fixture(scope="module")
def lumen130() -> Deck:
    return load_deck(Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml")


# --- rails: each cell on the nets of the rail it decouples -------------------------------------


def test_cells_use_the_nets_and_voltage_of_their_rail(lumen130: Deck) -> None:
    from celllab.cells import CellSpec
    from celllab.deck import parse_deck
    from celllab.engine import characterize

    data = lumen130.full_dump()
    data["supplies"]["named"] = {"analog": {"voltage_V": 1.5, "power_net": "AVDD", "ground_net": "AVSS"}}
    deck = parse_deck(data)
    specs = [CellSpec(name="thick_core", topology="nmos_inversion", oxide="io", rail="core", width_sites=16),
             CellSpec(name="thick_io", topology="nmos_inversion", oxide="io", width_sites=16),
             CellSpec(name="thick_analog", topology="nmos_inversion", oxide="io", rail="analog", width_sites=16)]
    cells = characterize(deck, specs, corners=["slow_125C"]).cells
    # Source: liberty-parser (docs/references.md [134]); the slow corner scales every rail by 0.9
    lib = parse(render_liberty(cells, deck, "slow_125C", date=DATE))
    voltages = {net: v for net, v in lib.get_attributes("voltage_map")}
    assert voltages == pytest.approx({"VDD": 1.08, "VSS": 0.0, "VDDIO": 2.97, "VSSIO": 0.0, "AVDD": 1.35,
                                      "AVSS": 0.0}, rel=1e-12)
    pins = {plain(g.args[0]): {plain(p.args[0]) for p in g.get_groups("pg_pin")} for g in lib.get_groups("cell")}
    assert pins == {"thick_core": {"VDD", "VSS"}, "thick_io": {"VDDIO", "VSSIO"}, "thick_analog": {"AVDD", "AVSS"}}
    # the thick-oxide cell on the core rail was characterized at the core supply
    assert cells[0].corners[0].supply_V == pytest.approx(1.08, rel=1e-12)


# --- every demo process: CLI -> files -> outside parser -> equal to the catalog ---------------


@pytest.mark.parametrize("deck_name", DECKS)
def test_every_library_parses_and_reads_back_the_catalog(
    deck_name: str, demo_view_catalog: Path, tmp_path: Path
) -> None:
    out = tmp_path / "views"
    assert (
        main(
            [
                "export",
                "liberty",
                "--catalog",
                str(demo_view_catalog),
                "--deck",
                deck_name,
                "--out",
                f"{out}/",
            ]
        )
        == 0
    )
    with open_catalog(demo_view_catalog, create=False) as cat:
        deck = Deck.model_validate(cat.deck_params(deck_name))
        corners = cat.corners(deck_name)
        rows = {c: {r["name"]: r for r in cat.query(deck=deck_name, corner=c)} for c in corners}
    assert sorted(p.name for p in out.iterdir()) == sorted(
        liberty_filename(deck_name, c) for c in corners
    )
    for corner in corners:
        lib = parse((out / liberty_filename(deck_name, corner)).read_text(encoding="utf-8"))
        at = deck.at_corner(corner)
        # Source: liberty-parser (PyPI) reading our file; expected values from the deck / catalog.
        assert lib.args == [f"{deck_name}_{corner}"]
        assert plain(lib["time_unit"]) == "1ns" and plain(lib["voltage_unit"]) == "1V"
        assert plain(lib["current_unit"]) == "1uA" and plain(lib["leakage_power_unit"]) == "1nW"
        assert plain(lib["pulling_resistance_unit"]) == "1kohm"
        assert lib["capacitive_load_unit"] == [1, "ff"]
        conditions = lib.get_group("operating_conditions")
        assert conditions.args == [corner] and lib["default_operating_conditions"] == corner
        assert conditions["voltage"] == pytest.approx(at.supplies.core_V, rel=1e-12)
        assert conditions["temperature"] == pytest.approx(deck.corners[corner].temperature_C)
        voltages = {net: v for net, v in lib.get_attributes("voltage_map")}
        assert voltages[at.supplies.core_power_net] == pytest.approx(at.supplies.core_V, rel=1e-12)
        assert voltages[at.supplies.core_ground_net] == 0
        assert {(d.attribute_name, d.group_name, d.attribute_type) for d in lib.defines} == {
            (name, "cell", kind) for name, (kind, _) in USER_ATTRIBUTES.items()
        }
        cells = lib.get_groups("cell")
        assert {plain(c.args[0]) for c in cells} == set(rows[corner])
        for group in cells:
            row = rows[corner][plain(group.args[0])]
            power, ground = at.supplies.rail_nets(row["rail"])
            assert group["area"] == row["area_um2"]
            assert group["is_decap_cell"] == "true"
            # P = V x I with the catalog's supply and leakage (gate + junction) at this corner
            expected_nW = row["supply_V"] * row["leakage_nA"]
            assert group["cell_leakage_power"] == pytest.approx(expected_nW, rel=1e-12)
            assert group["celllab_cap_fF"] == row["cap_fF"]
            assert group["celllab_esr_ohm"] == row["esr_ohm"]
            assert group["celllab_gate_leakage_nA"] == row["gate_leakage_nA"]
            assert group["celllab_junction_leakage_nA"] == row["junction_leakage_nA"]
            assert plain(group["celllab_cell_hash"]) == row["cell_hash"]
            pins = {
                plain(p.args[0]): (p["pg_type"], p["voltage_name"])
                for p in group.get_groups("pg_pin")
            }
            assert pins == {power: ("primary_power", power), ground: ("primary_ground", ground)}
            assert voltages[power] == pytest.approx(row["supply_V"], rel=1e-12)
            (leak,) = group.get_groups("leakage_power")
            assert leak["value"] == group["cell_leakage_power"] and leak["related_pg_pin"] == power


# --- V x I: a worked example ---------------------------------------------------------------


def test_leakage_power_is_supply_times_current_worked_example(
    make_cell: Any, lumen130: Deck
) -> None:
    # Worked example (P = V I): at slow_125C the core supply is 1.2 V x 0.90 = 1.08 V. A cell
    # leaking 2.5 nA through its gate oxide and 0.5 nA through its junctions draws 3.0 nA, so
    # P = 1.08 V x 3.0 nA = 3.24 nW; the gate part alone is 1.08 x 2.5 = 2.7 nW.
    cell = make_cell("mos", name="worked")
    slow = cell.corner("slow_125C")
    assert slow.supply_V == pytest.approx(1.08)
    metrics = {**slow.metrics, "leakage_nA": 3.0, "gate_leakage_nA": 2.5, "junction_leakage_nA": 0.5}
    cell.corners[1] = replace(slow, metrics=metrics)
    assert leakage_parts(cell.corners[1]) == LeakageParts(2.5, 0.5)
    assert cell_leakage_power_nW(cell.corners[1]) == pytest.approx(3.24, rel=1e-12)
    group = parse(render_liberty([cell], lumen130, "slow_125C", date=DATE)).get_group(
        "cell", "worked"
    )
    # Source: liberty-parser (PyPI) reading the file back; leakage_power_unit is 1 nW.
    assert group["cell_leakage_power"] == pytest.approx(3.24, rel=1e-12)
    assert group["celllab_gate_leakage_nA"] == 2.5 and group["celllab_junction_leakage_nA"] == 0.5
    gate_only = {k: v for k, v in slow.metrics.items() if k not in ("gate_leakage_nA", "junction_leakage_nA")}
    cell.corners[1] = replace(slow, metrics={**gate_only, "leakage_nA": 2.5})  # a record without the split
    group = parse(render_liberty([cell], lumen130, "slow_125C", date=DATE)).get_group(
        "cell", "worked"
    )
    assert group["cell_leakage_power"] == pytest.approx(2.7, rel=1e-12)


def test_leakage_parts_prefer_split_metrics_when_the_catalog_has_them(make_cell: Any) -> None:
    full = make_cell("mos").corners[0]
    result = replace(full, metrics={k: v for k, v in full.metrics.items()
                                    if k not in ("gate_leakage_nA", "junction_leakage_nA")})
    assert leakage_parts(result) == LeakageParts(result.metrics["leakage_nA"], 0.0)
    # a junction part the deck did not model (empty) counts 0, as in the catalog's total
    unmodelled = replace(full, metrics={**full.metrics, "junction_leakage_nA": math.nan})
    assert leakage_parts(unmodelled).junction_nA == 0.0
    split = replace(
        result, metrics={**result.metrics, "gate_leakage_nA": 1.25, "junction_leakage_nA": 0.75}
    )
    assert leakage_parts(split).total_nA == 2.0


# --- the file itself ------------------------------------------------------------------------


def test_header_carries_caution_deck_corner_date_and_generator(
    library: list[CellResult], lumen130: Deck
) -> None:
    text = render_liberty(library, lumen130, "typ_25C", date=DATE)
    head = text[: text.index("library (")]
    flat = " ".join(line.lstrip(" */") for line in head.splitlines())
    assert "CAUTION" in flat and " ".join(CAUTION.split()) in " ".join(flat.split())
    assert (
        lumen130.content_hash in flat and "typ_25C" in flat and DATE in flat and "celllab" in flat
    )
    lib = parse(text)
    # Source: liberty-parser (PyPI); the date and the caution also travel as library attributes.
    assert plain(lib["date"]) == DATE and "not sign-off" in plain(lib["comment"])


def test_cell_names_with_dots_and_dashes_are_quoted_and_read_back(
    library: list[CellResult], lumen130: Deck
) -> None:
    lib = parse(render_liberty(library, lumen130, "fast_m40C", date=DATE))
    # Source: liberty-parser (PyPI)
    assert [plain(c.args[0]) for c in lib.get_groups("cell")] == [c.name for c in library]
    assert "XCP.4x2-core" in [plain(c.args[0]) for c in lib.get_groups("cell")]


def test_rail_names_come_from_the_deck(library: list[CellResult], lumen130: Deck) -> None:
    data = lumen130.model_dump(mode="json")
    data["supplies"].update(core_power_net="VPWR_CORE", core_ground_net="VGND_CORE")
    renamed = Deck.model_validate(data)
    lib = parse(render_liberty(library, renamed, "typ_25C", date=DATE))
    # Source: liberty-parser (PyPI)
    assert dict(lib.get_attributes("voltage_map")) == {"VPWR_CORE": 1.2, "VGND_CORE": 0.0}
    pins = {plain(p.args[0]): p["pg_type"] for p in lib.get_groups("cell")[0].get_groups("pg_pin")}
    assert pins == {"VPWR_CORE": "primary_power", "VGND_CORE": "primary_ground"}


def test_write_liberty_set_writes_one_library_per_corner(
    library: list[CellResult], lumen130: Deck, tmp_path: Path
) -> None:
    corners = ["typ_25C", "slow_125C", "fast_m40C"]
    paths = write_liberty_set(tmp_path, library, lumen130, corners, date=DATE)
    assert [p.name for p in paths] == [f"lumen130_{c}.lib" for c in corners]
    for path, corner in zip(paths, corners):
        # Source: liberty-parser (PyPI)
        assert parse(path.read_text(encoding="utf-8")).get_group("operating_conditions").args == [
            corner
        ]


# --- bad input: located errors, nothing written -----------------------------------------------


def test_unknown_corner_names_the_allowed_ones(library: list[CellResult], lumen130: Deck) -> None:
    with pytest.raises(ExportError) as info:
        render_liberty(library, lumen130, "typical")
    (problem,) = info.value.problems
    assert problem.field == "corner" and problem.value == "typical"
    assert "typ_25C, slow_125C, fast_m40C, leaky_125C" in problem.message


def test_cell_without_the_corner_is_named(library: list[CellResult], lumen130: Deck) -> None:
    # the synthetic cells have no leaky_125C results although the deck defines that corner
    with pytest.raises(ExportError) as info:
        render_liberty(library, lumen130, "leaky_125C")
    problem = info.value.problems[0]
    assert problem.file == f"cell {library[0].name}" and problem.field == "corner"
    assert "typ_25C, slow_125C, fast_m40C" in problem.message


@pytest.mark.parametrize(
    ("case", "field"),
    [
        ("empty", "cells"),
        ("duplicate", "cells"),
        ("nan", "cell_leakage_power"),
        ("supply", "corners.typ_25C.supply_V"),
    ],
)
def test_bad_selections_give_located_errors(
    case: str, field: str, make_cell: Any, lumen130: Deck
) -> None:
    deck = lumen130
    cells = [make_cell("mos", name="A1")]
    if case == "empty":
        cells = []
    elif case == "duplicate":
        cells = cells + [make_cell("mom", name="A1")]
    elif case == "nan":
        typ = cells[0].corners[0]
        cells[0].corners[0] = replace(typ, metrics={**typ.metrics, "leakage_nA": math.nan,
                                                    "gate_leakage_nA": math.nan})
    else:  # the deck now says 1.3 V; the cell was characterized at 1.2 V
        deck = lumen130.with_changes({"supplies.core_V": 1.3})
    with pytest.raises(ExportError) as info:
        render_liberty(cells, deck, "typ_25C")
    assert [p.field for p in info.value.problems] == [field]
    assert str(info.value)  # one readable line per problem


def test_failed_render_leaves_an_existing_file_untouched(
    library: list[CellResult], lumen130: Deck, tmp_path: Path
) -> None:
    target = tmp_path / "keep.lib"
    target.write_text("previous\n", encoding="utf-8")
    with pytest.raises(ExportError):
        write_liberty(target, library, lumen130, "no_such_corner")
    with pytest.raises(ExportError):
        write_liberty_set(tmp_path, library, lumen130, ["typ_25C", "no_such_corner"])
    assert target.read_text(encoding="utf-8") == "previous\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.lib"]
