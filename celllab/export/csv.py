"""CSV export of catalog rows (one row per cell x corner).

Column names are the catalog's names, which carry their unit (``cap_fF``, ``esr_ohm``,
``area_um2``; see ``celllab.columns``). Numbers are written to ``DEFAULT_PRECISION``
significant digits (stated in a comment line), or with ``precision=None`` in Python's shortest
round-trip representation, so ``float(text)`` gives back exactly the stored value; booleans
are ``1``/``0``; a missing value is an empty field; undefined values are ``nan``/``inf``. A value
that is only a lower bound (its ``*_is_bound`` column is 1, e.g. no self-resonance found in the
circuit up to it) is written with a leading ``≥`` (``≥20000.0``), so no reader takes it for a
result; strip the mark to read the bound.

By default the file opens with ``#`` comment lines (tool, model version, the caution and a
unit legend), which most numeric readers skip (``pandas.read_csv(comment="#")``,
``numpy.loadtxt``); ``comments=False`` gives a bare header + rows file.
"""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Iterable, Mapping, Sequence
from numbers import Integral, Real
from pathlib import Path
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, __version__
from celllab.columns import CELL_COLUMNS, CORNER_COLUMNS, METRIC_NAMES, is_lower_bound, unit_of
from celllab.display import LOWER_BOUND
from celllab.export import CAUTION, atomic_write_text
from celllab.records import CellResult

#: Identity columns first, then per-cell columns, then metrics, then the hash.
ID_COLUMNS: tuple[str, ...] = ("name", "deck", "corner", "family", "topology", "oxide")
DEFAULT_COLUMNS: tuple[str, ...] = (
    *ID_COLUMNS,
    *CORNER_COLUMNS,
    *CELL_COLUMNS,
    *METRIC_NAMES,
    "flags",
    "model_version",
    "cell_hash",
    "deck_hash",
)

#: Significant digits of numbers in a CSV unless asked otherwise: the models are estimates,
#: more digits would only carry float noise (1.0299999999999998).
DEFAULT_PRECISION = 6
MAX_PRECISION = 17  # a float64 round-trips with 17 significant digits

__all__ = ["DEFAULT_COLUMNS", "DEFAULT_PRECISION", "format_value", "render_csv", "rows_from_cells", "write_csv"]


def format_value(value: Any, precision: int | None = None) -> str:
    """One field as text: floats to ``precision`` significant digits (None: the shortest
    round-trip text), ``1``/``0`` booleans, empty for ``None``, lists (flags) joined with
    ``"; "``."""
    if value is None:
        return ""
    if isinstance(value, (list, tuple)):
        return "; ".join(str(v) for v in value)
    if isinstance(value, (bool, np.bool_)):
        return "1" if value else "0"
    if isinstance(value, Integral):
        return str(int(value))
    if isinstance(value, Real):
        number = float(value)
        if math.isnan(number):
            return "nan"
        if precision is not None and math.isfinite(number):
            return f"{number:.{precision}g}"
        return repr(number)  # 'inf', '-inf' or the shortest round-trip decimal
    return str(value)


def _columns(rows: Sequence[Mapping[str, Any]], columns: Sequence[str] | None) -> list[str]:
    if columns is not None:
        return list(columns)
    present: dict[str, None] = {}
    for row in rows:
        present.update(dict.fromkeys(row))
    ordered = [c for c in DEFAULT_COLUMNS if c in present]
    ordered += [c for c in present if c not in DEFAULT_COLUMNS]
    return ordered or list(DEFAULT_COLUMNS)


def render_csv(
    rows: Iterable[Mapping[str, Any]],
    columns: Sequence[str] | None = None,
    comments: bool = True,
    precision: int | None = DEFAULT_PRECISION,
) -> str:
    """Render rows (catalog query dicts) as CSV text.

    Parameters
    ----------
    rows : iterable of mappings   keys as returned by ``Catalog.query`` (or ``rows_from_cells``)
    columns : sequence of str, optional   columns to write, in order; default: every key
        present, in ``DEFAULT_COLUMNS`` order then any others in first-seen order
    comments : bool   start with ``#`` lines: tool, model version, caution, units legend
    precision : int or None   significant digits of numbers (1-17); None: exact round-trip text

    Returns
    -------
    str   CSV text, ``\\r\\n`` line ends (RFC 4180), header row first after the comments
    """
    if precision is not None and not 1 <= precision <= MAX_PRECISION:
        raise ValueError(f"precision = {precision} -> allowed: 1 to {MAX_PRECISION} significant "
                         "digits, or None for exact round-trip text")
    materialized = list(rows)
    names = _columns(materialized, columns)
    out = io.StringIO(newline="")
    if comments:
        out.write(f"# celllab {__version__} catalog export; models {MODEL_VERSION}\r\n")
        out.write(f"# CAUTION: {CAUTION}\r\n")
        legend = ", ".join(f"{c} [{unit_of(c)}]" for c in names if unit_of(c))
        if legend:
            out.write(f"# units: {legend}\r\n")
        digits = (f"{precision} significant digits" if precision is not None
                  else "exact (shortest round-trip text)")
        out.write(f"# numbers: {digits}\r\n")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(names)
    for row in materialized:
        writer.writerow([LOWER_BOUND + format_value(row.get(c), precision)
                         if is_lower_bound(row, c) and row.get(c) is not None
                         else format_value(row.get(c), precision) for c in names])
    return out.getvalue()


def rows_from_cells(
    cells: Iterable[CellResult], deck_name: str, corner: str | None = None
) -> list[dict[str, Any]]:
    """Flatten cell records into catalog-like rows, one per cell x corner.

    ``corner`` keeps only that corner (``KeyError`` if a cell lacks it); ``None`` keeps all.
    """
    rows: list[dict[str, Any]] = []
    for cell in cells:
        chosen = [cell.corner(corner)] if corner is not None else cell.corners
        for result in chosen:
            row: dict[str, Any] = {
                "name": cell.name,
                "deck": deck_name,
                "corner": result.corner,
                "temperature_C": result.temperature_C,
                "supply_V": result.supply_V,
                "family": cell.family,
                "topology": cell.topology,
                "oxide": cell.oxide,
                **{c: getattr(cell, c) for c in CELL_COLUMNS},
            }
            row.update({m: result.metrics.get(m) for m in METRIC_NAMES})
            row["flags"] = list(result.flags)
            row["cell_hash"] = cell.cell_hash
            rows.append(row)
    return rows


def write_csv(
    path: str | os.PathLike[str],
    rows: Iterable[Mapping[str, Any]],
    columns: Sequence[str] | None = None,
    comments: bool = True,
    precision: int | None = DEFAULT_PRECISION,
    force: bool = False,
) -> Path:
    """Write :func:`render_csv` output to ``path`` atomically (``force``: replace a file)."""
    return atomic_write_text(path, render_csv(rows, columns=columns, comments=comments,
                                              precision=precision), force)
