"""A writer of VTK XML UnstructuredGrid (``.vtu``) files, its compression on every core.

Writing a large compressed VTU file is almost all deflate: each array is
cut into blocks of :data:`BLOCK` bytes and every block compressed on its
own (VTK File Formats, XML formats section: a compressed array is the
header ``[nblocks, blocksize, last_blocksize, compressed sizes...]``
followed by the blocks).  The blocks are independent, and zlib releases
the interpreter lock while it deflates, so they are compressed here by a
pool of threads, one per available core, and the file is streamed out
array by array.

The file holds what meshio's VTU writer puts in one from the same
``meshio.Mesh`` -- points (2D points padded with a zero third coordinate),
cells in VTK node order (the inverse of the reading tables of
:mod:`bandwise.formats.compat`), point data and cell data; no field data
-- so a mesh reads back the same through either reader.  Differences of
form only: the cell ``types`` array is ``UInt8`` (VTK's own type for it),
and the header type is ``UInt64`` when an array's size does not fit a
``UInt32``.  Anything else -- ascii or lzma output, polyhedra, sets left
on the mesh, data of more than two dimensions or of a type VTK has no
name for -- raises :class:`NotHandled`, and the caller writes the file
with meshio instead.

References
----------
Kitware, "VTK File Formats", VTK User's Guide, 11th ed., 2010, pp. 480-494
(XML formats: ``UnstructuredGrid``, ``DataArray``, binary and compressed data).
P. Deutsch, J.-L. Gailly, "ZLIB Compressed Data Format Specification
version 3.3", RFC 1950, 1996.
"""

from __future__ import annotations

import base64
import os
import zlib
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from typing import Any, BinaryIO
from xml.sax.saxutils import quoteattr

import numpy as np

from .vtu import VTK_TYPES, NotHandled

__all__ = ["BLOCK", "write_vtu"]

#: Uncompressed size of a compressed block (bytes; meshio's and VTK's choice).
BLOCK = 32768
#: Blocks compressed by one task (a task of about 2 MiB keeps the pool's overhead small).
BLOCKS_PER_TASK = 64
#: VTK cell type of ``types`` values (VTK File Formats: ``types`` is UInt8).
_TYPES_DTYPE = np.dtype(np.uint8)
_VTK_NAME = {np.dtype(v).newbyteorder("<"): k for k, v in VTK_TYPES.items()}


def write_vtu(path: str | os.PathLike[str], mesh: Any, compression: str | None = "zlib",
              threads: int | None = None) -> None:
    """Write a ``meshio.Mesh`` as a binary VTU file (module notes).

    Parameters
    ----------
    path
        The file to write (created or truncated).
    mesh
        A ``meshio.Mesh`` (anything with ``points``, ``cells`` of ``type`` and
        ``data``, ``point_data``, ``cell_data``, ``point_sets``, ``cell_sets``).
    compression
        ``"zlib"`` or None (raw binary).
    threads
        Compressing threads; default one per core this process may use.

    Raises
    ------
    NotHandled
        The mesh or the options need meshio's writer (module notes); nothing
        has been written then.
    """
    if compression not in (None, "zlib"):
        raise NotHandled(f"compression {compression}")
    if mesh.point_sets or mesh.cell_sets:
        raise NotHandled("sets left on the mesh")
    points = np.asarray(mesh.points)
    if points.ndim != 2 or points.shape[1] not in (2, 3):
        raise NotHandled("points")
    if points.shape[1] == 2:
        points = np.column_stack([points, np.zeros(len(points), dtype=points.dtype)])
    connectivity, offsets, types = _cell_arrays(mesh.cells)
    cell_data = {name: _joined(blocks) for name, blocks in mesh.cell_data.items()}
    arrays = [("Points", "Points", points), ("Cells", "connectivity", connectivity),
              ("Cells", "offsets", offsets), ("Cells", "types", types)]
    arrays += [("PointData", name, np.asarray(a)) for name, a in mesh.point_data.items()]
    arrays += [("CellData", name, a) for name, a in cell_data.items()]
    arrays = [(where, name, _little_endian(a)) for where, name, a in arrays]
    big = any(a.nbytes >= 2**32 for _, _, a in arrays)
    header = np.dtype("<u8" if big else "<u4")
    root = ('<VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian" '
            f'header_type="{"UInt64" if big else "UInt32"}"'
            + (' compressor="vtkZLibDataCompressor"' if compression else "") + ">\n")
    n_cells = len(types)
    with open(path, "wb") as f, ThreadPoolExecutor(max_workers=threads or _cores(),
                                                   thread_name_prefix="bandwise-deflate") as pool:
        f.write(b'<?xml version="1.0"?>\n' + root.encode()
                + b"<!-- written by bandwise -->\n<UnstructuredGrid>\n"
                + f'<Piece NumberOfPoints="{len(points)}" NumberOfCells="{n_cells}">\n'.encode())
        section = None
        for where, name, data in arrays:
            if where != section:
                if section is not None:
                    f.write(f"</{section}>\n".encode())
                f.write(f"<{where}>\n".encode())
                section = where
            _write_array(f, name, data, header, compression is not None, pool)
        f.write(f"</{section}>\n</Piece>\n</UnstructuredGrid>\n</VTKFile>\n".encode())


