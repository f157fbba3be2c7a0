"""The shared output-file writer: whole files, explicit replacing, no links, pipes or read-only
files, distinct file names for distinct cells.

POSIX ``rename``/``link`` semantics (docs/references.md [128]) are what make the writes atomic
and no-clobber; these tests check the outcomes on the real file system.
"""

from __future__ import annotations

import os
import stat
import sys
import threading
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.errors import OutputError
from celllab.export import write_csv
from celllab.export.files import file_stem, make_folder, write_files_atomic, write_text_atomic

posix = pytest.mark.skipif(sys.platform == "win32", reason="POSIX links, pipes and modes")


def test_new_file_is_written(tmp_path: Path) -> None:
    target = write_text_atomic(tmp_path / "a.txt", "hello\n")
    assert target.read_text() == "hello\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]  # no temporary left


def test_existing_file_is_kept_without_force(tmp_path: Path) -> None:
    target = tmp_path / "a.txt"
    target.write_text("mine")
    with pytest.raises(OutputError) as info:
        write_text_atomic(target, "new")
    assert str(target) in str(info.value) and "--force" in str(info.value)
    assert target.read_text() == "mine"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]


def test_force_replaces_a_writable_file(tmp_path: Path) -> None:
    target = tmp_path / "a.txt"
    target.write_text("old")
    write_text_atomic(target, "new", force=True)
    assert target.read_text() == "new"


@posix
def test_read_only_file_is_never_replaced(tmp_path: Path) -> None:
    target = tmp_path / "a.txt"
    target.write_text("keep")
    target.chmod(0o444)
    with pytest.raises(OutputError) as info:
        write_text_atomic(target, "new", force=True)
    assert "read-only" in str(info.value)
    assert target.read_text() == "keep" and stat.S_IMODE(target.stat().st_mode) == 0o444


@posix
@pytest.mark.parametrize("force", [False, True])
def test_symbolic_link_is_neither_followed_nor_replaced(tmp_path: Path, force: bool) -> None:
    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    link = tmp_path / "out.txt"
    link.symlink_to(victim)
    with pytest.raises(OutputError) as info:
        write_text_atomic(link, "attack", force=force)
    assert "symbolic link" in str(info.value)
    assert victim.read_text() == "precious" and link.is_symlink()


@posix
@pytest.mark.parametrize("force", [False, True])
def test_named_pipe_is_refused_without_blocking(tmp_path: Path, force: bool) -> None:
    fifo = tmp_path / "out.csv"
    os.mkfifo(fifo)
    outcome: list[BaseException] = []

    def write() -> None:
        try:
            write_text_atomic(fifo, "x", force=force)
        except BaseException as exc:  # noqa: BLE001 - the test inspects it
            outcome.append(exc)

    worker = threading.Thread(target=write, daemon=True)
    worker.start()
    worker.join(timeout=20)
    if worker.is_alive():  # unblock a writer stuck on the pipe so the test can end
        with open(fifo, "rb", buffering=0) as reader:
            reader.read(1)
        worker.join(timeout=5)
    assert outcome and isinstance(outcome[0], OutputError) and "pipe" in str(outcome[0])
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)


def test_folder_is_refused(tmp_path: Path) -> None:
    (tmp_path / "d").mkdir()
    with pytest.raises(OutputError) as info:
        write_text_atomic(tmp_path / "d", "x", force=True)
    assert "folder" in str(info.value)


@pytest.mark.skipif(not Path("/proc/self").is_dir(), reason="needs /proc")
@pytest.mark.parametrize("where", ["/proc/celllab-out.csv", "/proc/self/no/such/out.csv"])
def test_unwritable_places_are_located_errors(where: str) -> None:
    with pytest.raises(OutputError) as info:
        write_text_atomic(where, "x")
    assert info.value.problems[0].file == where


def test_path_through_a_file_is_a_located_error(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(OutputError) as info:
        make_folder(blocker / "sub")
    assert str(blocker / "sub") in str(info.value)
    with pytest.raises(OutputError):
        write_text_atomic(blocker / "out.csv", "x")


def test_several_files_are_checked_before_any_is_written(tmp_path: Path) -> None:
    (tmp_path / "b.txt").write_text("mine")
    with pytest.raises(OutputError):
        write_files_atomic(tmp_path, {"a.txt": "1", "b.txt": "2", "c.txt": "3"})
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.txt"]
    assert (tmp_path / "b.txt").read_text() == "mine"
    written = write_files_atomic(tmp_path, {"a.txt": "1", "b.txt": "2"}, force=True)
    assert [p.read_text() for p in written] == ["1", "2"]


def test_writers_refuse_to_overwrite_unless_asked(tmp_path: Path) -> None:
    rows = [{"name": "c1", "cap_fF": 1.0}]
    target = write_csv(tmp_path / "x.csv", rows)
    with pytest.raises(OutputError):
        write_csv(target, rows)
    write_csv(target, rows, force=True)


def test_cell_names_that_differ_in_punctuation_get_distinct_stems() -> None:
    names = ["cc-1", "cc_1", "cc.1", "cc~1", "cc 1", "cc/1", ".cc1", "-cc1", "cc\u00e91"]
    stems = [file_stem(n) for n in names]
    assert len(set(stems)) == len(names)
    assert stems[:3] == ["cc-1", "cc_1", "cc.1"]  # valid cell names are their own stems
    assert all("/" not in s and not s.startswith((".", "-")) for s in stems)


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.lists(st.text(min_size=1, max_size=12), min_size=2, max_size=6, unique=True))
def test_stems_are_injective(names: list[str]) -> None:
    stems = [file_stem(n) for n in names]
    assert len(set(stems)) == len(stems)
    assert all(set(s) <= set("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.-~")
               for s in stems)
