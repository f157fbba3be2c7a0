"""The plan report's text tables: a table wider than the console is split into parts that
each repeat the row names, so no number is cut short at 80 columns or less."""

from __future__ import annotations

import io

import pytest
from rich.console import Console

from celllab.export.plan_text import _table


def _render(table: object, width: int) -> str:
    out = io.StringIO()
    Console(file=out, width=width, color_system=None).print(table)
    return out.getvalue()


@pytest.mark.parametrize("width", [40, 60, 80, 200])
def test_wide_table_splits_and_keeps_every_number_whole(width: int) -> None:
    columns = ["cell"] + [f"figure {k} [unit]" for k in range(9)]
    rows = [[f"cell_{r}"] + [1234.5678 * (r + 1) * (k + 1) for k in range(9)]
            for r in range(3)]
    text = _render(_table("cells", columns, rows, set(range(1, 10))), width)
    lines = text.splitlines()
    assert "…" not in text
    assert max(len(line.rstrip()) for line in lines) <= width
    for r in range(3):
        for k in range(9):
            assert f"{1234.5678 * (r + 1) * (k + 1):.4g}" in text or \
                f"{1234.5678 * (r + 1) * (k + 1):,.0f}" in text
    for name in columns:
        assert name in text
    parts = text.count("cells (continued)")
    assert (parts == 0) == (width >= 200)  # 10 columns need 6 + 9 x 16 + 30 = 180
    # each part repeats the row names
    assert text.count("cell_0") == parts + 1
