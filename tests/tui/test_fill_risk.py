"""Fill-risk view: opened from the cell view and the catalog, computed in a worker, the library's
own answer on screen, bad values refused in place; the cell view's ESD rows as stored.

Reference for every number: ``celllab.fill_risk`` called directly with the deck and cell files
(the view must show the library's answer for the same question, reached through the catalog's
stored deck and the cell rebuilt from its stored geometry).
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from textual.widgets import DataTable, Input

from celllab.characterization.esd_events import EsdEvent
from celllab.fill_risk import CAUTION as FILL_CAUTION
from celllab.fill_risk import esd_exposure, fill_oxide_risk
from celllab.tui.app import CelllabApp
from celllab.tui.screens.cell import CellScreen
from celllab.tui.screens.fill_risk import FillRiskScreen, number, read_inputs
from celllab.tui.widgets.values import format_number

from .conftest import DECK_DIR

DECK = "lumen130"
#: A thin-oxide (core) decap with its gate tied to a rail, and the ESD-safe cross-coupled pair.
THIN = "lm_ncap-w16-h1-f2"
PAIR = "lm_xcap-w16-h1-f1"
QUESTION = {"area_mm2": "0.3", "life_years": "10", "temperature_C": "125", "target_ppm": "10",
            "hbm_V": "2000", "cdm_V": "250"}
BIG = (150, 110)  # tall enough that the whole answer is on screen at once


@pytest.fixture(scope="module")
def deck_and_cells() -> tuple[Any, dict[str, Any]]:
    from celllab.cells import load_cells
    from celllab.deck import load_deck

    deck = load_deck(DECK_DIR / "lumen130.toml")
    cells = load_cells(DECK_DIR / "cells" / "lumen130_cells.toml", deck)
    return deck, {c.name: c for c in cells}


async def _open_cell(app: CelllabApp, pilot: Any, ui: Any, name: str) -> CellScreen:
    await ui.settle(pilot)
    await pilot.press("slash")
    await ui.type_text(pilot, f'name = "{name}"')
    await pilot.press("enter")
    await ui.settle(pilot)
    await pilot.press("enter")
    await ui.settle(pilot)
    screen = app.screen
    assert isinstance(screen, CellScreen) and screen.cell is not None and screen.cell.name == name
    return screen


async def _fill(pilot: Any, screen: FillRiskScreen, values: dict[str, str]) -> None:
    for key, text in values.items():
        screen.query_one(f"#fr-{key}", Input).value = text
    await pilot.pause()


async def test_fill_risk_from_the_cell_view_shows_the_librarys_answer(
        demo_catalog: Any, ui: Any, deck_and_cells: tuple[Any, dict[str, Any]]) -> None:
    deck, cells = deck_and_cells
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=BIG) as pilot:
        await _open_cell(app, pilot, ui, THIN)
        await pilot.press("f")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, FillRiskScreen) and screen.cell_name == THIN
        # it answered at once for the deck's own mission and zaps, 1 mm^2 of fill
        first = screen.answer
        assert first is not None and first.inputs.area_mm2 == 1.0
        assert (first.inputs.life_years, first.inputs.temperature_C, first.inputs.target_ppm) == (
            deck.mission.life_years, deck.mission.temperature_C, deck.mission.target_ppm)
        assert (first.inputs.hbm_V, first.inputs.cdm_V) == (deck.esd.hbm_V, deck.esd.cdm_V)

        await _fill(pilot, screen, QUESTION)
        await pilot.press("ctrl+r")
        await ui.settle(pilot)
        answer = screen.answer
        assert answer is not None and answer.inputs.area_mm2 == 0.3
        text = ui.screen_text(app)

    spec = cells[THIN]
    risk = fill_oxide_risk(deck, [spec], 0.3, life_years=10, temperature_C=125, target_ppm=10)
    (esd,) = esd_exposure(deck, [spec], events=[EsdEvent("hbm", 2000.0), EsdEvent("cdm", 250.0)],
                          fill_mm2=0.3)

    # the numbers behind the view are the library's (same deck values, same cell geometry)
    shown = answer.risk
    assert shown.corners == risk.corners and shown.worst_corner == risk.worst_corner
    for name in ("failure_ppm", "fit", "affordable_footprint_mm2"):
        np.testing.assert_allclose(getattr(shown, name), getattr(risk, name), rtol=1e-9)
    np.testing.assert_array_equal(shown.within_target, risk.within_target)
    for name in ("fault_current_mA", "fault_power_mW", "fault_limit_mA"):
        np.testing.assert_allclose(getattr(shown.cells[0], name), getattr(risk.cells[0], name),
                                   rtol=1e-9)
    hbm, cdm = answer.events
    for e, exposure in enumerate((hbm, cdm)):
        assert exposure.events[0] == esd.events[e]
        for name in ("peak_oxide_V", "time_above_ns", "margin", "peak_rail_V"):
            np.testing.assert_allclose(getattr(exposure, name)[0], getattr(esd, name)[e],
                                       rtol=1e-9, atol=1e-12)
        assert exposure.notes[0] == esd.notes[e]

    # ... and what the screen shows is those numbers, per corner, the worst corner marked
    def row(corner: str, *values: float) -> str:
        mark = "▸" if corner in worst else ""
        cells_ = r"\s+".join(re.escape(number(v)) for v in values)
        return rf"{mark}\s*{re.escape(corner)}\s+{cells_}"

    for j, corner in enumerate(risk.corners):
        # no mark where the wear-out is the same at every corner (nothing to single out)
        worst = set() if risk.corner_label == "every corner" else {risk.worst_corner}
        assert re.search(row(corner, risk.failure_ppm[j], risk.fit[j],
                             risk.affordable_footprint_mm2[j]), text), corner
        cell = risk.cells[0]
        worst = {cell.corners[int(np.nanargmax(cell.fault_current_mA))]}
        assert re.search(row(corner, cell.fault_current_mA[j], cell.fault_power_mW[j],
                             cell.fault_limit_mA[j]), text), corner
        for e in range(2):
            worst = {esd.corners[int(np.argmin(esd.margin[e]))]}
            assert re.search(row(corner, esd.peak_rail_V[e, j], esd.peak_oxide_V[e, j],
                                 esd.v_bd_pulse_V[j], esd.time_above_ns[e, j],
                                 esd.margin[e, j]), text), (esd.events[e], corner)
    j = risk.corners.index(risk.worst_corner)
    verdict = "PASS" if bool(np.all(risk.within_target)) else "FAIL"
    assert verdict in text
    assert f"largest fill within the target: {format_number(risk.affordable_footprint_mm2[j])} mm²" \
        in text
    for e in range(2):  # the series-path sentence of each event's worst corner
        worst_j = int(np.argmin(esd.margin[e]))
        assert esd.notes[e][worst_j] in text
    assert "HBM +2000 V" in text and "CDM +250 V" in text
    assert " ".join(FILL_CAUTION.split()[:8]) in " ".join(text.split())


async def test_fill_risk_refuses_bad_values_in_place(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(80, 24)) as pilot:
        await _open_cell(app, pilot, ui, THIN)
        await pilot.press("f")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, FillRiskScreen) and screen.answer is not None

        await _fill(pilot, screen, {"area_mm2": "-0.3", "hbm_V": "two kV"})
        area = screen.query_one("#fr-area_mm2", Input)
        area.focus()
        await pilot.press("enter")
        await ui.settle(pilot)
        assert screen.answer is None  # no answer left on screen for values it did not compute
        assert [p.field for p in screen.problems] == ["fill mm²", "HBM V"]
        text = ui.screen_text(app)
        assert "fill mm² = '-0.3': must be a number > 0" in text
        assert "HBM V = 'two kV': not a number" in text
        assert "nothing computed" in text
        assert area.has_class("-invalid-field")
        assert screen.query_one("#fr-hbm_V", Input).has_class("-invalid-field")

        # corrected, it computes again
        await _fill(pilot, screen, {"area_mm2": "0.3", "hbm_V": "2000", "life_years": ""})
        await pilot.press("enter")
        await ui.settle(pilot)
        assert [p.field for p in screen.problems] == ["life yr"]
        await _fill(pilot, screen, {"life_years": "10"})
        await pilot.press("enter")
        await ui.settle(pilot)
        assert screen.problems == [] and screen.answer is not None
        assert screen.answer.inputs.area_mm2 == 0.3
        # the answer is longer than an 80x24 terminal: PgDn scrolls it while a field has focus
        results = screen.query_one("#fr-results")
        assert results.scroll_y == 0 and results.max_scroll_y > 0
        await pilot.press("pagedown")
        await pilot.pause()
        assert results.scroll_y > 0 and isinstance(app.focused, Input)

        # beyond what the deck schema allows for a mission value
        await _fill(pilot, screen, {"temperature_C": "400"})
        await pilot.press("enter")
        await ui.settle(pilot)
        assert "temp °C = '400': must be a number >= -55 and <= 200" in ui.screen_text(app)


def test_read_inputs_takes_the_deck_schemas_limits(lumen130_deck: Any) -> None:
    good, problems = read_inputs(QUESTION, lumen130_deck)
    assert problems == [] and good is not None and good.temperature_C == 125.0
    # the limits of the deck's [mission] and [esd] fields (deck/schema.py)
    for key, text in (("life_years", "0"), ("life_years", "101"), ("target_ppm", "0"),
                      ("cdm_V", "5001"), ("hbm_V", "nan"), ("area_mm2", "0"), ("area_mm2", "inf")):
        values, problems = read_inputs({**QUESTION, key: text}, lumen130_deck)
        assert values is None and len(problems) == 1, (key, text)
    values, _ = read_inputs({**QUESTION, "temperature_C": "-55", "life_years": "100"},
                            lumen130_deck)
    assert values is not None  # the bounds themselves are allowed


async def test_fill_risk_from_the_catalog_and_esc_leaves_while_computing(
        demo_catalog: Any, ui: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    import threading

    from celllab.tui.screens import fill_risk as screen_module

    # the events' transients wait until the test lets them go, so the view is surely still
    # computing when Esc is pressed (the computation itself takes ~1.5 s: too short to catch)
    release = threading.Event()
    original = screen_module.event_answer

    def held(*args: Any, **kwargs: Any) -> Any:
        release.wait(30.0)
        return original(*args, **kwargs)

    monkeypatch.setattr(screen_module, "event_answer", held)
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, f'name = "{THIN}"')
        await pilot.press("enter")
        await ui.settle(pilot)
        from celllab.tui.screens.catalog import CatalogScreen

        catalog_screen = app.screen
        assert isinstance(catalog_screen, CatalogScreen)
        catalog_screen.query_one("#catalog-table").focus()
        await pilot.press("f")
        # the view loads the deck and cell first: on a loaded machine that alone can take seconds
        await ui.wait_until(pilot, lambda: isinstance(app.screen, FillRiskScreen)
                            and app.screen.computing, timeout=60.0)
        assert app.screen.cell_name == THIN
        assert "esc leaves" in ui.screen_text(app)
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen is catalog_screen
        release.set()
        await ui.settle(pilot)
        assert app.screen is catalog_screen


async def test_the_fill_risk_key_is_listed(synthetic_catalog: Any, ui: Any) -> None:
    from celllab.tui.screens.catalog import CatalogScreen
    from celllab.tui.screens.keys import KeysOverlay

    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        assert isinstance(app.screen, CatalogScreen)
        await pilot.press("question_mark")
        assert isinstance(app.screen, KeysOverlay)
        assert re.search(r"\bf\s+Fill risk", ui.screen_text(app))  # Keys only: the footer is full
        await pilot.press("escape", "enter")
        await ui.settle(pilot)
        assert isinstance(app.screen, CellScreen)
        assert re.search(r"\bf Fill risk", ui.screen_text(app))  # in the cell view's footer
        await pilot.press("question_mark")
        assert re.search(r"\bf\s+Fill risk", ui.screen_text(app))


# --- the cell view's ESD rows -------------------------------------------------------------------

@pytest.fixture(scope="module")
def _esd_file(tmp_path_factory: pytest.TempPathFactory,
              deck_and_cells: tuple[Any, dict[str, Any]]) -> Path:
    """Two demo cells characterized with their HBM/CDM transients (the demo fixture skips them)."""
    from celllab.catalog import open_catalog
    from celllab.engine import characterize

    deck, cells = deck_and_cells
    path = tmp_path_factory.mktemp("esd") / "esd.sqlite"
    catalog = open_catalog(path)
    catalog.store_run(characterize(deck, [cells[THIN], cells[PAIR]], esd=True))
    catalog.close()
    return path


@pytest.fixture
def esd_catalog(_esd_file: Path, tmp_path: Path) -> Any:
    from celllab.catalog import open_catalog

    path = tmp_path / "esd.sqlite"
    shutil.copy(_esd_file, path)
    catalog = open_catalog(path)
    yield catalog
    catalog.close()


ESD_ROWS = ("hbm_oxide_peak_V", "hbm_margin_V", "cdm_oxide_peak_V", "cdm_margin_V")


@pytest.mark.parametrize("name", [THIN, PAIR])
async def test_cell_view_esd_rows_are_the_stored_values(esd_catalog: Any, ui: Any,
                                                        name: str) -> None:
    stored = esd_catalog.cell(name, DECK)
    app = CelllabApp(catalog=esd_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open_cell(app, pilot, ui, name)
        table = screen.query_one("#cell-metrics", DataTable)
        for corner in stored.corners:
            for metric in ESD_ROWS:
                value = corner.metrics.get(metric)
                assert value is not None and np.isfinite(value), (metric, corner.corner)
                assert str(table.get_cell(metric, corner.corner)) == format_number(value), \
                    (metric, corner.corner)
