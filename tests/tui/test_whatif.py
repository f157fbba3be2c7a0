"""What-if editor: live recompute in a worker, validation, nothing stored until saved."""

from __future__ import annotations

from typing import Any

import pytest
from textual.widgets import Input

from celllab.engine import characterize
from celllab.tui.app import CelllabApp
from celllab.tui.screens.save_variant import SaveVariantDialog
from celllab.tui.screens.whatif import (
    WhatIfScreen,
    deck_changes,
    geometry_changes,
    parse_field_text,
    spec_from_result,
)
from celllab.tui.widgets.problems_view import ProblemsView

CELL = "lm_ncap-w8-h1-f2"
DECK = "lumen130"


async def _open_whatif(app: CelllabApp, pilot: Any, ui: Any) -> WhatIfScreen:
    await ui.settle(pilot)
    await pilot.press("slash")
    await ui.type_text(pilot, f'name = "{CELL}"')
    await pilot.press("enter")
    await ui.settle(pilot)
    await pilot.press("w")
    await ui.settle(pilot)
    screen = app.screen
    assert isinstance(screen, WhatIfScreen) and screen.spec is not None
    return screen


async def _type_into(pilot: Any, screen: WhatIfScreen, input_id: str, text: str) -> None:
    from textual.widgets import Input

    screen.query_one(f"#{input_id}", Input).focus()
    await pilot.pause()
    await pilot.press("ctrl+a", "ctrl+k", *text)  # short values: typed key by key


