"""A process SIGKILLed in the middle of ``store_run`` leaves the catalog intact, with no partial batch.

The child process stores a large synthetic run; ``store._cell_stored_hook`` (test-only, called
inside the transaction after each cell) announces that it is mid-batch and then waits to be
killed. The parent kills it with SIGKILL, checks the file with SQLite's own integrity check and
then stores the same run to completion.
"""

from __future__ import annotations

import json
import signal
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from celllab.catalog import open_catalog

from .conftest import make_run

CONFTEST = Path(__file__).with_name("conftest.py")
BIG_RUN = {"n_cells": 300, "seed": 11, "deck_version": 2, "n_freq": 200}
KILL_AFTER_CELLS = 280  # past the first bulk write of per-corner rows (every 256 cells)

CHILD = textwrap.dedent("""
    import importlib.util, json, sys, time
    spec = importlib.util.spec_from_file_location("synthetic", sys.argv[1])
    synthetic = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(synthetic)
    from celllab.catalog import open_catalog, store

    def hold(n):
        if n == int(sys.argv[3]):
            print("mid-transaction", flush=True)
            time.sleep(120)

    run = synthetic.make_run(**json.loads(sys.argv[4]))
    store._cell_stored_hook = hold
    open_catalog(sys.argv[2]).store_run(run)
    print("finished", flush=True)
""")


def _table_counts(path: Path) -> dict[str, int]:
    conn = sqlite3.connect(path)
    counts = {
        t: conn.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
        for t in ("decks", "runs", "cells", "corner_metrics", "corner_extremes", "responses")
    }
    conn.close()
    return counts


@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_sigkill_mid_store_leaves_no_partial_batch(tmp_path: Path) -> None:
    path = tmp_path / "catalog.sqlite"
    base = make_run(n_cells=10)
    with open_catalog(path) as cat:
        cat.store_run(base)
        cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    before = _table_counts(path)
    wal = Path(f"{path}-wal")
    assert not wal.exists() or wal.stat().st_size == 0

    script = tmp_path / "child.py"
    script.write_text(CHILD)
    child = subprocess.Popen(
        [
            sys.executable,
            str(script),
            str(CONFTEST),
            str(path),
            str(KILL_AFTER_CELLS),
            json.dumps(BIG_RUN),
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        line = child.stdout.readline().strip() if child.stdout else ""
        assert line == "mid-transaction", child.stderr.read() if child.stderr else ""
        assert wal.stat().st_size > 0  # uncommitted pages of the batch did reach the disk
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=30)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
        for stream in (child.stdout, child.stderr):
            if stream:
                stream.close()
    assert child.returncode == -signal.SIGKILL

    # Source: SQLite's own PRAGMA integrity_check (independent of this project)
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert conn.execute("PRAGMA foreign_key_check").fetchall() == []
    conn.close()
    assert _table_counts(path) == before  # nothing of the killed batch

    big = make_run(**BIG_RUN)  # type: ignore[arg-type]
    with open_catalog(path) as cat:
        assert [d.current for d in cat.decks()] == [True]  # supersession rolled back too
        report = cat.store_run(big)
        assert report.inserted == BIG_RUN["n_cells"] and report.superseded == len(base.cells)
        assert cat.count() == BIG_RUN["n_cells"]
        assert cat.store_run(big).inserted == 0
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
