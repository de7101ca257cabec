"""Sparse matrix files: the fixed-format reader against the Matrix Market twins,
the published figures of the open test collection, and malformed copies.

Reference data: ``../shared/matrices`` (Harwell-Boeing and Rutherford-Boeing
files of the SuiteSparse Matrix Collection, T. A. Davis and Y. Hu, ACM TOMS
38(1), 2011, CC-BY 4.0; ``published.csv`` holds figures of its index).
"""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp
from conftest import shared_path

from bandwise.core.errors import MeshReadError
from bandwise.core.graph import graph_from_matrix
from bandwise.core.metrics import metrics
from bandwise.formats.matrix_io import (
    is_matrix_file,
    matrix_market_text,
    permuted_matrix,
    read_matrix,
    read_matrix_data,
    write_matrix_market,
)

FIXED_FORMAT = ["can_24.psa", "bcsstk01.rsa", "bcsstk02.rsa", "bcsstk01.rb"]


def _published() -> list[dict[str, str]]:
    with open(shared_path("matrices", "published.csv"), newline="") as fh:
        return list(csv.DictReader(fh))


def _same_pattern(a: sp.csr_matrix, b: sp.csr_matrix) -> bool:
    a, b = sp.csr_matrix(a), sp.csr_matrix(b)
    a.sort_indices()
    b.sort_indices()
    return (a.shape == b.shape and np.array_equal(a.indptr, b.indptr)
            and np.array_equal(a.indices, b.indices))


@pytest.mark.parametrize("name", FIXED_FORMAT)
def test_fixed_format_gives_the_pattern_of_its_matrix_market_twin(name):
    # The collection's README: each fixed-format file "must give exactly the
    # pattern of its .mtx twin" (the same matrix in two formats).
    fixed = read_matrix_data(shared_path("matrices", name))
    twin = read_matrix_data(shared_path("matrices", name.split(".")[0] + ".mtx"))
    assert _same_pattern(fixed.matrix, twin.matrix)
    assert fixed.symmetry == twin.symmetry == "symmetric"
    assert fixed.field == twin.field
    if fixed.field == "real":
        # values carried too: the two files print the same numbers to 12 digits
        np.testing.assert_allclose(fixed.matrix.data, twin.matrix.data, rtol=1e-11)


def test_fixed_format_header_counts():
    # can_24.psa header (Duff, Grimes and Lewis 1989 layout): 24 x 24, 92
    # stored entries (one triangle with the diagonal) -> 2*92 - 24 = 160 both
    # triangles, the nnz that published.csv lists for can_24.
    a = read_matrix(shared_path("matrices", "can_24.psa"))
    assert a.shape == (24, 24)
    assert sp.tril(a).nnz == 92
    assert a.nnz == 160


def test_published_nnz_and_original_bandwidth_are_reproduced_exactly():
    # published.csv (SuiteSparse index): nnz counts both triangles with the
    # diagonal; bandwidth_original is max(i - j) over stored entries in the
    # file's own order. The README says both must be reproduced exactly.
    rows = _published()
    assert len(rows) >= 70
    for row in rows:
        a = read_matrix(shared_path("matrices", f"{row['name']}.mtx"))
        assert a.shape == (int(row["n"]), int(row["n"])), row["name"]
        assert a.nnz == int(row["nnz"]), row["name"]
        coo = a.tocoo()
        assert int((coo.row - coo.col).max()) == int(row["bandwidth_original"]), row["name"]
        # and bandwise's own metric on the graph of the pattern agrees
        assert metrics(graph_from_matrix(a)).bandwidth == int(row["bandwidth_original"])


def test_explicit_zeros_count_as_structure(tmp_path):
    # Matrix Market (Boisvert, Pozo and Remington 1996) stores entries, not
    # nonzeros: an explicit 0.0 is an entry of the pattern.
    path = tmp_path / "z.mtx"
    path.write_text("%%MatrixMarket matrix coordinate real symmetric\n3 3 4\n"
                    "1 1 1.0\n2 1 0.0\n3 2 2.5\n3 3 0\n")
    a = read_matrix(path)
    assert a.nnz == 6          # (1,1), (2,1)+(1,2), (3,2)+(2,3), (3,3)
    assert graph_from_matrix(a).n_edges == 2


def _copy_with(tmp_path, name, edit):
    text = shared_path("matrices", name).read_text(encoding="latin-1")
    path = tmp_path / name
    path.write_text(edit(text.splitlines(keepends=True)), encoding="latin-1")
    return path