async def test_edits_recompute_like_the_engine_invalid_ones_are_explained(
        demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    before = demo_catalog.count(deck=DECK)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await _type_into(pilot, screen, "geo-width_sites", "16")
        await ui.settle(pilot)
        assert screen.variant is not None and screen.problems == []
        deck = app.deck_named(DECK)
        expected = characterize(deck, [screen.spec.with_changes({"width_sites": 16}, deck)]).cells[0]
        shown = screen.comparison()
        worst_cap = min(c.metrics["cap_fF"] for c in expected.corners)
        assert shown["cap_fF"][1] == pytest.approx(worst_cap, rel=1e-12)
        assert shown["cap_fF"][1] > shown["cap_fF"][0]  # twice the width, more capacitance
        assert demo_catalog.count(deck=DECK) == before  # nothing stored yet

        # an invalid value: the model's own rule, shown at the field; nothing computed
        await _type_into(pilot, screen, "geo-width_sites", "0")
        await ui.settle(pilot)
        assert screen.variant is None
        assert any("width_sites" in p.field for p in screen.problems)
        text = str(screen.query_one(ProblemsView).render())
        assert "width_sites" in text and "must be >= 1" in text
        assert screen.query_one("#geo-width_sites", Input).has_class("-invalid-field")
        await pilot.press("ctrl+s")
        await ui.settle(pilot)
        assert not isinstance(app.screen, SaveVariantDialog)  # nothing valid to save

        # reset drops every change
        await _type_into(pilot, screen, "geo-fingers", "3")
        await ui.settle(pilot)
        await pilot.press("ctrl+r")
        await ui.settle(pilot)
        assert screen.variant is None and screen.geometry_edits == {}
    assert demo_catalog.count(deck=DECK) == before


async def _save_as(app: CelllabApp, pilot: Any, ui: Any, name: str) -> None:
    await pilot.press("ctrl+s")
    await ui.settle(pilot)
    assert isinstance(app.screen, SaveVariantDialog)
    await ui.type_text(pilot, name)
    await pilot.press("enter")
    await ui.settle(pilot)


async def test_saving_a_variant_through_the_catalog(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    before = demo_catalog.count(deck=DECK)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        # the demo family already holds four fingers: the same cell is not stored twice
        await _type_into(pilot, screen, "geo-fingers", "4")
        await ui.settle(pilot)
        await _save_as(app, pilot, ui, "my_copy")
        assert screen.saved_as is None
        assert any("lm_ncap-w8-h1-f4" in p.message for p in screen.problems)
        # a new geometry under a name the catalog already uses is refused
        await _type_into(pilot, screen, "geo-fingers", "3")
        await ui.settle(pilot)
        await _save_as(app, pilot, ui, "lm_ncap-w8-h1-f1")
        assert screen.saved_as is None
        assert any("already in the catalog" in p.message for p in screen.problems)
        # a new name: stored
        await _save_as(app, pilot, ui, "lm_ncap-w8-h1-f3-mine")
        assert screen.saved_as == ("lm_ncap-w8-h1-f3-mine", DECK)
    assert demo_catalog.count(deck=DECK) == before + 1
    stored = demo_catalog.cell("lm_ncap-w8-h1-f3-mine", DECK)
    deck = app.deck_named(DECK)
    spec = spec_from_result(demo_catalog.cell(CELL, DECK)).with_changes({"fingers": 3}, deck,
                                                                        name="lm_ncap-w8-h1-f3-mine")
    expected = characterize(deck, [spec]).cells[0]
    assert stored.geometry["fingers"] == 3
    for corner in expected.corners:
        assert stored.corner(corner.corner).metrics["cap_fF"] == pytest.approx(corner.metrics["cap_fF"])
    # the cells it came from are untouched and still current
    assert demo_catalog.cell(CELL, DECK).geometry["fingers"] == 2
    assert demo_catalog.cell("lm_ncap-w8-h1-f1", DECK).geometry["fingers"] == 1


async def test_deck_parameter_what_if_is_saved_under_a_new_deck(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        path_input = screen.query_one("#deck-path", Input)
        path_input.focus()
        await pilot.pause()
        await ui.type_text(pilot, "oxides.core.t_ox_nm")
        await pilot.press("enter", *"-1", "enter")  # enter moves on to the value
        await ui.settle(pilot)
        assert screen.variant is None
        assert any("t_ox_nm" in p.field for p in screen.problems)

        path_input.focus()
        await pilot.pause()
        await ui.type_text(pilot, "oxides.core.t_ox_nm")
        await pilot.press("enter", *"1.8", "enter")
        await ui.settle(pilot)
        assert screen.deck_edits == {"oxides.core.t_ox_nm": 1.8}
        # thinner oxide, more capacitance: C_ox = eps_ox / t_ox
        # Source: Sze & Ng 2007, MOS capacitor oxide capacitance (direction only)
        cap_before, cap_after = screen.comparison()["cap_fF"]
        assert cap_after > cap_before
        await pilot.press("ctrl+s")
        await ui.settle(pilot)
        assert isinstance(app.screen, SaveVariantDialog)
        await pilot.press("enter")  # default names: <cell>_wi1 under deck lumen130-wi
        await ui.settle(pilot)
        assert screen.saved_as == (f"{CELL}_wi1", f"{DECK}-wi")
    decks = {d.name: d for d in demo_catalog.decks()}
    assert decks[DECK].current and decks[f"{DECK}-wi"].current
    assert demo_catalog.deck_params(f"{DECK}-wi")["oxides"]["core"]["t_ox_nm"] == 1.8
    assert demo_catalog.count(deck=f"{DECK}-wi") == 1


@pytest.mark.parametrize(("text", "annotation", "value"), [
    ("", int, None), ("auto", float, None), ("12", int, 12), ("0.35", float | None, 0.35),
    ("true", bool, True), ("no", bool, False), ("M4", str | None, "M4"), ("1e-3", float, 1e-3),
])
def test_parse_field_text(text: str, annotation: Any, value: Any) -> None:
    assert parse_field_text(text, annotation) == value


def test_geometry_changes_lists_only_what_differs(lumen130_deck: Any) -> None:
    from celllab.cells import CellSpec

    spec = CellSpec(name="x", topology="nmos_inversion", width_sites=8, fingers=2)
    changes = geometry_changes(spec, {"width_sites": "8", "fingers": "3", "gate_length_um": ""})
    assert changes == {"fingers": 3}
    assert deck_changes({"oxides.core.t_ox_nm": "2.5", "supplies.core_V": "x"}) == {
        "oxides.core.t_ox_nm": 2.5, "supplies.core_V": "x"}


async def test_keys_typed_while_loading_do_not_land_in_fields(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, f'name = "{CELL}"')
        await pilot.press("enter")
        await ui.settle(pilot)
        await pilot.press("w", "9", "9")  # typed before the form is there
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, WhatIfScreen)
        assert screen.query_one("#geo-width_sites", Input).value == str(screen.spec.width_sites)
        assert screen.variant is None and screen.problems == []


async def test_numeric_fields_take_numbers_and_empty_means_the_default(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await _type_into(pilot, screen, "geo-fingers", "4x")
        await ui.settle(pilot)
        assert screen.query_one("#geo-fingers", Input).value == "4"  # the letter did not go in
        await _type_into(pilot, screen, "geo-fingers", "")
        await ui.settle(pilot)
        # an empty integer field with a default is that default, not an error
        assert screen.problems == []
        assert screen.variant is not None and screen.variant_spec.fingers == 1
        await _type_into(pilot, screen, "geo-width_sites", "")
        await ui.settle(pilot)
        assert screen.problems and "width_sites" in str(screen.problems[0])
        assert "required" in str(screen.problems[0])


async def test_a_mistyped_deck_path_is_named_not_shown_as_nan(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await _type_into(pilot, screen, "deck-path", "oxides.core.t_ox_mm")
        await pilot.press("enter", *"2", "enter")
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert "nan" not in text
        assert "not a deck parameter" in text
        assert screen.problems and screen.variant is None


async def test_suggested_name_follows_the_new_geometry(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        assert screen.spec.fingers == 2 and "-f2" in CELL
        await _type_into(pilot, screen, "geo-fingers", "4")
        await ui.settle(pilot)
        await pilot.press("ctrl+s")
        await ui.settle(pilot)
        dialog = app.screen
        assert isinstance(dialog, SaveVariantDialog)
        name = dialog.query_one("#save-cell-name", Input).value
        assert "-f4" in name and "-f2" not in name


async def test_a_variant_saved_to_a_new_deck_is_shown_and_can_be_undone(demo_catalog: Any, ui: Any) -> None:
    from celllab.tui.screens.catalog import CatalogScreen

    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    before = demo_catalog.count(deck=DECK)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await _type_into(pilot, screen, "deck-path", "oxides.core.t_ox_nm")
        await pilot.press("enter", *"2.4", "enter")
        await ui.settle(pilot)
        assert screen.variant is not None
        await pilot.press("ctrl+s")
        await ui.settle(pilot)
        await pilot.press("enter")  # the suggested names
        await ui.settle(pilot)
        assert screen.saved_as is not None
        name, deck = screen.saved_as
        assert deck != DECK
        assert any(deck in n.message and "deck" in n.message for n in app._notifications)
        assert app.current_deck == deck  # the catalog follows the variant to its deck
        assert demo_catalog.count(deck=deck) == 1
        await pilot.press("ctrl+z")  # undo the save
        await ui.settle(pilot)
        assert screen.saved_as is None
        assert deck not in {d.name for d in demo_catalog.decks()}
        assert app.current_deck == DECK
        await pilot.press("escape", "escape", "escape")
        await ui.settle(pilot)
        assert isinstance(app.screen, CatalogScreen)
    assert demo_catalog.count(deck=DECK) == before


@pytest.mark.parametrize("size", [(120, 40), (80, 24)])
async def test_sweep_oxide_thickness_and_read_leakage_against_density(
        demo_catalog: Any, ui: Any, size: tuple[int, int]) -> None:
    from textual.widgets import DataTable, Select

    from celllab.records import corner_metrics
    from celllab.tui.screens.sweep import SweepScreen
    from celllab.tui.widgets.plot import PlotView

    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=size) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await pilot.press("ctrl+w")
        await ui.settle(pilot)
        sweep = app.screen
        assert isinstance(sweep, SweepScreen)
        assert app.focused is sweep.query_one("#sweep-parameter", Input)
        await pilot.press(*"oxides.core.t_ox_nm", "tab", *"1.8", "tab", *"2.6", "tab",
                          "ctrl+a", "ctrl+k", *"5", "enter")
        await ui.settle(pilot)
        assert sweep.result is not None and len(sweep.result.ok()) == 5
        sweep.query_one("#sweep-x", Select).value = "cap_density_fF_per_um2"
        await ui.settle(pilot)
        spec = sweep.query_one("#sweep-plot", PlotView).spec
        deck = screen.deck
        for (t_ox, _cell), x, y in zip(sweep.result.ok(), spec.series[0].x, spec.series[0].y):
            changed = deck.with_changes({"oxides.core.t_ox_nm": t_ox})
            direct = characterize(changed, [screen.spec.with_changes({}, changed)]).cells[0]
            worst = corner_metrics(direct, "worst")
            assert x == pytest.approx(worst["cap_density_fF_per_um2"])
            assert y == pytest.approx(worst["leakage_nA_per_nF"])
        table = sweep.query_one("#sweep-table", DataTable)
        assert table.row_count == 5
        text = ui.screen_text(app)
        assert "leakage_nA_per_nF" in text and "cap_density" in text
        await pilot.press("escape", "escape")
        await ui.settle(pilot)
        assert app.screen is screen


async def test_the_sweep_view_names_every_numeric_field_at_80_columns(demo_catalog: Any,
                                                                      ui: Any) -> None:
    from celllab.topologies import REGISTRY
    from celllab.tui.screens.sweep import SweepScreen

    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open_whatif(app, pilot, ui)
        await pilot.press("ctrl+w")
        await ui.settle(pilot)
        assert isinstance(app.screen, SweepScreen)
        words = " ".join(ui.screen_text(app).split())
        applies = REGISTRY[screen.spec.topology].fields
        numeric = [f for f in screen.spec.geometry if f in applies and f != "placement"]
        assert numeric and all(f in words for f in numeric), words
        status = str(app.screen.query_one("#sweep-status").render())
        assert "placement" not in status  # text: nothing to sweep over a range
        assert f"oxides.{screen.spec.oxide}.t_ox_nm" in words  # the example fits the cell
