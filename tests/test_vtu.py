"""The streaming VTU reader builds the same model as meshio's VTU reader.

Reference: meshio (Schlömer et al., meshio 5.3) ``meshio.read`` followed by
``model_from_meshio``; layout per Kitware, "VTK File Formats" (VTK User's
Guide, XML file formats: binary DataArray header, compressed-block header
``[nblocks, blocksize, last_blocksize, compressed sizes...]``).
"""

from __future__ import annotations

import base64
import zlib
from pathlib import Path

import meshio
import numpy as np
import pytest

from bandwise.core.errors import MeshReadError
from bandwise.formats.meshio_io import model_from_meshio, read_model
from bandwise.formats.vtu import NotHandled, read_vtu
from tests.conftest import assert_same_mesh, shared_path

HERE = Path(__file__).resolve().parent.parent


def _same(path: Path) -> None:
    fast = read_vtu(path)
    ref = model_from_meshio(meshio.read(path), source=str(path), file_format="vtu")
    assert_same_mesh(fast, ref)
    assert all(b.data.dtype == np.int64 for b in fast.cells)
    assert not ref.point_sets and not ref.cell_sets  # meshio's VTU reader derives no sets


def test_gusset_same_as_meshio():
    _same(HERE / "meshes" / "gusset.vtu")


@pytest.mark.parametrize("name", ["pylith/hex8_vertex_t10.vtu",
                                  "scikit-fem/backward-facing_step.vtu"])
def test_shared_meshes_same_as_meshio(name):
    path = shared_path("meshes-real", *name.split("/"))
    try:
        _same(path)
    except NotHandled:
        # files the fast path leaves to meshio must still read through read_model
        assert read_model(path).n_nodes == len(meshio.read(path).points)


def _mixed_mesh(int_type) -> meshio.Mesh:
    rng = np.random.default_rng(0)
    pts = rng.random((20, 3))
    cells = [("triangle", np.array([[0, 1, 2], [1, 2, 3]], int_type)),
             ("quad", np.array([[0, 1, 2, 3]], int_type)),
             ("triangle6", np.array([[0, 1, 2, 3, 4, 5]], int_type)),
             ("wedge", np.array([[0, 1, 2, 3, 4, 5]], int_type)),  # meshio reorders wedges
             ("hexahedron20", np.arange(20, dtype=int_type).reshape(1, 20)),
             ("tetra10", np.arange(10, dtype=int_type).reshape(1, 10))]
    ncell = [len(c[1]) for c in cells]
    return meshio.Mesh(pts, cells,
                       point_data={"t": np.arange(20.0), "u": rng.random((20, 3)),
                                   "i": np.arange(20, dtype=np.int32)},
                       cell_data={"mat": [np.full(n, j, np.int32) for j, n in enumerate(ncell)]},
                       field_data={"f": np.array([1.5, 2.5])})


@pytest.mark.parametrize("int_type", [np.int32, np.int64])
@pytest.mark.parametrize("options", [{}, {"compression": None}, {"header_type": "UInt64"},
                                     {"compression": None, "header_type": "UInt64"}])
def test_meshio_written_variants(tmp_path, int_type, options):
    path = tmp_path / "m.vtu"
    meshio.write(path, _mixed_mesh(int_type), **options)
    _same(path)


@pytest.mark.parametrize("options", [{"binary": False}, {"compression": "lzma"}])
def test_left_to_meshio(tmp_path, options):
    """ascii and lzma files are read by meshio: same model through read_model."""
    path = tmp_path / "m.vtu"
    meshio.write(path, _mixed_mesh(np.int64), **options)
    with pytest.raises(NotHandled):
        read_vtu(path)
    ref = model_from_meshio(meshio.read(path))
    got = read_model(path)
    np.testing.assert_array_equal(got.points, ref.points)
    assert [b.type for b in got.cells] == [b.type for b in ref.cells]


