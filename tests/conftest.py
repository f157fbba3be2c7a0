"""Shared fixtures: where the invented demo decks live, and one loaded demo deck."""

from __future__ import annotations

from pathlib import Path

import pytest

from celllab.deck import Deck, load_deck

_approx = pytest.approx


def _approx_no_default_abs(expected, rel=None, abs=None, nan_ok=False):  # type: ignore[no-untyped-def]
    """pytest.approx without its default absolute tolerance of 1e-12.

    SI capacitances (1e-15 F) and inductances (1e-12 H) sit below that default, where a plain
    ``approx`` would accept any value; here a comparison is relative unless a test asks for abs.
    """
    return _approx(expected, rel=rel if rel is not None else (None if abs is not None else 1e-6),
                   abs=abs if abs is not None else 0.0, nan_ok=nan_ok)


pytest.approx = _approx_no_default_abs  # applies to every test module (imported after conftest)

REPO_ROOT = Path(__file__).resolve().parent.parent
DECK_DIR = REPO_ROOT / "process_decks"
#: The invented demo processes; each has process_decks/NAME.toml and process_decks/cells/NAME_cells.toml.
DEMO_DECKS: tuple[str, ...] = ("lumen130", "tarn40lp", "quill28hk")


@pytest.fixture(scope="session")
def deck_dir() -> Path:
    """The folder holding the demo decks."""
    return DECK_DIR


@pytest.fixture(scope="session")
def demo_deck_paths() -> dict[str, tuple[Path, Path]]:
    """Demo process name -> (deck file, cell file)."""
    return {name: (DECK_DIR / f"{name}.toml", DECK_DIR / "cells" / f"{name}_cells.toml") for name in DEMO_DECKS}


@pytest.fixture(params=DEMO_DECKS)
def demo_deck_name(request: pytest.FixtureRequest) -> str:
    """Each demo process name in turn (parametrizes the test)."""
    return str(request.param)


@pytest.fixture(scope="session")
def lumen130_path() -> Path:
    return DECK_DIR / "lumen130.toml"


@pytest.fixture(scope="session")
def lumen130(lumen130_path: Path) -> Deck:
    """The lumen130 demo deck, loaded once (decks are frozen, so sharing is safe)."""
    return load_deck(lumen130_path)


@pytest.fixture(scope="session")
def demo_view_runs(demo_deck_paths: dict[str, tuple[Path, Path]]) -> dict[str, object]:
    """Each demo deck characterized on a few of its cells: the first of every (topology, oxide,
    one row or several) combination. Demo deck name -> CharacterizationRun."""
    from celllab.cells import load_cells
    from celllab.engine import characterize

    runs: dict[str, object] = {}
    for name, (deck_file, cell_file) in demo_deck_paths.items():
        deck = load_deck(deck_file)
        picked: dict[tuple[str, str, bool], object] = {}
        for spec in load_cells(cell_file, deck):
            picked.setdefault((spec.topology, spec.oxide, spec.height_rows > 1), spec)
        runs[name] = characterize(deck, list(picked.values()))  # type: ignore[arg-type]
    return runs


@pytest.fixture(scope="session")
def demo_view_catalog(demo_view_runs: dict[str, object], tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A catalog file holding ``demo_view_runs`` (tests only read it)."""
    from celllab.catalog import open_catalog

    path = tmp_path_factory.mktemp("views") / "views.sqlite"
    with open_catalog(path) as catalog:
        for run in demo_view_runs.values():
            catalog.store_run(run)  # type: ignore[arg-type]
    return path


# --------------------------------------------------------------------------- hardening tally

_TALLY: dict[str, object] = {}


@pytest.fixture(scope="session")
def tally() -> dict[str, object]:
    """Counts the fuzz and concurrency tests record (printed at the end of the run; written as
    JSON to $CELLLAB_TALLY_JSON when that is set). The README's hardening table quotes them."""
    return _TALLY


def pytest_terminal_summary(terminalreporter, exitstatus, config):  # type: ignore[no-untyped-def]
    if not _TALLY:
        return
    import json
    import os

    terminalreporter.section("hardening tally")
    for key, value in sorted(_TALLY.items()):
        terminalreporter.write_line(f"{key}: {json.dumps(value, sort_keys=True)}")
    if target := os.environ.get("CELLLAB_TALLY_JSON"):
        Path(target).write_text(json.dumps(_TALLY, indent=2, sort_keys=True) + "\n")
