"""Benchmark of the terminal UI on a large catalog (not a test: prints numbers, exits 0).

Builds a synthetic catalog of N cells (default 100 000; invented numbers, stored through
``Catalog.store_run`` like any run), then measures with Textual's headless Pilot:

* opening the app until the catalog table shows its first page (target: within 1 s);
* a filter keystroke until the table shows the filtered page (target: within 100 ms),
  both for Enter (applied at once) and for typing (applied after the debounce pause);
* paging to the next page and a sort change.

    python bench/bench_tui.py [--cells 100000] [--catalog PATH (kept; reused when it exists)]
"""

from __future__ import annotations

import argparse
import asyncio
import hashlib
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from celllab import MODEL_VERSION  # noqa: E402
from celllab.records import (  # noqa: E402
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)
from celllab.topologies import REGISTRY  # noqa: E402

TOPOLOGIES = REGISTRY.names()
ESD_SAFE = {"cross_coupled", "mom"}
CORNERS = (("typ_25C", 25.0, 1.2), ("slow_125C", 125.0, 1.08), ("fast_m40C", -40.0, 1.32))


def synthetic_run(n_cells: int, rng_state: int = 7, deck_name: str = "benchproc") -> CharacterizationRun:
    """A run of ``n_cells`` invented cells x 3 corners with short response arrays."""
    rng = np.random.default_rng(rng_state)
    freq = np.logspace(6, 11, 6)
    bias = np.linspace(-1.2, 1.2, 5)
    width = rng.integers(2, 64, n_cells)
    height = rng.integers(1, 4, n_cells)
    area = width * 0.41 * height * 3.69
    density = rng.uniform(1.0, 14.0, n_cells)
    leak_per_nF = 10 ** rng.uniform(-1.0, 3.0, n_cells)
    esr = 10 ** rng.uniform(-0.5, 2.0, n_cells)
    cells = []
    for i in range(n_cells):
        topology = TOPOLOGIES[i % len(TOPOLOGIES)]
        corners = []
        for k, (corner, temp, supply) in enumerate(CORNERS):
            drift = 1.0 + 0.05 * (k - 1)
            cap_fF = density[i] * area[i] * drift
            metrics = {name: float(rng.uniform(0.1, 10.0)) for name in METRIC_NAMES}
            metrics.update(cap_fF=cap_fF, cap_density_fF_per_um2=density[i] * drift,
                           esr_ohm=esr[i] / drift, leakage_nA_per_nF=leak_per_nF[i] * drift,
                           leakage_nA=leak_per_nF[i] * drift * cap_fF * 1e-6)
            z = esr[i] + 1.0 / (2j * np.pi * freq * cap_fF * 1e-15)
            corners.append(CornerResult(
                corner=corner, temperature_C=temp, supply_V=supply, metrics=metrics,
                response=FrequencyResponse(freq_Hz=freq, z_ohm=z),
                cv=CVCurve(bias_V=bias, cap_F=np.full(bias.shape, cap_fF * 1e-15),
                           operating_bias_V=supply, operating_cap_F=cap_fF * 1e-15)))
        name = f"syn_{topology[:4]}_{i:06d}"
        cells.append(CellResult(
            name=name, cell_hash=hashlib.sha256(name.encode()).hexdigest()[:16], family="syn",
            topology=topology, oxide="core" if i % 5 else "io",
            geometry={"width_sites": int(width[i]), "height_rows": int(height[i])},
            area_um2=float(area[i]), width_sites=int(width[i]), height_rows=int(height[i]),
            gate_area_um2=float(area[i] * 0.6), esd_safe=topology in ESD_SAFE, corners=corners))
    params = {"process": {"name": deck_name, "invented": True}}
    return CharacterizationRun(deck_name=deck_name, deck_hash=hashlib.sha256(
        f"{deck_name}{n_cells}{rng_state}".encode()).hexdigest()[:16], deck_params=params,
        model_version=MODEL_VERSION, corners=[c[0] for c in CORNERS], cells=cells)


def build_catalog(path: Path, n_cells: int) -> float:
    """Store the synthetic run; returns seconds taken."""
    from celllab.catalog import open_catalog

    started = time.perf_counter()
    catalog = open_catalog(path)
    catalog.store_run(synthetic_run(n_cells))
    catalog.close()
    return time.perf_counter() - started


async def _wait_for(predicate, timeout: float = 30.0, step: float = 0.002) -> float:  # type: ignore[no-untyped-def]
    started = time.perf_counter()
    while not predicate():
        if time.perf_counter() - started > timeout:
            raise TimeoutError("condition not reached")
        await asyncio.sleep(step)
    return time.perf_counter() - started


def _send_key(app: object, key: str, char: str | None = None) -> None:
    """Deliver a key the way the terminal driver does (no test-harness waiting)."""
    from textual import events

    app._driver.send_message(events.Key(key, char))  # type: ignore[attr-defined]


