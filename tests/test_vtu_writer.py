"""bandwise's threaded VTU writer: a file meshio reads back as it reads meshio's own.

References: meshio (Schlömer et al., meshio 5.3) ``meshio.write`` and
``meshio.read`` as the reference writer and reader; the layout of a
compressed array per Kitware, "VTK File Formats" (VTK User's Guide, 11th
ed., 2010, XML formats: header ``[nblocks, blocksize, last_blocksize,
compressed sizes...]``, each block deflated alone, RFC 1950).
"""

from __future__ import annotations

import base64
import re
import zlib
from pathlib import Path

import meshio
import numpy as np
import pytest
from conftest import assert_same_mesh

from bandwise.core.generate import scrambled, tet_grid
from bandwise.formats import read_model, write_model
from bandwise.formats.meshio_io import model_from_meshio
from bandwise.formats.vtu import NotHandled, read_vtu
from bandwise.formats.vtu_writer import BLOCK, write_vtu


def _mixed(points_dim: int = 3) -> meshio.Mesh:
    """Every cell family a solid or shell mesh has, wedges (reordered in VTK) among them."""
    rng = np.random.default_rng(5)
    pts = rng.random((20, points_dim))
    cells = [("triangle", np.array([[0, 1, 2], [1, 2, 3]])),
             ("quad", np.array([[0, 1, 2, 3]])),
             ("wedge", np.array([[0, 1, 2, 3, 4, 5], [6, 7, 8, 9, 10, 11]])),
             ("hexahedron20", np.arange(20).reshape(1, 20)),
             ("tetra10", np.arange(10).reshape(1, 10)),
             ("triangle", np.array([[4, 5, 6]]))]
    counts = [len(c[1]) for c in cells]
    return meshio.Mesh(pts, cells,
                       point_data={"temperature": np.arange(20.0),
                                   "displacement": rng.random((20, 3)),
                                   "flag": np.arange(20, dtype=np.int32)},
                       cell_data={"material": [np.full(n, j, np.uint16)
                                               for j, n in enumerate(counts)],
                                  "stress": [rng.random((n, 6)) for n in counts]})


def _read_both(tmp_path: Path, mesh: meshio.Mesh, compression: str | None):
    ours, theirs = tmp_path / "ours.vtu", tmp_path / "theirs.vtu"
    write_vtu(ours, mesh, compression)
    meshio.write(theirs, mesh, file_format="vtu", binary=True, compression=compression)
    return meshio.read(ours), meshio.read(theirs)


@pytest.mark.parametrize("compression", ["zlib", None])
@pytest.mark.parametrize("points_dim", [3, 2])
def test_reads_back_as_meshio_writes(tmp_path: Path, compression, points_dim) -> None:
    """meshio reads our file exactly as it reads the file its own writer makes."""
    assert_same_mesh(*_read_both(tmp_path, _mixed(points_dim), compression))


def test_names_are_escaped(tmp_path: Path) -> None:
    """A data name with XML's special characters reads back whole (meshio's writer leaves
    the quote unescaped, so its own file of this mesh does not read back)."""
    mesh = _mixed()
    name = "flag <&\"'>"
    mesh.point_data[name] = mesh.point_data.pop("flag")
    write_vtu(tmp_path / "odd.vtu", mesh, "zlib")
    back = meshio.read(tmp_path / "odd.vtu")
    np.testing.assert_array_equal(back.point_data[name], np.arange(20))


def test_the_streaming_reader_reads_it_as_meshio_does(tmp_path: Path) -> None:
    path = tmp_path / "ours.vtu"
    write_vtu(path, _mixed(), "zlib")
    fast = read_vtu(path)
    ref = model_from_meshio(meshio.read(path), source=str(path), file_format="vtu")
    np.testing.assert_array_equal(fast.points, ref.points)
    for a, b in zip(fast.cells, ref.cells, strict=True):
        assert a.type == b.type
        np.testing.assert_array_equal(a.data, b.data)


def test_compressed_arrays_follow_the_published_layout(tmp_path: Path) -> None:
    """Decoded by hand: header, per-block deflate streams, sizes (VTK File Formats)."""
    k = 23
    model = tet_grid(k, k, k)                     # 12,167 points: several blocks per array
    mesh = meshio.Mesh(model.points, [(b.type, b.data) for b in model.cells])
    path = tmp_path / "grid.vtu"
    write_vtu(path, mesh, "zlib", threads=2)
    text = path.read_text()
    assert 'compressor="vtkZLibDataCompressor"' in text and 'header_type="UInt32"' in text
    block = re.search(r'Name="Points" NumberOfComponents="3" format="binary">\s*(\S+)\s*<',
                      text).group(1)
    head_chars = 4 * -(-3 * 4 // 3)               # base64 of the first three UInt32
    nblocks, size, last = map(int, np.frombuffer(base64.b64decode(block[:head_chars]), "<u4"))
    expected_bytes = model.points.size * 8
    assert size == BLOCK and nblocks == -(-expected_bytes // BLOCK)
    assert last == expected_bytes - (nblocks - 1) * BLOCK
    all_head_chars = 4 * -(-(3 + nblocks) * 4 // 3)
    head = np.frombuffer(base64.b64decode(block[:all_head_chars]), "<u4")
    data = base64.b64decode(block[all_head_chars:])
    assert head[3:].sum() == len(data)
    raw, at = b"", 0
    for n in head[3:]:
        raw += zlib.decompress(data[at:at + n])
        at += n
    np.testing.assert_array_equal(np.frombuffer(raw, "<f8").reshape(-1, 3), model.points)


def test_threads_do_not_change_the_file(tmp_path: Path) -> None:
    model = scrambled(tet_grid(15, 15, 15), seed=3)
    mesh = meshio.Mesh(model.points, [(b.type, b.data) for b in model.cells])
    write_vtu(tmp_path / "one.vtu", mesh, "zlib", threads=1)
    write_vtu(tmp_path / "two.vtu", mesh, "zlib", threads=2)
    assert (tmp_path / "one.vtu").read_bytes() == (tmp_path / "two.vtu").read_bytes()


@pytest.mark.parametrize("change", ["lzma", "sets", "polygon_object", "complex"])
def test_what_it_does_not_write_is_left_to_meshio(tmp_path: Path, change: str) -> None:
    """Refused before the file is opened: nothing half-written is left behind."""
    mesh = _mixed()
    compression = "zlib"
    if change == "lzma":
        compression = "lzma"
    elif change == "sets":
        mesh.point_sets = {"base": np.array([0, 1])}
    elif change == "polygon_object":
        mesh.cells.append(meshio.CellBlock("polyhedron", [[np.array([0, 1, 2])]]))
    else:
        mesh.point_data["z"] = np.zeros(20, dtype=complex)
    path = tmp_path / "refused.vtu"
    with pytest.raises(NotHandled):
        write_vtu(path, mesh, compression)
    assert not path.exists()


def test_the_door_writes_it_and_keeps_the_data(tmp_path: Path) -> None:
    """Through write_model (read back and compared there) the model survives whole."""
    src = tmp_path / "in.vtu"
    meshio.write(src, _mixed(), file_format="vtu")
    model = read_model(src)
    out = tmp_path / "out.vtu"
    write_model(model, out)
    assert "written by bandwise" in out.read_text()[:300]
    back = read_model(out)
    np.testing.assert_array_equal(back.points, model.points)
    for a, b in zip(back.cells, model.cells, strict=True):
        np.testing.assert_array_equal(a.data, b.data)
    assert back.point_data.keys() == model.point_data.keys()
    assert back.cell_data.keys() == model.cell_data.keys()
