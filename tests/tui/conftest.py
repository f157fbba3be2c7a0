"""Fixtures for the terminal UI tests: catalogs built through the catalog API, frozen looks.

* ``synthetic_catalog``: a few hundred invented cells (fixed random state) stored with
  ``Catalog.store_run``; numbers independent of the physics, so snapshots stay put.
* ``demo_catalog``: the invented lumen130 demo deck characterized by the engine (what-ifs).
Both are built once per session and copied per test, so a test may write to its copy.
"""

from __future__ import annotations

import asyncio
import hashlib
import io
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from rich.console import Console

from celllab import MODEL_VERSION
from celllab.records import (
    METRIC_NAMES,
    METRICS,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)
from celllab.topologies import REGISTRY

REPO_ROOT = Path(__file__).resolve().parents[2]
DECK_DIR = REPO_ROOT / "process_decks"

TOPOLOGIES = REGISTRY.names()
ESD_SAFE = REGISTRY.esd_safe_names()
#: Metrics that are 0/1 flags.
BOOL_METRICS = [m.name for m in METRICS if m.kind == "bool"]

CORNERS = (("typ_25C", 25.0, 1.2), ("slow_125C", 125.0, 1.08), ("fast_m40C", -40.0, 1.32))
SYNTHETIC_DECK = "synproc"
N_SYNTHETIC = 240


def synthetic_run(n_cells: int = N_SYNTHETIC, rng_state: int = 11) -> CharacterizationRun:
    """Invented cells x 3 corners with simple RC responses and flat C-V curves."""
    rng = np.random.default_rng(rng_state)
    freq = np.logspace(6, 11, 26)
    bias = np.linspace(-1.2, 1.2, 13)
    cells = []
    for i in range(n_cells):
        topology = TOPOLOGIES[i % len(TOPOLOGIES)]
        width, height = int(rng.integers(2, 40)), int(rng.integers(1, 3))
        area = width * 0.41 * height * 3.69
        density = float(rng.uniform(1.0, 14.0))
        leak = float(10 ** rng.uniform(-1.0, 3.0))
        esr = float(10 ** rng.uniform(-0.5, 2.0))
        corners = []
        for k, (corner, temp, supply) in enumerate(CORNERS):
            drift = 1.0 + 0.05 * (k - 1)
            cap_fF = density * area * drift
            metrics = {name: float(rng.uniform(0.1, 10.0)) for name in METRIC_NAMES}
            for name in BOOL_METRICS:  # flags are 0 or 1 (a few lower bounds among them)
                metrics[name] = float(metrics[name] > 8.5)
            metrics.update(cap_fF=cap_fF, cap_density_fF_per_um2=density * drift,
                           esr_ohm=esr / drift, leakage_nA_per_nF=leak * drift,
                           leakage_nA=leak * drift * cap_fF * 1e-6)
            z = esr / drift + 1.0 / (2j * np.pi * freq * cap_fF * 1e-15)
            cap_curve = cap_fF * 1e-15 * (0.6 + 0.4 / (1 + np.exp(-4 * bias)))
            corners.append(CornerResult(
                corner=corner, temperature_C=temp, supply_V=supply, metrics=metrics,
                response=FrequencyResponse(freq_Hz=freq, z_ohm=z),
                cv=CVCurve(bias_V=bias, cap_F=cap_curve, operating_bias_V=supply,
                           operating_cap_F=float(np.interp(supply, bias, cap_curve))),
                flags=(["weak_channel: overdrive below 0.2 V, channel resistance formulas "
                        "outside their range"] if i % 7 == 0 else [])))
        name = f"syn_{topology[:4]}_{i:04d}"
        cells.append(CellResult(
            name=name, cell_hash=hashlib.sha256(name.encode()).hexdigest()[:16], family="syn",
            topology=topology, oxide="core" if i % 5 else "io",
            geometry={"width_sites": width, "height_rows": height}, area_um2=area,
            width_sites=width, height_rows=height, gate_area_um2=area * 0.6,
            esd_safe=topology in ESD_SAFE, corners=corners))
    return CharacterizationRun(
        deck_name=SYNTHETIC_DECK, deck_hash=hashlib.sha256(f"syn{n_cells}{rng_state}".encode()).hexdigest()[:16],
        deck_params={"process": {"name": SYNTHETIC_DECK, "invented": True}},
        model_version=MODEL_VERSION, corners=[c[0] for c in CORNERS], cells=cells)


@pytest.fixture(scope="session")
def _synthetic_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    from celllab.catalog import open_catalog

    path = tmp_path_factory.mktemp("syn") / "synthetic.sqlite"
    catalog = open_catalog(path)
    catalog.store_run(synthetic_run())
    catalog.close()
    return path


