"""The command starts without loading what its verb does not need.

Start-up time itself is measured in bench/bench_scale.py; here the check is which heavy
libraries a fresh interpreter has loaded after ``celllab --help`` and after a ranked query
(common practice, no source: import only what the verb uses).
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

HEAVY = ("numpy", "scipy", "pandas", "pydantic", "textual", "sqlite_utils", "rich")

_PROBE = """
import contextlib, io, json, sys
from celllab.cli.main import main
with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
    try:
        main(json.loads(sys.argv[1]))
    except SystemExit:
        pass
print(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))
"""


def loaded_after(argv: list[str]) -> set[str]:
    out = subprocess.run(
        [sys.executable, "-c", _PROBE, json.dumps(argv)], capture_output=True, text=True,
        check=True,
    )
    return set(json.loads(out.stdout.strip().splitlines()[-1])) & set(HEAVY)


@pytest.mark.parametrize("argv", [["--help"], ["export", "--help"], ["plan", "--help"], ["decks", "--help"]])
def test_help_loads_no_heavy_library(argv):
    assert loaded_after(argv) == set()


def test_ranked_query_loads_only_the_catalog(tmp_path):
    from celllab.catalog import open_catalog
    from tests.catalog.conftest import make_run

    path = tmp_path / "c.sqlite"
    with open_catalog(path) as catalog:
        catalog.store_run(make_run(n_cells=5))
    assert loaded_after(["rank", "--catalog", str(path), "--limit", "3"]) <= {
        "numpy",
        "sqlite_utils",
    }
