"""Planning view: a block file planned in a worker from keys alone, its report, plots and
files; budget changes that recompute; a bad budget or block file shown, not raised; cancel."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.planner import load_block, plan_block
from celllab.tui.app import CelllabApp
from celllab.tui.plan_plots import droop_plot, emission_plot, impedance_plot
from celllab.tui.screens.plan import PlanScreen, budget_overrides, find_block_files, render_text
from celllab.tui.widgets.plot import PlotView
from tests.planner import NETWORK, IdealCell, block_text, synthetic_catalog

CELLS = [IdealCell("ideal_a", 1000.0, esr_ohm=2.0, leakage_nA=0.5, width_sites=4),
         IdealCell("ideal_b", 300.0, esr_ohm=0.5, leakage_nA=0.05, width_sites=2)]


@pytest.fixture(scope="module")
def plan_catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    return synthetic_catalog(tmp_path_factory.mktemp("plan_view") / "c.sqlite", CELLS)


def _block(folder: Path, name: str = "core_block", **changes: Any) -> Path:
    path = folder / f"{name}.toml"
    network = dict(NETWORK, size_entrance_resistors=False)
    region = [{"name": "core", "frequency_MHz": 100.0, "peak_current_mA": 100.0,
               "rise_time_ps": 200.0, "clock_MHz": 100.0,
               "row_gaps": [{"name": "fill", "width_sites": [4, 8], "count": [100, 50]}]}]
    path.write_text(block_text(network=network, region=region, **changes))
    return path


def test_block_files_given_first_then_each_folder_once(tmp_path: Path) -> None:
    (tmp_path / "b.toml").write_text("")
    (tmp_path / "a.toml").write_text("")
    given = tmp_path / "b.toml"
    assert find_block_files([given], [tmp_path, tmp_path / "missing"]) == [
        given, tmp_path / "a.toml"]


@pytest.mark.parametrize(("leak", "kinds", "changes", "field"), [
    ("", "", {}, None),
    ("12.5", "2", {"leakage_uA": 12.5, "max_kinds": 2}, None),
    ("none", "", {"leakage_uA": None}, None),
    ("-1", "", {}, "budgets.leakage_uA"),
    ("lots", "", {}, "budgets.leakage_uA"),
    ("", "0", {}, "budgets.max_kinds"),
    ("", "2.5", {}, "budgets.max_kinds"),
])
def test_budget_fields(leak: str, kinds: str, changes: dict[str, Any], field: str | None) -> None:
    got, problems = budget_overrides(leak, kinds)
    assert got == changes
    assert [p.field for p in problems] == ([field] if field else [])


def test_plots_and_text_of_a_planned_block(tmp_path: Path, plan_catalog: Catalog) -> None:
    plan = plan_block(load_block(_block(tmp_path)), plan_catalog, explain=False)
    figures = plan.network.figures
    z = impedance_plot(plan, 0)
    # the plotted |Z| is the network's own, in mohm against MHz, one series per corner
    assert len(z.series) >= 3
    np.testing.assert_allclose(z.series[0].y, np.abs(figures.z[0, :, 0, 0]) * 1e3, rtol=1e-12)
    np.testing.assert_allclose(z.series[0].x, figures.freq * 1e-6, rtol=1e-12)
    assert droop_plot(plan).series and emission_plot(plan).series
    text = render_text(plan, 90)
    assert "Region core" in text and "Supply network" in text
    assert max(len(line) for line in text.splitlines()
               if not (line.startswith(" ") and not line.startswith("  "))) <= 90
    # a plan without a network: the plots say why they are empty
    bare = plan_block(load_block(_block(tmp_path)), plan_catalog, explain=False, network=None)
    assert not impedance_plot(bare, 0).series and "[network]" in impedance_plot(bare, 0).empty_text


async def test_plan_from_keys_report_plots_budgets_and_files(
        tmp_path: Path, plan_catalog: Catalog, ui: Any) -> None:
    block = _block(tmp_path)
    app = CelllabApp(catalog=plan_catalog, block_paths=[block], export_folder=tmp_path / "out")
    async with app.run_test(size=(120, 40)) as pilot:
        await ui.settle(pilot)
        await pilot.press("4")
        await ui.settle(pilot)
        screen = app.screen
        assert isinstance(screen, PlanScreen)
        await pilot.press("r")
        await ui.settle(pilot)
        assert screen.plan is not None
        words = " ".join(ui.screen_text(app).split())
        assert "Region core" in words and "planned" in words
        first = screen.plan.to_dict()
        # the plots carry the plan's network
        for tab in ("plot-z", "plot-droop", "plot-emission"):
            assert screen.query_one(f"#{tab}", PlotView).spec.series
        # budgets typed in the view recompute: one kind only
        await pilot.press("l")
        await ui.type_text(pilot, "0.001")
        await pilot.press("tab")  # to the kinds field
        await ui.type_text(pilot, "1")
        await pilot.press("enter")
        await ui.settle(pilot)
        second = screen.plan.to_dict()
        assert second is not first
        leak = next(b for b in second["budgets"] if b["name"] == "leakage")
        assert leak["limit"] == pytest.approx(0.001)
        assert len({c["name"] for r in second["regions"] for c in r["cells"]}) <= 1
        # switches and tabs from keys
        screen.query_one("#plan-scroll").focus()
        await pilot.press("d", "g")
        assert not screen.with_droop and not screen.with_damping
        await pilot.press("t")
        assert screen.query_one("#plan-tabs").active == "tab-z"
        await pilot.press("x")
        await ui.settle(pilot)
        written = sorted(p.name for p in (tmp_path / "out" / "plans").iterdir())
        assert "core_block_fill.csv" in written or any(n.endswith("_fill.csv") for n in written)
        assert any(n.endswith("_plan.html") for n in written)


async def test_bad_budget_and_bad_block_are_shown(tmp_path: Path, plan_catalog: Catalog,
                                                  ui: Any) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(block_text(budgets__max_kinds=0))
    app = CelllabApp(catalog=plan_catalog, block_paths=[bad])
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.press("4")
        await ui.settle(pilot)
        screen = app.screen
        await pilot.press("l")
        await ui.type_text(pilot, "lots")
        await pilot.press("enter")
        await ui.settle(pilot)
        words = " ".join(ui.screen_text(app).split())
        assert "budgets.leakage_uA" in words and screen.plan is None
        screen.query_one("#plan-leakage").value = ""
        screen.query_one("#plan-scroll").focus()
        await pilot.press("r")
        await ui.settle(pilot)
        words = " ".join(ui.screen_text(app).split())
        assert "could not be planned" in words and "budgets.max_kinds" in words
        assert f"{bad}" in words or "bad.toml" in words
        assert screen.plan is None


async def test_cancel_drops_the_running_plan(tmp_path: Path, plan_catalog: Catalog,
                                            ui: Any, monkeypatch: Any) -> None:
    import time

    import celllab.planner

    real = celllab.planner.plan_block

    def slow_plan(*args: Any, progress: Any = None, **kwargs: Any) -> Any:
        # a plan that is still running when Esc arrives, on a fast or a slow machine
        for _ in range(200):
            if progress is not None:
                progress("waiting")
            time.sleep(0.01)
        return real(*args, progress=progress, **kwargs)

    monkeypatch.setattr(celllab.planner, "plan_block", slow_plan)
    app = CelllabApp(catalog=plan_catalog, block_paths=[_block(tmp_path)])
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.press("4")
        await ui.settle(pilot)
        screen = app.screen
        await pilot.press("r", "escape")
        assert "cancelled" in " ".join(ui.screen_text(app).split())
        await ui.settle(pilot)
        # whatever the worker still finished is not shown
        assert screen.plan is None
        assert "cancelled" in " ".join(ui.screen_text(app).split())
