"""LEF views loaded by KLayout's Python module (``klayout`` from PyPI, its LEF/DEF reader).

Macro outlines, pin rectangles (named by the reader's pin labels) and blockages are read back
with ``klayout.db.Layout.read`` and compared with the geometry stored with each characterized
cell and the deck's layout rules.
"""

from __future__ import annotations

import re
from dataclasses import replace
from pathlib import Path
from typing import Any

import pytest

from celllab.deck import Deck, load_deck
from celllab.errors import ExportError
from celllab.export import CAUTION
from celllab.export.lef import (
    LEF_DATABASE_UNITS,
    lef_grid,
    macro_view,
    placement_class,
    render_lef,
    write_lef,
)
from celllab.records import CellResult

kdb = pytest.importorskip("klayout.db")

DECKS = ("lumen130", "tarn40lp", "quill28hk")
DECK_DIR = Path(__file__).resolve().parents[2] / "process_decks"


PIN_NAME = 1  # property key under which KLayout stores the LEF pin name of each pin shape


def read_lef(path: Path) -> Any:
    options = kdb.LoadLayoutOptions()
    config = options.lefdef_config
    config.pin_property_name = PIN_NAME
    options.lefdef_config = config
    layout = kdb.Layout()
    layout.read(str(path), options)
    return layout


def shapes(layout: Any, cell_name: str) -> dict[str, list[Any]]:
    """Layer name (KLayout's ``<layer>.PIN`` / ``.OBS`` / ``.LABEL`` / ``OUTLINE``) -> shapes."""
    cell = layout.cell(cell_name)
    assert cell is not None, f"KLayout did not create macro {cell_name}"
    found: dict[str, list[Any]] = {}
    for index in layout.layer_indexes():
        items = list(cell.shapes(index).each())
        if items:
            found[layout.get_info(index).name] = items
    return found


def expected_rails(
    cell: CellResult, deck: Deck, dbu: float
) -> set[tuple[str, tuple[int, int, int, int]]]:
    """(net, box) of every rail rectangle by the deck's rules: a rail_width_um rail centred on
    each row boundary, clipped to the outline; ground at the bottom, alternating upwards."""
    um = lambda v: round(v / dbu)  # noqa: E731
    width = um(cell.geometry["resolved_cell_width_um"])
    height = um(cell.geometry["resolved_cell_height_um"])
    half, row = um(deck.layout.rail_width_um / 2), um(deck.layout.row_height_um)
    power, ground = deck.supplies.rail_nets(cell.rail)
    return {
        ((ground, power)[k % 2], (0, max(0, k * row - half), width, min(height, k * row + half)))
        for k in range(cell.height_rows + 1)
    }


@pytest.fixture(scope="module")
def lumen130() -> Deck:
    return load_deck(DECK_DIR / "lumen130.toml")


# --- every demo process: render -> KLayout -> equal to the cell geometry ------------------------


