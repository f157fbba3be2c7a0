"""App-wide pieces: key help, about panel with the cautions, exports, task switching, CLI verb."""

from __future__ import annotations

import argparse
import csv
import json
import re
from pathlib import Path
from typing import Any

import pytest
from textual.widgets import Input, Label, RadioButton, TextArea

from celllab.tui.app import CelllabApp, DeckFailure
from celllab.tui.screens.about import AboutPanel
from celllab.tui.screens.export import ExportDialog
from celllab.tui.screens.keys import KeysOverlay

from .conftest import SYNTHETIC_DECK


async def test_key_help_and_about_panel(synthetic_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(100, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, KeysOverlay)
        text = ui.screen_text(app)
        for words in ("Keys · Catalog", "Filter", "Sort", "Columns", "What-if", "Next page",
                      "Everywhere", "About"):
            assert words in text
        assert "Focus Next" not in text  # Textual's own keys are summed up, not listed
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, KeysOverlay)

        await pilot.press("a")
        await pilot.pause()
        assert isinstance(app.screen, AboutPanel)
        words = " ".join(re.sub(r"[│▌]", " ", ui.screen_text(app)).split())  # drop borders
        assert "not sign-off" in words and "foundry's design rules" in words
        assert "ESD/reliability qualification standards" in words and "invented" in words
        await pilot.press("x")  # exports are reachable from the about panel
        await pilot.pause()
        assert isinstance(app.screen, ExportDialog)
        await pilot.press("escape")
        await ui.settle(pilot)
        assert type(app.screen).__name__ == "CatalogScreen"


async def _export(app: CelllabApp, pilot: Any, ui: Any, fmt: str, path: Path) -> None:
    await pilot.press("x")
    await pilot.pause()
    dialog = app.screen
    assert isinstance(dialog, ExportDialog)
    dialog.query_one(f"#fmt-{fmt}", RadioButton).value = True
    await pilot.pause()
    field = dialog.query_one("#export-path", Input)
    field.focus()
    field.value = str(path)
    await pilot.press("enter")
    await ui.settle(pilot)


async def test_csv_export_writes_every_filtered_row(synthetic_catalog: Any, ui: Any, tmp_path: Path) -> None:
    app = CelllabApp(catalog=synthetic_catalog, page_size=20, export_folder=tmp_path)
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, "oxide = io")
        await pilot.press("enter")
        await ui.settle(pilot)
        await _export(app, pilot, ui, "csv", tmp_path / "io.csv")
        # a folder that does not exist: said so, nothing written, the app keeps going
        await _export(app, pilot, ui, "csv", tmp_path / "nope" / "x.csv")
        assert any("folder does not exist" in n.message for n in app._notifications)
    assert not (tmp_path / "nope").exists()
    lines = [ln for ln in (tmp_path / "io.csv").read_text().splitlines() if not ln.startswith("#")]
    rows = list(csv.DictReader(lines))
    expected = synthetic_catalog.count(deck=SYNTHETIC_DECK, where="oxide = io")
    assert len(rows) == expected > 20  # every row, not just the page on screen
    assert {r["oxide"] for r in rows} == {"io"}


async def test_an_existing_file_is_replaced_only_after_a_second_enter(
        synthetic_catalog: Any, ui: Any, tmp_path: Path) -> None:
    app = CelllabApp(catalog=synthetic_catalog, page_size=20, export_folder=tmp_path)
    target = tmp_path / "rows.csv"
    target.write_text("keep me\n")
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        await _export(app, pilot, ui, "csv", target)
        dialog = app.screen
        assert "enter again replaces it" in str(dialog.query_one("#export-error", Label).render())
        assert target.read_text() == "keep me\n"  # warned, nothing written yet
        await pilot.press("enter")
        await ui.settle(pilot)
    assert target.read_text() != "keep me\n" and "cap_fF" in target.read_text()


