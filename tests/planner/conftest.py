"""Planner test fixtures: a demo catalog (the invented lumen130 and quill28hk decks) and one
lumen130 catalog for the supply-network tests."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from celllab.catalog import Catalog, open_catalog
from celllab.demo import build_demo_catalog

from .network_demo import build_lumen_catalog

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def demo_catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    folder = tmp_path_factory.mktemp("decks")
    (folder / "cells").mkdir()
    for deck in ("lumen130", "quill28hk"):
        shutil.copy(REPO / "process_decks" / f"{deck}.toml", folder)
        shutil.copy(REPO / "process_decks" / "cells" / f"{deck}_cells.toml", folder / "cells")
    return open_catalog(build_demo_catalog(folder / "demo.sqlite", folder=folder, esd=False))


@pytest.fixture(scope="session")
def lumen_catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    return build_lumen_catalog(tmp_path_factory.mktemp("lumen_network"))