@pytest.mark.parametrize("name, edit, words", [
    # truncated: the last data lines lost
    ("can_24.psa", lambda ls: "".join(ls[:-2]), "truncated"),
    ("bcsstk01.rsa", lambda ls: "".join(ls[:-10]), "truncated"),
    ("bcsstk01.rb", lambda ls: "".join(ls[:6]), "truncated"),
    # header line counts that do not add up (total 9 instead of 8)
    ("can_24.psa", lambda ls: "".join([ls[0], ls[1].replace("8", "9", 1), *ls[2:]]), "data lines"),
    # a pointer changed: the column pointers no longer end at nnz + 1
    ("can_24.psa", lambda ls: "".join([*ls[:5], ls[5].replace("93", "99"), *ls[6:]]),
     "pointers"),
    # an unreadable format string
    ("can_24.psa", lambda ls: "".join([*ls[:3], ls[3].replace("(16I5)", "(16X5)", 1), *ls[4:]]),
     "format"),
    # a row index outside 1..n
    ("can_24.psa", lambda ls: "".join([*ls[:6], "   99" + ls[6][5:], *ls[7:]]), "row index"),
    # a header cut short
    ("bcsstk02.rsa", lambda ls: "".join(ls[:2]), "header"),
    # a value that is not a number
    ("bcsstk01.rsa", lambda ls: "".join([*ls[:-1], "  0.2472387301ZZE+10" + ls[-1][20:]]),
     "not a number"),
])
def test_malformed_fixed_format_files_give_one_line(tmp_path, name, edit, words):
    path = _copy_with(tmp_path, name, edit)
    with pytest.raises(MeshReadError) as info:
        read_matrix(path)
    message = str(info.value)
    assert "\n" not in message
    assert words in message


@pytest.mark.parametrize("text", [
    "",                                                     # empty
    "%%MatrixMarket matrix coordinate real general\n3 3 2\n1 1 1.0\n",  # one entry missing
    "%%MatrixMarket matrix coordinate real general\n3 2 1\n1 1 1.0\n",  # not square
    "not a matrix at all\n",
])
def test_malformed_matrix_market_gives_one_line(tmp_path, text):
    path = tmp_path / "bad.mtx"
    path.write_text(text)
    with pytest.raises(MeshReadError) as info:
        read_matrix(path)
    assert "\n" not in str(info.value)


def test_permuted_matrix_is_the_symmetric_permutation():
    # B = P A P^T with perm[new] = old: B[i, j] = A[perm[i], perm[j]]
    # (checked against scipy's fancy indexing A[p][:, p]).
    a = read_matrix(shared_path("matrices", "bcsstk01.mtx"))
    perm = np.random.default_rng(3).permutation(a.shape[0])
    b = permuted_matrix(a, perm)
    assert (b != a[perm][:, perm]).nnz == 0


@pytest.mark.parametrize("name", ["bcsstk01.mtx", "can_24.mtx", "dwt_87.mtx"])
def test_written_matrix_reads_back_as_the_permuted_matrix(tmp_path, name):
    data = read_matrix_data(shared_path("matrices", name))
    perm = np.random.default_rng(7).permutation(data.n_rows)
    out = tmp_path / "out.mtx"
    write_matrix_market(out, data.matrix, perm, field=data.field)
    back = read_matrix_data(out)
    # a symmetric permutation of a symmetric matrix stays symmetric: the
    # lower triangle is written with a 'symmetric' header (Matrix Market 1996)
    assert back.symmetry == "symmetric"
    assert back.field == data.field
    ref = data.matrix[perm][:, perm]
    assert _same_pattern(back.matrix, ref)
    if data.field != "pattern":
        assert np.array_equal(back.matrix.toarray(), ref.toarray())  # values exact
    # scipy's own reader agrees with ours on the written file
    assert _same_pattern(sp.csr_matrix(scipy.io.mmread(out)), ref)
    header = out.read_text().splitlines()[0]
    assert header == f"%%MatrixMarket matrix coordinate {data.field} symmetric"


def test_general_matrix_is_written_in_full():
    a = sp.csr_matrix(np.array([[1.0, 2.0, 0.0], [0.0, 3.0, 0.0], [4.0, 0.0, 5.0]]))
    text = matrix_market_text(a, np.array([2, 0, 1]))
    lines = text.splitlines()
    assert lines[0] == "%%MatrixMarket matrix coordinate real general"
    data = [ln for ln in lines[1:] if not ln.startswith("%")]
    assert data[0] == "3 3 5" and len(data) == 6
    back = scipy.io.mmread(io.StringIO(text)).toarray()
    assert np.array_equal(back, a.toarray()[[2, 0, 1]][:, [2, 0, 1]])


def test_matrix_file_names():
    assert is_matrix_file("a/b/K.mtx") and is_matrix_file("K.RSA") and is_matrix_file("k.rb")
    assert is_matrix_file("k.psa") and is_matrix_file("k.mtx.gz")
    assert not is_matrix_file("bracket.msh") and not is_matrix_file("bracket.vtu")


def test_parts_of_every_matrix_match_the_published_components():
    # published.csv "components": connected components of the pattern's graph
    # (isolated rows count as components of their own).
    from bandwise.formats.matrix_io import summarise_matrix

    for row in _published():
        s = summarise_matrix(read_matrix_data(shared_path("matrices", f"{row['name']}.mtx")))
        assert s.n_parts + s.n_orphans == int(row["components"]), row["name"]
        assert s.node_level.bandwidth == int(row["bandwidth_original"]), row["name"]


