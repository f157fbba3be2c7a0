"""Every view opens with keys alone at the two terminal sizes people use, without a crash."""

from __future__ import annotations

from typing import Any

import pytest

from celllab.tui.app import CelllabApp

#: (keys from the catalog, name of the screen they lead to)
ROUTES: tuple[tuple[tuple[str, ...], str], ...] = (
    ((), "CatalogScreen"),
    (("2",), "RankingScreen"),
    (("3",), "DeckScreen"),
    (("enter",), "CellScreen"),
    (("enter", "s"), "SweepScreen"),
    (("w",), "WhatIfScreen"),
    (("space", "space", "v"), "CompareScreen"),
    (("c",), "ColumnPicker"),
    (("s",), "ChoicePicker"),
    (("x",), "ExportDialog"),
    (("a",), "AboutPanel"),
    (("question_mark",), "KeysOverlay"),
    (("enter", "t"), "NumberPrompt"),
)


@pytest.mark.parametrize("size", [(80, 24), (120, 40)], ids=["80x24", "120x40"])
async def test_every_view_opens_without_a_crash(demo_catalog: Any, ui: Any,
                                                 size: tuple[int, int]) -> None:
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=size) as pilot:
        await ui.settle(pilot)
        for keys, screen_name in ROUTES:
            for key in keys:
                await pilot.press(key)
                await ui.settle(pilot)
            assert type(app.screen).__name__ == screen_name, keys
            text = ui.screen_text(app)
            assert text.strip(), screen_name
            # back to the catalog: escape out of overlays and pushed screens, then 1
            for _ in range(4):
                if len(app.screen_stack) == 1:
                    break
                app.pop_screen()
                await ui.settle(pilot)
            await pilot.press("1")
            await ui.settle(pilot)
        # each cell tab and each what-if tab draws at this size
        await pilot.press("enter")
        await ui.settle(pilot)
        for _ in range(7):
            await pilot.press("right_square_bracket")
            await ui.settle(pilot)
        await pilot.press("w")
        await ui.settle(pilot)
        for _ in range(5):
            await pilot.press("right_square_bracket")
            await ui.settle(pilot)
    assert app.crash is None