def _paint(app: object) -> None:
    """Run the pending screen update now, so a measurement includes drawing the new rows."""
    app.screen._on_timer_update()  # type: ignore[attr-defined]


async def measure_once(path: Path, results: dict[str, list[float]]) -> None:
    """One app session: open, filter (Enter and typed), next page, reverse sort."""
    from celllab.catalog import open_catalog
    from celllab.tui.app import CelllabApp
    from celllab.tui.screens.catalog import CatalogScreen
    from celllab.tui.widgets.catalog_table import CatalogTable

    started = time.perf_counter()
    app = CelllabApp(catalog=open_catalog(path))
    async with app.run_test(size=(120, 40)) as pilot:
        def table() -> CatalogTable:
            return app.screen.query_one(CatalogTable)

        await _wait_for(lambda: isinstance(app.screen, CatalogScreen) and bool(table().rows_shown))
        _paint(app)
        results["open"].append(time.perf_counter() - started)
        screen = app.screen
        assert isinstance(screen, CatalogScreen)

        # Enter applies the filter at once: time from the key to the redrawn page
        await pilot.press("slash", *"esd_safe and leakage_nA_per_nF <= 5")
        await pilot.pause()
        before = table().rows_shown
        started = time.perf_counter()
        _send_key(app, "enter")
        await _wait_for(lambda: table().rows_shown is not before)
        _paint(app)
        results["enter"].append(time.perf_counter() - started)
        assert all(r["esd_safe"] for r in table().rows_shown)
        await _wait_for(lambda: screen.total is not None)
        results["count"].append(time.perf_counter() - started)

        # one more typed character: applied once typing pauses (the debounce)
        await pilot.press("slash", "end")
        await pilot.pause()
        before = table().rows_shown
        started = time.perf_counter()
        _send_key(app, "0", "0")  # "<= 50"
        await _wait_for(lambda: table().rows_shown is not before)
        _paint(app)
        elapsed = time.perf_counter() - started
        results["typed"].append(elapsed)
        results["debounce"].append(elapsed - app.debounce_s)

        await pilot.press("escape")
        await _wait_for(lambda: screen.total is not None)
        await pilot.pause(1.5)  # resting on the page: the next one is read ahead
        first = table().rows_shown[0]["name"]
        started = time.perf_counter()
        _send_key(app, "right_square_bracket", "]")
        await _wait_for(lambda: bool(table().rows_shown) and table().rows_shown[0]["name"] != first)
        _paint(app)
        results["next_page"].append(time.perf_counter() - started)

        await pilot.pause()
        first = table().rows_shown[0]["name"]
        started = time.perf_counter()
        _send_key(app, "r", "r")
        await _wait_for(lambda: bool(table().rows_shown) and table().rows_shown[0]["name"] != first)
        _paint(app)
        results["sort"].append(time.perf_counter() - started)


async def measure(path: Path, repeats: int) -> dict[str, list[float]]:
    results: dict[str, list[float]] = {"open": [], "enter": [], "count": [], "typed": [],
                                       "debounce": [], "next_page": [], "sort": []}
    for _ in range(repeats):
        await measure_once(path, results)
    return results


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=100_000)
    parser.add_argument("--catalog", type=Path, default=None, help="reuse/keep this catalog file")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)

    tmp = None
    path = args.catalog
    if path is None:
        tmp = tempfile.TemporaryDirectory()
        path = Path(tmp.name) / "bench.sqlite"
    if not path.exists():
        seconds = build_catalog(path, args.cells)
        print(f"built synthetic catalog: {args.cells:,} cells x 3 corners in {seconds:.1f} s ({path})")
    else:
        print(f"using existing catalog {path}")
    results = asyncio.run(measure(path, args.repeats))
    targets = {"open": 1.0, "enter": 0.1, "debounce": 0.1, "next_page": 0.1, "sort": 0.1}
    labels = {
        "open": "open app -> interactive table",
        "enter": "filter + Enter -> redrawn page",
        "count": "filter + Enter -> row count in the status line",
        "typed": "filter keystroke -> redrawn page (incl. debounce)",
        "debounce": "filter keystroke -> redrawn page (excl. debounce)",
        "next_page": "] next page -> redrawn page",
        "sort": "r reverse sort -> redrawn page",
    }
    print(f"{'measurement':<52} {'median':>9} {'best':>9} {'target':>8} {'ratio':>7}")
    for key, label in labels.items():
        values = results[key]
        median = statistics.median(values)
        target = targets.get(key)
        ratio = f"{median / target:.2f}" if target else ""
        print(f"{label:<52} {median * 1000:7.0f}ms {min(values) * 1000:7.0f}ms "
              f"{(f'{target * 1000:.0f}ms' if target else ''):>8} {ratio:>7}")
    if tmp is not None:
        tmp.cleanup()
    return 0


if __name__ == "__main__":
    sys.exit(main())
