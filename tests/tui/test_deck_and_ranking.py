"""Deck view (parameters with units, corners, a bad deck's located problems) and ranking view."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from textual.widgets import DataTable, OptionList, Select

from celllab.deck import load_deck
from celllab.errors import DeckError
from celllab.tui.app import CelllabApp, DeckFailure
from celllab.tui.screens.deck import DeckScreen, corner_changes, describe_deck_path, unit_of
from celllab.tui.screens.ranking import RankingScreen
from celllab.tui.widgets.catalog_table import CatalogTable
from celllab.tui.widgets.plot import PlotView

from .conftest import DECK_DIR, SYNTHETIC_DECK


@pytest.fixture
def bad_deck(tmp_path: Path) -> DeckFailure:
    text = (DECK_DIR / "lumen130.toml").read_text()
    text = text.replace("t_ox_nm = 2.2", "t_ox_nm = -2.2", 1)
    path = tmp_path / "broken.toml"
    path.write_text(text)
    with pytest.raises(DeckError) as caught:
        load_deck(path)
    return DeckFailure.from_error(path, caught.value)


@pytest.mark.parametrize(("path", "unit"), [
    ("oxides.core.t_ox_nm", "nm"), ("wells.pwell_doping_cm3", "cm^-3"),
    ("oxides.core.nmos.mu0_cm2_per_Vs", "cm^2/(V s)"), ("supplies.core_V", "V"),
    ("metals[0].sheet_ohm_per_sq", "ohm/sq"), ("oxides.core.reliability.weibull_beta", "unitless"),
    ("oxides.io.reliability.activation_energy_eV", "eV"),
])
def test_units_come_from_the_deck_schema(path: str, unit: str) -> None:
    assert unit_of(path, describe_deck_path(path)) == unit


async def test_deck_view_parameters_corners_and_a_bad_deck(
        lumen130_deck: Any, bad_deck: DeckFailure, synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog, deck=lumen130_deck, deck_failures=[bad_deck])
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        # the app opened on the catalog and says where to look
        assert type(app.screen).__name__ == "CatalogScreen"
        assert any("Decks (3)" in n.message for n in app._notifications)
        await pilot.press("3")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, DeckScreen)
        words = " ".join(ui.screen_text(app).split())
        assert "broken.toml" in words and "did not load" in words
        problem = bad_deck.problems[0]
        assert problem.line is not None
        assert f"broken.toml:{problem.line}" in words
        assert "oxides.core.t_ox_nm = -2.2" in words

        await pilot.press("down")  # the deck file
        await ui.settle(pilot)
        params = screen.query_one("#deck-params", DataTable)
        row = params.get_row("oxides.core.t_ox_nm")
        assert str(row[1]) == "2.2" and row[2] == "nm"
        corners = screen.query_one("#deck-corners", DataTable)
        assert corners.row_count == len(lumen130_deck.corner_names())
        assert "invented demo data" in ui.screen_text(app)
        listing = screen.query_one(OptionList)
        ids = [listing.get_option_at_index(i).id for i in range(listing.option_count)]
        assert ids == ["bad:" + bad_deck.path, "file:lumen130", f"catalog:{SYNTHETIC_DECK}"]


async def test_ranking_orders_by_the_metric_and_marks_the_pareto_front(
        synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(140, 44)) as pilot:
        await ui.settle(pilot)
        await pilot.click("#taskbar", offset=(25, 0))  # the task bar is clickable: "2 Ranking"
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, RankingScreen)
        await pilot.press("slash")
        await ui.type_text(pilot, "esd_safe")
        await pilot.press("enter")
        await ui.settle(pilot)
        ranked = screen.ranked_rows()
        values = [r["cap_density_fF_per_um2"] for r in ranked]
        assert values == sorted(values, reverse=True) and all(r["esd_safe"] for r in ranked)
        front = synthetic_catalog.pareto(["cap_density_fF_per_um2", "leakage_nA_per_nF"],
                                         deck=SYNTHETIC_DECK, where="esd_safe")
        assert {r["name"] for r in screen.front} == {r["name"] for r in front}
        spec = screen.query_one(PlotView).spec
        assert len(spec.markers) == len(front)
        # no candidate beats a front point in both metrics (denser and less leaky)
        for f in screen.front:
            assert not any(r["cap_density_fF_per_um2"] > f["cap_density_fF_per_um2"]
                           and r["leakage_nA_per_nF"] < f["leakage_nA_per_nF"]
                           for r in synthetic_catalog.query(deck=SYNTHETIC_DECK, where="esd_safe"))
        assert "●" in ui.screen_text(app)

        # another ranking metric, then enter opens the best cell
        await pilot.press("m")
        await pilot.pause()
        select = screen.query_one("#rank-by", Select)
        assert select.expanded
        select.value = "esr_ohm"
        await ui.settle(pilot)
        values = [r["esr_ohm"] for r in screen.ranked_rows()]
        assert values == sorted(values)
        screen.query_one(CatalogTable).focus()
        await pilot.press("enter")
        await ui.settle(pilot)
        assert type(app.screen).__name__ == "CellScreen"
        assert app.screen.cell.name == screen.ranked_rows()[0]["name"]  # type: ignore[attr-defined]
        await pilot.press("escape", "1")  # back to the ranking, then the catalog task
        await ui.settle(pilot)
        assert type(app.screen).__name__ == "CatalogScreen"


async def test_decks_view_shows_a_deck_taken_from_the_catalog(demo_catalog: Any, ui: Any) -> None:
    # a stored deck repeats a group after a nested one (oxides.core, oxides.core.nmos, oxides.core)
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("3")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, DeckScreen)
        params = screen.query_one("#deck-params", DataTable)
        row = params.get_row("oxides.core.t_ox_nm")
        assert str(row[1]) == "2.2"
        heads = [str(params.get_row_at(i)[0]) for i in range(params.row_count)
                 if str(params.get_row_at(i)[0]).strip() == "oxides.core"]
        assert len(heads) == 1  # every parameter of a group under its one heading
        words = " ".join(ui.screen_text(app).split())
        assert "lumen130" in words


async def test_corner_names_and_changes_fit_at_80_columns(lumen130_deck: Any, synthetic_catalog: Any,
                                                         ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog, deck=lumen130_deck)
    async with app.run_test(size=(80, 24)) as pilot:
        await ui.settle(pilot)
        await pilot.press("3")
        await ui.settle(pilot)
        await pilot.press("right_square_bracket")  # the Corners tab
        await ui.settle(pilot)
        table = app.screen.query_one("#deck-corners", DataTable)
        # every change whole: the table is no wider than its place (nothing cut at the edge)
        assert table.virtual_size.width <= table.scrollable_content_region.width
        shown = {}
        for name, corner in lumen130_deck.corners.items():
            head, changes = (str(cell) for cell in table.get_row(name))
            assert name in head and "°C" in head
            shown[name] = changes
            for path in {**(corner.scale or {}), **(corner.set or {})}:
                # a change to several metal layers reads once: metals[0–4].thickness_nm
                leaf = path.rpartition("]")[2] or path
                assert leaf in changes, path
        # the first corners are on the screen, with the start of their changes
        text = ui.screen_text(app)
        first = next(iter(lumen130_deck.corners))
        assert first in text


def test_the_same_change_to_several_layers_reads_once() -> None:
    corner = {"set": {"metals[0].width_bias_nm": 8, "metals[1].width_bias_nm": 8,
                      "metals[2].width_bias_nm": 8, "metals[4].width_bias_nm": 8,
                      "oxides.core.nmos.vth_V": 0.28},
              "scale": {"metals[1].via_below_ohm": 0.9, "metals[3].via_below_ohm": 0.9,
                        "metals[2].via_below_ohm": 1.1}}
    assert corner_changes(corner) == [
        "metals[0–2,4].width_bias_nm = 8", "oxides.core.nmos.vth_V = 0.28",
        "metals[1,3].via_below_ohm × 0.9", "metals[2].via_below_ohm × 1.1"]


@pytest.mark.parametrize("size", [(120, 40), (80, 24)])
async def test_ranking_shows_the_ranked_values_and_the_whole_plot_title(
        synthetic_catalog: Any, ui: Any, size: tuple[int, int]) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=size) as pilot:
        await ui.settle(pilot)
        await pilot.press("2")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, RankingScreen)
        best = screen.ranked_rows()[0]
        text = ui.screen_text(app)
        from celllab.tui.widgets.values import format_number

        assert "cap_density_fF_per_um2" in text  # the ranked column's header ...
        first_line = next(ln for ln in text.splitlines() if best["name"] in ln)
        assert format_number(best["cap_density_fF_per_um2"]) in first_line  # ... and its values
        assert "Pareto" in text and "front cell" in text  # the plot's title line is whole


async def test_a_pareto_point_opens_its_cell(synthetic_catalog: Any, ui: Any) -> None:
    from celllab.tui.screens.cell import CellScreen

    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("2")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, RankingScreen)
        front = sorted(screen.front, key=lambda r: r["cap_density_fF_per_um2"])
        await pilot.press("period")  # first point of the front (lowest x)
        await ui.settle(pilot)
        assert screen.pointed is not None and screen.pointed["name"] == front[0]["name"]
        await pilot.press("period")
        await ui.settle(pilot)
        assert screen.pointed["name"] == front[1]["name"]
        assert front[1]["name"] in ui.screen_text(app)  # the status line names it
        spec = screen.query_one(PlotView).spec
        assert any(m.glyph == "◎" for m in spec.markers)  # and the plot rings it
        await pilot.press("o")
        await ui.settle(pilot)
        assert isinstance(app.screen, CellScreen) and app.screen.cell.name == front[1]["name"]
        await pilot.press("escape")
        await ui.settle(pilot)
        # a click on the plot picks the nearest front point
        plot = screen.query_one(PlotView)
        lines = plot._rendered.split("\n")
        row = next(i for i, ln in enumerate(lines) if i > 0 and "●" in ln)
        await pilot.click(PlotView, offset=(lines[row].index("●"), row))
        await ui.settle(pilot)
        assert screen.pointed is not None
        assert screen.pointed["name"] in {r["name"] for r in front}
