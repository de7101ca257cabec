"""Atomic output: write into a temporary place in the target folder, then rename.

An interrupted or failed write never leaves a half-written file and never
damages an existing output: the old file stays until the new one is whole
and checked, then ``rename(2)`` puts it in place in one step (POSIX:
replacing a file by a rename within one file system is atomic; common
practice).

Every output ``NAME`` has one temporary place, the folder ``.NAME.part``
beside it, holding the files being written and a note of the process that
writes them.  A run killed at any moment therefore leaves the old output or
the new one, plus at most that one folder; the next run for the same
output removes it first (or stops with a clear message while the process
that owns it is still running).

Outputs of several files (an XDMF file and its HDF5 data) are published
so that the folder always holds a whole old or a whole new output: the new
companions go in under names of their own, then the main file is renamed
over the old one, then the old companions it no longer names are removed.
A note in the temporary folder lists the companions to remove, so that a
run killed between those steps is completed by the next one.
"""

from __future__ import annotations

import contextlib
import os
import shutil
from collections.abc import Callable, Iterator
from pathlib import Path

from bandwise.core.errors import MeshWriteError

#: Files of the temporary folder that are bookkeeping, not output.
OWNER, JOURNAL = ".owner", ".companions"
#: The companions (sibling file names) an output file names; None: it names none.
References = Callable[[Path], set[str]] | None


def temporary_place(path: str | os.PathLike[str]) -> Path:
    """The one temporary folder of an output: ``.NAME.part`` beside it."""
    path = Path(path)
    return path.parent / f".{path.name}.part"


def _target_folder(path: Path) -> Path:
    folder = path.resolve().parent
    if not folder.is_dir():
        raise MeshWriteError(f"{path}: the folder {folder} does not exist")
    return folder


def _process_start(pid: int) -> str | None:
    """A process's start time (``/proc/PID/stat`` field 22), None when it is not running."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii", errors="replace") as fh:
            return fh.read().rsplit(")", 1)[1].split()[19]
    except (OSError, IndexError):
        pass
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return None
    except (PermissionError, OSError):
        return ""
    return ""


def _owner_text() -> str:
    pid = os.getpid()
    return f"{pid} {_process_start(pid) or ''}\n"


def _owner_alive(tmp: Path) -> int | None:
    """The pid owning a temporary folder when that process is still running, else None."""
    try:
        pid_text, _, start = (tmp / OWNER).read_text(encoding="ascii").strip().partition(" ")
        pid = int(pid_text)
    except (OSError, ValueError):
        return None
    if pid == os.getpid():
        return None
    now = _process_start(pid)
    if now is None or (start and now and now != start):
        return None
    return pid


def _claim(path: Path, folder: Path, references: References) -> Path:
    """Create the output's temporary folder, first clearing what an earlier run left."""
    tmp = folder / f".{path.name}.part"
    if tmp.exists() or tmp.is_symlink():
        pid = _owner_alive(tmp)
        if pid is not None:
            raise MeshWriteError(f"{path}: another run (process {pid}) is writing it; wait for "
                                 f"it to finish, or remove {tmp} if that process is not bandwise")
        _finish_sweep(tmp, folder / path.name, references)
        _remove(tmp)
    try:
        os.mkdir(tmp)
        with open(tmp / OWNER, "w", encoding="ascii") as fh:
            fh.write(_owner_text())
    except OSError as exc:
        _remove(tmp)
        raise MeshWriteError(f"{path}: cannot write in {folder}: {exc.strerror or exc}") from None
    return tmp


def _remove(tmp: Path) -> None:
    if tmp.is_symlink() or tmp.is_file():
        with contextlib.suppress(OSError):
            tmp.unlink()
    else:
        shutil.rmtree(tmp, ignore_errors=True)


@contextlib.contextmanager
def atomic_folder(path: str | os.PathLike[str], references: References = None) -> Iterator[Path]:
    """Yield the output's temporary folder; on success move the files in it beside ``path``.

    The caller writes ``<tmp>/<path.name>`` (and any companion files its
    format writes beside it, such as the HDF5 file of an XDMF mesh, each
    under a name no earlier output uses), and may read them back to check
    them before the block ends.  On success the companions, then the named
    file, are renamed into the folder of ``path``; on failure nothing is
    moved.  The temporary folder is removed either way.

    Parameters
    ----------
    path
        The output.
    references
        For outputs with companions: the sibling file names an output file
        names (old companions are removed once the new output is in place).
    """
    path = Path(path)
    folder = _target_folder(path)
    tmp = _claim(path, folder, references)
    try:
        yield tmp
        _publish(tmp, folder / path.name, references)
    except OSError as exc:
        raise MeshWriteError(f"{path}: write failed: {exc.strerror or exc}") from None
    finally:
        _remove(tmp)


def _publish(tmp: Path, target: Path, references: References) -> None:
    main = tmp / target.name
    if not main.is_file():
        raise MeshWriteError(f"{target}: the writer produced no file")
    companions = sorted(p for p in tmp.iterdir()
                        if p.name not in (OWNER, JOURNAL, target.name))
    for item in [*companions, main]:
        _fsync(item)
    folder = target.parent
    if companions:
        old = references(target) if references is not None and target.is_file() else set()
        with open(tmp / JOURNAL, "w", encoding="utf-8") as fh:
            fh.write("\n".join(sorted(old | {c.name for c in companions})) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
        for item in companions:
            os.replace(item, folder / item.name)
    os.replace(main, target)
    fsync_folder(folder)
    if companions:
        _finish_sweep(tmp, target, references)


def _finish_sweep(tmp: Path, target: Path, references: References) -> None:
    """Remove the companions listed in the journal that the output in place no longer names."""
    try:
        listed = (tmp / JOURNAL).read_text(encoding="utf-8").split("\n")
    except OSError:
        return
    named = references(target) if references is not None and target.is_file() else set()
    for name in filter(None, listed):
        item = target.parent / name
        if name not in named and name != target.name and Path(name).name == name:
            with contextlib.suppress(OSError):
                item.unlink()


def _fsync(path: Path) -> None:
    """Flush a finished file to disk, so that a crash after the rename leaves it whole."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_folder(folder: Path) -> None:
    """Flush a folder's entries (the rename) to disk where the system allows it."""
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def write_text_atomic(path: str | os.PathLike[str], text: str) -> None:
    """Write a text file atomically (temporary folder beside it, then rename)."""
    write_bytes_atomic(path, text.encode("utf-8"))


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes,
                       check: Callable[[Path], None] | None = None) -> None:
    """Write a binary file atomically (temporary folder beside it, then rename).

    ``check`` sees the finished temporary file before it is renamed into
    place and raises to stop it.
    """
    path = Path(path)
    with atomic_folder(path) as tmp:
        part = tmp / path.name
        with open(part, "wb") as fh:
            fh.write(data)
        if check is not None:
            check(part)
