"""Catalog view driven with keys and clicks: filter, sort, pages, columns, corners."""

from __future__ import annotations

from typing import Any

import pytest
from textual.widgets import OptionList, Select, SelectionList

from celllab.records import METRIC_NAMES
from celllab.tui.app import CelllabApp
from celllab.tui.screens.catalog import DEFAULT_COLUMNS, SORTABLE, CatalogScreen
from celllab.tui.widgets.catalog_table import CatalogTable
from celllab.tui.widgets.filter_bar import FilterBar
from celllab.tui.widgets.values import format_number

from .conftest import N_SYNTHETIC, SYNTHETIC_DECK


def _screen(app: CelllabApp) -> CatalogScreen:
    screen = app.screen
    assert isinstance(screen, CatalogScreen)
    return screen


async def test_first_page_units_filter_and_filter_errors(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog, page_size=50)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        # one page, never the whole catalog; the same rows the catalog ranks first
        rows = screen.visible_rows()
        assert len(rows) == 50 and screen.total == N_SYNTHETIC
        assert screen.query_one(CatalogTable).row_count == 50
        expected = synthetic_catalog.query(deck=SYNTHETIC_DECK, corner="worst", limit=50)
        assert [r["name"] for r in rows] == [r["name"] for r in expected]
        text = ui.screen_text(app)
        # a long name breaks after an underscore, the sort mark on its second line
        assert "cap_density_" in text and "fF_per_um2 ▼" in text
        assert "[fF/µm²]" in text and "[nA/nF]" in text
        assert f"rows 1–50 of {N_SYNTHETIC}" in text

        # a bad filter is explained under the input; the table stays as it was
        before = [r["name"] for r in rows]
        await pilot.press("slash", *"leakag < 5", "enter")
        await ui.settle(pilot)
        bar = screen.query_one(FilterBar)
        assert "unknown name 'leakag'" in bar.error and "leakage_nA" in bar.error
        assert "unknown name 'leakag'" in ui.screen_text(app)
        assert [r["name"] for r in screen.visible_rows()] == before

        # a good one narrows the table to exactly what the catalog returns, error gone
        where = "esd_safe and leakage_nA_per_nF <= 50"
        await ui.type_text(pilot, where)
        await pilot.press("enter")
        await ui.settle(pilot)
        assert bar.error == ""
        rows = screen.visible_rows()
        assert rows and all(r["esd_safe"] and r["leakage_nA_per_nF"] <= 50 for r in rows)
        assert screen.total == synthetic_catalog.count(deck=SYNTHETIC_DECK, where=where) < N_SYNTHETIC
        assert app.focused is screen.query_one(CatalogTable)  # enter hands keys back to the table

        # typing alone (no enter) applies once typing pauses
        await pilot.press("slash")
        await ui.type_text(pilot, "oxide = io")
        await ui.settle(pilot)
        assert {r["oxide"] for r in screen.visible_rows()} == {"io"}


async def test_sort_by_picker_reverse_and_header_click(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(160, 40)) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        await pilot.press("s")
        await pilot.pause()
        options = app.screen.query_one(OptionList)
        ids = [options.get_option_at_index(i).id for i in range(options.option_count)]
        options.highlighted = ids.index("esr_ohm")
        await pilot.press("enter")
        await ui.settle(pilot)
        values = [r["esr_ohm"] for r in screen.visible_rows()]
        assert values == sorted(values)  # ESR: lower is better, best first
        await pilot.press("r")
        await ui.settle(pilot)
        values = [r["esr_ohm"] for r in screen.visible_rows()]
        assert values == sorted(values, reverse=True)

        table = screen.query_one(CatalogTable)
        index = list(table.columns_shown).index("cap_fF")
        x = sum(table.ordered_columns[i].get_render_width(table) for i in range(index)) + 3
        await pilot.click(CatalogTable, offset=(x, 0))
        await ui.settle(pilot)
        assert screen.order_by == "cap_fF"
        values = [r["cap_fF"] for r in screen.visible_rows()]
        assert values == sorted(values, reverse=True)  # capacitance: higher is better


async def test_pages_cover_the_whole_result_in_order(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog, page_size=100)
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        table = screen.query_one(CatalogTable)
        seen: list[str] = []
        for _ in range(3):
            seen += [r["name"] for r in screen.visible_rows()]
            await pilot.press("right_square_bracket")
            await ui.settle(pilot)
        everything = synthetic_catalog.query(deck=SYNTHETIC_DECK)
        assert seen == [r["name"] for r in everything]  # 100 + 100 + 40, in order, no overlap
        assert table.row_count == N_SYNTHETIC - 200
        await pilot.press("home")
        await ui.settle(pilot)
        assert screen.row_offset == 0
        # the arrow keys run on past a page's last row and back before its first
        table.move_cursor(row=99)
        await pilot.press("down")
        await ui.settle(pilot)
        assert screen.row_offset == 100 and table.cursor_row == 0
        await pilot.press("up")
        await ui.settle(pilot)
        assert screen.row_offset == 0 and table.cursor_row == 99


