"""Decap topologies: one module per family, each declaring its ``Topology`` records.

``REGISTRY`` holds every topology of the modules in this package (found at import, in the
order their records ask for). To add a topology, add a module here with a module-level
``TOPOLOGIES`` tuple; cell validation, geometry, the engine, the filter language and the UI
pick it up from the registry (see DEVELOPERS.md, "Adding a topology").
"""

from __future__ import annotations

import importlib
import pkgutil
from collections.abc import Sequence
from typing import Any

import numpy as np

from celllab.topologies.common import GroupResult, MergedGroup
from celllab.topologies.registry import REGISTRY, Registry, Topology

__all__ = ["REGISTRY", "Registry", "Topology", "GroupResult", "MergedGroup", "evaluate"]

def _register_package_modules() -> None:
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"{__name__}.{info.name}")
        for topology in getattr(module, "TOPOLOGIES", ()):
            REGISTRY.register(topology)


def evaluate(topology: str, deck: Any, corners: Any, cells: Sequence[Any], geos: Sequence[Any],
             freq: np.ndarray) -> GroupResult | MergedGroup:
    """Evaluate a group of cells that share one topology (split by circuit structure)."""
    spec = REGISTRY[topology]
    keys = [spec.circuit_key(c, g) for c, g in zip(cells, geos)]
    order = sorted(set(keys), key=keys.index)
    parts = []
    for key in order:  # a handful of circuit structures per topology, not one per variant
        idx = [i for i, k in enumerate(keys) if k == key]
        parts.append((idx, spec.evaluate(deck, corners, [cells[i] for i in idx], [geos[i] for i in idx], freq)))
    return parts[0][1] if len(parts) == 1 else MergedGroup(parts)


_register_package_modules()
