"""The checks over real mesh files from public repositories (the shared reference data).

Each file that meshio reads is checked; facts asserted come from the
inventory that comes with the files (``inventory.json``: unreferenced
points) or from what the files are (sfepy's ``hanging_nodes.mesh`` is a quad
mesh with four hanging nodes, visible in its node list; the PyLith fault
test mesh has its nodes split along the fault; the pyNastran contact model
holds two separate bodies).
"""

from __future__ import annotations

import contextlib
import io
import json

import pytest

from bandwise.algorithms.checks import run_checks
from bandwise.core.errors import MeshReadError
from bandwise.formats.meshio_io import model_from_meshio, read_model


def _entries():
    from conftest import SHARED

    path = SHARED / "meshes-real" / "inventory.json"
    if not path.exists():
        return []
    files = json.loads(path.read_text())["files"]
    return [f for f in files if f["role"] == "mesh" and (f.get("meshio_5_3_5") or {}).get("reads")]


def _model(entry):
    from conftest import shared_path

    path = shared_path("meshes-real", entry["file"])
    fmt = entry["meshio_5_3_5"].get("file_format_arg")
    try:
        return read_model(path, fmt)
    except MeshReadError:  # e.g. nodes but no cells: checked through the adapter alone
        import meshio

        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            mesh = meshio.read(path, file_format=fmt)
        return model_from_meshio(mesh, str(path), fmt or "")


ENTRIES = _entries()


@pytest.mark.parametrize("entry", ENTRIES, ids=[e["file"] for e in ENTRIES])
def test_checks_run_and_count_unreferenced_points(entry):
    if entry["meshio_5_3_5"]["points"] == 0:  # read as empty: refused with a clear message
        with pytest.raises(MeshReadError, match="node"):
            _model(entry)
        return
    model = _model(entry)
    found = {f.code: f for f in run_checks(model)}
    unreferenced = entry["meshio_5_3_5"]["unreferenced_points"]
    orphans = found["nodes.orphan"].count if "nodes.orphan" in found else 0
    marked = found["nodes.point_only"].count if "nodes.point_only" in found else 0
    # nodes in no cell at all are orphans, or marked when a node set lists them
    assert orphans <= unreferenced <= orphans + marked


def _found(name):
    entry = next((e for e in ENTRIES if e["file"] == name), None)
    if entry is None:
        from conftest import shared_path

        shared_path("meshes-real", name)  # skips (or fails under CI) when missing
        pytest.skip(f"{name} is not in the inventory")
    return {f.code: f for f in run_checks(_model(entry))}


def test_hanging_nodes_mesh():
    found = _found("sfepy/hanging_nodes.mesh")
    assert found["nodes.hanging"].node_ids == (13, 15, 17, 19)
    assert found["joints.nonconforming"].node_ids == (3, 7, 11)
    assert "parts.disconnected" not in found


def test_nodes_without_cells_are_all_orphans():
    found = _found("pyNastran/static_solid_shell_bar.bdf")  # elements are in an INCLUDE file
    assert found["mesh.no_elements"].severity == "error"
    assert found["nodes.orphan"].count == 25


def test_split_fault_nodes_are_an_unmerged_seam():
    found = _found("pylith/hex8_vertex_t10.vtu")
    assert found["parts.disconnected"].count == 2
    assert found["nodes.coincident_seam"].count == 4
    assert found["nodes.coincident_seam"].details[0]["parts_after_merge"] == 1


def test_contact_model_has_two_bodies():
    assert _found("pyNastran/contact.bdf")["parts.disconnected"].count == 2


@pytest.mark.parametrize("name", ["sfepy/wheelset.vtk", "sfepy/cube_cylinder.mesh",
                                  "xrd_simulator/readme_example_polycrystal.xdmf"])
def test_larger_tet_meshes_have_no_errors(name):
    found = _found(name)
    assert not [f for f in found.values() if f.severity == "error"]
    assert found["facets.free_faces"].count > 0
