"""How numbers and tables read where people see them (CLI, datasheets, file headers, the UI).

One place for: significant digits, empty and undefined values, yes/no for booleans, plain
aligned text tables, and NaN -> None for stores and formats that have no NaN (SQLite, JSON).
Pure functions over plain values; no I/O.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Collection, Mapping, Sequence
from numbers import Integral, Real
from typing import Any

from celllab.columns import BOUND_FLAGS, is_lower_bound, unit_of

__all__ = ["LOWER_BOUND", "corner_conditions", "count_text", "finite_or_none", "format_metric", "format_number", "format_value",
           "jsonable", "mark_bounds", "nan_to_none", "none_to_nan", "text_table"]

#: Prefix of a value that is only a lower bound (no resonance or cutoff found up to it).
LOWER_BOUND = "≥"

#: Magnitudes shown in plain notation by ``format_number(..., plain_range=PLAIN_RANGE)``;
#: outside it, exponent notation keeps table columns narrow (a display choice, not a rule).
PLAIN_RANGE = (1e-3, 1e6)


def format_number(value: float, digits: int = 4, plain_range: tuple[float, float] | None = None) -> str:
    """``value`` to ``digits`` significant digits ('nan', 'inf', '-inf' when not finite).

    With ``plain_range`` (low, high), magnitudes outside [low, high) always use exponent
    notation with ``digits`` significant digits (``1.000e+07``); zero stays ``0``.
    """
    number = float(value)
    if not math.isfinite(number):
        return "nan" if math.isnan(number) else ("inf" if number > 0 else "-inf")
    if number == 0:
        return "0"
    if plain_range is not None and not plain_range[0] <= abs(number) < plain_range[1]:
        return f"{number:.{digits - 1}e}"
    return f"{number:.{digits}g}"


def format_value(value: Any, empty: str = "-", digits: int = 4) -> str:
    """One value as text: numbers to ``digits`` significant digits, booleans yes/no, lists
    joined with '; ', ``empty`` for None, NaN and an empty list."""
    if value is None:
        return empty
    if isinstance(value, (list, tuple)):
        return "; ".join(str(v) for v in value) or empty
    if isinstance(value, bool) or _is_numpy_bool(value):
        return "yes" if value else "no"
    if isinstance(value, Integral):
        return str(int(value))
    if isinstance(value, Real):
        return empty if math.isnan(float(value)) else format_number(float(value), digits)
    return str(value)


def count_text(n: int, singular: str, plural: str | None = None) -> str:
    """``1 row``, ``2 rows``, ``1,024 cells``: a count with its noun in the right number."""
    word = singular if n == 1 else (plural or singular + "s")
    return f"{n:,} {word}"


def format_metric(row: Mapping[str, Any], name: str, empty: str = "-", digits: int = 4) -> str:
    """``row[name]`` as ``format_value`` does, prefixed with "≥" when the row marks it as a lower
    bound (``columns.is_lower_bound``)."""
    text = format_value(row.get(name), empty, digits)
    return f"{LOWER_BOUND}{text}" if text != empty and is_lower_bound(row, name) else text


def mark_bounds(row: Mapping[str, Any], empty: str = "-", digits: int = 4) -> dict[str, Any]:
    """A copy of ``row`` whose lower-bound values read "≥value" (text); other values unchanged."""
    out = dict(row)
    for name in BOUND_FLAGS:
        if name in out and is_lower_bound(row, name):
            out[name] = format_metric(row, name, empty, digits)
    return out


def corner_conditions(temperature_C: float, supply_V: float) -> str:
    """``T = 25 degC, supply = 1.2 V``: a corner's conditions for file headers."""
    return (f"T = {temperature_C:g} {unit_of('temperature_C')}, "
            f"supply = {supply_V:g} {unit_of('supply_V')}")


def _is_numpy_bool(value: Any) -> bool:
    """Whether ``value`` is a numpy bool (numpy is not imported for this: without it loaded,
    no value can be one), so printing a table does not load numpy."""
    np = sys.modules.get("numpy")
    return np is not None and isinstance(value, np.bool_)


def _is_number(value: Any) -> bool:
    return (isinstance(value, Real) or _is_numpy_bool(value)) and not isinstance(value, str)


def text_table(rows: Sequence[Mapping[str, Any]], columns: Sequence[str],
               numeric: Collection[str] | None = None, empty: str = "-") -> str:
    """Plain aligned table: a header of column names, a rule, one line per row.

    Numbers are right-aligned, text left-aligned. ``numeric`` names the right-aligned columns;
    by default a column is right-aligned when every value in it is a number.
    """
    cells = [[format_value(r.get(c), empty) for c in columns] for r in rows]
    widths = [max([len(c)] + [len(line[i]) for line in cells]) for i, c in enumerate(columns)]
    right = [c in numeric if numeric is not None else all(_is_number(r.get(c)) for r in rows) for c in columns]

    def line(values: Sequence[str]) -> str:
        return "  ".join(v.rjust(w) if r else v.ljust(w) for v, w, r in zip(values, widths, right, strict=True)).rstrip()

    return "\n".join([line(list(columns)), line(["-" * w for w in widths]), *(line(c) for c in cells)])


def nan_to_none(value: Any) -> float | None:
    """A number as float, None for None and NaN (infinities kept): how SQLite stores it."""
    if value is None:
        return None
    number = float(value)
    return None if math.isnan(number) else number


def none_to_nan(value: Any) -> float:
    """The inverse of ``nan_to_none``: a stored empty value back as NaN."""
    return math.nan if value is None else float(value)


def finite_or_none(value: Any) -> float | None:
    """A number as float, None for None, NaN and infinities: JSON has no such numbers."""
    number = nan_to_none(value)
    return number if number is None or math.isfinite(number) else None


def jsonable(value: Any) -> Any:
    """``value`` with every non-finite float (nested in dicts, lists, tuples) replaced by None."""
    if isinstance(value, float):
        return finite_or_none(value)
    if isinstance(value, dict):
        return {k: jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    return value
