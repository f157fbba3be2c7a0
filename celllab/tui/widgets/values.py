"""How catalog values look in tables: units in headers, numbers to four significant digits.

Not a widget itself: the cell renderables every table widget of the TUI shares.
"""

from __future__ import annotations

import math
from typing import Any

from rich.text import Text

from celllab import display
from celllab.columns import COLUMNS, TEXT_COLUMNS, unit_of
from celllab.units import pretty_unit

#: Identity columns of a catalog row, with how they read in a header.
ID_COLUMNS: dict[str, str] = {name: column.description for name, column in TEXT_COLUMNS.items()}

__all__ = ["ID_COLUMNS", "column_description", "column_header", "column_unit", "format_number",
           "header_lines", "header_width", "value_text"]


def column_unit(column: str) -> str:
    """Unit of a catalog column as it reads on screen (``fF/µm²``; '' for identity columns)."""
    return pretty_unit(unit_of(column))


def column_description(column: str) -> str:
    """One-line meaning of a catalog column."""
    info = COLUMNS.get(column)
    return info.description if info else column


#: Widest line of a column name in a table header: longer names break after an underscore
#: (``cap_density_`` / ``fF_per_um2``), so an 80-column terminal shows four columns, not two.
HEADER_WIDTH = 12


def header_lines(column: str, width: int = HEADER_WIDTH) -> list[str]:
    """A column name in at most two lines of about ``width``, broken after an underscore."""
    if len(column) <= width or "_" not in column:
        return [column, ""]
    cut = column.rfind("_", 0, width) + 1 or column.find("_") + 1
    return [column[:cut], column[cut:]]


def column_header(column: str, sort_mark: str = "") -> Text:
    """Three-line header: the column name (as the filter language spells it, broken after an
    underscore when long) over its unit."""
    unit = column_unit(column)
    first, second = header_lines(column)
    mark = f" {sort_mark}" if sort_mark else ""
    head = Text(first + (mark if not second else ""), style="bold")
    head.append("\n" + second + (mark if second else ""), style="bold")
    head.append("\n")
    head.append(f"[{unit}]" if unit and unit != "bool" else "", style="dim")
    return head


def header_width(column: str) -> int:
    """Cells a header needs: its longest name line with a sort mark, or its unit."""
    unit = column_unit(column)
    unit_text = f"[{unit}]" if unit and unit != "bool" else ""
    return max(len(line) for line in [*header_lines(column), unit_text]) + 2


def format_number(value: float, digits: int = 4) -> str:
    """Significant digits as everywhere (``display.format_number``); exponent form outside the
    plain range keeps table columns narrow."""
    return display.format_number(value, digits, plain_range=display.PLAIN_RANGE)


def value_text(value: Any, column: str = "", bound: bool = False) -> Text:
    """A table cell: numbers right-aligned, booleans as yes/no, None as a dash; ``bound``: the
    number is a lower bound (``≥`` in front, see ``columns.is_lower_bound``)."""
    if bound and isinstance(value, (int, float)) and not isinstance(value, bool):
        if not math.isnan(float(value)):
            return Text(display.LOWER_BOUND + format_number(float(value)), justify="right")
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