@pytest.fixture
def synthetic_catalog(_synthetic_file: Path, tmp_path: Path) -> Any:
    """A writable copy of the synthetic catalog, opened."""
    from celllab.catalog import open_catalog

    path = tmp_path / "synthetic.sqlite"
    shutil.copy(_synthetic_file, path)
    catalog = open_catalog(path)
    yield catalog
    catalog.close()


@pytest.fixture(scope="session")
def _demo_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The invented lumen130 demo deck and its cells, characterized and stored (the CLI's path)."""
    from celllab.catalog import open_catalog
    from celllab.cells import load_cells
    from celllab.deck import load_deck
    from celllab.engine import characterize

    path = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    deck = load_deck(DECK_DIR / "lumen130.toml")
    cells = load_cells(DECK_DIR / "cells" / "lumen130_cells.toml", deck)
    catalog = open_catalog(path)
    catalog.store_run(characterize(deck, cells, esd=False))  # ESD transients: see tests/test_engine_risk.py
    catalog.close()
    return path


@pytest.fixture
def demo_catalog(_demo_file: Path, tmp_path: Path) -> Any:
    """A writable copy of the demo catalog (the lumen130 demo deck), opened."""
    from celllab.catalog import open_catalog

    path = tmp_path / "demo.sqlite"
    shutil.copy(_demo_file, path)
    catalog = open_catalog(path)
    yield catalog
    catalog.close()


@pytest.fixture(scope="session")
def lumen130_deck() -> Any:
    from celllab.deck import load_deck

    return load_deck(DECK_DIR / "lumen130.toml")


@pytest.fixture(autouse=True)
def _frozen_looks(monkeypatch: pytest.MonkeyPatch) -> None:
    """No blinking cursor, no animations: screens render the same every run."""
    import textual._wait
    import textual.constants
    from textual.widgets import Input

    monkeypatch.setattr(Input, "_toggle_cursor", lambda self: None)
    monkeypatch.setattr(textual.constants, "TEXTUAL_ANIMATIONS", "none")
    # Pilot waits for CPU idleness in 20 ms slices after every key; finer slices keep a typed
    # filter from costing seconds. ``settle`` below waits for the app's real state anyway.
    monkeypatch.setattr(textual._wait, "SLEEP_GRANULARITY", 0.004)
    monkeypatch.setattr(textual._wait, "SLEEP_IDLE", 0.0008)


def _pending_timers(app: Any) -> bool:
    """A filter pause or a what-if debounce still waiting to fire."""
    from celllab.tui.widgets.filter_bar import FilterBar

    screen = app.screen
    for bar in screen.query(FilterBar):
        if bar._pending is not None:
            return True
    return getattr(screen, "_debounce", None) is not None


async def settle(pilot: Any, timeout: float = 30.0) -> None:
    """Wait until no worker runs, no debounce timer waits and the screen has caught up."""
    app = pilot.app
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    quiet = 0
    while quiet < 3:
        if loop.time() > end:
            raise AssertionError("the app did not settle")
        await pilot.pause(0.01)
        if _pending_timers(app):
            quiet = 0
            continue
        if any(w.state.name in ("PENDING", "RUNNING") for w in app.workers):
            quiet = 0
            await app.workers.wait_for_complete()
            continue
        quiet += 1
    await pilot.pause()


async def type_text(pilot: Any, text: str) -> None:
    """Put ``text`` into the focused input as if typed (one change event, not one per key)."""
    from textual.widgets import Input

    field = pilot.app.focused
    assert isinstance(field, Input), f"focus is on {field!r}, not an input"
    field.value = text
    field.cursor_position = len(text)
    await pilot.pause()


async def wait_until(pilot: Any, predicate: Callable[[], bool], timeout: float = 10.0) -> None:
    """Pause until ``predicate()`` holds (fails the test after ``timeout`` seconds)."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while not predicate():
        if loop.time() > end:
            raise AssertionError("condition not reached in time")
        await pilot.pause(0.02)


def screen_text(app: Any) -> str:
    """What the terminal shows, as plain text (the same render the screenshots use)."""
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), force_terminal=True,
                      color_system="truecolor", record=True, legacy_windows=False, safe_box=False)
    console.print(app.screen._compositor.render_update(full=True,
                                                         screen_stack=app._background_screens))
    return console.export_text()


class UiHelpers:
    """Helpers handed to tests through the ``ui`` fixture."""

    settle = staticmethod(settle)
    type_text = staticmethod(type_text)
    wait_until = staticmethod(wait_until)
    screen_text = staticmethod(screen_text)


@pytest.fixture
def ui() -> UiHelpers:
    return UiHelpers()