def _hand_written(compressed: bool) -> bytes:
    """A two-triangle VTU written by hand, header and data encoded apart (as VTK does)."""
    pts = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0]], np.float32)
    arrays = {"Points": pts, "connectivity": np.array([0, 1, 2, 1, 3, 2], np.int64),
              "offsets": np.array([3, 6], np.int64), "types": np.array([5, 5], np.uint8)}

    def enc(a):
        raw = a.tobytes()
        if not compressed:
            return (base64.b64encode(np.uint32(len(raw)).tobytes())
                    + base64.b64encode(raw)).decode()
        bs = 16  # small blocks: several blocks per array
        parts = [zlib.compress(raw[i:i + bs]) for i in range(0, len(raw), bs)]
        last = len(raw) - bs * (len(parts) - 1)
        head = np.array([len(parts), bs, last if last != bs else 0]
                        + [len(p) for p in parts], np.uint32)
        return (base64.b64encode(head.tobytes()) + base64.b64encode(b"".join(parts))).decode()

    def da(name, a, nc=""):
        t = {"float32": "Float32", "int64": "Int64", "uint8": "UInt8"}[a.dtype.name]
        return f'<DataArray type="{t}" Name="{name}" {nc} format="binary">\n{enc(a)}\n</DataArray>'

    comp = ' compressor="vtkZLibDataCompressor"' if compressed else ""
    return (f'<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid" version="1.0" '
            f'byte_order="LittleEndian" header_type="UInt32"{comp}>\n<UnstructuredGrid>\n'
            f'<Piece NumberOfPoints="4" NumberOfCells="2">\n<Points>\n'
            f'{da("Points", pts, "NumberOfComponents=" + chr(34) + "3" + chr(34))}\n</Points>\n'
            f'<Cells>\n{da("connectivity", arrays["connectivity"])}\n'
            f'{da("offsets", arrays["offsets"])}\n{da("types", arrays["types"])}\n</Cells>\n'
            f'</Piece>\n</UnstructuredGrid>\n</VTKFile>\n').encode()


@pytest.mark.parametrize("compressed", [False, True])
def test_hand_written_vtk_layout(tmp_path, compressed):
    path = tmp_path / "h.vtu"
    path.write_bytes(_hand_written(compressed))
    _same(path)
    m = read_vtu(path)
    np.testing.assert_array_equal(m.cells[0].data, [[0, 1, 2], [1, 3, 2]])


def test_one_cell_type_is_a_view_of_the_connectivity(tmp_path):
    path = tmp_path / "t.vtu"
    meshio.write(path, meshio.Mesh(np.random.default_rng(1).random((4, 3)),
                                   [("tetra", np.array([[0, 1, 2, 3]] * 3, np.int64))]))
    block = read_vtu(path).cells[0].data
    assert block.dtype == np.int64 and block.shape == (3, 4) and block.base is not None


def test_appended_raw_left_to_meshio(tmp_path):
    path = tmp_path / "a.vtu"
    path.write_bytes(_hand_written(False).replace(b'format="binary"', b'format="appended"'))
    with pytest.raises(NotHandled):
        read_vtu(path)


@pytest.mark.parametrize("cut", [0.3, 0.6, 0.9])
def test_truncated_file_is_one_line_error(tmp_path, cut):
    src = HERE / "meshes" / "gusset.vtu"
    data = src.read_bytes()
    path = tmp_path / "cut.vtu"
    path.write_bytes(data[:int(len(data) * cut)])
    with pytest.raises(MeshReadError, match="cut.vtu"):
        read_model(path)


def test_header_claiming_huge_size_allocates_nothing(tmp_path):
    head = base64.b64encode(np.array([1, 1 << 31, 1 << 31, 1 << 30], np.uint32).tobytes())
    text = _hand_written(True).decode().split("\n")
    text[6] = head.decode() + "eJwDAAAAAAE="  # Points: a header far beyond the data
    path = tmp_path / "big.vtu"
    path.write_text("\n".join(text))
    with pytest.raises(NotHandled):
        read_vtu(path)
    with pytest.raises(MeshReadError):
        read_model(path)
