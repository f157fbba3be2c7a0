"""One-parameter sweeps of a cell: a geometry field or a numeric deck parameter over a range.

``sweep_cell`` characterizes the cell at every value of the parameter and returns the records;
geometry sweeps run as one engine call over all variants (the engine is vectorized over
variants), deck sweeps as one call per deck value (each value is another deck). A value the
models reject is kept as a problem beside the others, never an exception for the whole sweep.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from celllab.errors import CelllabError, Problem
from celllab.records import CellResult

Spacing = Literal["linear", "log"]

#: Most values one sweep computes (each deck value is a full characterization).
MAX_POINTS = 200


@dataclass
class SweepResult:
    """The swept parameter, its values and one record (or the problems) per value."""

    parameter: str
    values: list[float]
    cells: list[CellResult | None]
    problems: list[list[Problem]] = field(default_factory=list)

    def ok(self) -> list[tuple[float, CellResult]]:
        """(value, record) of every value that was characterized."""
        return [(v, c) for v, c in zip(self.values, self.cells) if c is not None]


def sweep_values(start: float, stop: float, points: int, spacing: Spacing = "linear",
                 integer: bool = False) -> list[float]:
    """``points`` values from ``start`` to ``stop`` (both included), evenly or log-spaced.

    Integer parameters are rounded and repeated values dropped. Raises ValueError with the
    allowed values when the range cannot be swept.
    """
    if not 2 <= points <= MAX_POINTS:
        raise ValueError(f"points = {points} -> allowed: 2 to {MAX_POINTS}")
    if start == stop:
        raise ValueError("from and to are equal -> give a range")
    if spacing == "log":
        if start <= 0 or stop <= 0:
            raise ValueError("log spacing needs from > 0 and to > 0")
        values = np.geomspace(start, stop, points)
    else:
        values = np.linspace(start, stop, points)
    if integer:
        return [float(v) for v in dict.fromkeys(int(round(v)) for v in values)]
    return [float(v) for v in values]


def sweep_cell(deck: Any, spec: Any, parameter: str, values: Sequence[float],
               corners: Sequence[str] | None = None) -> SweepResult:
    """Characterize ``spec`` under ``deck`` with ``parameter`` set to each of ``values``.

    ``parameter`` is a geometry field of the cell (``fingers``) or a dotted numeric deck path
    (``oxides.core.t_ox_nm``). Raises CelllabError when it is neither.
    """
    from celllab.deck import numeric_paths
    from celllab.engine import characterize
    from celllab.topologies import REGISTRY

    geometry = parameter in spec.geometry and parameter in REGISTRY[spec.topology].fields
    if not geometry and parameter not in numeric_paths(deck):
        raise CelllabError([Problem("<sweep>", "parameter", "not a geometry field of this cell "
                                    "nor a numeric deck parameter", parameter)])
    result = SweepResult(parameter, list(values), [None] * len(values),
                         [[] for _ in values])
    if geometry:
        integer = type(spec).model_fields[parameter].annotation is int
        specs, index = [], []
        for i, value in enumerate(values):
            try:
                specs.append(spec.with_changes({parameter: int(value) if integer else value}, deck,
                                               name=f"sweep_{i}"))
                index.append(i)
            except CelllabError as exc:
                result.problems[i] = list(exc.problems)
        if specs:
            run = characterize(deck, specs, corners=corners)
            for i, cell in zip(index, run.cells):
                result.cells[i] = cell
        return result
    for i, value in enumerate(values):
        try:
            changed = deck.with_changes({parameter: value})
            run = characterize(changed, [spec.with_changes({}, changed)], corners=corners)
        except CelllabError as exc:
            result.problems[i] = list(exc.problems)
            continue
        except (ValueError, ArithmeticError) as exc:
            result.problems[i] = [Problem("<sweep>", parameter, f"the models could not evaluate "
                                          f"this value: {exc}", value)]
            continue
        result.cells[i] = run.cells[0]
    return result
