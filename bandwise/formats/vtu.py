"""A streaming reader of VTK XML UnstructuredGrid (``.vtu``) files.

The file is memory-mapped; the tags are found by a scan of the mapped bytes
(no document tree of the whole file), and each binary ``DataArray`` is
decoded from base64 and, when compressed, inflated block by block straight
into a preallocated array.  The layout follows the VTK file-format
documentation (Kitware, "VTK File Formats", VTK User's Guide, XML formats
section): a binary array is base64 text of a header of ``header_type``
integers and the data; a compressed array's header is
``[nblocks, blocksize, last_blocksize, compressed sizes...]``.

The reader builds the same :class:`~bandwise.core.model.Model` as meshio's VTU
reader followed by :func:`bandwise.formats.meshio_io.model_from_meshio` (cell blocks
are runs of one VTK cell type, typed and reordered with meshio's own tables, reached
through :mod:`bandwise.formats.compat`).
For anything it does not handle -- ascii or appended data, lzma, several
pieces, big-endian files, polyhedra, polygons, cells of unknown type,
offsets that do not match fixed-size cells, damaged data -- it raises
:class:`NotHandled` and the caller reads the file with meshio instead.
"""

from __future__ import annotations

import binascii
import mmap
import re
import sys
import zlib
from pathlib import Path
from typing import Any

import numpy as np

from bandwise.core.model import CellBlock, Model

#: VTK XML scalar type names and their numpy types (VTK File Formats, DataArray ``type``).
VTK_TYPES = {
    "Float32": np.float32, "Float64": np.float64,
    "Int8": np.int8, "Int16": np.int16, "Int32": np.int32, "Int64": np.int64,
    "UInt8": np.uint8, "UInt16": np.uint16, "UInt32": np.uint32, "UInt64": np.uint64,
}
_TAG = re.compile(rb"<(/?)([A-Za-z_][\w.-]*)((?:[^>\"']|\"[^\"]*\"|'[^']*')*?)(/?)>")
_ATTR = re.compile(rb"([\w:.-]+)\s*=\s*(?:\"([^\"]*)\"|'([^']*)')")
_CHUNK = 1 << 22  # base64 characters decoded at a time (a multiple of 4)
_SPACE = b" \t\r\n"
#: Largest inflation ratio of a deflate stream (zlib technical details: about 1032:1).
_MAX_INFLATE = 1032


class NotHandled(Exception):
    """The fast path does not handle this file or mesh; meshio reads or writes it instead."""


def _attrs(raw: bytes) -> dict[str, str]:
    return {m.group(1).decode(): (m.group(2) if m.group(2) is not None else m.group(3)).decode()
            for m in _ATTR.finditer(raw)}


