"""A newcomer, keys only: the densest ESD-safe cell under a leakage limit, its plots, a what-if
saved as a new variant that is then in the catalog."""

from __future__ import annotations

import math
from typing import Any

import pytest

from celllab.engine import characterize
from celllab.tui.app import CelllabApp
from celllab.tui.screens.catalog import SORTABLE, CatalogScreen
from celllab.tui.screens.cell import CellScreen
from celllab.tui.screens.save_variant import SaveVariantDialog
from celllab.tui.screens.whatif import WhatIfScreen, spec_from_result
from celllab.tui.widgets.plot import PlotView

DECK = "lumen130"


async def test_newcomer_finds_opens_tries_and_saves_with_keys_alone(demo_catalog: Any, ui: Any) -> None:
    # a leakage limit (nA/nF, whole number) just tight enough to rule out the densest ESD-safe cell
    unconstrained = demo_catalog.query(deck=DECK, where="esd_safe", limit=1)[0]
    LIMIT = math.floor(unconstrained["leakage_nA_per_nF"]) - 1  # noqa: N806
    WHERE = f"esd_safe and leakage_nA_per_nF <= {LIMIT}"  # noqa: N806
    expected = demo_catalog.query(deck=DECK, where=WHERE, order_by="cap_density_fF_per_um2",
                                  descending=True, limit=1)[0]
    assert expected["name"] != unconstrained["name"]  # the limit matters in this scenario
    cells_before = demo_catalog.count(deck=DECK)

    app = CelllabApp(catalog=demo_catalog, debounce_s=0.05)
    async with app.run_test(size=(100, 32)) as pilot:
        await ui.settle(pilot)
        assert isinstance(app.screen, CatalogScreen) and app.current_deck == DECK

        # 1. filter in the catalog's language
        await pilot.press("slash", *WHERE, "enter")
        await ui.settle(pilot)
        # 2. sort by capacitance density: s opens the list, arrows pick, enter sorts
        await pilot.press("r")  # (start from the other order, so the sort visibly acts)
        await ui.settle(pilot)
        await pilot.press("s")
        await pilot.pause()
        await pilot.press("home", *["down"] * SORTABLE.index("cap_density_fF_per_um2"), "enter")
        await ui.settle(pilot)
        rows = app.screen.visible_rows()  # type: ignore[attr-defined]
        assert rows[0]["name"] == expected["name"]
        assert all(r["esd_safe"] and r["leakage_nA_per_nF"] <= LIMIT for r in rows)
        assert expected["name"] in ui.screen_text(app)

        # 3. open it and look at its plots
        await pilot.press("enter")
        await ui.settle(pilot)
        assert isinstance(app.screen, CellScreen) and app.screen.cell.name == expected["name"]
        await pilot.press("right_square_bracket")  # C-V with the operating point
        await ui.settle(pilot)
        assert "◆ operating point" in ui.screen_text(app)
        await pilot.press("right_square_bracket")  # |Z|(f) on log axes
        await ui.settle(pilot)
        assert "|Z| [Ω]" in ui.screen_text(app)
        assert app.screen.query_one("#plot-z", PlotView).spec.x_log

        # 4. what-if: twice the width
        await pilot.press("w")
        await ui.settle(pilot)
        whatif = app.screen
        assert isinstance(whatif, WhatIfScreen)
        width = whatif.spec.width_sites
        await pilot.press("e", "ctrl+a", "ctrl+k", *str(2 * width))  # e: to the first field, width_sites
        await ui.settle(pilot)
        assert whatif.variant is not None
        before, after = whatif.comparison()["cap_fF"]
        assert after > before

        # 5. save it as a new variant
        await pilot.press("ctrl+s")
        await ui.settle(pilot)
        assert isinstance(app.screen, SaveVariantDialog)
        await pilot.press("ctrl+a", "ctrl+k", *"xcap-wide-trial", "enter")
        await ui.settle(pilot)
        assert whatif.saved_as == ("xcap-wide-trial", DECK)

        # back in the catalog (escape: leave the field, the what-if, the cell), the variant is there
        await pilot.press("escape", "escape", "escape")
        await ui.settle(pilot)
        await pilot.press("slash", "ctrl+a", "ctrl+k", *'name = "xcap-wide-trial"', "enter")
        await ui.settle(pilot)
        assert [r["name"] for r in app.screen.visible_rows()] == ["xcap-wide-trial"]  # type: ignore[attr-defined]

    assert demo_catalog.count(deck=DECK) == cells_before + 1
    stored = demo_catalog.cell("xcap-wide-trial", DECK)
    deck = app.deck_named(DECK)
    spec = spec_from_result(demo_catalog.cell(expected["name"], DECK)).with_changes(
        {"width_sites": 2 * width}, deck, name="xcap-wide-trial")
    reference = characterize(deck, [spec]).cells[0]
    assert stored.esd_safe and stored.width_sites == 2 * width
    for corner in reference.corners:
        assert stored.corner(corner.corner).metrics["cap_fF"] == pytest.approx(corner.metrics["cap_fF"])
