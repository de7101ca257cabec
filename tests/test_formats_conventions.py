"""Node-order conventions per format: cells come out in the order the element checks expect.

References:
- MED's node order against VTK's: gmsh's MED reader, ``med2mshNodeIndex``
  (C. Geuzaine and J.-F. Remacle, Gmsh source ``Geo/GModelIO_MED.cpp``):
  TETRA4 ``0 2 1 3``, PYRA5 ``0 3 2 1 4``, PENTA6 ``0 2 1 3 5 4``, HEXA8
  ``0 3 2 1 4 7 6 5``, TETRA10 ``0 2 1 3 6 5 4 7 8 9``, HEXA20
  ``0 3 2 1 4 7 6 5 11 8 16 10 19 9 18 17 15 12 14 13`` (gmsh node k is MED
  node map[k]); and gmsh's own order of the quadratic cells against VTK's
  (Gmsh reference manual, "Node ordering"; from memory as meshio's gmsh
  tables give it).
- FLAC3D: a zone's first four grid points form a right-handed system
  (Itasca FLAC3D manual, grid file format; from memory, and as meshio's
  FLAC3D writer states it).
- Known volumes: unit tetrahedron 1/6, unit pyramid 1/3, unit prism 1/2,
  unit cube 1 (common practice).
- The valid shared files ``cylinder.med`` (Salome 9.2.2), ``box.med``
  (code_aster) and ``flac3d_mesh_ex.f3grid`` (FLAC3D 6.00): no element of
  theirs is inverted.
"""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
from conftest import shared_path

from bandwise.algorithms.checks import measures, run_checks
from bandwise.algorithms.topology import corner_shape
from bandwise.core.errors import MeshWriteError
from bandwise.core.model import CellBlock, Model
from bandwise.formats import read_model, write_model
from bandwise.formats.conventions import READ_ORDERS, WRITE_ORDERS
from bandwise.formats.registry import FORMATS, writable_names

#: gmsh's med2mshNodeIndex: gmsh node k is MED node MED_TO_GMSH[type][k].
MED_TO_GMSH = {
    "tetra": [0, 2, 1, 3], "pyramid": [0, 3, 2, 1, 4], "wedge": [0, 2, 1, 3, 5, 4],
    "hexahedron": [0, 3, 2, 1, 4, 7, 6, 5],
    "tetra10": [0, 2, 1, 3, 6, 5, 4, 7, 8, 9],
    "hexahedron20": [0, 3, 2, 1, 4, 7, 6, 5, 11, 8, 16, 10, 19, 9, 18, 17, 15, 12, 14, 13],
}
#: meshio (VTK) node k is gmsh node GMSH_TO_MESHIO[type][k] (linear cells: the same order).
GMSH_TO_MESHIO = {
    "tetra10": [0, 1, 2, 3, 4, 5, 6, 7, 9, 8],
    "hexahedron20": [0, 1, 2, 3, 4, 5, 6, 7, 8, 11, 13, 9, 16, 18, 19, 17, 10, 12, 14, 15],
}

#: Unit cells in meshio's order, each of known positive volume.
_CUBE = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]]
UNIT = {
    "tetra": ([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], 1 / 6),
    "pyramid": ([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0.5, 0.5, 1]], 1 / 3),
    "wedge": ([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [0, 1, 1]], 1 / 2),
    "hexahedron": (_CUBE, 1.0),
}


def _quadratic(cell_type: str) -> tuple[list[list[float]], float]:
    """A unit tetra10 / hexahedron20: corners, then mid-edge nodes in meshio's order."""
    from bandwise.formats.conventions import _EDGES

    corners = np.array(UNIT["tetra" if cell_type == "tetra10" else "hexahedron"][0], float)
    mids = [(corners[a] + corners[b]) / 2 for a, b in _EDGES[cell_type]]
    return np.vstack([corners, mids]).tolist(), (1 / 6 if cell_type == "tetra10" else 1.0)


def _cell_model(cell_type: str) -> tuple[Model, float]:
    points, volume = _quadratic(cell_type) if cell_type.endswith(("10", "20")) else UNIT[cell_type]
    n = len(points)
    return Model(points=np.array(points, float),
                 cells=[CellBlock(cell_type, np.arange(n)[None, :])]), volume


def _volume(model: Model) -> float:
    b = model.cells[0]
    measure, _, _ = measures.solid_measures(corner_shape(b.type), model.points, b.data)
    return float(measure[0])


def test_med_orders_are_gmsh_s_tables():
    for cell_type, med_to_gmsh in MED_TO_GMSH.items():
        g2m = GMSH_TO_MESHIO.get(cell_type, list(range(len(med_to_gmsh))))
        want = [med_to_gmsh[k] for k in g2m]
        assert list(READ_ORDERS["med"][cell_type]) == want, cell_type
        # writing undoes reading
        order = np.array(READ_ORDERS["med"][cell_type])
        assert np.array_equal(order[list(WRITE_ORDERS["med"][cell_type])], np.arange(len(order)))


