"""The command line when the operating system says no: a full disk (under a file or under
standard output), a catalog folder this user may not write, Ctrl-C at any point, and the plan
verb's output folder. Each ends with a located message and exit status 2 (130 when
interrupted), never a traceback, and nothing stored or already written is lost."""

from __future__ import annotations

import contextlib
import errno
import io
import os
import re
import shutil
import sqlite3
import subprocess
import sys
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pytest

from celllab.catalog import open_catalog
from celllab.cli import main as cli_main
from celllab.cli.main import main
from celllab.records import CharacterizationRun

from .test_export_cli import CORNERS, DECK, _cell

REPO = Path(__file__).resolve().parents[2]
BLOCKS = REPO / "process_decks" / "blocks"


def run_cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(argv))
    assert "Traceback" not in err.getvalue()
    return code, out.getvalue(), err.getvalue()


def _run(n: int = 3) -> CharacterizationRun:
    cells = [_cell(f"c{i}", "cross_coupled", True, (50 + i) * 1e-15, 20.0) for i in range(n)]
    return CharacterizationRun(DECK, "deckhash" * 4, {"name": DECK}, "models-test", list(CORNERS), cells)


@pytest.fixture
def catalog_path(tmp_path: Path) -> Path:
    path = tmp_path / "cat.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(_run())
    return path


# --------------------------------------------------------------------------- a full disk


def test_export_on_a_full_disk_keeps_the_old_file_and_leaves_nothing(
        catalog_path: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from celllab.export import files

    old = tmp_path / "old.csv"
    old.write_text("kept\n")

    def full(fd: int) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(files.os, "fsync", full)
    code, _, err = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", str(old), "--force")
    assert code == 2 and str(old) in err and "No space left" in err
    assert old.read_text() == "kept\n"
    folder = tmp_path / "new_folder"
    code, _, err = run_cli("export", "spice", "--catalog", str(catalog_path), "--out", f"{folder}/")
    assert code == 2 and "No space left" in err
    assert not folder.exists()  # the folder this export created is gone again
    assert not [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporary file left


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full")
@pytest.mark.parametrize("argv", [["export", "csv"], ["rank", "--limit", "1"]])
def test_standard_output_on_a_full_disk_is_a_located_error(catalog_path: Path, argv: list[str]) -> None:
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "celllab.cli.main", *argv, "--catalog", str(catalog_path)],
                              stdout=full, stderr=subprocess.PIPE, timeout=120)
    err = done.stderr.decode()
    assert done.returncode == 2 and "standard output" in err and "Traceback" not in err


def test_catalog_on_a_full_disk_keeps_what_it_held(catalog_path: Path) -> None:
    # SQLite's page limit gives the same error as a full disk (SQLITE_FULL)
    from celllab.errors import CatalogError

    with open_catalog(catalog_path) as cat:
        before = cat.count(corner="typ_25C")
        pages = cat._db.execute("PRAGMA page_count").fetchone()[0]
        cat._db.execute(f"PRAGMA max_page_count = {pages}")
        bigger = _run(40)
        with pytest.raises(CatalogError) as info:
            cat.store_run(CharacterizationRun(DECK, "feedbeef" * 4, {"name": DECK}, "models-test",
                                              list(CORNERS), bigger.cells))
        assert "disk is full" in str(info.value) and "nothing" in str(info.value)
        assert cat.count(corner="typ_25C") == before
    db = sqlite3.connect(catalog_path)
    assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    db.close()


# --------------------------------------------------------------------------- Ctrl-C


def test_ctrl_c_while_loading_exits_130_without_traceback(monkeypatch: pytest.MonkeyPatch) -> None:
    def interrupted() -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(cli_main, "build_parser", interrupted)
    code, _, err = run_cli("rank")
    assert code == 130 and err.strip() == "interrupted"


def test_ctrl_c_during_a_build_stores_nothing(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                              lumen130_path: Path) -> None:
    import celllab.engine

    catalog = tmp_path / "c.sqlite"
    with open_catalog(catalog) as cat:
        cat.store_run(_run())
    original = celllab.engine._records  # the records of one circuit-structure part at a time
    calls = []

    def records_then_interrupt(*args, **kwargs):  # type: ignore[no-untyped-def]
        calls.append(1)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return original(*args, **kwargs)

    monkeypatch.setattr(celllab.engine, "_records", records_then_interrupt)
    cells = REPO / "process_decks" / "cells" / "lumen130_cells.toml"
    code, _, err = run_cli("build", "--deck", str(lumen130_path), "--cells", str(cells),
                           "--catalog", str(catalog), "--quiet")
    assert code == 130 and "interrupted" in err
    with open_catalog(catalog, create=False) as cat:
        assert [d.name for d in cat.decks()] == [DECK]


# --------------------------------------------------------------------------- read-only places