async def test_columns_and_corner_choice(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(220, 40)) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        table = screen.query_one(CatalogTable)
        await pilot.press("c")
        await pilot.pause()
        chooser = app.screen.query_one(SelectionList)
        chooser.deselect("area_um2")
        chooser.select("esl_pH")
        await pilot.press("a")
        await ui.settle(pilot)
        assert table.columns_shown == tuple(c for c in DEFAULT_COLUMNS if c != "area_um2") + ("esl_pH",)
        assert "[pH]" in ui.screen_text(app)

        await pilot.press("o")
        await pilot.pause()
        select = screen.query_one("#corner-select", Select)
        assert select.expanded
        for corner in ("best", "slow_125C"):
            select.value = corner
            await ui.settle(pilot)
            rows = screen.visible_rows()
            expected = synthetic_catalog.query(deck=SYNTHETIC_DECK, corner=corner, limit=len(rows))
            assert [r["cap_fF"] for r in rows] == [r["cap_fF"] for r in expected]
            assert app.current_corner == corner

        screen.columns = ("name", *METRIC_NAMES)
        screen.request_page(0, count=False)
        await ui.settle(pilot)
        assert table.columns_shown == ("name", *METRIC_NAMES)


async def test_empty_catalog_says_how_to_fill_it(tmp_path: Any, ui: Any) -> None:
    from celllab.catalog import open_catalog

    app = CelllabApp(catalog=open_catalog(tmp_path / "empty.sqlite"))
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        assert "catalog is empty" in ui.screen_text(app)


