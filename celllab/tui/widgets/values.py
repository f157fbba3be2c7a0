"""How catalog values look in tables: units in headers, numbers to four significant digits.

Not a widget itself: the cell renderables every table widget of the TUI shares.
"""

from __future__ import annotations

import math
from typing import Any

from rich.text import Text

from celllab import display
from celllab.columns import BOUND_MARK, COLUMNS, TEXT_COLUMNS, unit_of
from celllab.units import pretty_unit

#: Identity columns of a catalog row, with how they read in a header.
ID_COLUMNS: dict[str, str] = {name: column.description for name, column in TEXT_COLUMNS.items()}

__all__ = ["ID_COLUMNS", "column_description", "column_header", "column_unit", "format_number",
           "value_text"]


def column_unit(column: str) -> str:
    """Unit of a catalog column as it reads on screen (``fF/µm²``; '' for identity columns)."""
    return pretty_unit(unit_of(column))


def column_description(column: str) -> str:
    """One-line meaning of a catalog column."""
    info = COLUMNS.get(column)
    return info.description if info else column


def column_header(column: str, sort_mark: str = "") -> Text:
    """Two-line header: the column name (as the filter language spells it) over its unit."""
    unit = column_unit(column)
    head = Text(column + (f" {sort_mark}" if sort_mark else ""), style="bold")
    head.append("\n")
    head.append(f"[{unit}]" if unit and unit != "bool" else "", style="dim")
    return head


def format_number(value: float, digits: int = 4) -> str:
    """Significant digits as everywhere (``display.format_number``); exponent form outside the
    plain range keeps table columns narrow."""
    return display.format_number(value, digits, plain_range=display.PLAIN_RANGE)


def value_text(value: Any, column: str = "", bound: bool = False) -> Text:
    """A table cell: numbers right-aligned, booleans as yes/no, None as a dash; ``bound``: the
    number is a lower bound (``≥`` in front, see ``columns.is_lower_bound``)."""
    if bound and isinstance(value, (int, float)) and not isinstance(value, bool):
        if not math.isnan(float(value)):
            return Text(BOUND_MARK + format_number(float(value)), justify="right")
    if value is None:
        return Text("–", style="dim", justify="center")
    if isinstance(value, bool) or column == "esd_safe":
        yes = bool(value)
        return Text("yes" if yes else "no", style="green" if yes else "dim", justify="center")
    if isinstance(value, int):
        return Text(str(value), justify="right")
    if isinstance(value, float):
        if math.isnan(value):
            return Text("n/a", style="dim", justify="right")
        return Text(format_number(value), justify="right")
    return Text(str(value))
