"""Import hygiene: the core never pulls in the UI or the database (dependencies point one way)."""

import subprocess
import sys

import pytest

CORE = [
    "celllab.physics.oxide", "celllab.physics.mos_cv", "celllab.physics.netlist", "celllab.physics.mom",
    "celllab.physics.circuits", "celllab.physics.cross_coupled", "celllab.physics.leakage",
    "celllab.physics.tddb", "celllab.physics.esd", "celllab.physics.impedance", "celllab.physics.transient",
    "celllab.deck", "celllab.cells", "celllab.records", "celllab.engine", "celllab",
]
FORBIDDEN = ["textual", "sqlite3", "sqlite_utils", "matplotlib", "celllab.catalog", "celllab.tui", "celllab.export"]


@pytest.mark.parametrize("module", CORE)
def test_core_module_imports_no_ui_or_database(module: str) -> None:
    code = (
        f"import sys, importlib; importlib.import_module({module!r}); "
        f"bad = [m for m in {FORBIDDEN!r} if m in sys.modules]; print(','.join(bad))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"{module} imported {out.stdout.strip()}"


def test_physics_core_does_no_io() -> None:
    """The physics package must not open files, print or touch SQLite (common practice, no source)."""
    import pathlib

    import celllab.physics

    folder = pathlib.Path(celllab.physics.__file__).parent
    for path in folder.glob("*.py"):
        text = path.read_text()
        for word in ("open(", "print(", "sqlite", "textual", "subprocess"):
            assert word not in text, f"{path.name} uses {word}"