def _synthetic_run() -> CharacterizationRun:
    """A small run a merge accepts (tests/catalog/conftest.py builds it from a real deck)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("synthetic_runs_os", REPO / "tests" / "catalog" / "conftest.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.make_run(n_cells=4, n_freq=8)  # type: ignore[no-any-return]


def _unprivileged() -> list[str] | None:
    """Command prefix running as a user without write access to others' files, or None."""
    if os.geteuid() != 0:
        return []
    setpriv = shutil.which("setpriv")
    if not setpriv:
        return None
    prefix = [setpriv, "--reuid=65534", "--regid=65534", "--clear-groups"]
    # a checkout inside a folder only root may enter (``mktemp -d``) cannot be imported by that
    # user: the test then has no unprivileged user to run as
    probe = subprocess.run([*prefix, sys.executable, "-c", "import celllab.cli.main"],
                           capture_output=True, timeout=60, cwd="/")
    return prefix if probe.returncode == 0 else None


@pytest.fixture
def shared_folder() -> Iterator[Path]:
    folder = Path(tempfile.mkdtemp(prefix="celllab-ro-"))
    folder.chmod(0o755)
    yield folder
    for root, dirs, _ in os.walk(folder):
        for d in dirs:
            os.chmod(os.path.join(root, d), 0o755)
    shutil.rmtree(folder, ignore_errors=True)


@pytest.mark.skipif(sys.platform == "win32" or _unprivileged() is None,
                    reason="needs an unprivileged user who can import this checkout")
def test_catalog_in_a_read_only_folder_can_be_read_not_written(shared_folder: Path) -> None:
    prefix = _unprivileged()
    assert prefix is not None
    ro = shared_folder / "ro"
    ro.mkdir()
    with open_catalog(ro / "cat.sqlite") as cat:
        cat.store_run(_synthetic_run())
    (ro / "cat.sqlite").chmod(0o644)
    if os.geteuid() != 0:
        (ro / "cat.sqlite").chmod(0o444)
    ro.chmod(0o555)
    target = shared_folder / "mine.sqlite"
    (shared_folder).chmod(0o777)

    def cli(*argv: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run([*prefix, sys.executable, "-m", "celllab.cli.main", *argv], capture_output=True,
                              text=True, timeout=180, cwd=shared_folder)

    done = cli("rank", "--catalog", str(ro / "cat.sqlite"), "--corner", "typ_25C")
    assert done.returncode == 0, done.stderr
    assert "rows 1-" in done.stdout and "Traceback" not in done.stderr
    done = cli("merge", str(ro / "cat.sqlite"), "--catalog", str(target))
    assert done.returncode == 0, done.stderr
    assert sorted(p.name for p in ro.iterdir()) == ["cat.sqlite"]  # nothing written beside it
    done = cli("build", "--deck", str(REPO / "process_decks" / "lumen130.toml"), "--cells",
               str(REPO / "process_decks" / "cells" / "lumen130_cells.toml"), "--catalog",
               str(ro / "cat.sqlite"), "--quiet", "--corners", "typ_25C")
    assert done.returncode == 2 and "read-only" in done.stderr and "Traceback" not in done.stderr


# --------------------------------------------------------------------------- plan --out


def test_plan_refuses_an_unusable_out_before_solving(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import celllab.planner

    def must_not_run(*args, **kwargs):  # type: ignore[no-untyped-def]
        raise AssertionError("the plan was solved although --out cannot be written")

    monkeypatch.setattr(celllab.planner, "plan_block", must_not_run)
    catalog = tmp_path / "cat.sqlite"
    with open_catalog(catalog) as cat:
        cat.store_run(_run())
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, _, err = run_cli("plan", str(BLOCKS / "lumen130_dsp.toml"), "--catalog", str(catalog),
                           "--out", str(blocker / "plans"))
    assert code == 2 and "not a folder" in err
    out = tmp_path / "plans"
    out.mkdir()
    (out / "dsp_core_fill.csv").write_text("mine\n")
    code, _, err = run_cli("plan", str(BLOCKS / "lumen130_dsp.toml"), "--catalog", str(catalog),
                           "--out", str(out))
    assert code == 2 and "--force" in err
    assert (out / "dsp_core_fill.csv").read_text() == "mine\n"


def test_plan_checks_a_network_table(tmp_path: Path) -> None:
    # the demo block's own [network] table with a NaN drop limit and a negative capacitance
    text = (BLOCKS / "lumen130_dsp.toml").read_text()
    text = re.sub(r"(?m)^ir_drop_limit_mV = [0-9.]+", "ir_drop_limit_mV = nan", text, count=1)
    text = re.sub(r"(?m)^(wells_wiring_capacitance_nF) = [0-9.]+", r"\1 = -1", text, count=1)
    block = tmp_path / "b.toml"
    block.write_text(text)
    code, _, err = run_cli("plan", str(block), "--catalog", str(tmp_path / "none.sqlite"))
    assert code == 2
    assert "network.ir_drop_limit_mV = nan -> not a finite number" in err
    assert "wells_wiring_capacitance_nF" in err and str(block) in err


def test_waveform_file_that_is_a_device_is_a_located_error() -> None:
    from celllab.errors import PlanError
    from celllab.planner.network_spec import read_waveform_csv

    with pytest.raises(PlanError) as info:
        read_waveform_csv("/dev/zero")
    assert "not a regular file" in str(info.value) and "CSV" in str(info.value)
