"""Reading meshes and ``bandwise check``: figures, JSON, and bad input.

Bad input must give one line naming the file and the problem, exit code 2,
no traceback, and leave the input untouched.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pytest
from conftest import MESHES

from bandwise.core.model import CellBlock, Model
from bandwise.formats import read_model


def sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def run(runner, app, *args):
    result = runner.invoke(app, list(map(str, args)))
    return result.exit_code, result.stdout, result.stderr


# Figures of the demo meshes, fixed by their construction in
# scripts/make_demo_meshes.py (nodes and cells counted from the geometry:
# bracket: 25x9x13 grid less the cut-out; gusset: 61x31 grid less the hole).
DEMO = {
    "bracket.msh": {"nodes": 1305, "elements": {"tetra": 5184, "triangle": 432}, "dofs": 3915,
                    "dimension": 3},
    "gusset.vtu": {"nodes": 1854, "elements": {"triangle": 3500}, "dofs": 3708, "dimension": 2},
    "frame.inp": {"nodes": 96, "elements": {"line": 104}, "dofs": 576, "dimension": 1},
}


@pytest.mark.parametrize("name", sorted(DEMO))
def test_check_json_on_demo_meshes(runner, cli_app, name):
    path = MESHES / name
    before = sha(path)
    code, out, err = run(runner, cli_app, "check", path, "--json")
    assert code == 0, err
    doc = json.loads(out)
    mesh = doc["meshes"][0]
    want = DEMO[name]
    assert mesh["nodes"] == want["nodes"]
    assert mesh["elements"] == want["elements"]
    assert mesh["dofs"]["total"] == want["dofs"]
    assert mesh["dimension"] == want["dimension"]
    assert mesh["parts"] == 1 and mesh["orphan_nodes"] == 0
    cur = mesh["current_numbering"]
    assert cur["dofs"]["n_rows"] == want["dofs"]
    assert "qualified engineer" in doc["caution"]
    assert sha(path) == before


def test_demo_frame_figures_follow_the_space_frame_rule(runner, cli_app):
    # 18 joints and 26 members (no ground beams), each split into 4 elements:
    # 18 + 26*3 = 96 nodes and 104 line elements, 6 DOFs at every node; a
    # uniform d gives b_dof = d*b + d - 1 (DESIGN notes, from the definition).
    _, out, _ = run(runner, cli_app, "check", MESHES / "frame.inp", "--json")
    mesh = json.loads(out)["meshes"][0]
    assert mesh["dofs"]["nodes_by_signature"] == {"ux uy uz rx ry rz": 96}
    node, dof = mesh["current_numbering"]["nodes"], mesh["current_numbering"]["dofs"]
    assert dof["bandwidth"] == 6 * node["bandwidth"] + 5


def test_check_text_output_has_units(runner, cli_app):
    code, out, _ = run(runner, cli_app, "check", MESHES / "bracket.msh")
    assert code == 0
    for word in ("bandwidth", "profile", "wavefront", "MiB", "DOF level", "Caution"):
        assert word in out


def test_dofs_per_node_and_physics_overrides(runner, cli_app):
    _, out, _ = run(runner, cli_app, "check", MESHES / "gusset.vtu", "--json", "--physics", "scalar")
    assert json.loads(out)["meshes"][0]["dofs"]["total"] == 1854
    _, out, _ = run(runner, cli_app, "check", MESHES / "gusset.vtu", "--json", "--dofs-per-node", "3")
    assert json.loads(out)["meshes"][0]["dofs"]["total"] == 3 * 1854


def _write_text(path, text):
    path.write_text(text)
    return path


GOOD_MSH = MESHES / "bracket.msh"


def bad_files(tmp_path):
    """Broken inputs, each with a word its message must contain."""
    cases = []
    cases.append((tmp_path / "missing.msh", "no such file"))
    cases.append((_write_text(tmp_path / "part.xyz", "1 2 3\n"), "unknown file extension"))
    cases.append((_write_text(tmp_path / "empty.vtk", ""), "empty"))
    data = (MESHES / "frame.inp").read_bytes()
    trunc = tmp_path / "trunc.inp"
    trunc.write_bytes(data[: len(data) // 3])
    cases.append((trunc, "trunc.inp"))
    cases.append((_write_text(tmp_path / "garbage.msh", "$MeshFormat\nnot a mesh\n"), "garbage.msh"))
    import meshio

    model = Model(points=np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]]),
                  cells=[CellBlock("triangle", np.array([[0, 1, 2]]))])
    nan_points = model.points.copy()
    nan_points[1, 0] = np.nan
    meshio.write(tmp_path / "nan.vtk", meshio.Mesh(nan_points, [("triangle", [[0, 1, 2]])]),
                 binary=False)
    cases.append((tmp_path / "nan.vtk", "non-finite"))
    bad = Model(points=model.points, cells=[CellBlock("triangle", np.array([[0, 1, 7]]))])
    meshio.write(tmp_path / "dangling.vtk", meshio.Mesh(bad.points, [("triangle", bad.cells[0].data)]))
    cases.append((tmp_path / "dangling.vtk", "refers to node"))
    # nodes only: like a bulk-data deck whose elements sit in an INCLUDE file
    grids = "BEGIN BULK\nGRID           1       0      0.      0.      0.\n" \
            "GRID           2       0      1.      0.      0.\nENDDATA\n"
    cases.append((_write_text(tmp_path / "nodes_only.bdf", grids), "no elements"))
    return cases


def test_bad_input_gives_one_line_and_exit_2(runner, cli_app, tmp_path):
    for path, word in bad_files(tmp_path):
        before = sha(path) if path.exists() else None
        code, out, err = run(runner, cli_app, "check", path)
        assert code == 2, (path, out, err)
        lines = [ln for ln in err.splitlines() if ln.strip()]
        assert len(lines) == 1, (path, err)
        assert "Traceback" not in err and word in lines[0], (path, lines[0])
        assert str(path.name) in lines[0]
        assert out == ""
        if before is not None:
            assert sha(path) == before


def test_format_override_and_unknown_format(runner, cli_app, tmp_path):
    copy = tmp_path / "bracket.data"
    copy.write_bytes(GOOD_MSH.read_bytes())
    code, out, _ = run(runner, cli_app, "check", copy, "--format", "gmsh", "--json")
    assert code == 0 and json.loads(out)["meshes"][0]["nodes"] == 1305
    code, _, err = run(runner, cli_app, "check", copy, "--format", "nosuch")
    assert code == 2 and "unknown format" in err


def test_library_read_keeps_physical_names_and_sets():
    bracket = read_model(MESHES / "bracket.msh")
    assert set(bracket.field_data) == {"bracket_body", "mount_face", "load_face"}
    frame = read_model(MESHES / "frame.inp")
    assert frame.point_sets["column_bases"].size == 6


def test_python_m_entry_point():
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-m", "bandwise", "--version"], capture_output=True,
                         text=True, check=True)
    assert out.stdout.startswith("bandwise ")


def test_atomic_text_output_gets_ordinary_permissions(tmp_path):
    # A temporary file is created 0600; the renamed output must look like any
    # file the user's umask allows (common practice of atomic writers).
    import os

    from bandwise.formats.atomic import write_text_atomic

    mask = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "map.csv", "a,b\n")
    finally:
        os.umask(mask)
    assert (tmp_path / "map.csv").stat().st_mode & 0o777 == 0o644
    assert [p.name for p in tmp_path.iterdir()] == ["map.csv"]


def test_only_vertex_cells_is_refused_naming_the_file(runner, cli_app, tmp_path):
    # Point masses alone couple no node: there is no stiffness matrix to size.
    import meshio

    path = tmp_path / "points_only.vtu"
    meshio.write(path, meshio.Mesh(np.array([[0.0, 0, 0], [1, 0, 0]]),
                                   [("vertex", np.array([[0], [1]]))]))
    code, out, err = run(runner, cli_app, "check", path)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "points_only.vtu" in err and "vertex" in err


@pytest.mark.parametrize("cell_type, width", [("quad", 0), ("tetra", 3), ("tetra10", 4)])
def test_cells_of_the_wrong_width_are_a_damaged_file(cell_type, width):
    # Found by fuzzing: a gmsh file cut inside its element section gave meshio a
    # quad block of zero nodes per cell, which then failed deep in the checks.
    # A quad has 4 nodes, a tetra 4, a tetra10 10 (meshio cell type names, the
    # VTK cell types; common practice).
    from bandwise.core.errors import MeshReadError
    from bandwise.formats.meshio_io import validate_model

    model = Model(points=np.zeros((5, 3)),
                  cells=[CellBlock(cell_type, np.zeros((3, width), dtype=np.int64))])
    with pytest.raises(MeshReadError, match=rf"\({cell_type}\) has {width} nodes per cell"):
        validate_model(model)
