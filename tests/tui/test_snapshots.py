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


# --- what a newcomer does with keys alone, at both terminal sizes ---------------------------

SIZES = pytest.mark.parametrize("size", [(80, 24), (120, 40)], ids=["80x24", "120x40"])
LIMIT_FILTER = "esd_safe = yes and leakage_nA_per_nF <= 500"


@SIZES
def test_densest_esd_safe_under_a_leakage_limit(snap_compare: Any, synthetic_catalog: Any,
                                                ui: Any, size: tuple[int, int]) -> None:
    async def run_before(pilot: Any) -> None:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, LIMIT_FILTER)
        await pilot.press("enter")
        await ui.settle(pilot)

    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=size,
                        run_before=run_before)


@SIZES
def test_three_cells_compared_impedance(snap_compare: Any, synthetic_catalog: Any, ui: Any,
                                        size: tuple[int, int]) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=size,
                        run_before=_steps(ui, "space", "space", "space", "v",
                                          "right_square_bracket", "right_square_bracket"))


@SIZES
def test_three_cells_compared_metrics(snap_compare: Any, synthetic_catalog: Any, ui: Any,
                                      size: tuple[int, int]) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=size,
                        run_before=_steps(ui, "space", "space", "space", "v"))


@SIZES
def test_oxide_sweep_leakage_against_density(snap_compare: Any, demo_catalog: Any, ui: Any,
                                             size: tuple[int, int]) -> None:
    # the demo deck: a sweep needs a real deck (these numbers move when the models do)
    async def run_before(pilot: Any) -> None:
        from textual.widgets import Select

        await ui.settle(pilot)
        for key in ("w", "ctrl+w"):
            await pilot.press(key)
            await ui.settle(pilot)
        await pilot.press(*"oxides.core.t_ox_nm", "tab", *"1.8", "tab", *"2.6", "enter")
        await ui.settle(pilot)
        pilot.app.screen.query_one("#sweep-x", Select).value = "cap_density_fF_per_um2"
        await ui.settle(pilot)

    assert snap_compare(CelllabApp(catalog=demo_catalog), terminal_size=size,
                        run_before=run_before)


@SIZES
def test_export_dialog_with_the_datasheet_chosen(snap_compare: Any, synthetic_catalog: Any,
                                                 ui: Any, size: tuple[int, int],
                                                 tmp_path: Path) -> None:
    app = CelllabApp(catalog=synthetic_catalog, export_folder=Path("exports"))
    assert snap_compare(app, terminal_size=size,
                        run_before=_steps(ui, "enter", "x", "down", "down", "down", "space"))


@SIZES
def test_ranking_with_a_front_cell_picked(snap_compare: Any, synthetic_catalog: Any, ui: Any,
                                          size: tuple[int, int]) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=size,
                        run_before=_steps(ui, "2", "period", "period"))


@SIZES
def test_cell_cv_every_corner(snap_compare: Any, synthetic_catalog: Any, ui: Any,
                              size: tuple[int, int]) -> None:
    assert snap_compare(CelllabApp(catalog=synthetic_catalog), terminal_size=size,
                        run_before=_steps(ui, "enter", "right_square_bracket"))


@SIZES
def test_decks_from_the_catalog(snap_compare: Any, demo_catalog: Any, ui: Any,
                                size: tuple[int, int]) -> None:
    assert snap_compare(CelllabApp(catalog=demo_catalog), terminal_size=size,
                        run_before=_steps(ui, "3", "right_square_bracket"))
