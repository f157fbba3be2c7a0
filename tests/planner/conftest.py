"""Fixtures for the supply-network tests: one lumen130 catalog per test run."""

from __future__ import annotations

import pytest

from celllab.catalog import Catalog

from .network_demo import build_lumen_catalog


@pytest.fixture(scope="session")
def lumen_catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    return build_lumen_catalog(tmp_path_factory.mktemp("lumen_network"))
