"""The command line under careless or hostile input: exit status 2 and one located line per
problem, never a traceback, a hang, or a file lost or clobbered.

Covers arguments that are not UTF-8, numbers beyond any sensible bound, output paths the OS
refuses (under /proc, through a regular file), catalogs that cannot be created or opened,
device files given as decks, and exports whose file names would collide or exist already.
"""

from __future__ import annotations

import contextlib
import io
import os
import sys
from pathlib import Path

import pytest

from celllab.catalog import open_catalog
from celllab.cli.main import main
from celllab.records import CharacterizationRun

from .test_export_cli import CORNERS, DECK, _cell

posix = pytest.mark.skipif(sys.platform == "win32", reason="POSIX paths")
has_proc = pytest.mark.skipif(not Path("/proc/self").is_dir(), reason="needs /proc")


def run_cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(argv))
    text = err.getvalue()
    assert "Traceback" not in text
    return code, out.getvalue(), text


@pytest.fixture
def catalog_path(tmp_path: Path) -> Path:
    cells = [
        _cell("cc-1", "cross_coupled", True, 60e-15, 30.0),
        _cell("cc_1", "nmos_inversion", False, 150e-15, 12.0),
        _cell("cc.1", "mom", True, 40e-15, 3.0),
    ]
    run = CharacterizationRun(DECK, "deckhash" * 4, {"name": DECK}, "models-test", list(CORNERS), cells)
    path = tmp_path / "cat.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(run)
    return path


# --------------------------------------------------------------------------- arguments


@pytest.mark.parametrize("argv", [
    ["rank", "--where", "name = \udcff\udcfe"],
    ["check", "--deck", "/tmp/\udcffdeck.toml"],
    ["export", "csv", "--out", "out\udce9.csv"],
])
def test_arguments_that_are_not_utf8_are_refused(argv: list[str]) -> None:
    code, out, err = run_cli(*argv)
    assert code == 2 and "not valid UTF-8" in err and out == ""
    assert "\\xff" in err or "\\udc" in err.lower() or "\\xe9" in err


@pytest.mark.parametrize(("argv", "option"), [
    (["rank", "--limit", "99999999999999999999"], "--limit"),
    (["rank", "--offset", "-1"], "--offset"),
    (["export", "csv", "--limit", str(2**63)], "--limit"),
    (["export", "spice", "--segments", "100000000"], "--segments"),
    (["export", "spice", "--segments", "0"], "--segments"),
    (["export", "touchstone", "--reference-ohm", "inf"], "--reference-ohm"),
    (["export", "touchstone", "--reference-ohm", "nan"], "--reference-ohm"),
    (["demo", "--no-ui", "--limit", "1e400"], "--limit"),
])
def test_numbers_out_of_range_name_the_option(catalog_path: Path, argv: list[str], option: str) -> None:
    code, out, err = run_cli(*argv, "--catalog", str(catalog_path))
    assert code == 2 and option in err and "allowed" in err or "not a whole number" in err


# --------------------------------------------------------------------------- files and folders


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="needs /dev/zero")
def test_check_on_a_device_is_a_located_error() -> None:
    code, _, err = run_cli("check", "--deck", "/dev/zero")
    assert code == 2 and err.startswith("/dev/zero: ") and "not a regular file" in err


@has_proc
@pytest.mark.parametrize("where", ["/proc/celllab/cat.sqlite", "/proc/self/celllab.sqlite"])
def test_catalog_that_cannot_be_created_names_its_path(where: str, lumen130_path: Path,
                                                       tmp_path: Path) -> None:
    cells = tmp_path / "c.toml"
    cells.write_text('[[cell]]\nname = "n"\ntopology = "mom"\nwidth_sites = 12\n')
    code, _, err = run_cli("build", "--deck", str(lumen130_path), "--cells", str(cells),
                           "--catalog", where, "--quiet")
    assert code == 2 and where in err


@posix
def test_ui_on_an_unopenable_catalog_exits_2_before_the_ui(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")
    for where in (str(blocker / "cat.sqlite"), str(tmp_path)):
        code, _, err = run_cli("ui", "--catalog", where)
        assert code == 2 and where in err


@has_proc
@pytest.mark.parametrize("out", ["/proc/celllab.csv", "/proc/self/none/x.csv"])
def test_export_into_proc_is_a_located_error(catalog_path: Path, out: str) -> None:
    code, _, err = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", out)
    assert code == 2 and "/proc/" in err


def test_export_through_a_file_is_a_located_error(catalog_path: Path, tmp_path: Path) -> None:
    blocker = tmp_path / "notes.txt"
    blocker.write_text("mine")
    for out in (f"{blocker}/x.csv", f"{blocker}/sub/"):
        code, _, err = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", out)
        assert code == 2 and str(blocker) in err
    assert blocker.read_text() == "mine"


# --------------------------------------------------------------------------- exports


def test_cells_differing_in_punctuation_get_their_own_files(catalog_path: Path, tmp_path: Path) -> None:
    for fmt, ext in (("spice", ".sp"), ("datasheet", ".html")):
        folder = tmp_path / fmt
        code, _, err = run_cli("export", fmt, "--catalog", str(catalog_path), "--out", f"{folder}/",
                               "--no-plots" if fmt == "datasheet" else "--corner=worst")
        assert code == 0, err
        names = sorted(p.name for p in folder.iterdir())
        assert {f"cc-1{ext}", f"cc_1{ext}", f"cc.1{ext}"} <= set(names)
    subckts = {line.split()[1] for p in (tmp_path / "spice").iterdir()
               for line in p.read_text().splitlines() if line.startswith(".subckt")}
    assert len(subckts) == 3  # one SPICE deck may include all three files
    folder = tmp_path / "ts"
    assert run_cli("export", "touchstone", "--catalog", str(catalog_path), "--out", f"{folder}/")[0] == 0
    assert len(list(folder.iterdir())) == 3 * len(CORNERS)


def test_existing_files_are_kept_unless_forced(catalog_path: Path, tmp_path: Path) -> None:
    target = tmp_path / "cells.csv"
    target.write_text("mine")
    code, _, err = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", str(target))
    assert code == 2 and str(target) in err and "--force" in err
    assert target.read_text() == "mine"
    code, _, _ = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", str(target), "--force")
    assert code == 0 and target.read_text() != "mine"


def test_folder_export_writes_nothing_when_one_file_exists(catalog_path: Path, tmp_path: Path) -> None:
    folder = tmp_path / "sp"
    folder.mkdir()
    (folder / "cc_1.sp").write_text("mine")
    code, _, err = run_cli("export", "spice", "--catalog", str(catalog_path), "--out", f"{folder}/")
    assert code == 2 and "cc_1.sp" in err
    assert sorted(p.name for p in folder.iterdir()) == ["cc_1.sp"]


@posix
def test_read_only_link_and_pipe_targets_are_refused_even_with_force(catalog_path: Path,
                                                                    tmp_path: Path) -> None:
    read_only = tmp_path / "ro.csv"
    read_only.write_text("keep")
    read_only.chmod(0o444)
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    link = tmp_path / "link.csv"
    link.symlink_to(victim)
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    for target, says in ((read_only, "read-only"), (link, "symbolic link"), (fifo, "pipe")):
        code, _, err = run_cli("export", "csv", "--catalog", str(catalog_path), "--out", str(target),
                               "--force")
        assert code == 2 and says in err, err
    assert read_only.read_text() == "keep" and (read_only.stat().st_mode & 0o777) == 0o444
    assert victim.read_text() == "precious" and link.is_symlink()
