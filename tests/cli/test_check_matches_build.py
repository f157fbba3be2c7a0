"""``check`` refuses what ``build`` would refuse, with the file and line of the problem.

Two families (in one file or in two files) that produce the same variant - the same name, or
the same topology, oxide and geometry under another name - used to pass ``check`` and stop
``build`` with a message naming neither file nor line.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from celllab.cli.main import main

SAME_GEOMETRY = """\
[[family]]
name = "fa"
topology = "cross_coupled"
width_sites = [24, 32]

[[family]]
name = "fb"
topology = "cross_coupled"
width_sites = [32, 40]
"""


def _both(capsys: pytest.CaptureFixture[str], deck: Path, cells: list[Path],
          catalog: Path) -> tuple[str, str]:
    args = ["--deck", str(deck), *[a for c in cells for a in ("--cells", str(c))]]
    assert main(["check", *args]) == 2
    checked = capsys.readouterr().err
    assert main(["build", *args, "--catalog", str(catalog), "--quiet"]) == 2
    built = capsys.readouterr().err
    assert not catalog.exists()  # nothing written
    return checked, built


def test_same_geometry_in_two_families(tmp_path: Path, lumen130_path: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    cells = tmp_path / "cells.toml"
    cells.write_text(SAME_GEOMETRY)
    checked, built = _both(capsys, lumen130_path, [cells], tmp_path / "cat.sqlite")
    assert checked == built
    (line,) = checked.splitlines()
    assert line.startswith(f"{cells}:6: family[1]") and "same geometry" in line
    assert re.search(r"fa-w32-h1", line) and "cells.toml:1" in line


def test_variant_repeated_in_a_second_file(tmp_path: Path, lumen130_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    first, second = tmp_path / "a.toml", tmp_path / "b.toml"
    first.write_text(SAME_GEOMETRY.split("\n\n")[0] + "\n")
    second.write_text('\n[[cell]]\nname = "fa-w24-h1"\ntopology = "mom"\nwidth_sites = 24\n')
    checked, built = _both(capsys, lumen130_path, [first, second], tmp_path / "cat.sqlite")
    assert checked == built
    (line,) = checked.splitlines()
    assert line.startswith(f"{second}:3: cell[0].name") and "duplicate variant name" in line
    assert str(first) in line
