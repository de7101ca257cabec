"""Every private meshio name bandwise uses, pinned against the installed meshio.

bandwise reaches meshio's private modules in one place,
:mod:`bandwise.formats.compat`; these tests import each listed name and
check the behaviour bandwise relies on, so that a meshio upgrade that
moves or changes one fails here, loudly, rather than misreading files.
The source is the installed meshio itself; the layout facts (gmsh 4.1
sections) follow the gmsh reference manual, "MSH file format" (C. Geuzaine
and J.-F. Remacle).
"""

from __future__ import annotations

import ast
import io
from pathlib import Path

import meshio
import numpy as np
import pytest

import bandwise
from bandwise.formats import compat

PACKAGE = Path(bandwise.__file__).resolve().parent


def test_the_installed_meshio_is_the_one_checked():
    assert meshio.__version__ == compat.TESTED_MESHIO


@pytest.mark.parametrize("module,name", sorted(compat.PRIVATE_NAMES))
def test_each_private_name_exists(module, name):
    value = compat.private(module, name)
    assert value is not None


def test_unlisted_names_are_refused():
    with pytest.raises(KeyError):
        compat.private("meshio._helpers", "register_format")


def test_private_meshio_names_live_in_compat_only():
    """No other module of bandwise names a private meshio module or attribute."""
    offenders = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "compat.py":
            continue
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("meshio"):
                names = [node.module] + [a.name for a in node.names]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names if a.name.startswith("meshio")]
            elif isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) \
                    and node.value.id == "meshio":
                names = [node.attr]
            if any(part.startswith("_") for n in names for part in n.split(".")):
                offenders.append(f"{path.relative_to(PACKAGE)}:{node.lineno}")
    assert offenders == []


def test_reader_and_writer_names_cover_the_registry():
    from bandwise.formats.registry import FORMATS

    readers, writers = set(compat.reader_names()), set(compat.writer_names())
    for fmt in FORMATS.values():
        assert fmt.meshio_name in readers, fmt.name
    for name in ("gmsh", "gmsh22", "vtu", "vtk", "vtk42", "xdmf", "med", "exodus", "flac3d",
                 "abaqus", "nastran"):
        assert name in writers


def test_cell_type_tables_are_keyed_by_meshio_cell_types():
    for name in ("gmsh", "vtu", "xdmf", "med", "exodus", "abaqus", "nastran", "flac3d"):
        held = compat.cell_types_held(name)
        assert held is not None and {"tetra", "hexahedron"} <= held, name


def test_vtk_tables_give_types_orders_and_sizes():
    types, order, sizes = compat.vtk_cell_tables()
    assert types[10] == "tetra" and types[12] == "hexahedron" and types[13] == "wedge"
    assert sizes["tetra10"] == 10
    # meshio's wedge is gmsh's prism: the VTK wedge's base is mirrored
    assert list(order(13)) == [0, 2, 1, 3, 5, 4] and order(10) is None


def test_gmsh_node_hook_sees_the_tags_and_meshio_still_drops_them(tmp_path):
    """meshio's gmsh 4.1 reader returns nodes in file order; the hook keeps their tags."""
    text = ("$MeshFormat\n4.1 0 8\n$EndMeshFormat\n$Nodes\n1 3 1 3\n2 1 0 3\n3\n1\n2\n"
            "0 0 0\n1 0 0\n0 1 0\n$EndNodes\n$Elements\n1 1 1 1\n2 1 2 1\n1 3 1 2\n"
            "$EndElements\n")
    path = tmp_path / "tri.msh"
    path.write_text(text)
    seen: list[np.ndarray] = []
    store: dict[str, np.ndarray] = {}
    with compat.gmsh_node_tags(seen.append, store):
        mesh = meshio.read(path)
    assert store["tags"].tolist() == [3, 1, 2] and seen[0].tolist() == [3, 1, 2]
    np.testing.assert_allclose(mesh.points[0], [0, 0, 0])       # file order, not tag order
    # and the hook is undone afterwards
    assert meshio.read(path).points.shape == (3, 3) and len(seen) == 1


def test_gmsh_section_writers_write_the_4_1_layout():
    writers = compat.gmsh_section_writers()
    fh = io.BytesIO()
    writers["physical_names"](fh, {"wall": np.array([7, 2])})
    assert fh.getvalue() == b'$PhysicalNames\n1\n2 7 "wall"\n$EndPhysicalNames\n'
    fh = io.BytesIO()
    cells = [meshio.CellBlock("triangle", np.array([[0, 1, 2]]))]
    tags = {"gmsh:physical": [np.array([7])], "gmsh:geometrical": [np.array([4])]}
    writers["elements"](fh, cells, tags, False)
    # blocks, elements, min tag, max tag; then dim, entity, element type (2: 3-node triangle)
    assert fh.getvalue().split(b"\n")[:3] == [b"$Elements", b"1 1 1 1", b"2 4 2 1"]


def test_flac3d_reader_gives_group_members_over_all_cells(tmp_path):
    """meshio's FLAC3D reader: members of a group in the second block count from the first."""
    points = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 1]], dtype=float)
    mesh = meshio.Mesh(points, [("tetra", np.array([[0, 1, 2, 3]])),
                                ("pyramid", np.array([[0, 1, 4, 2, 3]]))],
                       cell_sets={"TIP": [np.zeros(0, int), np.array([0])]})
    path = tmp_path / "two.f3grid"
    meshio.write(path, mesh)
    back = meshio.read(path)
    members = [np.asarray(a).tolist() for a in back.cell_sets["zone:TIP:1"]]
    assert compat.FLAC3D_SET_INDICES_GLOBAL == (members == [[], [1]])