@pytest.mark.parametrize("deck_name", DECKS)
def test_macros_load_in_klayout_and_match_the_cell_geometry(
    deck_name: str, demo_view_runs: dict[str, Any], tmp_path: Path
) -> None:
    run = demo_view_runs[deck_name]
    deck = load_deck(DECK_DIR / f"{deck_name}.toml")
    path = write_lef(tmp_path / f"{deck_name}.lef", run.cells, deck)
    layout = read_lef(path)
    grid = lef_grid(deck)
    # Source: KLayout LEF reader; database units as written (UNITS DATABASE MICRONS)
    assert layout.dbu == pytest.approx(1 / grid.dbu)
    site = round(deck.layout.site_width_um / layout.dbu)
    layers = [m.name for m in deck.metals]
    for cell in run.cells:
        found = shapes(layout, cell.name)
        (outline,) = found["OUTLINE"]
        box = outline.box
        # Source: KLayout LEF reader (macro SIZE -> OUTLINE box); expected: stored geometry
        assert (box.left, box.bottom) == (0, 0)
        assert box.width() * layout.dbu == pytest.approx(
            cell.geometry["resolved_cell_width_um"], rel=1e-9
        )
        assert box.height() * layout.dbu == pytest.approx(
            cell.geometry["resolved_cell_height_um"], rel=1e-9
        )
        assert box.width() % site == 0 and box.width() // site == cell.width_sites
        # pins: rectangles on the rail layer, each carrying its LEF pin name as a property
        rail = deck.layout.rail_layer
        pins = {
            (s.property(PIN_NAME), (s.box.left, s.box.bottom, s.box.right, s.box.top))
            for s in found[f"{rail}.PIN"]
        }
        assert pins == expected_rails(cell, deck, layout.dbu)
        assert {s.text.string for s in found[f"{rail}.LABEL"]} == set(
            deck.supplies.rail_nets(cell.rail)
        )
        assert not [n for n in found if n.endswith(".PIN") and not n.startswith(f"{rail}.")]
        # blockages: the rail layer over MOS devices, every MOM finger layer, nothing else
        blocked = {n.removesuffix(".OBS") for n in found if n.endswith(".OBS")}
        expected = set(cell.geometry["resolved_mom_layers"])
        if cell.geometry["resolved_devices"] > 0:  # MOS devices under the rails
            expected.add(rail)
        assert blocked == expected and blocked <= set(layers)
        for name in blocked:
            for shape in found[f"{name}.OBS"]:
                assert box.contains(shape.box.p1) and box.contains(shape.box.p2)
                assert shape.box.width() > 0 and shape.box.height() > 0
        for name in cell.geometry["resolved_mom_layers"]:
            (finger_field,) = found[f"{name}.OBS"]  # bus bar to bus bar, centred in the cell
            b = finger_field.box
            assert (b.bottom, b.top) == (0, box.top) and b.left == box.right - b.right > 0


@pytest.mark.parametrize("deck_name", DECKS)
def test_coordinates_lie_on_the_manufacturing_grid(
    deck_name: str, demo_view_runs: dict[str, Any], tmp_path: Path
) -> None:
    run = demo_view_runs[deck_name]
    deck = load_deck(DECK_DIR / f"{deck_name}.toml")
    grid = lef_grid(deck)
    assert grid.dbu in LEF_DATABASE_UNITS
    layout = read_lef(write_lef(tmp_path / "g.lef", run.cells, deck))
    step = grid.step
    for cell in run.cells:
        for items in shapes(layout, cell.name).values():
            for shape in items:
                if shape.is_box():
                    b = shape.box
                    # Source: KLayout LEF reader (integer database units)
                    assert all(v % step == 0 for v in (b.left, b.bottom, b.right, b.top)), cell.name


