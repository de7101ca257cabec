"""``bandwise renumber``: what it writes, what it reports, and how it refuses bad input.

Most tests run with a registry of orderings defined here (scipy's reverse
Cuthill-McKee wrapped, a seeded shuffle), so that they check the command and
not bandwise's own orderings; one test runs ``auto`` on the real registry.
"""

from __future__ import annotations

import hashlib
import json
import tempfile
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import shared_path
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.sparse.csgraph import reverse_cuthill_mckee

import bandwise.algorithms.orderings.compare as compare_mod
from bandwise.algorithms.orderings import OrderingInfo
from bandwise.core.errors import MeshReadError
from bandwise.core.generate import quad_grid, scrambled, triangle_grid
from bandwise.core.graph import NodeGraph, node_graph
from bandwise.core.metrics import metrics
from bandwise.core.model import CellBlock, Model
from bandwise.formats import read_model, write_model
from bandwise.formats.matrix_io import read_matrix_data
from bandwise.formats.node_map import node_map_text, read_node_map, write_node_map

CALLS: list[dict] = []


def _scipy_rcm(graph: NodeGraph) -> np.ndarray:
    return reverse_cuthill_mckee(graph.to_scipy().tocsr(), symmetric_mode=True).astype(np.int64)


def _shuffle(graph: NodeGraph, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).permutation(graph.n)


def _recording(graph: NodeGraph, w1: float = 2.0, w2: float = 1.0) -> np.ndarray:
    CALLS.append({"w1": w1, "w2": w2})
    return _scipy_rcm(graph)


@pytest.fixture
def orderings(monkeypatch):
    reg = {
        "scipy-rcm": OrderingInfo("scipy-rcm", _scipy_rcm, "scipy RCM", "bandwidth"),
        "shuffle": OrderingInfo("shuffle", _shuffle, "seeded shuffle", "none"),
        "sloan": OrderingInfo("sloan", _recording, "records its weights", "profile"),
    }
    monkeypatch.setattr(compare_mod, "ORDERINGS", reg)
    CALLS.clear()
    return reg


