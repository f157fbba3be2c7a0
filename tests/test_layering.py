"""Import hygiene: the import contracts of pyproject.toml hold, in one process.

The contracts ([tool.importlinter] in pyproject.toml) say that dependencies point one way
(physics -> deck -> characterization -> topologies -> cells -> engine -> catalog -> export/planner ->
tui -> cli) and that the core loads no UI, plotting or database package. The tests below run them
on the real package and show, on copies of its import graph with one import added, that each rule
catches what it is meant to catch - including for modules that do not exist yet.
"""

from __future__ import annotations

import copy
import pathlib

import grimp
import pytest
from importlinter.api import read_configuration
from importlinter.application.use_cases import lint_imports
from importlinter.contracts.forbidden import ForbiddenContract
from importlinter.contracts.layers import LayersContract
from importlinter.domain.contract import Contract

import celllab.physics

PYPROJECT = pathlib.Path(__file__).resolve().parents[1] / "pyproject.toml"


def test_import_contracts_are_kept() -> None:
    # On failure the report printed above the traceback lists every offending import chain;
    # `.venv/bin/lint-imports` prints the same.
    assert lint_imports(config_filename=str(PYPROJECT), cache_dir=None, no_logo=True)


# --------------------------------------------------------------- each rule catches its violation

_CONFIG = read_configuration(str(PYPROJECT))
_OPTIONS = {c["id"]: c for c in _CONFIG["contracts_options"]}


def _contract(contract_id: str, kind: type[Contract]) -> Contract:
    options = _OPTIONS[contract_id]
    assert options["type"] == kind.type_name
    session = _CONFIG["session_options"]
    return kind(name=options["name"], session_options=session, contract_options=options)


@pytest.fixture(scope="module")
def graph() -> grimp.ImportGraph:
    return grimp.build_graph("celllab", include_external_packages=True, cache_dir=None)


def _kept_with(graph: grimp.ImportGraph, contract: Contract, *imports: tuple[str, str]) -> bool:
    trial = copy.deepcopy(graph)
    for importer, imported in imports:
        for module in (importer, imported):
            # a new module arrives with its package (celllab.topologies for .pair)
            parts = module.split(".")
            for depth in range(2, len(parts) + 1):
                if parts[0] == "celllab" and ".".join(parts[:depth]) not in trial.modules:
                    trial.add_module(".".join(parts[:depth]))
        trial.add_import(importer=importer, imported=imported)
    return contract.check(trial, verbose=False).kept




@pytest.mark.parametrize(
    ("importer", "imported", "kept"),
    [
        ("celllab.physics.oxide", "celllab.catalog.store", False),  # physics below the catalog
        ("celllab.physics.oxide", "celllab.deck.schema", False),  # physics below the deck
        ("celllab.deck.schema", "celllab.cells.schema", False),  # deck below the cells
        ("celllab.engine", "celllab.export.csv", False),
        ("celllab.catalog.store", "celllab.tui.app", False),
        ("celllab.tui.app", "celllab.cli.main", False),  # the CLI starts the UI, not back
        ("celllab.errors", "celllab.deck.schema", False),  # leaves import nothing above
        ("celllab.export.csv", "celllab.planner.fill", True),  # siblings that may share
        ("celllab.cli.main", "celllab.physics.oxide", True),  # any layer may use a lower one
        # modules other engineers are adding, placed before they exist
        ("celllab.topologies.pair", "celllab.engine", False),
        ("celllab.topologies.pair", "celllab.cells.schema", False),  # cells read the registry
        ("celllab.cells.schema", "celllab.topologies.pair", True),
        ("celllab.topologies.pair", "celllab.characterization.params", True),
        ("celllab.columns", "celllab.physics.oxide", False),
        ("celllab.physics.oxide", "celllab.columns", True),
        ("celllab.catalog.query", "celllab.columns", True),
    ],
)
def test_layer_rule(graph: grimp.ImportGraph, importer: str, imported: str, kept: bool) -> None:
    assert _kept_with(graph, _contract("layers", LayersContract), (importer, imported)) is kept


@pytest.mark.parametrize(
    ("imports", "kept"),
    [
        ([("celllab.physics.mom", "matplotlib")], False),
        ([("celllab.engine", "textual")], False),
        ([("celllab.cells.expand", "sqlite3")], False),
        ([("celllab.deck.load", "sqlite_utils")], False),
        ([("celllab.characterization.mos", "rich")], False),
        # indirect: a core module reaching the UI through a leaf module
        ([("celllab.physics.oxide", "celllab.units"), ("celllab.units", "rich")], False),
        ([("celllab.topologies.pair", "textual")], False),  # not yet written, already covered
        ([("celllab.export.datasheet", "matplotlib")], True),  # plotting belongs in export
        ([("celllab.tui.app", "rich")], True),
    ],
)
def test_core_rule(graph: grimp.ImportGraph, imports: list[tuple[str, str]], kept: bool) -> None:
    assert _kept_with(graph, _contract("core-without-ui", ForbiddenContract), *imports) is kept


def test_physics_core_does_no_io() -> None:
    """The physics package must not open files, print or touch SQLite (common practice, no source)."""
    folder = pathlib.Path(celllab.physics.__file__).parent
    for path in folder.glob("*.py"):
        text = path.read_text()
        for word in ("open(", "print(", "sqlite", "textual", "subprocess"):
            assert word not in text, f"{path.name} uses {word}"