def test_the_unit_cells_are_positive_in_bandwise_order():
    for cell_type in [*UNIT, "tetra10", "hexahedron20"]:
        model, volume = _cell_model(cell_type)
        assert _volume(model) == pytest.approx(volume), cell_type


CASES = [(fmt, t) for fmt in writable_names() for t in ("tetra", "pyramid", "wedge", "hexahedron")]


@pytest.mark.parametrize("fmt,cell_type", CASES)
def test_a_positive_element_stays_positive_through_every_format(fmt, cell_type, tmp_path):
    """Written, read back: the same volume, of the same sign, and no inverted finding."""
    from bandwise.formats.compat import cell_types_held

    model, volume = _cell_model(cell_type)
    path = tmp_path / f"cell{FORMATS[fmt].extensions[0]}"
    held = FORMATS[fmt].cell_types or cell_types_held(fmt)
    if cell_type not in held:                          # refused, with the reason
        with pytest.raises(MeshWriteError, match=f"cannot hold {cell_type}"):
            write_model(model, path, fmt)
        assert not path.exists()
        return
    write_model(model, path, fmt)
    back = read_model(path, fmt)
    assert back.cells_by_type() == {cell_type: 1}
    assert _volume(back) == pytest.approx(volume)
    assert "elements.inverted" not in {f.code for f in run_checks(back)}


@pytest.mark.parametrize("cell_type", ["tetra", "pyramid", "wedge", "hexahedron", "tetra10",
                                       "hexahedron20"])
def test_med_files_hold_the_med_order(cell_type, tmp_path):
    """What bandwise writes to MED, read raw and put in gmsh's order by gmsh's table, is positive."""
    model, volume = _cell_model(cell_type)
    path = tmp_path / "cell.med"
    write_model(model, path)
    raw = meshio.read(path).cells[0].data[0]                 # MED order, as stored
    as_gmsh = raw[MED_TO_GMSH[cell_type]]
    g2m = GMSH_TO_MESHIO.get(cell_type, list(range(len(raw))))
    positioned = Model(points=model.points, cells=[CellBlock(cell_type, as_gmsh[g2m][None, :])])
    assert _volume(positioned) == pytest.approx(volume)
    # and the stored order itself, taken as VTK's, is the mirror image
    mirrored = Model(points=model.points, cells=[CellBlock(cell_type, raw[None, :])])
    assert _volume(mirrored) < 0


def test_flac3d_zones_are_right_handed_in_the_file(tmp_path):
    zones = []
    for cell_type in ("tetra", "pyramid", "wedge", "hexahedron"):
        model, _ = _cell_model(cell_type)
        path = tmp_path / f"{cell_type}.f3grid"
        write_model(model, path)
        for line in path.read_text().splitlines():
            if line.startswith("Z "):
                ids = [int(t) - 1 for t in line.split()[3:]]
                p = model.points[ids[:4]]
                zones.append(np.linalg.det(np.array([p[1] - p[0], p[2] - p[0], p[3] - p[0]])))
    assert len(zones) == 4 and all(d > 0 for d in zones)


@pytest.mark.parametrize("name", ["meshio/cylinder.med", "meshio/box.med",
                                  "meshio/flac3d_mesh_ex.f3grid"])
def test_valid_shared_files_have_no_inverted_element(runner, cli_app, name):
    path = shared_path("meshes-real", *name.split("/"))
    result = runner.invoke(cli_app, ["check", str(path), "--json"])
    assert result.exit_code in (0, 1), result.stderr
    codes = {f["code"] for f in json.loads(result.stdout)["meshes"][0]["findings"]}
    assert "elements.inverted" not in codes and "elements.distorted" not in codes
    model = read_model(path)
    for b in model.cells:
        if b.dimension == 3:
            measure, _, _ = measures.solid_measures(corner_shape(b.type), model.points, b.data)
            assert (measure > 0).all(), b.type


def test_meshio_alone_reads_the_shared_files_mirrored():
    """Without the conventions, every solid of these valid files reads as inverted."""
    for name, types in (("cylinder.med", ("tetra", "pyramid")), ("box.med", ("hexahedron",)),
                        ("flac3d_mesh_ex.f3grid", ("wedge",))):
        mesh = meshio.read(shared_path("meshes-real", "meshio", name))
        for b in mesh.cells:
            if b.type in types:
                measure, _, _ = measures.solid_measures(corner_shape(b.type), mesh.points, b.data)
                assert (measure < 0).all(), (name, b.type)