def run(runner, app, *args):
    result = runner.invoke(app, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def plate(seed: int = 0, nx: int = 14, ny: int = 6, gmsh: bool = False) -> Model:
    """A scrambled plate of quads with a temperature field, a material id and sets."""
    m = scrambled(quad_grid(nx, ny), seed=seed)
    n, c = m.n_nodes, len(m.cells[0])
    rng = np.random.default_rng(seed)
    m.point_data["temperature"] = rng.random(n)
    m.cell_data["material"] = [rng.integers(1, 4, c)]
    m.point_sets["clamp"] = np.sort(rng.choice(n, 5, replace=False))
    m.cell_sets["web"] = [np.sort(rng.choice(c, 4, replace=False))]
    if gmsh:  # gmsh files tag every cell and node with its entity and physical group
        m.cell_data["gmsh:physical"] = [np.full(c, 7)]
        m.cell_data["gmsh:geometrical"] = [np.full(c, 1)]
        m.point_data["gmsh:dim_tags"] = np.tile([2, 1], (n, 1))
        m.field_data["plate"] = np.array([7, 2])
    return m


def nothing_new(folder: Path, before: set[str]) -> bool:
    return {p.name for p in folder.iterdir()} == before


# ---------------------------------------------------------------- the mesh written

def test_written_mesh_has_the_figures_reported(runner, cli_app, orderings, tmp_path):
    src = tmp_path / "plate.vtu"
    write_model(plate(1), src)
    before = sha(src)
    out = tmp_path / "renumbered.vtu"
    code, stdout, stderr = run(runner, cli_app, "renumber", src, out, "--json",
                               "--method", "scipy-rcm,shuffle")
    assert code == 0, stderr
    doc = json.loads(stdout)
    assert list(doc)[:2] == ["bandwise_version", "caution"]
    assert sha(src) == before                           # input untouched
    comp = doc["comparison"]
    assert [m["method"] for m in comp["methods"]] == ["original", "scipy-rcm", "shuffle"]
    chosen = next(m for m in comp["methods"] if m["chosen"])
    original = comp["methods"][0]
    assert chosen["dofs"]["profile"] <= original["dofs"]["profile"]
    # the file written, read back, measures what was reported for the chosen perm
    source = read_model(src)
    back = read_model(out)
    node_map = read_node_map(doc["node_map"])
    assert doc["node_map"] == str(tmp_path / "renumbered.map.csv")
    in_memory = metrics(node_graph(source), node_map.perm)
    assert metrics(node_graph(back)) == in_memory
    assert in_memory.to_dict() == chosen["nodes"]
    assert np.array_equal(node_map.perm, _scipy_rcm(node_graph(source))) == \
        (chosen["method"] == "scipy-rcm")


def test_text_output_marks_the_chosen_method(runner, cli_app, orderings, tmp_path):
    src = tmp_path / "plate.inp"
    write_model(plate(2), src)
    code, stdout, stderr = run(runner, cli_app, "renumber", src, tmp_path / "o.inp",
                               "--method", "scipy-rcm", "--objective", "bandwidth")
    assert code == 0, stderr
    lines = stdout.splitlines()
    chosen = [ln for ln in lines if ln.startswith("*")]
    assert len(chosen) == 1 and "scipy-rcm" in chosen[0]
    assert any(ln.split()[:1] == ["original"] for ln in lines)
    assert "o.map.csv" in stdout and "qualified engineer" in stdout
    assert (tmp_path / "o.inp").exists() and (tmp_path / "o.map.csv").exists()


def test_auto_on_the_registered_orderings_is_never_worse(runner, cli_app, tmp_path):
    # the real registry: whatever is registered, the original is a candidate
    src = tmp_path / "plate.vtu"
    write_model(plate(3, nx=10, ny=5), src)
    code, stdout, stderr = run(runner, cli_app, "renumber", src, tmp_path / "o.vtu", "--json")
    assert code == 0, stderr
    comp = json.loads(stdout)["comparison"]
    chosen = next(m for m in comp["methods"] if m["chosen"])
    assert chosen["dofs"]["profile"] <= comp["methods"][0]["dofs"]["profile"]


def test_sloan_weights_reach_sloan(runner, cli_app, orderings, tmp_path):
    src = tmp_path / "plate.vtu"
    write_model(plate(4), src)
    code, _, stderr = run(runner, cli_app, "renumber", src, tmp_path / "o.vtu",
                          "--method", "sloan", "--sloan-weights", "1,2")
    assert code == 0, stderr
    assert CALLS and all(c == {"w1": 1.0, "w2": 2.0} for c in CALLS)  # warm-up and run


def _restored(back: Model, node_map) -> Model:
    """Apply the inverse map: the renumbered model put back in the old node order."""
    return back.renumbered(node_map.new_of_old)


def assert_same_model(a: Model, b: Model) -> None:
    assert np.array_equal(a.points, b.points)
    assert [c.type for c in a.cells] == [c.type for c in b.cells]
    for x, y in zip(a.cells, b.cells):
        assert np.array_equal(x.data, y.data)
    assert sorted(a.point_data) == sorted(b.point_data)
    for k in a.point_data:
        assert np.array_equal(a.point_data[k], b.point_data[k]), k
    assert sorted(a.cell_data) == sorted(b.cell_data)
    for k in a.cell_data:
        for x, y in zip(a.cell_data[k], b.cell_data[k]):
            assert np.array_equal(x, y), k
    assert sorted(a.point_sets) == sorted(b.point_sets)
    for k in a.point_sets:
        assert np.array_equal(np.sort(a.point_sets[k]), np.sort(b.point_sets[k])), k
    assert sorted(a.cell_sets) == sorted(b.cell_sets)
    for k in a.cell_sets:
        for x, y in zip(a.cell_sets[k], b.cell_sets[k]):
            assert np.array_equal(np.sort(x), np.sort(y)), k


@pytest.mark.parametrize("ext", [".msh", ".vtu", ".inp"])
@settings(max_examples=4, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 10_000), nx=st.integers(3, 9), ny=st.integers(3, 6),
       triangles=st.booleans())
def test_round_trip_through_the_inverse_map(runner, cli_app, orderings, ext, seed, nx, ny,
                                             triangles):
    # Renumbering is a relabelling: written, read back and put back through
    # the inverse of the map, the mesh equals the input as the same format
    # keeps it (points, cells, fields, sets), exactly.
    model = plate(seed, nx, ny, gmsh=ext == ".msh")
    if triangles:
        tri = triangle_grid(nx, ny).cells[0].data
        model = Model(model.points, [CellBlock("triangle", tri)], model.point_data,
                      {k: [np.r_[v[0], v[0]]] for k, v in model.cell_data.items()},
                      model.point_sets, {}, model.field_data)
    with tempfile.TemporaryDirectory() as folder:
        src, out = Path(folder, "in" + ext), Path(folder, "out" + ext)
        write_model(model, src)
        code, _, stderr = run(runner, cli_app, "renumber", src, out, "--method", "scipy-rcm")
        assert code == 0, stderr
        source, back = read_model(src), read_model(out)
        node_map = read_node_map(Path(folder, "out.map.csv"))
        assert not np.array_equal(node_map.new_of_old, np.arange(source.n_nodes)) or \
            source.n_nodes < 3
        assert_same_model(_restored(back, node_map), source)