def test_technology_section_restates_the_deck(
    lumen130: Deck, demo_view_runs: dict[str, Any]
) -> None:
    # Own line reader of our output (KLayout loads the section but does not expose layer rules);
    # expected values are the deck's, keywords per the LEF/DEF 5.8 reference (Layer (Routing),
    # Layer (Cut), Site).
    text = render_lef(demo_view_runs["lumen130"].cells, lumen130, date="2031-04-05")
    blocks = dict(re.findall(r"^LAYER (\S+)\n(.*?)^END \1$", text, flags=re.MULTILINE | re.DOTALL))
    routing = [n for n, body in blocks.items() if "TYPE ROUTING ;" in body]
    assert routing == [m.name for m in lumen130.metals]
    order = re.findall(r"^LAYER (\S+)$", text, flags=re.MULTILINE)
    assert order == [
        "M1",
        "CUT_M1_M2",
        "M2",
        "CUT_M2_M3",
        "M3",
        "CUT_M3_M4",
        "M4",
        "CUT_M4_M5",
        "M5",
    ]
    for i, m in enumerate(lumen130.metals):
        body = blocks[m.name]
        number = lambda key: float(re.search(rf"^  {key} (\S+) ;", body, re.MULTILINE).group(1))  # noqa: E731,B023
        assert number("WIDTH") == pytest.approx(m.min_width_nm / 1000)
        assert number("SPACING") == pytest.approx(m.min_space_nm / 1000)
        assert number("PITCH") == pytest.approx((m.min_width_nm + m.min_space_nm) / 1000)
        assert number("RESISTANCE RPERSQ") == pytest.approx(m.sheet_ohm_per_sq)
        assert ("HORIZONTAL" if i % 2 == 0 else "VERTICAL") in body
        if i:
            cut = blocks[f"CUT_{lumen130.metals[i - 1].name}_{m.name}"]
            assert "TYPE CUT ;" in cut and f"RESISTANCE {m.via_below_ohm:g} ;" in cut
    site = re.search(
        r"^SITE lumen130_core\n(.*?)^END lumen130_core$", text, re.MULTILINE | re.DOTALL
    ).group(1)
    assert "CLASS CORE ;" in site and "SYMMETRY Y ;" in site and "SIZE 0.425 BY 3.825 ;" in site
    assert "MANUFACTURINGGRID 0.005 ;" in text and "DATABASE MICRONS 1000 ;" in text
    head = "\n".join(line for line in text.splitlines() if line.startswith("#"))
    assert " ".join(CAUTION.split()) in " ".join(head.split()) and lumen130.content_hash in head


def test_macro_statements_follow_the_reference_order(
    lumen130: Deck, demo_view_runs: dict[str, Any]
) -> None:
    # LEF/DEF 5.8 reference, MACRO: "the keywords must be specified in the given order"
    text = render_lef(demo_view_runs["lumen130"].cells, lumen130)
    rank = {"CLASS": 0, "ORIGIN": 1, "SIZE": 2, "SYMMETRY": 3, "SITE": 4, "PIN": 5, "OBS": 6}
    for body in re.findall(r"^MACRO \S+\n(.*?)^END \S+$", text, flags=re.MULTILINE | re.DOTALL):
        keys = [line.split()[0] for line in body.splitlines() if re.match(r"^  [A-Z]", line)]
        keys = [k for k in keys if k in rank]
        assert keys == sorted(keys, key=rank.__getitem__)
        if "CLASS CORE SPACER ;" in body:      # core-row cells sit on the site, open-region cells not
            assert keys[:5] == ["CLASS", "ORIGIN", "SIZE", "SYMMETRY", "SITE"]
        else:
            assert keys[:5] == ["CLASS", "ORIGIN", "SIZE", "SYMMETRY", "PIN"]
    cells = demo_view_runs["lumen130"].cells
    assert text.count("CLASS CORE SPACER ;") == sum(c.placement == "core_row" for c in cells)
    assert text.count("CLASS PAD SPACER ;") == sum(c.placement == "open_region" for c in cells) > 0


# --- placement class ------------------------------------------------------------------------


def test_placement_defaults_to_core_row_and_open_region_cells_are_pad_spacers(
    lumen130: Deck, demo_view_runs: dict[str, Any], tmp_path: Path
) -> None:
    cell = demo_view_runs["lumen130"].cells[0]
    assert placement_class(cell) == "core_row"
    spacer = replace(
        cell, name="ring_spacer", geometry={**cell.geometry, "placement": "open_region"}
    )
    assert placement_class(spacer) == "open_region"
    view = macro_view(spacer, lumen130, lef_grid(lumen130))
    assert (view.macro_class, view.site, view.symmetry) == ("PAD SPACER", None, "X Y R90")
    text = render_lef([cell, spacer], lumen130)
    macro = re.search(
        r"^MACRO ring_spacer\n(.*?)^END ring_spacer$", text, re.MULTILINE | re.DOTALL
    ).group(1)
    assert "CLASS PAD SPACER ;" in macro and "SITE" not in macro
    path = tmp_path / "ring.lef"
    path.write_text(text, encoding="utf-8")
    layout = read_lef(path)  # keep the layout alive while its shapes are looked at
    # Source: KLayout LEF reader
    assert shapes(layout, "ring_spacer")["OUTLINE"][0].box.width() == view.width


