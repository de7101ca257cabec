"""Atomic output: write into a temporary place in the target folder, then rename.

An interrupted or failed write never leaves a half-written file and never
damages an existing output: the old file stays until the new one is whole.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

from bandwise.core.errors import MeshWriteError


def _target_folder(path: Path) -> Path:
    folder = path.resolve().parent
    if not folder.is_dir():
        raise MeshWriteError(f"{path}: the folder {folder} does not exist")
    return folder


@contextlib.contextmanager
def atomic_folder(path: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary folder; on success move every file in it beside ``path``.

    The caller writes ``<tmp>/<path.name>`` (and any companion files a format
    writes beside it, such as the HDF5 file of an XDMF mesh).  On success each
    file is renamed into the folder of ``path``; on failure nothing is moved
    and the temporary folder is removed.
    """
    path = Path(path)
    folder = _target_folder(path)
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".part", dir=folder))
    except OSError as exc:
        raise MeshWriteError(f"{path}: cannot write in {folder}: {exc.strerror}") from None
    try:
        yield tmp
        # on disk before any rename; companions first, the named file last
        produced = sorted(tmp.iterdir(), key=lambda p: (p.name == path.name, p.name))
        for item in produced:
            _fsync(item)
        for item in produced:
            os.replace(item, folder / item.name)
    except OSError as exc:
        raise MeshWriteError(f"{path}: write failed: {exc.strerror or exc}") from None
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _fsync(path: Path) -> None:
    """Flush a finished file to disk, so that a crash after the rename leaves it whole."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _ordinary_mode() -> int:
    """The permissions ``open()`` would give a new file: 0666 less the umask."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_text_atomic(path: str | os.PathLike[str], text: str) -> None:
    """Write a text file atomically (temporary file in the same folder, then rename)."""
    write_bytes_atomic(path, text.encode("utf-8"))


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> None:
    """Write a binary file atomically (temporary file in the same folder, then rename)."""
    path = Path(path)
    folder = _target_folder(path)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    except OSError as exc:
        raise MeshWriteError(f"{path}: cannot write in {folder}: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, _ordinary_mode())  # mkstemp makes 0600; outputs are ordinary files
        os.replace(tmp, path)
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise MeshWriteError(f"{path}: write failed: {exc.strerror or exc}") from None
