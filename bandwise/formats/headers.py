"""What a mesh file announces before its data: kind (version, encoding, compression) and counts.

Read from the first bytes of a file, without parsing its data, so that a
file can be refused before it is read (too big for the machine, counts it
cannot hold) and written back as the same kind of file.
"""

from __future__ import annotations

import mmap
import os
import re
import struct
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from bandwise.core.errors import MeshReadError

#: Bytes read from the start of a file to find its kind and counts.
HEADER_BYTES = 1 << 16
_VTU_PIECE = re.compile(rb'NumberOfPoints="(\d+)"\s+NumberOfCells="(\d+)"')
#: Fewest bytes a node and an element take in a gmsh file (text, binary): ``"1 0 0\n"``, three
#: doubles; an element with its tag and one node.
_GMSH_MIN_BYTES = {False: (6, 4), True: (24, 8)}


@dataclass(frozen=True)
class HeaderCounts:
    """Counts a file announces before its data, and whether they can be believed."""

    nodes: int
    cells: int
    plausible: bool = True


def head(path: str | os.PathLike[str], size: int = HEADER_BYTES) -> bytes:
    """The first ``size`` bytes of a file (empty when it cannot be read)."""
    try:
        with open(path, "rb") as fh:
            return fh.read(size)
    except OSError:
        return b""


def gmsh_version(data: bytes) -> tuple[str | None, str | None]:
    """(version, encoding) from a gmsh header: ``('4.1', 'ascii')``; Nones if not gmsh."""
    words = data[:256].split()
    if len(words) < 3 or words[0] != b"$MeshFormat":
        return None, None
    version = words[1].decode("ascii", "replace")
    return version, ("binary" if words[2] == b"1" else "ascii")


def vtk_legacy_kind(data: bytes) -> tuple[str | None, str | None]:
    """(version, encoding) of a legacy VTK file: ``('4.2', 'ascii')``."""
    lines = data[:1024].split(b"\n")
    if not lines or not lines[0].startswith(b"# vtk DataFile Version"):
        return None, None
    version = lines[0][len(b"# vtk DataFile Version"):].strip().decode("ascii", "replace")
    encoding = lines[2].strip().upper() if len(lines) > 2 else b""
    return version, ("binary" if encoding == b"BINARY" else "ascii")


def vtu_kind(data: bytes) -> tuple[str | None, str | None]:
    """(encoding, compression) of a VTU file from its first DataArray and its root element."""
    compression = None
    if b"vtkZLibDataCompressor" in data:
        compression = "zlib"
    elif b"vtkLZMADataCompressor" in data:
        compression = "lzma"
    fmt = re.search(rb'<DataArray[^>]*format="(\w+)"', data)
    encoding = "ascii" if fmt is not None and fmt.group(1) == b"ascii" else "binary"
    return encoding, compression


def xdmf_encoding(data: bytes) -> str:
    """``"ascii"`` when the XDMF file holds its arrays as XML text, else ``"hdf5"``."""
    fmt = re.search(rb'Format="(\w+)"', data)
    return "ascii" if fmt is not None and fmt.group(1) == b"XML" else "hdf5"


def flac3d_encoding(data: bytes) -> str:
    """``"binary"`` when a FLAC3D grid starts with binary bytes (meshio's own test)."""
    return "binary" if b"\x00" in data[:8] else "ascii"


def _gmsh_counts(data: Any) -> HeaderCounts | None:
    """Nodes and elements announced by a gmsh file (2.2 or 4.x, text or binary)."""
    head_lines = bytes(data[:256]).split(b"\n")
    fields = head_lines[1].split() if len(head_lines) > 1 else []
    if len(fields) < 3:
        return None
    four, binary = fields[0].startswith(b"4"), fields[1] == b"1"
    size_t = "<Q" if fields[2] == b"8" else "<I"
    counts = []
    consistent = True
    for name in (b"$Nodes", b"$Elements"):
        pos = data.find(name + b"\n")
        if pos < 0:
            pos = data.find(name + b"\r\n")
        if pos < 0:
            counts.append(0)
            continue
        pos = data.find(b"\n", pos) + 1
        if four and binary:
            width = struct.calcsize(size_t)
            raw = bytes(data[pos:pos + 4 * width])
            if len(raw) < 4 * width:
                return None
            head4 = list(struct.unpack("<" + size_t[1] * 4, raw))
        else:
            line = bytes(data[pos:data.find(b"\n", pos)]).split()
            if not line or not all(t.isdigit() for t in line[:4]):
                return None
            head4 = [int(t) for t in line[:4]]
        if four and len(head4) == 4:
            blocks, count, low, high = head4
            # blocks, then count tags from low to high: none of these can disagree
            consistent &= not (count and (blocks == 0 or low < 1 or high < low
                                          or high - low + 1 < count))
            counts.append(count)
        else:  # gmsh 2.2 (the count alone), or 4.0 (blocks, count)
            counts.append(head4[1] if four and len(head4) > 1 else head4[0])
    node_bytes, cell_bytes = _GMSH_MIN_BYTES[binary]
    plausible = consistent and counts[0] * node_bytes + counts[1] * cell_bytes <= len(data)
    return HeaderCounts(counts[0], counts[1], plausible)


def gmsh_counts(path: str | os.PathLike[str]) -> HeaderCounts | None:
    """Nodes and elements after ``$Nodes`` and ``$Elements`` of a gmsh file (2.2 or 4.x).

    A file announcing more nodes and elements than its size can hold, or
    (4.x) counts its entity blocks and tag range contradict, is marked not
    plausible.
    """
    try:
        with open(path, "rb") as fh:
            if os.fstat(fh.fileno()).st_size == 0:
                return None
            with mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as data:
                if data[:11] != b"$MeshFormat":
                    return None
                return _gmsh_counts(data)
    except (OSError, ValueError, struct.error):
        return None


def vtu_counts(path: str | os.PathLike[str]) -> HeaderCounts | None:
    """Points and cells of a VTU file's ``Piece`` element."""
    data = head(path)
    piece = _VTU_PIECE.search(data)
    if piece and b"UnstructuredGrid" in data:
        return HeaderCounts(int(piece.group(1)), int(piece.group(2)))
    return None


def check_counts_fit(path: str | os.PathLike[str], counts: HeaderCounts | None,
                     streamed: bool = False, available: int | None = None) -> None:
    """Refuse, from its header alone, a file whose mesh will not fit in memory.

    The header gives no cell types: cells of unknown type count 4 nodes and
    a node degree of 6; when it gives no cell count, every node counts as in
    one cell.  Both err low, so that nothing that fits is refused.

    Raises
    ------
    MeshReadError
        The header announces more than the file can hold (cut short, damaged).
    InputError
        The mesh will not fit in memory.
    """
    from bandwise.core.memory import check_fits

    if counts is None:
        return
    if not counts.plausible:
        raise MeshReadError(f"{path}: the header's counts ({counts.nodes:,} nodes, "
                            f"{counts.cells:,} elements) contradict its entity blocks or tag "
                            f"range, or exceed what {Path(path).stat().st_size:,} bytes can "
                            "hold: the file is cut short or damaged")
    check_fits(counts_estimate(counts, streamed), available, what=str(path))


def counts_estimate(counts: HeaderCounts, streamed: bool = False) -> int:
    """Peak bytes to read, measure and renumber a mesh of a header's counts (see
    :func:`check_counts_fit`: unknown cells of 4 nodes, node degree 6; errs low)."""
    from bandwise.core.memory import estimate_bytes

    n, cells = counts.nodes, counts.cells
    return estimate_bytes(n, {"unknown": cells or n}, streamed=streamed)
