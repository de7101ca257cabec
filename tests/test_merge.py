"""Merging coincident nodes (bandwise.algorithms.merge and ``bandwise merge``).

Known answers by construction: two plates meshed apart share a seam of 3
coincident node pairs; merged, they are one part of 21 nodes.  The k-d tree
pair search is compared with the brute-force all-pairs distance matrix
(scipy.spatial.distance.pdist), the reference definition.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.spatial.distance import pdist, squareform

from bandwise.algorithms.checks import run_checks
from bandwise.algorithms.merge import coincident_pairs, merged_model
from bandwise.core.generate import quad_grid
from bandwise.core.graph import node_graph
from bandwise.core.model import CellBlock, Model
from bandwise.core.summary import count_parts
from bandwise.formats import read_model, write_model


def two_plates() -> Model:
    """Two 3 x 2 quad plates meshed apart, touching along x = 3 (12 nodes each)."""
    a = quad_grid(4, 3)
    right = a.points.copy()
    right[:, 0] += 3.0
    return Model(points=np.r_[a.points, right],
                 cells=[CellBlock("quad", np.r_[a.cells[0].data, a.cells[0].data + 12])])


@given(st.integers(0, 2**31 - 1), st.floats(0.01, 0.3))
def test_pairs_match_all_pairs_distances(seed, tol):
    pts = np.random.default_rng(seed).random((60, 3))
    expect = np.argwhere(np.triu(squareform(pdist(pts)) <= tol, k=1))
    assert coincident_pairs(pts, tol).tolist() == expect.tolist()


def test_merge_two_plates_gives_one_part():
    model = two_plates()
    model.point_sets = {"right_edge": np.arange(12, 24)}
    model.point_data = {"temperature": np.arange(24, dtype=float)}
    result = merged_model(model)
    assert result.n_merged == 3
    assert result.kept.tolist() == [3, 7, 11] and result.removed.tolist() == [12, 16, 20]
    m = result.model
    assert m.n_nodes == 21 and count_parts(node_graph(m))[0] == 1
    # the kept node keeps its own field value; the set holds the merged node once
    assert m.point_data["temperature"][3] == 3.0 and len(m.point_data["temperature"]) == 21
    assert len(m.point_sets["right_edge"]) == 12 and 3 in m.point_sets["right_edge"].tolist()
    assert not any(f.code.startswith(("nodes.coincident", "parts.")) for f in run_checks(m))
    assert model.n_nodes == 24  # the input is untouched


def test_merge_refuses_to_collapse_an_element():
    # a sliver quad whose two nodes are 1e-6 apart: merging them would collapse it
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1e-6, 0], [0, 1, 0]], float)
    m = Model(points=pts, cells=[CellBlock("quad", np.array([[0, 1, 2, 3]]))])
    result = merged_model(m, tolerance=1e-3)
    assert result.n_merged == 0 and result.refused.tolist() == [1, 2]
    assert result.model.n_nodes == 4


def test_merge_keeps_node_ids():
    model = two_plates()
    model.node_ids = np.arange(1001, 1025)
    m = merged_model(model).model
    assert m.node_ids.tolist() == [i for i in range(1001, 1025) if i not in (1013, 1017, 1021)]


def test_cli_merge_writes_the_merged_mesh(tmp_path, runner, cli_app):
    src = tmp_path / "bracket.vtu"
    write_model(two_plates(), src)
    before = src.read_bytes()
    out = tmp_path / "bracket_merged.vtu"
    res = runner.invoke(cli_app, ["merge", str(src), str(out), "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    assert doc["merged"] == 3 and doc["parts_before"] == 2 and doc["parts_after"] == 1
    assert doc["pairs"] == [[4, 13], [8, 17], [12, 21]]
    assert read_model(out).n_nodes == 21
    assert src.read_bytes() == before  # the input is read-only


@pytest.mark.parametrize("args,needle", [
    (["--tolerance", "0"], "tolerance must be a positive"),
    (["--tolerance", "-2"], "tolerance must be a positive"),
])
def test_cli_merge_bad_input(tmp_path, runner, cli_app, args, needle):
    src = tmp_path / "frame.vtu"
    write_model(two_plates(), src)
    res = runner.invoke(cli_app, ["merge", str(src), str(tmp_path / "o.vtu"), *args])
    assert res.exit_code == 2 and needle in res.stderr
    assert not (tmp_path / "o.vtu").exists()


def test_cli_merge_refuses_to_overwrite_the_input(tmp_path, runner, cli_app):
    src = tmp_path / "frame.vtu"
    write_model(two_plates(), src)
    res = runner.invoke(cli_app, ["merge", str(src), str(src)])
    assert res.exit_code == 2 and "input" in res.stderr


def test_pairs_with_a_large_tolerance_use_the_tree_and_agree():
    # 1,500 points and a radius of 0.4: the sweep would compare too many pairs
    pts = np.random.default_rng(7).random((1500, 3))
    expect = np.argwhere(np.triu(squareform(pdist(pts)) <= 0.4, k=1))
    assert coincident_pairs(pts, 0.4).tolist() == expect.tolist()
