"""Writing export files safely: whole files only, no silent overwrite, no links or pipes.

Every exporter (and any other code writing a file for the user) goes through
``write_text_atomic`` or, for several files, ``write_files_atomic``:

* the text goes to a temporary file in the destination folder, then takes the target's name in
  one step, so a failure never leaves half a file behind;
* an existing target is replaced only with ``force=True``, and never when it is a symbolic
  link, a named pipe, a device or a folder, or when it is read-only (no write permission bit);
* without ``force`` the final step is a hard link, which the OS refuses if the name appeared in
  the meantime, so a file created by someone else between the check and the write is kept;
* every refusal and every OS error is an ``OutputError`` naming the file and saying what is
  allowed.

File names for cells come from ``file_stem``, which maps distinct cell names to distinct stems.
POSIX semantics of ``rename`` and ``link`` are those of docs/references.md [128].
"""

from __future__ import annotations

import errno
import os
import stat
import tempfile
from collections.abc import Mapping
from pathlib import Path

from celllab.errors import OutputError

_SAFE = set("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.-")


def file_stem(name: str) -> str:
    """A file-name stem for ``name``: distinct names give distinct stems.

    Letters, digits, ``_``, ``-`` and ``.`` are kept (every valid cell name is its own stem);
    any other character - and a leading ``.`` or ``-`` - becomes ``~`` and its UTF-8 bytes in
    hex (``~`` itself included), so no two names share a stem.
    """
    out = []
    for i, ch in enumerate(name):
        if ch in _SAFE and ch != "~" and not (i == 0 and ch in ".-"):
            out.append(ch)
        else:
            out.append("".join(f"~{b:02x}" for b in ch.encode("utf-8", "surrogatepass")))
    return "".join(out) or "~"


def _fail(path: Path, message: str) -> OutputError:
    return OutputError.single(str(path), "", message)  # type: ignore[return-value]


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc)


def check_target(path: str | os.PathLike[str], force: bool = False) -> Path:
    """Raise ``OutputError`` unless ``path`` may be written (see the module docstring)."""
    target = Path(path)
    try:
        info = os.lstat(target)
    except FileNotFoundError:
        info = None
    except OSError as exc:
        raise _fail(target, f"cannot write here: {_reason(exc)}") from None
    if info is not None:
        if stat.S_ISLNK(info.st_mode):
            raise _fail(target, "is a symbolic link; celllab neither writes through nor replaces "
                        "links (remove it or choose another name)")
        if not stat.S_ISREG(info.st_mode):
            kind = "a folder" if stat.S_ISDIR(info.st_mode) else "a pipe, device or socket"
            raise _fail(target, f"is {kind}, not a regular file; choose another name")
        if not force:
            raise _fail(target, "already exists; pass --force (force=True) to replace it")
        if not info.st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH) or not os.access(target, os.W_OK):
            raise _fail(target, "is read-only; celllab does not replace read-only files "
                        "(make it writable first)")
    folder = target.parent
    if not folder.is_dir():
        raise _fail(target, f"the folder {folder} does not exist or is not a folder")
    return target


def make_folder(path: str | os.PathLike[str]) -> Path:
    """Create the output folder ``path`` (and its parents); ``OutputError`` if that fails."""
    folder = Path(path)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise _fail(folder, "is a file, not a folder (or lies under a file)") from None
    except OSError as exc:
        raise _fail(folder, f"cannot create this folder: {_reason(exc)}") from None
    if not folder.is_dir():
        raise _fail(folder, "is not a folder")
    return folder


def check_files(folder: str | os.PathLike[str], names: list[str], force: bool = False) -> None:
    """Raise ``OutputError`` unless ``write_files_atomic(folder, ...)`` could write ``names``
    there now - without creating anything (a check before a long computation)."""
    base = Path(folder)
    if base.is_dir():
        for name in names:
            check_target(base / name, force)
        return
    existing = base
    while not os.path.lexists(existing) and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise _fail(base, "is a file, not a folder (or lies under a file)")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise _fail(base, f"cannot create this folder: {existing} is not writable")


def _current_umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _temporary(target: Path, text: str) -> str:
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name[:60]}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        # mkstemp creates the file 0600; give it the mode a plain open() would have.
        os.chmod(tmp_name, 0o666 & ~_current_umask())
    except BaseException:
        _remove(tmp_name)
        raise
    return tmp_name


def _remove(name: str | os.PathLike[str]) -> None:
    try:
        os.unlink(name)
    except FileNotFoundError:
        pass


def _place(tmp_name: str, target: Path, force: bool) -> None:
    """Give the temporary file the target's name (no-clobber unless ``force``)."""
    if force:
        check_target(target, force=True)  # again, just before the replace
        os.replace(tmp_name, target)
        return
    try:
        os.link(tmp_name, target)
    except FileExistsError:
        raise _fail(target, "already exists; pass --force (force=True) to replace it") from None
    except OSError as exc:
        if exc.errno not in (errno.EPERM, errno.EOPNOTSUPP, errno.ENOTSUP, errno.EXDEV, errno.EMLINK):
            raise
        # a file system without hard links: reserve the name exclusively, then replace it
        fd = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o600)
        os.close(fd)
        os.replace(tmp_name, target)
    else:
        _remove(tmp_name)


def write_text_atomic(path: str | os.PathLike[str], text: str, force: bool = False) -> Path:
    """Write ``text`` (UTF-8) to ``path`` all at once; returns the path written.

    ``force`` allows replacing an existing regular, writable file. Links, pipes, devices,
    folders and read-only files are never written or replaced. ``OutputError`` names the file
    and the reason; on any failure an existing file is left untouched.
    """
    target = check_target(path, force)
    try:
        tmp_name = _temporary(target, text)
    except OSError as exc:
        raise _fail(target, f"cannot write here: {_reason(exc)}") from None
    try:
        _place(tmp_name, target, force)
    except OutputError:
        _remove(tmp_name)
        raise
    except OSError as exc:
        _remove(tmp_name)
        raise _fail(target, f"cannot write here: {_reason(exc)}") from None
    except BaseException:
        _remove(tmp_name)
        raise
    return target


def write_files_atomic(folder: str | os.PathLike[str], files: Mapping[str, str],
                       force: bool = False) -> list[Path]:
    """Write several files into ``folder`` (created if missing): every target is checked before
    the first is written, and if one write fails the files this call created are removed."""
    new_folder = not os.path.lexists(folder)
    base = make_folder(folder)
    try:
        targets = [base / name for name in files]
        for target in targets:
            check_target(target, force)
    except BaseException:
        if new_folder:
            _remove_folder(base)
        raise
    created: list[Path] = []
    written: list[Path] = []
    try:
        for target, text in zip(targets, files.values()):
            existed = os.path.lexists(target)
            write_text_atomic(target, text, force)
            written.append(target)
            if not existed:
                created.append(target)
    except BaseException:
        for path in created:
            _remove(path)
        if new_folder:
            _remove_folder(base)
        raise
    return written


def _remove_folder(folder: Path) -> None:
    """Remove a folder this call created, if it is still empty (what a failed write leaves)."""
    try:
        folder.rmdir()
    except OSError:
        pass
