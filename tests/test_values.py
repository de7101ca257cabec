"""Assembled matrices checked by their values, against matrices assembled outside bandwise.

The plane truss here is assembled with plain numpy from the textbook bar
element in global axes, k = (EA/L) [[c^2, cs, -c^2, -cs], [cs, s^2, -cs, -s^2],
...] with c, s the direction cosines (D. L. Logan, "A First Course in the
Finite Element Method", 4th ed., Thomson, 2007, the plane truss element), and
written with scipy's Matrix Market writer: no bandwise code makes the matrix.
Truths: a free plane body has 3 rigid motions (rigid-body kinematics); the
truss is statically determinate and stiff, 2j - b - 3 = 0 mechanisms
(J. C. Maxwell, Phil. Mag. 27 (1864) 294-299), so with a pin and a roller
(3 held DOFs) its stiffness is positive definite; reciprocity (Maxwell-Betti)
makes it symmetric.  The BCSSTK stiffness matrices (Harwell-Boeing, J. Lewis
1982) are compared with numpy's dense eigen-solve of the same matrix.
"""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp

from bandwise.algorithms.values import check_values, rigid_body_vectors
from bandwise.formats.matrix_io import read_matrix_data

BAYS = 6


def _truss() -> tuple[np.ndarray, list[tuple[int, int]], np.ndarray]:
    """A Warren truss of BAYS bays (bottom chord 0..BAYS, top chord between), steel."""
    bottom = np.column_stack([np.arange(BAYS + 1.0), np.zeros(BAYS + 1)])
    top = np.column_stack([np.arange(BAYS) + 0.5, np.full(BAYS, 1.5)])
    x = np.vstack([bottom, top])
    nb = BAYS + 1
    bars = [(i, i + 1) for i in range(BAYS)] + [(nb + i, nb + i + 1) for i in range(BAYS - 1)]
    bars += [(i, nb + i) for i in range(BAYS)] + [(i + 1, nb + i) for i in range(BAYS)]
    k = np.zeros((2 * len(x), 2 * len(x)))
    for i, j in bars:
        d = x[j] - x[i]
        length = np.hypot(*d)
        c, s = d / length
        t = np.array([c, s, -c, -s])
        idx = [2 * i, 2 * i + 1, 2 * j, 2 * j + 1]
        k[np.ix_(idx, idx)] += 210e9 * 4e-4 / length * np.outer(t, t)   # EA/L, N/m
    return x, bars, k


HELD = [0, 1, 2 * BAYS + 1]          # pin at node 1 (ux, uy), roller at the right end (uy)


def _write(path, k: np.ndarray, symmetry: str = "general") -> None:
    scipy.io.mmwrite(str(path), sp.coo_matrix(k), symmetry=symmetry)


def _check_json(runner, cli_app, *args) -> dict:
    result = runner.invoke(cli_app, ["check", *map(str, args), "--json"])
    assert result.exit_code in (0, 1), result.output
    return json.loads(result.stdout)["meshes"][0]


def test_truss_free_held_and_perturbed(runner, cli_app, tmp_path) -> None:
    x, bars, k = _truss()
    assert 2 * len(x) - len(bars) - 3 == 0                      # Maxwell: determinate
    _write(tmp_path / "truss_free.mtx", k, "symmetric")
    free = np.setdiff1d(np.arange(k.shape[0]), HELD)
    _write(tmp_path / "truss_held.mtx", k[np.ix_(free, free)], "symmetric")
    bent = k.copy()
    bent[4, 2] *= 1.0 + 1e-4                                     # one off-diagonal entry
    _write(tmp_path / "truss_bent.mtx", bent, "general")

    doc = _check_json(runner, cli_app, tmp_path / "truss_free.mtx")
    assert doc["values"]["symmetric"] is True
    assert doc["values"]["zero_modes"] == 3
    assert doc["values"]["positive_definite"] is False and doc["values"]["negative_pivots"] == 0
    assert [f["code"] for f in doc["findings"]] == ["values.singular"]
    assert doc["verdict"] == "unsupported"          # free: a static solve would be singular

    doc = _check_json(runner, cli_app, tmp_path / "truss_held.mtx")
    assert doc["values"]["symmetric"] is True
    assert doc["values"]["zero_modes"] == 0
    assert doc["values"]["positive_definite"] is True and doc["verdict"] == "ready"
    assert 0 < doc["values"]["pivot_ratio"] <= 1

    doc = _check_json(runner, cli_app, tmp_path / "truss_bent.mtx")
    assert doc["values"]["symmetric"] is False
    assert doc["values"]["asymmetry_at"] == [5, 3]               # 1-based row, column
    assert doc["values"]["largest_asymmetry"] == pytest.approx(1e-4 * abs(k[4, 2]) /
                                                               np.sqrt(k[4, 4] * k[2, 2]),
                                                               rel=1e-6)
    assert "values.asymmetric" in [f["code"] for f in doc["findings"]]
    assert doc["verdict"] == "problems"
    result = runner.invoke(cli_app, ["check", str(tmp_path / "truss_bent.mtx")])
    assert result.exit_code == 1 and "values.asymmetric" in result.stdout