def test_element_order_keeps_cell_fields_with_their_cells(runner, cli_app, orderings, tmp_path):
    model = plate(5, gmsh=True)
    src, out = tmp_path / "plate.msh", tmp_path / "o.msh"
    write_model(model, src)
    code, stdout, stderr = run(runner, cli_app, "renumber", src, out, "--element-order",
                               "--method", "scipy-rcm", "--json")
    assert code == 0, stderr
    doc = json.loads(stdout)
    front = doc["element_order"]
    assert front["after"]["rms_dofs"] <= front["before"]["rms_dofs"]
    source, back = read_model(src), read_model(out)
    restored = _restored(back, read_node_map(doc["node_map"]))
    # same cells, same material on each cell, whatever their order in the file
    pairs_in = {(tuple(sorted(c)), int(v)) for c, v in
                zip(source.cells[0].data, source.cell_data["material"][0])}
    pairs_out = {(tuple(sorted(c)), int(v)) for c, v in
                 zip(restored.cells[0].data, restored.cell_data["material"][0])}
    assert pairs_in == pairs_out
    # elements now in ascending order of their lowest new node (bandwise.algorithms.orderings.frontal)
    assert np.all(np.diff(back.cells[0].data.min(axis=1)) >= 0)


# ---------------------------------------------------------------- matrix input

def test_matrix_input_writes_the_permuted_matrix(runner, cli_app, orderings, tmp_path):
    src = shared_path("matrices", "can_24.psa")
    out = tmp_path / "can_24_rcm.mtx"
    code, stdout, stderr = run(runner, cli_app, "renumber", src, out, "--objective", "bandwidth",
                               "--method", "scipy-rcm", "--json")
    assert code == 0, stderr
    doc = json.loads(stdout)
    original = read_matrix_data(src).matrix
    perm = read_node_map(tmp_path / "can_24_rcm.map.csv").perm
    back = read_matrix_data(out)
    assert back.symmetry == "symmetric" and back.field == "pattern"
    assert (back.matrix != original[perm][:, perm]).nnz == 0
    # published.csv: can_24 bandwidth 21 in the file's order (SuiteSparse index)
    assert doc["comparison"]["methods"][0]["nodes"]["bandwidth"] == 21
    chosen = next(m for m in doc["comparison"]["methods"] if m["chosen"])
    coo = sp.tril(back.matrix).tocoo()
    assert chosen["nodes"]["bandwidth"] == int((coo.row - coo.col).max())


# ---------------------------------------------------------------- bad input

@pytest.mark.parametrize("args, words", [
    (["--method", "nope"], "valid"),
    (["--objective", "speed"], "valid"),
    (["--sloan-weights", "2"], "--sloan-weights"),
    (["--sloan-weights", "-1,1"], "--sloan-weights"),
    (["--sloan-weights", "2,1", "--method", "scipy-rcm"], "sloan among the methods"),
])
def test_bad_options_give_one_line_and_exit_2(runner, cli_app, orderings, tmp_path, args, words):
    src = tmp_path / "plate.vtu"
    write_model(plate(6), src)
    before = {p.name for p in tmp_path.iterdir()}
    code, stdout, stderr = run(runner, cli_app, "renumber", src, tmp_path / "o.vtu", *args)
    assert code == 2
    assert len(stderr.strip().splitlines()) == 1 and words in stderr
    assert "Traceback" not in stderr + stdout
    assert nothing_new(tmp_path, before)


def _tiny(tmp_path: Path, points, cells) -> Path:
    path = tmp_path / "tiny.vtu"
    write_model(Model(np.asarray(points, dtype=float), cells), path)
    return path