def test_characterized_cells_carry_their_placement_and_rail(lumen130: Deck) -> None:
    from celllab.cells import CellSpec
    from celllab.engine import characterize

    specs = [CellSpec(name="ring", topology="nmos_inversion", width_sites=8, placement="open_region"),
             CellSpec(name="thick_core", topology="tied_cmos", oxide="io", rail="core", width_sites=16)]
    ring, thick = characterize(lumen130, specs, corners=["typ_25C"]).cells
    assert ring.geometry["placement"] == "open_region" and placement_class(ring) == "open_region"
    grid = lef_grid(lumen130)
    assert macro_view(ring, lumen130, grid).macro_class == "PAD SPACER"
    view = macro_view(thick, lumen130, grid)
    # a thick-oxide cell on the core rail connects to the core nets, not the I/O ones
    assert (view.macro_class, set(view.pins)) == ("CORE SPACER", {"VDD", "VSS"})


def test_unknown_placement_lists_the_allowed_ones(demo_view_runs: dict[str, Any]) -> None:
    cell = demo_view_runs["lumen130"].cells[0]
    odd = replace(cell, geometry={**cell.geometry, "placement": "corner"})
    with pytest.raises(ExportError) as info:
        placement_class(odd)
    (problem,) = info.value.problems
    assert problem.field == "placement" and "core_row, open_region" in problem.message


# --- bad input --------------------------------------------------------------------------------


def test_record_without_a_layout_definition_is_named(
    library: list[CellResult], lumen130: Deck
) -> None:
    with pytest.raises(ExportError) as info:
        render_lef(library, lumen130)
    assert {p.file for p in info.value.problems} == {f"cell {c.name}" for c in library}
    assert {p.field for p in info.value.problems} == {"geometry"}


def test_cells_from_another_deck_are_refused(
    lumen130: Deck, demo_view_runs: dict[str, Any]
) -> None:
    tarn_cell = demo_view_runs["tarn40lp"].cells[0]
    with pytest.raises(ExportError) as info:
        render_lef([tarn_cell], lumen130)
    (problem,) = info.value.problems
    assert problem.file == f"cell {tarn_cell.name}" and problem.field == "cell_width_um"
    assert "characterized" in problem.message


@pytest.mark.parametrize(
    ("grid_um", "fields"),
    [
        (0.007, {"layout.site_width_um", "layout.row_height_um"}),
        (0.0, {"manufacturing grid"}),
    ],
)
def test_grid_off_the_deck_lengths_names_them(
    grid_um: float, fields: set[str], lumen130: Deck, demo_view_runs: dict[str, Any]
) -> None:
    with pytest.raises(ExportError) as info:
        render_lef(demo_view_runs["lumen130"].cells, lumen130, manufacturing_grid_um=grid_um)
    assert fields <= {p.field for p in info.value.problems}


def test_empty_or_duplicate_selection(lumen130: Deck, demo_view_runs: dict[str, Any]) -> None:
    cell = demo_view_runs["lumen130"].cells[0]
    for cells in ([], [cell, cell]):
        with pytest.raises(ExportError) as info:
            render_lef(cells, lumen130)
        assert [p.field for p in info.value.problems] == ["cells"]


def test_failed_render_leaves_an_existing_file_untouched(
    library: list[CellResult], lumen130: Deck, tmp_path: Path
) -> None:
    target = tmp_path / "keep.lef"
    target.write_text("previous\n", encoding="utf-8")
    with pytest.raises(ExportError):
        write_lef(target, library, lumen130)
    assert target.read_text(encoding="utf-8") == "previous\n"
    assert [p.name for p in tmp_path.iterdir()] == ["keep.lef"]
