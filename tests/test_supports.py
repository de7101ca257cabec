"""Supports: selectors, DOF choices, the TOML support file, errors, and real mesh files.

Expected node counts come from the structured grids' construction (a plane
of an n x m grid holds n*m nodes) and from the shared real meshes, whose sets
and physical groups are listed in their README (gmsh physical names in
``field_data``, Abaqus node sets as point sets).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import shared_path

from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.supports import (
    apply_supports,
    check_dofs,
    parse_support,
    read_support_file,
    set_names,
)
from bandwise.core.dofs import dof_layout
from bandwise.core.errors import InputError
from bandwise.core.generate import hex_grid, quad_grid
from bandwise.formats import read_model


def _held(model, texts, **opts):
    layout = dof_layout(model, **opts)
    return apply_supports(model, layout, [parse_support(t) for t in texts])


def test_selectors_pick_the_expected_nodes() -> None:
    model = hex_grid(4, 3, 2)                       # 24 nodes, x = 0..3, y = 0..2, z = 0..1
    assert _held(model, ["plane x=0:ux"]).applied[0].nodes.size == 6
    assert _held(model, ["plane z=1:uz"]).applied[0].nodes.size == 12
    assert _held(model, ["plane y=2.0000001 tol=1e-3:uy"]).applied[0].nodes.size == 8
    assert _held(model, ["box 0,0,0 1,2,0:pinned"]).applied[0].nodes.size == 6
    near = _held(model, ["near 2.9,0.1,0.2:fixed"]).applied[0]
    assert near.nodes.tolist() == [3] and near.n_dofs == 3
    assert _held(model, ["node 1,24:uz"]).applied[0].nodes.tolist() == [0, 23]


def test_dof_choices() -> None:
    model = hex_grid(2, 2, 2)
    fixed = _held(model, ["node 1:fixed", "node 2:pinned", "node 3:uy,uz", "node 4:uz ux"])
    assert fixed.fixed[:4].tolist() == [7, 7, 6, 5]
    assert fixed.n_fixed_dofs == 3 + 3 + 2 + 2 and fixed.n_supported_nodes == 4
    assert check_dofs("UX, uz") == "ux uz"
    # fixed holds every DOF the node carries: 3 for a plane frame node (ux uy rz)
    from bandwise.core.generate import line_frame

    frame = line_frame(np.array([[0.0, 0], [1, 0]]), np.array([[0, 1]]))
    held = _held(frame, ["node 1:fixed", "node 2:pinned"])
    assert held.applied[0].n_dofs == 3 and held.applied[1].n_dofs == 2


@pytest.mark.parametrize("text, words", [
    ("plane x=0:uq", "unknown DOF name 'uq'"),
    ("plane x=0", "expected SELECTOR:DOFS"),
    ("plane w=0:ux", "plane needs"),
    ("box 0,0,0:ux", "two corners"),
    ("near 1,a,0:ux", "near needs 3 numbers"),
    ("node x:ux", "node needs labels"),
    ("plane x=0:fixed,ux", "stands alone"),
    ("plane x=0:", "no DOFs given"),
])
def test_syntax_errors_are_one_line_input_errors(text: str, words: str) -> None:
    with pytest.raises(InputError, match=words) as err:
        parse_support(text)
    assert "\n" not in str(err.value)


def test_application_errors() -> None:
    model = quad_grid(3, 3)
    model.point_sets = {"EDGE": np.array([0, 1, 2])}
    with pytest.raises(InputError, match="picks no node"):
        _held(model, ["plane x=7:ux"])
    with pytest.raises(InputError, match="named 'WALL'.*EDGE"):
        _held(model, ["WALL:fixed"])
    with pytest.raises(InputError, match="do not carry uz"):
        _held(model, ["EDGE:uz"])                   # a plane mesh has ux uy only
    with pytest.raises(InputError, match="no node with 1-based node position 99"):
        _held(model, ["node 99:ux"])
    model.points = np.vstack([model.points, [[5.0, 5.0, 0.0]]])   # an orphan node
    with pytest.raises(InputError, match="belong to no element"):
        _held(model, ["near 5,5,0:ux"])
    with pytest.raises(InputError, match="pinned"):
        _held(quad_grid(2, 2), ["node 1:pinned"], physics="scalar")
    with pytest.raises(InputError, match="no standard names"):
        _held(quad_grid(2, 2), ["node 1:fixed"], dofs_per_node=5)


def test_support_file_round_trip(tmp_path) -> None:
    text = """