def _cores() -> int:
    """Cores this process may run on."""
    if hasattr(os, "sched_getaffinity"):
        return max(1, len(os.sched_getaffinity(0)))
    return os.cpu_count() or 1


def _cell_arrays(blocks: list[Any]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``connectivity``, ``offsets`` and ``types`` of the cell blocks, VTK node order."""
    from .compat import private, vtk_cell_tables

    vtk_to_meshio_order = vtk_cell_tables()[1]
    vtk_type = private("meshio._vtk_common", "meshio_to_vtk_type")
    if not blocks:
        raise NotHandled("no cells")
    conn, offsets, types = [], [], []
    end = 0
    for block in blocks:
        data = np.asarray(block.data)
        if data.dtype == object or data.ndim != 2 or block.type not in vtk_type:
            raise NotHandled(f"{block.type} cells")
        order = vtk_to_meshio_order(vtk_type[block.type])
        if order is not None:                 # file position of each meshio position
            data = data[:, np.argsort(order)]
        n, k = data.shape
        conn.append(data.reshape(-1))
        offsets.append(end + k * np.arange(1, n + 1, dtype=np.int64))
        end += n * k
        types.append(np.full(n, vtk_type[block.type], dtype=_TYPES_DTYPE))
    connectivity = np.concatenate(conn)
    return connectivity, np.concatenate(offsets).astype(connectivity.dtype), np.concatenate(types)


def _joined(blocks: list[Any]) -> np.ndarray:
    """One cell-data array over every block (the blocks' values one after another)."""
    return np.concatenate([np.asarray(b) for b in blocks])


def _little_endian(data: np.ndarray) -> np.ndarray:
    """``data`` as a contiguous little-endian array of a type VTK names."""
    if data.ndim > 2 or data.dtype.kind not in "iuf":
        raise NotHandled(f"data of shape {data.shape} and type {data.dtype}")
    data = np.ascontiguousarray(data, dtype=data.dtype.newbyteorder("<"))
    if data.dtype not in _VTK_NAME:
        raise NotHandled(f"data of type {data.dtype}")
    return data


def _write_array(f: BinaryIO, name: str, data: np.ndarray, header: np.dtype, compressed: bool,
                 pool: ThreadPoolExecutor) -> None:
    """One ``DataArray`` element: base64 of the header, then base64 of the data."""
    components = f' NumberOfComponents="{data.shape[1]}"' if data.ndim == 2 else ""
    f.write(f'<DataArray type="{_VTK_NAME[data.dtype]}" Name={quoteattr(name)}{components} '
            'format="binary">\n'.encode())
    raw = memoryview(data.reshape(-1)).cast("B")
    if compressed:
        blocks = [b for task in pool.map(_deflate, _tasks(raw)) for b in task]
        last = len(raw) - (len(blocks) - 1) * BLOCK if blocks else 0
        head = np.array([len(blocks), BLOCK, last, *map(len, blocks)], dtype=header)
        f.write(base64.b64encode(head.tobytes()))
        f.write(base64.b64encode(b"".join(blocks)))
    else:
        f.write(base64.b64encode(np.array([len(raw)], dtype=header).tobytes()))
        f.write(base64.b64encode(raw))
    f.write(b"\n</DataArray>\n")


def _tasks(raw: memoryview) -> Iterator[memoryview]:
    """The data cut into runs of :data:`BLOCKS_PER_TASK` blocks."""
    step = BLOCK * BLOCKS_PER_TASK
    for start in range(0, len(raw), step):
        yield raw[start:start + step]


def _deflate(run: memoryview) -> list[bytes]:
    """Each block of a run deflated on its own (zlib's default level, as VTK writes)."""
    return [zlib.compress(run[a:a + BLOCK]) for a in range(0, len(run), BLOCK)]
