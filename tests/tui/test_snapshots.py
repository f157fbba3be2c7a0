"""How the main screens look (pytest-textual-snapshot; SVGs in __snapshots__).

Numbers come from the synthetic catalog (fixed random state), so the pictures do not move when the
physics does. Regenerate after a deliberate change with ``--snapshot-update`` and read the SVG
diff first.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from celllab.deck import load_deck
from celllab.errors import DeckError
from celllab.tui.app import CelllabApp, DeckFailure

from .conftest import DECK_DIR


def _steps(ui: Any, *keys: str) -> Any:
    async def run_before(pilot: Any) -> None:
        await ui.settle(pilot)
        for key in keys:
            await pilot.press(key)
            await ui.settle(pilot)

    return run_before


def test_catalog_80x24(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(80, 24),
                        run_before=_steps(ui))


def test_catalog_filter_error_120x40(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, "esd_safe and leakag <= 5")
        await pilot.press("enter", "escape")
        await ui.settle(pilot)

    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(120, 40),
                        run_before=run_before)


def test_cell_metrics_80x24(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(80, 24),
                        run_before=_steps(ui, "enter"))


def test_cell_cv_plot_100x30(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(100, 30),
                        run_before=_steps(ui, "enter", "right_square_bracket"))


def test_ranking_120x40(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(120, 40),
                        run_before=_steps(ui, "2"))


@pytest.fixture
def decks_in_cwd(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> tuple[Any, DeckFailure]:
    monkeypatch.chdir(tmp_path)  # relative paths: the same picture on every machine
    text = (DECK_DIR / "lumen130.toml").read_text().replace("t_ox_nm = 2.2", "t_ox_nm = -2.2", 1)
    Path("broken.toml").write_text(text)
    with pytest.raises(DeckError) as caught:
        load_deck("broken.toml")
    return load_deck(DECK_DIR / "lumen130.toml"), DeckFailure.from_error("broken.toml", caught.value)


def test_decks_with_a_bad_deck_80x24(snap_compare: Any, synthetic_catalog: Any, ui: Any,
                                      decks_in_cwd: tuple[Any, DeckFailure]) -> None:
    good, bad = decks_in_cwd
    app = CelllabApp(catalog=synthetic_catalog, deck=good, deck_failures=[bad])
    assert snap_compare(app, terminal_size=(80, 24), run_before=_steps(ui, "3"))


def test_about_80x24(snap_compare: Any, synthetic_catalog: Any, ui: Any) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=(80, 24),
                        run_before=_steps(ui, "a"))