# bracket supports
[[support]]
set = "EDGE"
dofs = "fixed"

[[support]]
plane = "y=2"
tol = 1e-3
dofs = ["uy"]

[[support]]
box = [[0, 0, 0], [2, 0, 0]]
dofs = "pinned"

[[support]]
near = [2, 2]
dofs = "ux uy"
label = "corner"

[[support]]
node = [5]
dofs = "ux"
"""
    path = tmp_path / "bracket.toml"
    path.write_text(text)
    supports = read_support_file(path)
    assert [s.kind for s in supports] == ["set", "plane", "box", "near", "node"]
    assert supports[1].tol == 1e-3 and supports[1].dofs == "uy"
    assert supports[3].target == (2.0, 2.0, 0.0) and "corner" in supports[3].origin
    model = quad_grid(3, 3)
    model.point_sets = {"EDGE": np.array([0, 3, 6])}
    held = apply_supports(model, dof_layout(model), supports)
    assert [a.nodes.size for a in held.applied] == [3, 3, 3, 1, 1]


@pytest.mark.parametrize("text, words", [
    ("[[support]]\nset = 'A'\ndofs = \n", "line 3, column"),
    ("[[support]]\nset = 'A'\n", "'dofs' is missing"),
    ("[[support]]\nset = 'A'\nplane = 'x=0'\ndofs = 'ux'\n", "exactly one of"),
    ("[[support]]\nwhere = 'A'\ndofs = 'ux'\n", "unknown key 'where'"),
    ("[job]\nx = 1\n", "unknown top-level key 'job'"),
    ("", "no \\[\\[support\\]\\] table"),
])
def test_support_file_errors(tmp_path, text: str, words: str) -> None:
    path = tmp_path / "s.toml"
    path.write_text(text)
    with pytest.raises(InputError, match=words) as err:
        read_support_file(path)
    assert "\n" not in str(err.value)
    with pytest.raises(InputError, match="cannot read"):
        read_support_file(tmp_path / "none.toml")


def test_gmsh_physical_groups_of_a_real_file() -> None:
    # box.msh (scikit-fem examples, MSH 2.2): tetra 'all' and triangle groups
    # 'front', 'back', 'top' named in field_data (see the shared README)
    model = read_model(shared_path("meshes-real", "scikit-fem", "box.msh"))
    assert {"front", "back", "top", "all"} <= set(set_names(model))
    layout = dof_layout(model)
    free = zero_energy_modes(model, layout)
    assert free.total == 6                          # a free solid
    held = apply_supports(model, layout, [parse_support("front:fixed")])
    assert zero_energy_modes(model, layout, held).total == 0
    # 'top' is the face y = 1; holding uz there leaves translations along x and y, the
    # rotation about z, and the rotation about an x axis lying in that face
    held = apply_supports(model, layout, [parse_support("top:uz")])
    modes = zero_energy_modes(model, layout, held).modes()
    assert len(modes) == 4
    words = [m.description for m in modes]
    assert "translation along x of part 1" in words and "translation along y of part 1" in words
    assert any(w.startswith("rotation about the axis through (") and ", 1, " in w
               and w.endswith("along x of part 1") for w in words)


def test_gmsh41_cell_sets_and_abaqus_node_sets() -> None:
    # insulated-4.1.msh (meshio test data): cell sets 'wire', 'insulation', 'convection'
    model = read_model(shared_path("meshes-real", "meshio", "insulated-4.1.msh"))
    layout = dof_layout(model, physics="scalar")
    held = apply_supports(model, layout, [parse_support("convection:t")])
    assert held.applied[0].nodes.size > 0
    assert zero_energy_modes(model, layout, held).total == 0
    # abaqus_tet.inp (sfepy): node sets NS1, NS2 as point sets
    model = read_model(shared_path("meshes-real", "sfepy", "abaqus_tet.inp"))
    held = apply_supports(model, dof_layout(model), [parse_support("NS1:pinned")])
    assert held.applied[0].nodes.size == model.point_sets["NS1"].size


# --------------------------------------------------------------------------- command line


def _write_plate(tmp_path):
    """A small plane plate (the gusset of our demo, coarse) as a gmsh file."""
    from bandwise.formats import write_model

    model = quad_grid(5, 3, 10.0, 10.0)
    path = tmp_path / "plate.msh"
    write_model(model, path)
    return path


def test_check_reports_free_modes_without_supports(runner, cli_app, tmp_path) -> None:
    import json

    path = _write_plate(tmp_path)
    result = runner.invoke(cli_app, ["check", str(path), "--json"])
    assert result.exit_code == 0, result.stderr
    mesh = json.loads(result.stdout)["meshes"][0]
    assert mesh["zero_energy_modes"]["total"] == 3          # a free plane body
    assert mesh["zero_energy_modes"]["per_part"][0]["modes"] == 3
    assert mesh["supports"] == [] and len(mesh["suggested_supports"]) >= 2
    assert mesh["equations"]["equations"] == mesh["dofs"]["total"] == 30
    assert "nodes" in mesh and "current_numbering" in mesh   # existing keys untouched
    text = runner.invoke(cli_app, ["check", str(path)]).stdout
    assert "Supports and zero-energy modes" in text and "no supports given" in text
    assert "zero-energy modes: 3 (3 rigid, 0 mechanism" in text


def test_check_with_supports_stiffness_check_and_dof_map(runner, cli_app, tmp_path) -> None:
    import csv
    import json

    path = _write_plate(tmp_path)
    dof_map = tmp_path / "dofs.csv"
    result = runner.invoke(cli_app, ["check", str(path), "--support", "plane x=0:fixed",
                                     "--stiffness-check", "--dof-map", str(dof_map), "--json"])
    assert result.exit_code == 0, result.stderr
    mesh = json.loads(result.stdout)["meshes"][0]
    assert mesh["zero_energy_modes"]["total"] == 0
    assert mesh["supports"][0]["nodes"] == 3 and mesh["supports"][0]["held_dofs"] == 6
    assert mesh["equations"]["fixed_dofs"] == 6 and mesh["equations"]["equations"] == 24
    assert mesh["stiffness_check"]["agrees"] is True
    rows = list(csv.reader(dof_map.open()))
    assert rows[0] == ["node", "dof", "equation"] and len(rows) == 31
    assert sum(r[2] == "fixed" for r in rows[1:]) == 6


def test_supports_that_leave_modes_fail_the_gate(runner, cli_app, tmp_path) -> None:
    path = _write_plate(tmp_path)
    result = runner.invoke(cli_app, ["check", str(path), "--support", "node 1:pinned"])
    assert result.exit_code == 1                              # one rotation left
    assert "supports.free_modes" in result.stdout
    assert "rotation about the axis through node 1 along z of part 1" in result.stdout
    assert 'suggested holds (not applied): --support "node' in result.stdout


def test_support_file_option(runner, cli_app, tmp_path) -> None:
    path = _write_plate(tmp_path)
    spec = tmp_path / "plate.toml"
    spec.write_text('[[support]]\nplane = "x=0"\ndofs = "pinned"\n')
    result = runner.invoke(cli_app, ["check", str(path), "--supports", str(spec)])
    assert result.exit_code == 0, result.stderr
    assert "zero-energy modes: 0" in result.stdout


@pytest.mark.parametrize("args, words", [
    (["--support", "plane x=0:uq"], "unknown DOF name 'uq'"),
    (["--support", "WALL:fixed"], "named 'WALL'"),
    (["--support", "plane x=99:ux"], "picks no node"),
    (["--support", "plane x=0:uz"], "do not carry uz"),
    (["--supports", "BAD_TOML"], "TOML syntax error"),
])
def test_bad_support_options_exit_2_with_one_line(runner, cli_app, tmp_path, args, words) -> None:
    path = _write_plate(tmp_path)
    (tmp_path / "bad.toml").write_text("[[support]\n")
    args = [str(tmp_path / "bad.toml") if a == "BAD_TOML" else a for a in args]
    result = runner.invoke(cli_app, ["check", str(path), *args])
    assert result.exit_code == 2
    assert words in result.stderr and len(result.stderr.strip().splitlines()) == 1
    assert "Traceback" not in result.stderr


def test_dof_map_takes_one_mesh(runner, cli_app, tmp_path) -> None:
    path = _write_plate(tmp_path)
    result = runner.invoke(cli_app, ["check", str(path), str(path), "--dof-map",
                                     str(tmp_path / "x.csv")])
    assert result.exit_code == 2 and "(--dof-map) takes one mesh file" in result.stderr
    assert not (tmp_path / "x.csv").exists()
