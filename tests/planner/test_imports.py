"""The planner's place in the layers: it reads the catalog and the physics, never the
exporters, the CLI or the terminal UI (common practice, no source)."""

from __future__ import annotations

import ast
from pathlib import Path

import celllab.planner

FORBIDDEN = ("celllab.export", "celllab.cli", "celllab.tui", "textual", "rich")


def _imports(path: Path) -> set[str]:
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            names |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
    return names


def test_planner_imports_no_exporter_cli_or_ui() -> None:
    folder = Path(celllab.planner.__file__).parent
    for path in sorted(folder.glob("*.py")):
        bad = [n for n in _imports(path) if n.startswith(FORBIDDEN)]
        assert not bad, f"{path.name} imports {bad}"


def test_planner_does_no_file_io_beyond_the_block_file() -> None:
    folder = Path(celllab.planner.__file__).parent
    for path in sorted(folder.glob("*.py")):
        calls = {node.func.attr if isinstance(node.func, ast.Attribute) else
                 getattr(node.func, "id", "")
                 for node in ast.walk(ast.parse(path.read_text()))
                 if isinstance(node, ast.Call)}
        bad = calls & {"open", "print", "write_text", "write_bytes", "connect", "mkdir"}
        assert not bad, f"{path.name} calls {bad}"
