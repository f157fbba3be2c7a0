"""Readers are never refused while other processes write and checkpoint the catalog.

Writer processes store batches (one synthetic run each, a few MB of responses) and checkpoint
the write-ahead log after every batch, so the catalog file keeps growing under the readers. The
readers open the catalog, count and rank, through the library and through ``celllab rank``
called in this process. Every refusal, lock error and missing batch is counted; the counts are
recorded in the session tally (printed at the end of the run) and must all be zero.

SQLite's documented behaviour under these loads (WAL readers do not block writers, a busy
handler waits for locks) is described in docs/references.md [125] and [126].
"""

from __future__ import annotations

import contextlib
import io
import subprocess
import sys
import textwrap
import time
from pathlib import Path

from celllab.catalog import open_catalog
from celllab.catalog.schema import check_file_header
from celllab.cli.main import main
from celllab.errors import CelllabError

from .conftest import make_run

CONFTEST = Path(__file__).with_name("conftest.py")

WRITER = textwrap.dedent("""
    import importlib.util, json, sys, time
    spec = importlib.util.spec_from_file_location("synthetic", sys.argv[1])
    synthetic = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(synthetic)
    from celllab.catalog import open_catalog

    path, writer, batches, n_cells, n_freq = sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), \\
        int(sys.argv[5]), int(sys.argv[6])
    done = 0
    for batch in range(batches):
        run = synthetic.make_run(n_cells=n_cells, seed=100 * writer + batch, n_freq=n_freq,
                                 deck_name=f"invented_w{writer}b{batch}")
        with open_catalog(path) as cat:
            cat.store_run(run)
            cat._db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        done += 1
        print(json.dumps({"writer": writer, "batch": batch}), flush=True)
""")


def _start_writers(
    tmp_path: Path, path: Path, writers: int, batches: int, n_cells: int, n_freq: int
) -> list[subprocess.Popen[str]]:
    script = tmp_path / "writer.py"
    script.write_text(WRITER)
    return [
        subprocess.Popen(
            [
                sys.executable,
                str(script),
                str(CONFTEST),
                str(path),
                str(w),
                str(batches),
                str(n_cells),
                str(n_freq),
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for w in range(writers)
    ]


def _finish(procs: list[subprocess.Popen[str]], timeout: float) -> list[str]:
    """Wait for the writers; return their error output (empty when all succeeded)."""
    errors = []
    for p in procs:
        try:
            _out, err = p.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            p.kill()
            _out, err = p.communicate()
            errors.append(f"writer {p.pid} did not finish in {timeout} s")
        if p.returncode != 0:
            errors.append(err)
    return errors


def _classify(message: str) -> str:
    return "lock" if "locked" in message or "busy" in message else "refusal"


def test_header_check_holds_while_the_file_grows_under_a_checkpoint(tmp_path: Path) -> None:
    """The quick header check and an open never refuse a file another process checkpoints."""
    path = tmp_path / "catalog.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(make_run(n_cells=5))
    (writer,) = _start_writers(tmp_path, path, writers=1, batches=6, n_cells=60, n_freq=600)
    opens = 0
    refused: list[str] = []
    try:
        while writer.poll() is None:
            try:
                check_file_header(path)
                with open_catalog(path, create=False) as cat:
                    cat.count(deck="invented_n7x")
            except CelllabError as exc:
                refused.append(str(exc))
            opens += 1
    finally:
        errors = _finish([writer], timeout=120)
    assert not errors, errors
    assert opens > 20  # the loop really ran alongside the writer
    assert refused == [], f"{len(refused)} of {opens} opens refused, e.g. {refused[:3]}"


def _cli_rank(path: Path) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["rank", "--catalog", str(path), "--limit", "3", "--corner", "worst"])
    return code, err.getvalue()


def test_readers_during_several_writers(tmp_path: Path, tally: dict[str, object]) -> None:
    """Three writer processes, a library reader and a CLI reader: no refusal, no lock error,
    no lost batch."""
    writers, batches = 3, 4
    path = tmp_path / "catalog.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(make_run(n_cells=5))
    procs = _start_writers(tmp_path, path, writers, batches, n_cells=40, n_freq=300)
    counts = {"api_reads": 0, "cli_reads": 0, "refusals": 0, "lock_errors": 0}
    failures: list[str] = []
    started = time.monotonic()
    try:
        while any(p.poll() is None for p in procs) and time.monotonic() - started < 200:
            try:
                with open_catalog(path, create=False) as cat:
                    cat.count()
                    cat.query(limit=5)
                counts["api_reads"] += 1
            except CelllabError as exc:
                counts["refusals" if _classify(str(exc)) == "refusal" else "lock_errors"] += 1
                failures.append(str(exc))
            code, err = _cli_rank(path)
            counts["cli_reads"] += 1
            if code != 0:
                counts["refusals" if _classify(err) == "refusal" else "lock_errors"] += 1
                failures.append(err)
    finally:
        errors = _finish(procs, timeout=200)
    assert not errors, errors
    with open_catalog(path, create=False) as cat:
        stored = {d.name for d in cat.decks()}
    expected = {f"invented_w{w}b{b}" for w in range(writers) for b in range(batches)}
    lost = sorted(expected - stored)
    seconds = time.monotonic() - started
    tally["concurrency"] = {
        "writer_processes": writers,
        "batches_written": len(expected) - len(lost),
        "batches_lost": len(lost),
        "seconds": round(seconds, 1),
        **counts,
    }
    assert counts["api_reads"] > 0 and counts["cli_reads"] > 0
    assert (counts["refusals"], counts["lock_errors"], lost) == (0, 0, []), failures[:3]


def test_reader_connection_and_interrupt(tmp_path: Path) -> None:
    """A second connection (`Catalog.reader`) reads beside the first; `interrupt` stops the
    statement running on it (CatalogError), leaves a later statement alone and is harmless on a
    closed catalog. The UI counts rows this way so a page never waits behind a count."""
    import threading

    from celllab.errors import CatalogError

    main = open_catalog(tmp_path / "c.sqlite")
    reader = main.reader()
    outcome: list[str] = []
    slow = ("WITH RECURSIVE t(x) AS (SELECT 1 UNION ALL SELECT x + 1 FROM t WHERE x < 1000000000) "
            "SELECT COUNT(*) FROM t")

    def run() -> None:
        try:
            with reader._access() as db:
                db.execute(slow).fetchone()
            outcome.append("finished")
        except CatalogError as exc:
            outcome.append(str(exc))

    worker = threading.Thread(target=run)
    worker.start()
    time.sleep(0.2)
    assert main.count() == 0  # the first connection answers while the reader is busy
    reader.interrupt()
    worker.join(30)
    assert not worker.is_alive() and len(outcome) == 1 and "interrupted" in outcome[0]
    assert reader.count() == 0  # a statement after the interrupt runs normally
    reader.close()
    reader.interrupt()
    main.close()