def test_rigid_body_vectors_with_coordinates_from_a_mesh(runner, cli_app, tmp_path) -> None:
    x, bars, k = _truss()
    _write(tmp_path / "truss.mtx", k, "symmetric")
    mesh = tmp_path / "truss.vtu"
    meshio.write(mesh, meshio.Mesh(np.column_stack([x, np.zeros(len(x))]),
                                   [("line", np.array(bars))]))
    doc = _check_json(runner, cli_app, tmp_path / "truss.mtx", "--coordinates", mesh,
                      "--dofs-per-node", "2")
    rigid = doc["values"]["rigid_body"]
    assert rigid["dofs"] == ["ux", "uy"] and rigid["motions"] == ["tx", "ty", "qz"]
    assert rigid["passed"] is True and max(rigid["residuals"]) < 1e-12
    # DOFs per node follow from rows / nodes when not given
    assert _check_json(runner, cli_app, tmp_path / "truss.mtx", "--coordinates",
                       mesh)["values"]["rigid_body"]["passed"] is True
    # coordinates in another order than the matrix's nodes: rigid motions make forces
    swapped = x.copy()
    swapped[[2, 9]] = swapped[[9, 2]]
    meshio.write(mesh, meshio.Mesh(np.column_stack([swapped, np.zeros(len(x))]),
                                   [("line", np.array(bars))]))
    doc = _check_json(runner, cli_app, tmp_path / "truss.mtx", "--coordinates", mesh)
    assert doc["values"]["rigid_body"]["passed"] is False
    bad = [f for f in doc["findings"] if f["code"] == "values.rigid_body_force"]
    assert bad and set(bad[0]["details"][0]["rows"]) & {5, 6, 19, 20}
    # the held matrix has fewer rows than nodes x DOFs: said, not guessed
    free = np.setdiff1d(np.arange(k.shape[0]), HELD)
    held = check_values(sp.csr_matrix(k[np.ix_(free, free)]), dofs_per_node=2, coordinates=x)
    assert held.rigid.passed is None and "before held DOFs are removed" in held.rigid.note


def test_rigid_body_vectors_are_in_the_null_space_of_a_textbook_truss() -> None:
    x, _, k = _truss()
    r, names = rigid_body_vectors(x, ("ux", "uy"))
    assert names == ("tx", "ty", "qz") and r.shape == (k.shape[0], 3)
    np.testing.assert_allclose(np.linalg.norm(r, axis=0), 1.0)
    assert np.abs(k @ r).max() < 1e-12 * np.abs(k).max()
    # a space frame node: six motions, rotations carried by rx ry rz
    r6, names6 = rigid_body_vectors(np.array([[0.0, 0, 0], [1, 2, 3]]),
                                    ("ux", "uy", "uz", "rx", "ry", "rz"))
    assert len(names6) == 6 and np.linalg.matrix_rank(r6) == 6


def test_negative_diagonal_and_indefinite_are_findings() -> None:
    _, _, k = _truss()
    free = np.setdiff1d(np.arange(k.shape[0]), HELD)
    a = k[np.ix_(free, free)].copy()
    a[4, 4] = -a[4, 4]
    v = check_values(sp.csr_matrix(a))
    assert v.nonpositive_diagonal == (5,) and v.n_nonpositive_diagonal == 1
    assert v.negative_pivots >= 1 and v.positive_definite is False
    codes = {f.code: f for f in v.findings()}
    assert {"values.diagonal_not_positive", "values.indefinite"} <= set(codes)
    assert codes["values.indefinite"].severity == "error"
    # the count of negative eigenvalues is the dense one (Sylvester)
    assert v.negative_pivots == int((np.linalg.eigvalsh(a) < 0).sum())


def test_pattern_file_has_no_values(runner, cli_app, tmp_path) -> None:
    path = tmp_path / "p.mtx"
    path.write_text("%%MatrixMarket matrix coordinate pattern symmetric\n3 3 3\n1 1\n2 1\n3 3\n")
    doc = _check_json(runner, cli_app, path)
    assert "values" not in doc


@pytest.mark.parametrize("name", ["bcsstk01", "bcsstk05", "bcsstk08", "bcsstk19", "bcsstk22"])
def test_published_stiffness_matrices_against_dense_eigenvalues(name: str) -> None:
    from conftest import shared_path

    data = read_matrix_data(shared_path("matrices", f"{name}.mtx"))
    a = data.matrix.toarray()
    d = np.sqrt(np.abs(np.diag(a)))
    w = np.linalg.eigvalsh(a / np.outer(d, d))                  # same unit-diagonal scale
    v = check_values(data.matrix)
    assert v.symmetric and v.largest_asymmetry == 0.0           # stored as one triangle
    assert v.zero_modes == int((np.abs(w) < 1e-11).sum()) == 0
    assert v.negative_pivots == int((w < -1e-11).sum()) == 0
    assert v.positive_definite and v.count.certain and v.n_nonpositive_diagonal == 0


def test_harwell_boeing_file_is_checked_by_value(runner, cli_app) -> None:
    from conftest import shared_path

    doc = _check_json(runner, cli_app, shared_path("matrices", "bcsstk01.rsa"))
    twin = check_values(read_matrix_data(shared_path("matrices", "bcsstk01.mtx")).matrix)
    assert doc["values"]["symmetric"] is True and doc["values"]["zero_modes"] == 0
    assert doc["values"]["pivot_ratio"] == pytest.approx(twin.pivot_ratio, rel=1e-6)