class _Reader:
    def __init__(self, mm: mmap.mmap, root: dict[str, str]):
        self.mm = mm
        if root.get("byte_order", "LittleEndian") != "LittleEndian" or sys.byteorder != "little":
            raise NotHandled("byte order")
        header = root.get("header_type", "UInt32")
        if header not in ("UInt32", "UInt64"):
            raise NotHandled("header type")
        self.htype = np.dtype(VTK_TYPES[header])
        compressor = root.get("compressor")
        if compressor not in (None, "vtkZLibDataCompressor"):
            raise NotHandled("compressor")
        self.compressed = compressor is not None

    def _chars(self, start: int, end: int) -> tuple[int, int]:
        mm = self.mm
        while start < end and mm[start] in _SPACE:
            start += 1
        while end > start and mm[end - 1] in _SPACE:
            end -= 1
        for ch in _SPACE:
            if mm.find(bytes([ch]), start, end) != -1:
                raise NotHandled("whitespace inside binary data")
        return start, end

    def _decode(self, start: int, end: int) -> bytes:
        try:
            return binascii.a2b_base64(self.mm[start:end], strict_mode=True)
        except binascii.Error:
            raise NotHandled("bad base64") from None

    def _stream(self, start: int, end: int):
        """Yield the decoded bytes of base64 text ``[start, end)`` chunk by chunk."""
        for a in range(start, end, _CHUNK):
            yield self._decode(a, min(a + _CHUNK, end))

    def read(self, start: int, end: int, attrs: dict[str, str]) -> np.ndarray:
        if attrs.get("format", "ascii") != "binary":
            raise NotHandled("not inline binary data")
        try:
            dtype = np.dtype(VTK_TYPES[attrs["type"]])
        except KeyError:
            raise NotHandled("data type") from None
        start, end = self._chars(start, end)
        hs = self.htype.itemsize
        nchars = end - start
        if self.compressed:
            out = self._inflate(start, end, dtype)
        else:
            hchars = 4 * -(-hs // 3)
            head = np.frombuffer(self._decode(start, start + hchars)[:hs], self.htype)
            apart = self.mm[start + hchars - 1] == ord("=")  # header encoded on its own (VTK)
            total = int(head[0])
            if total > nchars * 3 // 4 or total % dtype.itemsize:
                raise NotHandled("size beyond the data")
            out = np.empty(total // dtype.itemsize, dtype)
            view = memoryview(out).cast("B")
            pos, skip = 0, 0 if apart else hs
            for chunk in self._stream(start + hchars if apart else start, end):
                piece = memoryview(chunk)
                if skip:
                    n = min(skip, len(piece))
                    piece, skip = piece[n:], skip - n
                take = min(len(piece), total - pos)
                view[pos:pos + take] = piece[:take]
                pos += take
                if pos == total:
                    break
            if pos != total:
                raise NotHandled("data cut short")
        nc = attrs.get("NumberOfComponents", "")
        if nc != "":
            k = int(nc)
            if k <= 0 or out.size % k:
                raise NotHandled("components")
            out = out.reshape(-1, k)
        return out

    def _inflate(self, start: int, end: int, dtype: np.dtype) -> np.ndarray:
        hs = self.htype.itemsize
        first = np.frombuffer(self._decode(start, start + 4 * -(-hs // 3))[:hs], self.htype)
        nblocks = int(first[0])
        hchars = 4 * -(-(3 + nblocks) * hs // 3)
        if hchars > end - start:
            raise NotHandled("header beyond the data")
        head = np.frombuffer(self._decode(start, start + hchars)[:(3 + nblocks) * hs],
                             self.htype).astype(np.int64)
        blocksize, last = int(head[1]), int(head[2])
        sizes = head[3:]
        packed = int(sizes.sum()) if nblocks else 0
        if nblocks == 0:
            total = 0
        else:
            total = blocksize * (nblocks - 1) + (last if last else blocksize)
        body = end - start - hchars
        if (np.any(sizes < 0) or blocksize < 0 or last < 0 or packed > body * 3 // 4
                or total > packed * _MAX_INFLATE or total % dtype.itemsize):
            raise NotHandled("sizes beyond the data")
        out = np.empty(total // dtype.itemsize, dtype)
        view = memoryview(out).cast("B")
        pos = 0
        blocks = iter(sizes.tolist())
        need = next(blocks, None)
        inflater = zlib.decompressobj()
        for chunk in self._stream(start + hchars, end):
            piece, at = memoryview(chunk), 0  # a view: no copy of the rest of the chunk
            while at < len(piece) and need is not None:
                take = min(need, len(piece) - at)
                got = inflater.decompress(piece[at:at + take])
                at, need = at + take, need - take
                if pos + len(got) > total:
                    raise NotHandled("block larger than announced")
                view[pos:pos + len(got)] = got
                pos += len(got)
                if need == 0:
                    rest = inflater.flush()
                    if not inflater.eof or pos + len(rest) > total:
                        raise NotHandled("damaged block")
                    view[pos:pos + len(rest)] = rest
                    pos += len(rest)
                    inflater = zlib.decompressobj()
                    need = next(blocks, None)
            if need is None:
                break
        if need is not None or pos != total:
            raise NotHandled("data cut short")
        return out


def _scan(mm: mmap.mmap) -> tuple[dict[str, str], dict[str, str],
                                  list[tuple[str, dict[str, str], Any]]]:
    """The VTKFile and Piece attributes and (path, attributes, (start, end)) per DataArray."""
    found: list[tuple[str, dict[str, str], Any]] = []
    stack: list[str] = []
    root: dict[str, str] | None = None
    pieces: list[dict[str, str]] = []
    pos = 0
    allowed = {
        (): {"VTKFile"}, ("VTKFile",): {"UnstructuredGrid"},
        ("VTKFile", "UnstructuredGrid"): {"Piece", "FieldData"},
        ("VTKFile", "UnstructuredGrid", "Piece"): {"Points", "Cells", "PointData", "CellData"},
    }
    while True:
        lt = mm.find(b"<", pos)
        if lt == -1:
            break
        if mm[lt:lt + 4] == b"<!--":
            close = mm.find(b"-->", lt)
            if close == -1:
                raise NotHandled("comment not closed")
            pos = close + 3
            continue
        if mm[lt:lt + 2] == b"<?":
            close = mm.find(b"?>", lt)
            if close == -1:
                raise NotHandled("declaration not closed")
            pos = close + 2
            continue
        gt = mm.find(b">", lt)
        if gt == -1:
            raise NotHandled("tag not closed")
        m = _TAG.fullmatch(mm[lt:gt + 1])
        if m is None:
            raise NotHandled("tag")
        closing, name, raw, empty = m.group(1), m.group(2).decode(), m.group(3), m.group(4)
        pos = gt + 1
        if closing:
            if not stack or stack[-1] != name:
                raise NotHandled("tags do not nest")
            stack.pop()
            continue
        key = tuple(stack)
        if name == "DataArray" and len(stack) >= 3 and stack[-1] in (
                "Points", "Cells", "PointData", "CellData", "FieldData"):
            attrs = _attrs(raw)
            if empty:
                raise NotHandled("empty DataArray")
            stop = mm.find(b"</DataArray>", pos)
            if stop == -1 or mm.find(b"<", pos, stop) != -1:
                raise NotHandled("DataArray content")
            found.append(("/".join(stack), attrs, (pos, stop)))
            pos = stop + len(b"</DataArray>")
            continue
        if name not in allowed.get(key, ()):
            raise NotHandled(f"tag {name}")
        if name == "VTKFile":
            root = _attrs(raw)
        if name == "Piece":
            pieces.append(_attrs(raw))
        if not empty:
            stack.append(name)
    if stack or root is None:
        raise NotHandled("file cut short")
    if len(pieces) != 1:
        raise NotHandled("not one piece")
    return root, pieces[0], found


def read_vtu(path: str | Path) -> Model:
    """Read a ``.vtu`` file into a :class:`Model`, or raise :class:`NotHandled`.

    Parameters
    ----------
    path
        A VTK XML UnstructuredGrid file with inline binary (raw or zlib) data.
    """
    from .compat import vtk_cell_tables

    vtk_to_meshio_type, vtk_to_meshio_order, num_nodes_per_cell = vtk_cell_tables()

    with open(path, "rb") as f:
        try:
            mm = mmap.mmap(f.fileno(), 0, access=mmap.ACCESS_READ)
        except (ValueError, OSError):
            raise NotHandled("cannot map") from None
    try:
        root, pattrs, arrays = _scan(mm)
        if root.get("type") != "UnstructuredGrid" or root.get("version", "0.1") not in ("0.1",
                                                                                       "1.0"):
            raise NotHandled("file type")
        n_points, n_cells = int(pattrs["NumberOfPoints"]), int(pattrs["NumberOfCells"])
        reader = _Reader(mm, root)
        points = None
        cells: dict[str, np.ndarray] = {}
        point_data: dict[str, np.ndarray] = {}
        cell_raw: dict[str, np.ndarray] = {}
        field_data: dict[str, np.ndarray] = {}
        for where, attrs, (a, b) in arrays:
            part = where.rsplit("/", 1)[-1]
            data = reader.read(a, b, attrs)
            name = attrs.get("Name", "")
            if part == "Points":
                if points is not None or "NumberOfComponents" not in attrs:
                    raise NotHandled("points")
                points = data.reshape(n_points, int(attrs["NumberOfComponents"]))
            elif part == "Cells":
                cells[name] = data
            elif part == "PointData":
                point_data[name] = data
            elif part == "CellData":
                cell_raw[name] = data
            else:
                field_data[name] = data
        if points is None or set(cells) != {"connectivity", "offsets", "types"}:
            raise NotHandled("points or cells missing")
        conn = cells["connectivity"].ravel()
        offsets = cells["offsets"].ravel()
        types = cells["types"].ravel()
        if len(offsets) != n_cells or len(types) != n_cells:
            raise NotHandled("cell counts")
        if not np.issubdtype(conn.dtype, np.integer) or not np.issubdtype(offsets.dtype,
                                                                          np.integer):
            raise NotHandled("integer cells")
        blocks: list[CellBlock] = []
        cell_data: dict[str, list[np.ndarray]] = {}
        breaks = np.flatnonzero(types[:-1] != types[1:]) + 1
        starts = np.concatenate([[0], breaks]).astype(np.int64)
        ends = np.concatenate([breaks, [len(types)]]).astype(np.int64)
        if conn.dtype != np.int64:
            conn = conn.astype(np.int64)
        for s, e in zip(starts.tolist(), ends.tolist()):
            if s == e:
                continue
            kind = vtk_to_meshio_type.get(int(types[s]))
            if kind is None or kind not in num_nodes_per_cell:
                raise NotHandled("cell type")
            k = num_nodes_per_cell[kind]
            base = int(offsets[s - 1]) if s else 0
            expect = base + k * np.arange(1, e - s + 1, dtype=np.int64)
            if not np.array_equal(offsets[s:e], expect) or expect[-1] > len(conn):
                raise NotHandled("offsets of ragged cells")
            data = conn[base:int(expect[-1])].reshape(e - s, k)
            order = vtk_to_meshio_order(int(types[s]))
            if order is not None:
                data = data[:, order]
            blocks.append(CellBlock(kind, data))
            for name, d in cell_raw.items():
                cell_data.setdefault(name, []).append(np.array(d[s:e]))
        for name, d in point_data.items():
            if len(d) != n_points:
                raise NotHandled("point data length")
        return Model(
            points=np.asarray(points, dtype=np.float64),
            cells=blocks,
            point_data=point_data,
            cell_data=cell_data,
            field_data=field_data,
            source=str(path),
            file_format="vtu",
        )
    except (KeyError, ValueError, IndexError, OverflowError, zlib.error, MemoryError) as exc:
        raise NotHandled(str(exc)) from None
    finally:
        try:
            mm.close()
        except BufferError:  # an array still views the map: closed when it is freed
            pass
