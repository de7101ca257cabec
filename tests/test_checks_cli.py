"""``bandwise check``: the findings, the --fail-on gate and its exit codes (0 / 1 / 2)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from bandwise.core.generate import quad_grid
from bandwise.core.model import CellBlock, Model
from bandwise.formats import write_model


def _plates(gap: float = 0.0) -> Model:
    """A bracket of two plates meshed apart, seam at x = 3 (coincident nodes when gap = 0)."""
    a = quad_grid(4, 3)
    right = a.points.copy()
    right[:, 0] += 3.0 + gap
    return Model(points=np.r_[a.points, right],
                 cells=[CellBlock("quad", np.r_[a.cells[0].data, a.cells[0].data + 12])])


@pytest.fixture
def meshes(tmp_path):
    clean = tmp_path / "plate.vtu"
    write_model(quad_grid(4, 3), clean)
    seam = tmp_path / "bracket.vtu"
    write_model(_plates(), seam)
    orphan = tmp_path / "frame.vtu"
    m = quad_grid(4, 3)
    m.points = np.r_[m.points, [[9.0, 9.0, 0.0]]]
    write_model(m, orphan)
    return clean, seam, orphan


def test_clean_mesh_exits_0(runner, cli_app, meshes):
    res = runner.invoke(cli_app, ["check", str(meshes[0])])
    assert res.exit_code == 0, res.stderr
    assert "facets.free_edges" in res.stdout and "error" not in res.stdout.split("Mesh checks")[1]


def test_errors_exit_1_and_are_listed(runner, cli_app, meshes):
    res = runner.invoke(cli_app, ["check", str(meshes[1])])
    assert res.exit_code == 1
    assert "parts.disconnected" in res.stdout and "nodes.coincident_seam" in res.stdout


@pytest.mark.parametrize("fail_on,code", [("error", 0), ("warning", 1), ("never", 0)])
def test_fail_on_sets_the_gate(runner, cli_app, meshes, fail_on, code):
    # the orphan node is a warning: it fails the gate only from --fail-on warning
    res = runner.invoke(cli_app, ["check", str(meshes[2]), "--fail-on", fail_on])
    assert res.exit_code == code, res.stdout


def test_never_lets_errors_through(runner, cli_app, meshes):
    assert runner.invoke(cli_app, ["check", str(meshes[1]), "--fail-on", "never"]).exit_code == 0


def test_several_files_one_summary_line_each(runner, cli_app, meshes):
    res = runner.invoke(cli_app, ["check", *map(str, meshes)])
    assert res.exit_code == 1
    tail = res.stdout.splitlines()[-len(meshes):]  # the output ends with one line per file
    # the plate is clean but held nowhere: its static stiffness is singular
    assert tail[0].startswith(str(meshes[0])) and ": unsupported (" in tail[0]
    assert tail[1].startswith(str(meshes[1])) and ": problems (" in tail[1]
    assert "3 findings at or above error" in tail[1]  # parts, seam nodes, seam edges


def test_json_has_findings_per_mesh_and_keeps_the_summary(runner, cli_app, meshes):
    res = runner.invoke(cli_app, ["check", "--json", str(meshes[0]), str(meshes[1])])
    assert res.exit_code == 1
    doc = json.loads(res.stdout)
    assert doc["fail_on"] == "error"
    first, second = doc["meshes"]
    assert first["parts"] == 1 and first["verdict"] == "unsupported"  # summary keys still there
    codes = {f["code"]: f for f in second["findings"]}
    assert codes["parts.disconnected"]["count"] == 2
    assert codes["nodes.coincident_seam"]["node_id_kind"] == "1-based node position"


def test_tolerance_option(runner, cli_app, tmp_path):
    path = tmp_path / "gap.vtu"
    write_model(_plates(gap=0.01), path)
    res = runner.invoke(cli_app, ["check", "--json", str(path), "--tolerance", "0.02"])
    codes = {f["code"] for f in json.loads(res.stdout)["meshes"][0]["findings"]}
    assert "nodes.coincident_seam" in codes
    res = runner.invoke(cli_app, ["check", "--json", str(path), "--tolerance", "0.005"])
    codes = {f["code"] for f in json.loads(res.stdout)["meshes"][0]["findings"]}
    assert "nodes.coincident_seam" not in codes


@pytest.mark.parametrize("args,needle", [
    (["--tolerance", "0"], "tolerance must be a positive"),
    (["--tolerance", "-1"], "tolerance must be a positive"),
    (["--relative-tolerance", "0"], "relative tolerance must be positive"),
    (["--fail-on", "sometimes"], "--fail-on must be one of"),
])
def test_bad_options_exit_2_with_one_line(runner, cli_app, meshes, args, needle):
    res = runner.invoke(cli_app, ["check", str(meshes[0]), *args])
    assert res.exit_code == 2
    assert needle in res.stderr and len(res.stderr.strip().splitlines()) == 1


def test_only_vertex_cells_exit_2(runner, cli_app, tmp_path):
    path = tmp_path / "points.vtu"
    write_model(Model(points=np.zeros((2, 3)) + [[0, 0, 0], [1, 0, 0]],
                      cells=[CellBlock("vertex", np.array([[0], [1]]))]), path)
    res = runner.invoke(cli_app, ["check", str(path)])
    assert res.exit_code == 2 and "vertex" in res.stderr