def test_check_reports_a_matrix_file(runner, cli_app):
    import json

    result = runner.invoke(cli_app, ["check", str(shared_path("matrices", "can_24.psa")), "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    (matrix,) = doc["meshes"]
    # can_24: n = 24, bandwidth 21 in the file's order (published.csv)
    assert matrix["nodes"] == 24 and matrix["dofs"]["total"] == 24
    assert matrix["current_numbering"]["nodes"]["bandwidth"] == 21
    assert matrix["matrix"]["entries"] == 160 and matrix["matrix"]["field"] == "pattern"
    text = runner.invoke(cli_app, ["check", str(shared_path("matrices", "bcsstk01.rb"))])
    assert text.exit_code == 0 and "rutherford-boeing" in text.stdout
    # bcsstk01: bandwidth 35 in the file's order (published.csv)
    line = next(ln for ln in text.stdout.splitlines() if ln.startswith("bandwidth"))
    assert line.split()[1:3] == ["35", "35"]


def _boeing_file(path, mxtype, ptr, ind, vals, rutherford=False):
    """Write a tiny fixed-format file laid out as Duff, Grimes and Lewis (1989) describe.

    Pointers as (4I3), indices as (3I3), values as (2D12.4): the D exponent
    and narrow fields a Fortran writer may use.
    """
    def rows(items, per_line, fmt):
        return ["".join(fmt(x) for x in items[k:k + per_line])
                for k in range(0, len(items), per_line)]

    p = rows(ptr, 4, lambda x: f"{x:3d}")
    i = rows(ind, 3, lambda x: f"{x:3d}")
    v = rows(vals, 2, lambda x: f"{x:12.4E}".replace("E", "D")) if vals else []
    counts = [len(p) + len(i) + len(v), len(p), len(i), len(v)] + ([] if rutherford else [0])
    n = len(ptr) - 1
    lines = ["tiny test matrix".ljust(72) + "TINY".ljust(8),
             "".join(f"{c:14d}" for c in counts),
             mxtype.ljust(14) + "".join(f"{c:14d}" for c in (n, n, len(ind), 0)),
             "(4I3)".ljust(16) + "(3I3)".ljust(16) + ("(2D12.4)" if vals else "").ljust(20),
             *p, *i, *v]
    path.write_text("\n".join(lines) + "\n")
    return path


# A = [[1, 0, 2], [3, 4, 0], [0, 5, 0]], stored column by column, 1-based
TINY_PTR, TINY_IND, TINY_VAL = [1, 3, 5, 6], [1, 2, 2, 3, 1], [1.0, 3.0, 4.0, 5.0, 2.0]
TINY = np.array([[1.0, 0.0, 2.0], [3.0, 4.0, 0.0], [0.0, 5.0, 0.0]])


def test_unsymmetric_fixed_format_files(tmp_path):
    rua = read_matrix_data(_boeing_file(tmp_path / "t.rua", "RUA", TINY_PTR, TINY_IND, TINY_VAL))
    assert rua.symmetry == "general" and rua.field == "real"
    assert np.array_equal(rua.matrix.toarray(), TINY)
    pua = read_matrix_data(_boeing_file(tmp_path / "t.pua", "PUA", TINY_PTR, TINY_IND, []))
    assert pua.field == "pattern"
    assert np.array_equal(pua.matrix.toarray(), TINY != 0)
    rb = read_matrix_data(_boeing_file(tmp_path / "t.rb", "rua", TINY_PTR, TINY_IND, TINY_VAL,
                                       rutherford=True))
    assert np.array_equal(rb.matrix.toarray(), TINY)
    # written out, the unsymmetric matrix stays general, every entry listed
    write_matrix_market(tmp_path / "t.mtx", rua.matrix)
    assert np.array_equal(read_matrix(tmp_path / "t.mtx").toarray(), TINY)
    assert "general" in (tmp_path / "t.mtx").read_text().splitlines()[0]


def test_skew_symmetric_file_is_mirrored_with_the_sign(tmp_path):
    # skew-symmetric (type Z): a_ji = -a_ij, the lower triangle stored
    skew = read_matrix(_boeing_file(tmp_path / "t.rza", "RZA", [1, 2, 3, 3], [2, 3], [1.5, -2.0]))
    assert np.array_equal(skew.toarray(), [[0, -1.5, 0], [1.5, 0, 2.0], [0, -2.0, 0]])


def test_elemental_files_are_refused_in_one_line(tmp_path):
    path = _boeing_file(tmp_path / "t.rsa", "RSE", TINY_PTR, TINY_IND, TINY_VAL)
    with pytest.raises(MeshReadError, match="elemental"):
        read_matrix(path)


def test_values_with_a_fortran_exponent_without_e(tmp_path):
    # A Fortran E edit descriptor drops the letter E when the exponent needs
    # three digits (e.g. 0.1500-100 for 0.15e-100): common practice of
    # Fortran output, seen in fixed-format matrix files.
    path = _boeing_file(tmp_path / "t.rsa", "RSA", [1, 2, 3], [1, 2], [1.0, 2.0])
    lines = path.read_text().splitlines()
    lines[-1] = "  0.1500-100  0.2500+101"
    path.write_text("\n".join(lines) + "\n")
    a = read_matrix(path)
    assert a[0, 0] == 0.15e-100 and a[1, 1] == 0.25e101
