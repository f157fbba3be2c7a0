"""The topology registry: what a decap topology declares, and the table of known topologies.

A topology module declares one or more ``Topology`` records in a module-level ``TOPOLOGIES``
tuple; ``celllab.topologies`` finds every module of the package and registers them. Cell
validation, geometry, the engine, the filter language and the UI all read ``REGISTRY``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from celllab.topologies.geometry import PLACEMENTS

#: (cell spec, deck, geometry with the outline filled in) -> None; fills in the rest of the
#: geometry or raises ``geometry.GeometryProblem`` naming the cell field at fault.
GeometryRule = Callable[[Any, Any, Any], None]
#: (deck, corner set, cells, resolved geometries, frequencies in Hz) -> ``common.GroupResult``.
Evaluate = Callable[[Any, Any, Sequence[Any], Sequence[Any], np.ndarray], Any]
#: (cell, resolved geometry) -> hashable key; cells with equal keys share one circuit structure.
CircuitKey = Callable[[Any, Any], tuple[Any, ...]]


def _one_structure(cell: Any, geo: Any) -> tuple[Any, ...]:
    return ()


@dataclass(frozen=True, kw_only=True)
class Topology:
    """Everything the rest of celllab needs to know about one decap topology.

    Attributes
    ----------
    name : str              the value of ``topology`` in cell files and the catalog
    description : str       one line for help texts
    esd_safe : bool         True when no gate is tied directly to a supply rail
    fields : frozenset      the cell geometry fields that apply (others keep their defaults;
                            a field that defaults to "derived" may not be set)
    geometry : GeometryRule fills in the derived geometry from the outline
    evaluate : Evaluate     the figures of a group of cells of this topology
    circuit_key : CircuitKey  splits a group by equivalent-circuit structure
    order : int             position in listings (allowed values, help); ties keep registration order
    placements : frozenset  where cells of this topology may be placed (``geometry.PLACEMENTS``)
    """

    name: str
    description: str
    esd_safe: bool
    fields: frozenset[str]
    geometry: GeometryRule
    evaluate: Evaluate
    circuit_key: CircuitKey = _one_structure
    order: int = 1000
    placements: frozenset[str] = frozenset(PLACEMENTS)


@dataclass
class Registry(Mapping[str, Topology]):
    """Known topologies by name, in listing order."""

    _items: dict[str, Topology] = field(default_factory=dict)

    def register(self, topology: Topology, *, replace: bool = False) -> Topology:
        """Add a topology (``replace=True`` to redefine one); returns it."""
        if not topology.name.isidentifier():
            raise ValueError(f"topology name {topology.name!r} must be a lower-case identifier")
        if topology.name in self._items and not replace:
            raise ValueError(f"topology {topology.name!r} is already registered")
        items = {**self._items, topology.name: topology}
        ranked = sorted(enumerate(items.values()), key=lambda pair: (pair[1].order, pair[0]))
        self._items = {t.name: t for _, t in ranked}
        return topology

    def unregister(self, name: str) -> None:
        """Remove a topology (tests that register a temporary one)."""
        self._items.pop(name, None)

    def __getitem__(self, name: str) -> Topology:
        return self._items[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self._items)

    def __len__(self) -> int:
        return len(self._items)

    def names(self) -> tuple[str, ...]:
        """Topology names in listing order."""
        return tuple(self._items)

    def esd_safe_names(self) -> frozenset[str]:
        """Topologies with no gate tied directly to a supply rail."""
        return frozenset(n for n, t in self._items.items() if t.esd_safe)

    def placements_of(self, name: str) -> tuple[str, ...]:
        """Placements a topology allows, in ``geometry.PLACEMENTS`` order."""
        return tuple(p for p in PLACEMENTS if p in self._items[name].placements)

    def users_of(self, fieldname: str) -> tuple[str, ...]:
        """Topologies a geometry field applies to, in listing order."""
        return tuple(n for n, t in self._items.items() if fieldname in t.fields)


REGISTRY = Registry()