async def test_slash_again_selects_the_filter_so_typing_replaces_it(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        await pilot.press("slash", *"oxide = io", "enter")
        await ui.settle(pilot)
        await pilot.press("slash", *"esd_safe", "enter")  # replaces, does not append
        await ui.settle(pilot)
        bar = _screen(app).query_one(FilterBar)
        assert bar.text == "esd_safe" and bar.error == ""
        assert all(r["esd_safe"] for r in _screen(app).visible_rows())
        # while typing in the filter, / selects it all again (the language has no /)
        await pilot.press("slash", *"oxide", "slash", *"topology = mom", "enter")
        await ui.settle(pilot)
        assert bar.text == "topology = mom" and bar.error == ""
        assert {r["topology"] for r in _screen(app).visible_rows()} == {"mom"}


async def test_sorting_by_a_hidden_column_shows_it(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        assert "esl_pH" not in screen.columns
        screen.sort_by("esl_pH")
        await ui.settle(pilot)
        assert "esl_pH" in screen.query_one(CatalogTable).columns_shown
        assert "esl_pH ▲" in ui.screen_text(app)  # lower is better: smallest first


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_sorting_by_a_column_off_the_right_edge_brings_it_next_to_the_name(
        synthetic_catalog: Any, ui: Any, size: tuple[int, int]) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=size) as pilot:
        await ui.settle(pilot)
        screen = _screen(app)
        table = screen.query_one(CatalogTable)
        assert "area_um2" in table.columns_shown and not table.in_view("area_um2")
        screen.sort_by("area_um2")
        await ui.settle(pilot)
        assert table.columns_shown[:2] == ("name", "area_um2") and table.in_view("area_um2")
        assert "area_um2 ▲" in ui.screen_text(app)


async def test_column_checklist_reads_without_colour(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("c")
        await ui.settle(pilot)
        lines = ui.screen_text(app).splitlines()
        shown = [ln for ln in lines if "cap_density_fF_per_um2 " in ln][0]
        hidden = [ln for ln in lines if "cap_ox_fF " in ln][0]
        assert "✓" in shown and "✓" not in hidden  # a glyph, not only a colour, tells them apart


async def test_units_read_as_symbols_and_counts_as_words(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        name = _screen(app).visible_rows()[0]["name"]
        text = ui.screen_text(app)
        assert "[fF/µm²]" in text and "[Ω]" in text and "um^2" not in text
        await pilot.press("slash", *f'name = "{name}"', "enter")
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert "row 1 of 1" in text and "1 rows" not in text
        await pilot.press("enter")  # the cell view: area in µm²
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert "µm²" in text and "um^2" not in text and "°C" in text
        await pilot.press("escape", "2")
        await ui.settle(pilot)
        await pilot.press("slash", *f'name = "{name}"', "enter")
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert "1 cell meets" in text and "1 cells" not in text


async def test_three_marked_cells_compare_side_by_side(synthetic_catalog: Any, ui: Any) -> None:
    from textual.widgets import DataTable

    from celllab.tui.screens.compare import CompareScreen
    from celllab.tui.widgets.plot import PlotView

    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        rows = _screen(app).visible_rows()[:3]
        await pilot.press("v")  # nothing marked: said so
        await ui.settle(pilot)
        assert any("mark 2 to 5" in n.message for n in app._notifications)
        await pilot.press("space", "space", "space")
        await ui.settle(pilot)
        assert "3 marked" in ui.screen_text(app) and "✓ " + rows[0]["name"] in ui.screen_text(app)
        await pilot.press("v")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, CompareScreen)
        table = screen.query_one("#cmp-table", DataTable)
        names = sorted(r["name"] for r in rows)
        assert [str(c.label) for c in table.ordered_columns[1:]] == names
        # side by side: each cell's worst value, as the catalog ranks it; the best one starred
        for row in rows:
            shown = str(table.get_cell("cap_fF", row["name"]))
            assert shown.startswith(f"{row['cap_fF']:.4g}")
        assert sum("★" in str(table.get_cell("cap_fF", n)) for n in names) == 1
        for plot_id in ("#cmp-plot-cv", "#cmp-plot-z", "#cmp-plot-esr", "#cmp-plot-ceff"):
            spec = screen.query_one(plot_id, PlotView).spec
            assert [s.label for s in spec.series] == names  # one curve per cell
        await pilot.press("right_square_bracket", "right_square_bracket")
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert all(n in text for n in names) and "|Z|(f)" in text


async def test_sort_choices_keep_one_line_each(synthetic_catalog: Any, ui: Any) -> None:
    # long descriptions (placement, rail) end in an ellipsis instead of wrapping under the names
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("s")
        await ui.settle(pilot)
        lines = [ln.split("▊", 1)[1].split("▎")[0].strip() for ln in ui.screen_text(app).splitlines()
                 if "▊ " in ln]
        listed = [ln for ln in lines if ln.strip("▔▁ ")]
        assert listed and all(ln.split()[0] in SORTABLE for ln in listed), listed
        assert any(ln.startswith("placement") and ln.endswith("…") for ln in listed)


async def test_the_sort_chooser_opens_on_the_current_column(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        catalog = _screen(app)
        await pilot.press("s")
        await ui.settle(pilot)
        options = app.screen.query_one(OptionList)
        assert options.highlighted == SORTABLE.index(catalog.order_by)
        await pilot.press("down", "enter")
        await ui.settle(pilot)
        assert catalog.order_by == SORTABLE[SORTABLE.index("cap_density_fF_per_um2") + 1]


async def test_80_columns_show_density_and_leakage_beside_the_real_cell_names(
        demo_catalog: Any, ui: Any) -> None:
    # demo cell names are long (lm_acap-w32-h1-open-f2-welln): the ranked density and the
    # leakage limit's values must still be on an 80-column screen
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(80, 24)) as pilot:
        await ui.settle(pilot)
        table = _screen(app).query_one(CatalogTable)
        for column in ("name", "esd_safe", "cap_density_fF_per_um2", "leakage_nA_per_nF"):
            assert table.in_view(column), column
        first = table.rows_shown[0]
        line = next(ln for ln in ui.screen_text(app).splitlines() if first["name"] in ln)
        assert format_number(first["leakage_nA_per_nF"]) in line


async def test_three_long_named_cells_compare_whole_at_80_columns(demo_catalog: Any,
                                                                  ui: Any) -> None:
    from textual.widgets import DataTable

    from celllab.tui.screens.compare import CompareScreen

    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(80, 24)) as pilot:
        await ui.settle(pilot)
        rows = _screen(app).visible_rows()[:3]
        await pilot.press("space", "space", "space", "v")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, CompareScreen)
        table = screen.query_one("#cmp-table", DataTable)
        # every cell's column on the screen, none cut at the edge
        assert table.virtual_size.width <= table.scrollable_content_region.width
        text = ui.screen_text(app)
        line = next(ln for ln in text.splitlines() if ln.lstrip().startswith("cap_fF"))
        for row in rows:
            assert format_number(row["cap_fF"]) in line
        assert "3 cells of lumen130" in text