async def test_circuit_text_and_cell_exports_from_the_cell_view(
        demo_catalog: Any, ui: Any, tmp_path: Path) -> None:
    app = CelllabApp(catalog=demo_catalog, export_folder=tmp_path)
    formats = {"json": "json", "touchstone": "s1p", "spice": "sp", "datasheet": "html",
               "datasheet-pdf": "pdf"}
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("enter")
        await ui.settle(pilot)
        name = app.screen.cell.name  # type: ignore[attr-defined]
        # the Circuit tab: the equivalent circuit as SPICE-like text
        circuit = app.screen.query_one("#cell-circuit", TextArea).text
        assert name in circuit
        elements = [ln.split() for ln in circuit.splitlines() if ln.strip() and not ln.startswith("*")]
        assert any(parts[0][0].upper() in "RCL" for parts in elements)
        for fmt, suffix in formats.items():
            await _export(app, pilot, ui, fmt, tmp_path / f"out.{suffix}")
    for fmt, suffix in formats.items():
        if suffix == "pdf":
            assert (tmp_path / "out.pdf").read_bytes().startswith(b"%PDF")
            continue
        text = (tmp_path / f"out.{suffix}").read_text()
        assert name in text, fmt
    assert json.loads((tmp_path / "out.json").read_text())
    assert any(line.startswith("#") for line in (tmp_path / "out.s1p").read_text().splitlines())


async def test_library_views_from_the_table_and_the_cell_view(
        demo_catalog: Any, ui: Any, tmp_path: Path) -> None:
    liberty_parser = pytest.importorskip("liberty.parser")
    kdb = pytest.importorskip("klayout.db")
    app = CelllabApp(catalog=demo_catalog, export_folder=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("slash")
        await ui.type_text(pilot, "topology = mom")
        await pilot.press("enter")
        await ui.settle(pilot)
        await pilot.press("x")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, ExportDialog)
        for fmt, suffix in (("liberty", ".lib"), ("lef", ".lef")):
            dialog.query_one(f"#fmt-{fmt}", RadioButton).value = True
            await pilot.pause()
            assert dialog.query_one("#export-path", Input).value.endswith(suffix)
        await pilot.press("escape")
        await ui.settle(pilot)
        # no cell open: the views hold every row of the table
        await _export(app, pilot, ui, "liberty", tmp_path / "table.lib")
        await _export(app, pilot, ui, "lef", tmp_path / "table.lef")
        await pilot.press("enter")  # open the first row's cell
        await ui.settle(pilot)
        name = app.screen.cell.name  # type: ignore[attr-defined]
        await _export(app, pilot, ui, "liberty", tmp_path / "cell.lib")
        await _export(app, pilot, ui, "lef", tmp_path / "cell.lef")
    moms = {r["name"] for r in demo_catalog.query(where="topology = mom")}
    assert len(moms) > 1
    plain = lambda v: getattr(v, "value", v)  # noqa: E731
    for path, cells in ((tmp_path / "table.lib", moms), (tmp_path / "cell.lib", {name})):
        lib = liberty_parser.parse_liberty(path.read_text(encoding="utf-8"))
        # Source: liberty-parser (PyPI); the table ranks worst corners, so the deck's first corner
        assert {plain(c.args[0]) for c in lib.get_groups("cell")} == cells
        assert lib.get_group("operating_conditions").args == ["typ_25C"]
    for path, cells in ((tmp_path / "table.lef", moms), (tmp_path / "cell.lef", {name})):
        layout = kdb.Layout()
        layout.read(str(path))
        # Source: KLayout LEF reader
        assert {c.name for c in layout.each_cell()} == cells