def test_bad_meshes_and_outputs_give_one_line_and_exit_2(runner, cli_app, orderings, tmp_path):
    good = tmp_path / "plate.vtu"
    write_model(plate(7), good)
    single = _tiny(tmp_path, [[0, 0, 0]], [CellBlock("vertex", np.array([[0]]))])
    Path(tmp_path, "single.vtu").write_bytes(single.read_bytes())
    vertices = _tiny(tmp_path, [[0, 0, 0], [1, 0, 0], [0, 1, 0]],
                     [CellBlock("vertex", np.array([[0], [1], [2]]))])
    empty = tmp_path / "empty.vtu"
    empty.write_text("")
    cases = [
        (tmp_path / "single.vtu", tmp_path / "o.vtu", [], "nothing to renumber"),
        (vertices, tmp_path / "o.vtu", [], "vertex"),
        (empty, tmp_path / "o.vtu", [], "empty"),
        (tmp_path / "missing.vtu", tmp_path / "o.vtu", [], "no such file"),
        (good, tmp_path / "no" / "such" / "o.vtu", [], "does not exist"),
        (good, good, [], "--replace-input"),
        (good, tmp_path / "o.vtu", ["--map", good], "node map"),
        (good, tmp_path / "o.xyz", [], "o.xyz"),
    ]
    for src, out, extra, words in cases:
        before = {p.name for p in tmp_path.iterdir()}
        digest = sha(good)
        code, stdout, stderr = run(runner, cli_app, "renumber", src, out, *extra)
        assert code == 2, (src, out, stdout)
        assert len(stderr.strip().splitlines()) == 1, stderr
        assert words in stderr, stderr
        assert nothing_new(tmp_path, before), (src, out)
        assert sha(good) == digest


def test_replace_input_overwrites_it_whole(runner, cli_app, orderings, tmp_path):
    src = tmp_path / "plate.vtu"
    write_model(plate(8), src)
    source = read_model(src)
    code, _, stderr = run(runner, cli_app, "renumber", src, src, "--replace-input",
                          "--method", "scipy-rcm", "--map", tmp_path / "plate.map.csv")
    assert code == 0, stderr
    node_map = read_node_map(tmp_path / "plate.map.csv")
    assert_same_model(_restored(read_model(src), node_map), source)
    assert not any(p.name.endswith(".part") for p in tmp_path.iterdir())


# ---------------------------------------------------------------- the node map file

def test_node_map_round_trip_with_ids(tmp_path):
    perm = np.array([2, 0, 3, 1])
    ids = np.array([101, 102, 205, 301])
    write_node_map(tmp_path / "m.csv", perm, ids)
    lines = (tmp_path / "m.csv").read_text().splitlines()
    assert lines[0] == "old_position,new_position,node_id"
    # old node 1 (position 0) is perm's entry at new position 1 -> "1,2,101"
    assert lines[1] == "1,2,101"
    back = read_node_map(tmp_path / "m.csv")
    assert np.array_equal(back.perm, perm) and np.array_equal(back.node_ids, ids)


@pytest.mark.parametrize("text", [
    "",
    "old,new\n1,1\n",
    "old_position,new_position\n1,1\n2,1\n",        # not a permutation
    "old_position,new_position\n1,2\n3,1\n",        # old positions skip one
    "old_position,new_position\n1,x\n2,1\n",
])
def test_malformed_node_maps_give_one_line(tmp_path, text):
    path = tmp_path / "m.csv"
    path.write_text(text)
    with pytest.raises(MeshReadError) as info:
        read_node_map(path)
    assert "\n" not in str(info.value)


def test_node_map_text_is_ordered_by_old_position():
    text = node_map_text(np.array([1, 2, 0]))
    assert text.splitlines() == ["old_position,new_position", "1,3", "2,1", "3,2"]


# Real files of several formats (see ../shared/meshes-real/README.md for their
# sources and licences). Renumbering must add no loss of its own: the output,
# put back through the inverse map, equals the input written and read back
# in the same format without renumbering.
REAL = ["dealii/2d_test_pave.inp", "meshio/insulated-2.2.msh", "scikit-fem/beams.msh",
        "meshio/cylinder.med", "pylith/mesh_tet4.exo", "pylith/hex8_vertex_t10.vtu",
        "xrd_simulator/grain0056.xdmf", "meshio/cavity.vtk"]


@pytest.mark.parametrize("name", REAL)
def test_real_files_lose_nothing_by_renumbering(runner, cli_app, orderings, tmp_path, name):
    src = shared_path("meshes-real", *name.split("/"))
    digest = sha(src)
    plain = tmp_path / f"plain{src.suffix}"
    write_model(read_model(src), plain)
    out = tmp_path / f"out{src.suffix}"
    code, stdout, stderr = run(runner, cli_app, "renumber", src, out, "--method", "scipy-rcm",
                               "--json")
    assert code == 0, stderr
    node_map = read_node_map(json.loads(stdout)["node_map"])
    assert_same_model(_restored(read_model(out), node_map), read_model(plain))
    assert sha(src) == digest
