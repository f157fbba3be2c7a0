"""Cell view: metrics at every corner, plots with their markers, circuit text, flags in words."""

from __future__ import annotations

from typing import Any

import numpy as np
from textual.widgets import DataTable, Select, TabbedContent

from celllab.records import METRICS
from celllab.tui.app import CelllabApp
from celllab.tui.screens.cell import CellScreen, explain_flag
from celllab.tui.screens.whatif import WhatIfScreen
from celllab.tui.widgets.plot import PlotView

from .conftest import CORNERS, SYNTHETIC_DECK


async def _open_first(app: CelllabApp, pilot: Any, ui: Any) -> CellScreen:
    await ui.settle(pilot)
    await pilot.press("enter")
    await ui.settle(pilot)
    screen = app.screen
    assert isinstance(screen, CellScreen)
    return screen


async def test_cell_view_metrics_plots_and_back(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        first = synthetic_catalog.query(deck=SYNTHETIC_DECK, limit=1)[0]["name"]
        screen = await _open_first(app, pilot, ui)
        cell = screen.cell
        assert cell is not None and cell.name == first

        # every metric at every corner, as stored
        table = screen.query_one("#cell-metrics", DataTable)
        assert table.row_count == len([m for m in METRICS if not m.bounds])  # bound flags: the ≥ mark
        assert [str(c.label).split("\n")[0] for c in table.ordered_columns[1:]] == [c[0] for c in CORNERS]
        stored = synthetic_catalog.cell(first, SYNTHETIC_DECK)
        slow = stored.corner("slow_125C").metrics["esr_ohm"]
        assert float(str(table.get_cell("esr_ohm", "slow_125C"))) == float(f"{slow:.4g}")
        text = ui.screen_text(app)
        assert first in text and "typ_25C" in text and "cap_density_fF_per_um2" in text

        # C-V of every corner on one plot, each with its operating point; |Z|, ESR and C_eff
        # on log axes
        cv = screen.query_one("#plot-cv", PlotView).spec
        assert cv is not None and [s.label for s in cv.series] == [c[0] for c in CORNERS]
        assert len(cv.markers) == len(CORNERS)
        for marker, corner in zip(cv.markers, cell.corners):
            assert marker.x == corner.cv.operating_bias_V
            assert np.isclose(marker.y, corner.cv.operating_cap_F * 1e15)  # plotted in fF
        esr = screen.query_one("#plot-esr", PlotView).spec
        assert esr.x_log and len(esr.series) == len(CORNERS)
        # ESR(f) is Re Z of the stored response; Source: definition of ESR as Re Z; exact
        typ_z = cell.corner("typ_25C").response.z_ohm
        assert np.allclose(esr.series[0].y, np.real(typ_z))
        z = screen.query_one("#plot-z", PlotView).spec
        ceff = screen.query_one("#plot-ceff", PlotView).spec
        assert z.x_log and z.y_log and ceff.x_log and len(z.series) == len(CORNERS)
        # C_eff = -1/(w Im Z) of a series R-C branch is C at every frequency
        # Source: circuit theory, Z = R + 1/(jwC) => Im Z = -1/(wC); exact
        cap_fF = cell.corner("typ_25C").metrics["cap_fF"]
        ceff_typ = [s for s in ceff.series if s.label == "typ_25C"][0]
        assert np.allclose(ceff_typ.y, cap_fF, rtol=1e-9)

        await pilot.press("right_square_bracket")  # C-V tab
        await ui.settle(pilot)
        assert screen.query_one(TabbedContent).active == "tab-cv"
        text = ui.screen_text(app)
        assert "◆ operating point" in text and "V_gb [V]" in text
        await pilot.press("right_square_bracket")  # |Z|(f) tab
        await ui.settle(pilot)
        text = ui.screen_text(app)
        assert "1G" in text and "10M" in text  # decade ticks on the frequency axis

        await pilot.press("escape")
        await ui.settle(pilot)
        assert type(app.screen).__name__ == "CatalogScreen"


async def test_flags_in_words_and_unknown_cells(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    flagged = "syn_nmos_0000"  # the synthetic builder flags every 7th cell at every corner
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        app.push_screen(CellScreen(flagged, SYNTHETIC_DECK))
        await ui.settle(pilot)
        app.screen.query_one(TabbedContent).active = "tab-flags"
        await ui.settle(pilot)
        words = " ".join(ui.screen_text(app).split())  # table cells wrap over lines
        assert "weak_channel all Overdrive below 0.2 V" in words
        assert "ESR, tau and bandwidth are the least certain" in words
        app.push_screen(CellScreen("no_such_cell", SYNTHETIC_DECK))
        await ui.settle(pilot)
        assert "cannot open no_such_cell" in ui.screen_text(app)
        # the synthetic deck holds no full parameter set: a what-if says why it cannot run
        app.push_screen(WhatIfScreen(flagged, SYNTHETIC_DECK))
        await ui.settle(pilot)
        words = " ".join(ui.screen_text(app).split())
        assert f"cannot edit {flagged}" in words and "required field is missing" in words


def test_explain_flag_keeps_the_engine_sentence_and_adds_the_consequence() -> None:
    words = explain_flag("srf_beyond_sweep: no self-resonance below 1 THz; value is a lower bound")
    assert words.startswith("No self-resonance below 1 THz")
    assert "'at least'" in words
    assert explain_flag("odd_code") == "Odd code."


async def test_lower_bounds_carry_their_mark_in_table_cell_view_and_what_if(
        demo_catalog: Any, ui: Any) -> None:
    from celllab.columns import is_lower_bound

    rows = demo_catalog.query(corner="typ_25C", where="topology = mom")
    row = next(r for r in rows if is_lower_bound(r, "srf_GHz"))
    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        screen = app.screen
        screen.columns = ("name", "srf_GHz", "bandwidth_GHz")  # type: ignore[attr-defined]
        await pilot.press("slash", *f'name = "{row["name"]}"', "enter")
        await ui.settle(pilot)
        # the bound sits where the search stopped (the lumped limit, cell dependent), not at 1 THz
        # typ_25C, where this cell's SRF is a bound (at fast_m40C it is computed, so its worst
        # row carries no mark)
        screen.query_one("#corner-select", Select).value = "typ_25C"
        await ui.settle(pilot)
        assert "≥" in ui.screen_text(app)  # the table
        await pilot.press("enter")
        await ui.settle(pilot)
        cell_screen = app.screen
        assert isinstance(cell_screen, CellScreen)
        metrics = cell_screen.query_one("#cell-metrics", DataTable)
        assert str(metrics.get_row("srf_GHz")[1]).startswith("≥")
        assert not str(metrics.get_row("cap_fF")[1]).startswith("≥")
        await pilot.press("w")
        await ui.settle(pilot)
        whatif = app.screen
        assert isinstance(whatif, WhatIfScreen)  # its bound marks: tests/tui/test_values.py


async def test_target_impedance_is_drawn_on_the_impedance_plot(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_first(app, pilot, ui)
        assert not screen.query_one("#plot-z", PlotView).spec.levels  # no target known yet
        await pilot.press("t")
        await pilot.pause()
        await pilot.press(*"abc")  # a number field: letters do not go in
        await pilot.press(*"2.5", "enter")
        await ui.settle(pilot)
        assert app.z_target_ohm == 2.5
        levels = screen.query_one("#plot-z", PlotView).spec.levels
        assert [lv.y for lv in levels] == [2.5]
        screen.query_one(TabbedContent).active = "tab-z"
        await ui.settle(pilot)
        assert "target 2.5 Ω" in ui.screen_text(app)
        await pilot.press("t")
        await pilot.pause()
        await pilot.press("backspace", "enter")  # the value opens selected: empty clears it
        await ui.settle(pilot)
        assert app.z_target_ohm is None and not screen.query_one("#plot-z", PlotView).spec.levels


def test_the_header_counts_in_words_and_names_placement_and_rail(synthetic_catalog: Any) -> None:
    from dataclasses import replace

    from celllab.tui.screens.cell import cell_summary

    name = synthetic_catalog.query(deck=SYNTHETIC_DECK, limit=1)[0]["name"]
    cell = synthetic_catalog.cell(name, deck=SYNTHETIC_DECK)
    one = replace(cell, width_sites=1, height_rows=1, placement="open_region", rail="io")
    text = cell_summary(one, SYNTHETIC_DECK).plain
    assert "(1 site × 1 row)" in text and "open region, io rail" in text
    two = replace(cell, width_sites=30, height_rows=2)
    assert "(30 sites × 2 rows)" in cell_summary(two, SYNTHETIC_DECK).plain