def test_ui_verb_is_registered_and_builds_the_app(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    from celllab.cli import ui as ui_verb

    parser = argparse.ArgumentParser()
    sub = parser.add_subparsers()
    ui_verb.register(sub)
    bad = tmp_path / "bad.toml"
    bad.write_text("[process]\nname = 'x'\nnode_nm = -5\n")
    good = Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml"
    args = parser.parse_args(["ui", "--catalog", str(tmp_path / "c.sqlite"), "--deck", str(good), str(bad)])
    seen: dict[str, Any] = {}

    def fake_run(self: CelllabApp) -> None:
        seen["app"] = self

    monkeypatch.setattr(CelllabApp, "run", fake_run)
    assert args.func(args) == 0
    app = seen["app"]
    assert list(app.decks) == ["lumen130"]
    assert [Path(f.path).name for f in app.deck_failures] == ["bad.toml"]
    assert all(isinstance(f, DeckFailure) for f in app.deck_failures)
    assert str(app.catalog.path) == str(tmp_path / "c.sqlite")


def test_an_unexpected_error_exits_non_zero_with_one_line_and_a_log(
        monkeypatch: pytest.MonkeyPatch, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from textual.app import App

    from celllab.tui import app as app_module

    def boom(self: CelllabApp) -> None:
        raise RuntimeError("wires crossed in the test")

    real_run = App.run
    monkeypatch.setattr(CelllabApp, "on_mount", boom)
    monkeypatch.setattr(CelllabApp, "run", lambda self: real_run(self, headless=True))
    status = app_module.run_app(tmp_path / "c.sqlite", log_folder=tmp_path)
    err = capsys.readouterr().err
    assert status != 0
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err  # one line, no traceback on the terminal
    assert "RuntimeError: wires crossed in the test" in lines[0]
    logs = list(tmp_path.glob("celllab-ui-*.log"))
    assert len(logs) == 1 and str(logs[0]) in lines[0]
    text = logs[0].read_text()
    assert "Traceback" in text and "in boom" in text


@pytest.mark.parametrize("opener", ["question_mark", "a", "x", "c"])
async def test_ctrl_q_quits_with_an_overlay_open(synthetic_catalog: Any, ui: Any, opener: str) -> None:
    app = CelllabApp(catalog=synthetic_catalog)
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        await pilot.press(opener)
        await pilot.pause()
        assert app.screen is not app.screen_stack[0] and len(app.screen_stack) > 1
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert app._exit  # the app is on its way out
    assert app.return_code == 0


async def test_export_dialog_extension_follows_the_format_and_enter_exports(
        demo_catalog: Any, ui: Any, tmp_path: Path) -> None:
    app = CelllabApp(catalog=demo_catalog, export_folder=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("enter")  # open a cell: every format is offered
        await ui.settle(pilot)
        name = app.screen.cell.name  # type: ignore[attr-defined]
        await pilot.press("x")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, ExportDialog)
        path = dialog.query_one("#export-path", Input)
        assert path.value.endswith(".json")  # the first format of a cell
        # keys alone: down the format list to the datasheet, space picks it
        order = [b.id for b in dialog.query(RadioButton)]
        for _ in range(order.index("fmt-datasheet")):
            await pilot.press("down")
        await pilot.press("space")
        await pilot.pause()
        assert path.value.endswith(".html") and Path(path.value).parent == tmp_path
        await pilot.press("enter")  # enter on the format list exports, as the dialog says
        await ui.settle(pilot)
        assert not isinstance(app.screen, ExportDialog)
    written = tmp_path / f"{name}.html"
    assert written.exists() and "<html" in written.read_text().lower()
    assert not list(tmp_path.glob("*.csv")) and not list(tmp_path.glob("*.json"))


async def test_export_folder_defaults_to_an_exports_folder_beside_the_catalog(
        demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("x")
        await pilot.pause()
        path = Path(app.screen.query_one("#export-path", Input).value)
        assert path.parent == Path(demo_catalog.path).parent / "exports"
        assert "exports" in ui.screen_text(app)
        await pilot.press("enter")
        await ui.settle(pilot)
    assert path.exists()  # the folder is made on the first export


async def test_export_formats_read_without_colour(demo_catalog: Any, ui: Any) -> None:
    app = CelllabApp(catalog=demo_catalog)
    async with app.run_test(size=(100, 30)) as pilot:
        await ui.settle(pilot)
        await pilot.press("x")
        await ui.settle(pilot)
        lines = ui.screen_text(app).splitlines()
        chosen = [ln for ln in lines if "CSV:" in ln][0]
        other = [ln for ln in lines if "Liberty:" in ln][0]
        assert "●" in chosen and "●" not in other and "○" in other
