"""Solver decks read and renumbered in place.

External references: meshio (a reference reader of both deck formats)
gives the node and element counts and the element geometry of every
shared deck it reads; the renumbered deck is read back by meshio too.
Field layout of the bulk format (8-character small fields, 16-character
large fields with ``*`` continuation, comma-separated free fields) and the
keyword format (comma-separated data lines, ``**`` comments, ``GENERATE``
ranges): the formats' public definitions, from memory.
"""

from __future__ import annotations

import contextlib
import io
import re
from pathlib import Path

import numpy as np
import pytest
from conftest import shared_path

from bandwise.core.dofs import dof_layout
from bandwise.core.errors import InputError, MeshReadError
from bandwise.core.graph import graph_from_cells, node_graph
from bandwise.core.summary import count_parts
from bandwise.formats.decks import (
    deck_links,
    deck_supports,
    new_ids,
    parse_bulk_deck,
    parse_keyword_deck,
    read_deck,
    renumber_deck,
)
from bandwise.workflows.deck_inputs import deck_support_set

# decks meshio reads correctly (per the shared data README), and two it cannot
MESHIO_DECKS = [
    ("sfepy", "abaqus_tet.inp"), ("meshio", "UUea.inp"), ("dealii", "2d_test_pave.inp"),
    ("dealii", "3d_test_abaqus.inp"), ("dealii", "codim_1-tube.inp"),
    ("sfepy", "abaqus_quad_tri.inp"), ("pyNastran", "plate.bdf"),
    ("pyNastran", "solid_bending.bdf"), ("pyNastran", "contact.bdf"), ("sfepy", "cube.bdf"),
]
OTHER_DECKS = [("pyNastran", "model1_sim1-solution_1.bdf"),
               ("pyNastran", "composite_plate_2022.fem")]
RENUMBERABLE = MESHIO_DECKS + OTHER_DECKS


def _meshio_read(path: Path):
    import meshio

    with contextlib.redirect_stdout(io.StringIO()):
        return meshio.read(path)


def _cell_geometry(points: np.ndarray, blocks) -> dict[str, np.ndarray]:
    """Per cell type, the rows of node coordinates of every cell, sorted (order-free)."""
    out: dict[str, list[np.ndarray]] = {}
    for cell_type, conn in blocks:
        xyz = points[conn][:, :, :3].reshape(len(conn), -1) if len(conn) else np.zeros((0, 0))
        out.setdefault(cell_type, []).append(np.round(xyz, 9))
    return {k: np.unique(np.vstack(v), axis=0) for k, v in out.items()}


def _padded(points: np.ndarray) -> np.ndarray:
    return points if points.shape[1] == 3 else np.column_stack(
        [points, np.zeros((len(points), 3 - points.shape[1]))])


@pytest.mark.parametrize("folder,name", MESHIO_DECKS)
def test_shared_deck_matches_meshio(folder, name):
    """Nodes, cells per type and the geometry of every cell agree with meshio's reader."""
    path = shared_path("meshes-real", folder, name)
    model = read_deck(path).to_model()
    ref = _meshio_read(path)
    assert model.n_nodes == len(ref.points)
    counts = {}
    for b in ref.cells:
        counts[b.type] = counts.get(b.type, 0) + len(b.data)
    assert model.cells_by_type() == counts
    ours = _cell_geometry(model.points, [(b.type, b.data) for b in model.cells])
    theirs = _cell_geometry(_padded(ref.points), [(b.type, b.data) for b in ref.cells])
    assert ours.keys() == theirs.keys()
    for k in ours:
        np.testing.assert_allclose(ours[k], theirs[k], atol=1e-9)


def test_decks_meshio_cannot_read():
    """Large-field CHEXA with continuations and free-field CQUAD4: counted from the text."""
    path = shared_path("meshes-real", "pyNastran", "model1_sim1-solution_1.bdf")
    text = path.read_text()
    model = read_deck(path).to_model()
    assert model.n_nodes == sum(ln.startswith("GRID*") for ln in text.splitlines()) == 2363
    by_card = {c: sum(ln.startswith(c) for ln in text.splitlines())
               for c in ("CTETRA", "CHEXA", "CPYRAM")}
    counts = model.cells_by_type()
    assert counts["tetra"] + counts["tetra10"] == by_card["CTETRA"]
    assert counts["hexahedron"] + counts["hexahedron20"] == by_card["CHEXA"]
    assert counts["pyramid"] == by_card["CPYRAM"]
    fem = shared_path("meshes-real", "pyNastran", "composite_plate_2022.fem")
    deck = read_deck(fem)
    lines = fem.read_text().splitlines()
    assert deck.n_nodes == sum(ln.startswith("GRID,") for ln in lines) == 122
    assert deck.to_model().cells_by_type() == {"quad": sum(ln.startswith("CQUAD4,") for ln in lines)}
    # SPC,1,2,3 with GSET: the 40 hinge grids of SET 2 held in component 3 (uz)
    held = deck_supports(deck)
    assert len(held) == 40 and all(v == ["uz"] for v in held.values())


def _refs_by_line(deck):
    spans: dict[int, list[tuple[int, int]]] = {}
    for r in deck.refs:
        spans.setdefault(r.line, []).append((r.start, r.end))
    return spans


def _pattern(line: str, spans: list[tuple[int, int]]) -> re.Pattern:
    """The line with each node field replaced by 'some number': everything else as it was."""
    parts, pos = [], 0
    for s, e in sorted(spans):
        parts.append(re.escape(line[pos:s]))
        pos = e
    parts.append(re.escape(line[pos:]))
    return re.compile(r" *\d+ *".join(parts), re.DOTALL)


def _block_lines(rw) -> int:
    """Lines of a range card written out: a keyword line and 16 ids a line, or a small-field
    card of 8 fields a line (keyword and bulk format definitions)."""
    n = rw.node_ids.size
    if rw.kind == "keyword":
        return 1 + -(-n // 16)
    return 1 + -(-max(0, len(rw.head) - 1 + n - 8) // 8)


def _definition_lines(deck) -> set[int]:
    """Lines of node cards (NODE data lines, GRID cards with their continuation lines)."""
    found = {r.line for r in deck.refs if r.card in ("NODE", "GRID")}
    for k in sorted(found):
        e = k + 1
        while deck.kind == "bulk" and e < len(deck.lines) and deck.lines[e].strip() \
                and deck.lines[e][0] in "+*, ":
            found.add(e)
            e += 1
    return found


def _without_id(line: str) -> str:
    """A node card line without its id field (keyword, free, small or large field)."""
    if line.startswith("GRID*"):
        return line[:8] + line[24:]
    if line.startswith("GRID,"):
        return line.split(",", 2)[2]
    if line.startswith("GRID"):
        return line[:8] + line[16:]
    if line[:1] in "+*" or not line.strip():
        return line
    return line.split(",", 1)[1] if "," in line else line


def _check_renumbered(deck, text: str, ids: dict[int, int], tmp_path: Path, suffix: str):
    before = deck.lines
    after_lines = text.splitlines(keepends=True)
    first = {rw.lines[0]: rw for rw in deck.list_rewrites}
    rest = {k for rw in deck.list_rewrites for k in rw.lines[1:]}
    spans = _refs_by_line(deck)
    definitions = _definition_lines(deck)
    moved_before, moved_after = [], []
    j = 0
    for k, line in enumerate(before):
        if k in rest:
            continue
        if k in first:
            j += _block_lines(first[k])
            continue
        if k in definitions:  # node cards are put in new-id order: compared as a whole below
            moved_before.append(_without_id(line))
            moved_after.append(_without_id(after_lines[j]))
        elif k in spans:  # only the numbers changed, every other character kept
            assert _pattern(line, spans[k]).fullmatch(after_lines[j]), (line, after_lines[j])
        else:           # a line without node ids: byte-identical
            assert after_lines[j] == line
        j += 1
    assert j == len(after_lines)
    assert sorted(moved_before) == sorted(moved_after)
    out = tmp_path / f"renumbered{suffix}"
    out.write_text(text)
    again = read_deck(out)
    # the same mesh through the map: node ids mapped, coordinates unchanged
    new_of_old = np.array([ids[int(i)] for i in deck.node_ids])
    pos = {int(i): k for k, i in enumerate(again.node_ids)}
    order = np.array([pos[int(i)] for i in new_of_old])
    np.testing.assert_array_equal(again.points[order], deck.points)
    for a, b in zip(deck.elements, again.elements):
        assert a.card == b.card and a.cell_type == b.cell_type
        np.testing.assert_array_equal(a.element_ids, b.element_ids)
        mapped = np.vectorize(ids.__getitem__)(a.connectivity) if a.connectivity.size else a.connectivity
        np.testing.assert_array_equal(b.connectivity, mapped)
        # same geometry per element
        np.testing.assert_array_equal(again.points[again.index_of(b.connectivity)],
                                      deck.points[deck.index_of(a.connectivity)])
    for name, members in deck.node_sets.items():
        assert sorted(again.node_sets[name].tolist()) == sorted(ids[int(i)] for i in members)
    old_support = {ids[int(deck.node_ids[k])]: v for k, v in deck_supports(deck).items()}
    new_support = {int(again.node_ids[k]): v for k, v in deck_supports(again).items()}
    assert old_support == new_support
    old_links = sorted(sorted(ids[int(i)] for i in g) for _, g in deck.links)
    assert old_links == sorted(sorted(int(i) for i in g) for _, g in again.links)
    return out, again


@pytest.mark.parametrize("folder,name", RENUMBERABLE)
def test_shared_deck_renumbered_in_place(folder, name, tmp_path):
    path = shared_path("meshes-real", folder, name)
    deck = read_deck(path)
    perm = np.random.default_rng(7).permutation(deck.n_nodes)
    ids = new_ids(deck.node_ids, perm)
    result = renumber_deck(deck, ids)
    assert result.changed_cards  # reports which cards it changed
    out, _ = _check_renumbered(deck, result.text, ids, tmp_path, path.suffix)
    if (folder, name) in MESHIO_DECKS:  # meshio reads our output as it read the input
        ref, new = _meshio_read(path), _meshio_read(out)
        a = _cell_geometry(_padded(ref.points), [(b.type, b.data) for b in ref.cells])
        b = _cell_geometry(_padded(new.points), [(c.type, c.data) for c in new.cells])
        for k in a:
            np.testing.assert_allclose(a[k], b[k], atol=1e-9)


def test_new_ids_keep_the_id_set():
    # ids 1..n: new id = 1-based new position
    assert new_ids(np.array([1, 2, 3]), np.array([2, 0, 1])) == {3: 1, 1: 2, 2: 3}
    # scattered ids: the set is kept, its assignment permuted
    got = new_ids(np.array([10, 500, 7]), np.array([1, 2, 0]))
    assert got == {500: 7, 7: 10, 10: 500}
    with pytest.raises(InputError):
        new_ids(np.array([1, 2]), np.array([0, 0]))


BRACKET_INP = """\
*HEADING
bracket, two plates joined by a kinematic coupling
** nodes of the left plate, then of the right plate
*NODE, NSET=ALL
 1, 0.0, 0.0, 0.0
 2, 1.0, 0.0, 0.0
 3, 1.0, 1.0, 0.0
 4, 0.0, 1.0, 0.0
 5, 2.0, 0.0, 0.0
 6, 3.0, 0.0, 0.0
 7, 3.0, 1.0, 0.0
 8, 2.0, 1.0, 0.0
 9, 1.5, 0.5, 0.0
*ELEMENT, TYPE=S4R, ELSET=LEFT
 1, 1, 2, 3, 4
*ELEMENT, TYPE=S4R, ELSET=RIGHT
 2, 5, 6, 7, 8
*NSET, NSET=EDGE, GENERATE
 1, 4, 3
*NSET, NSET=TIP
 6, 7
*KINEMATIC COUPLING, REF NODE=9
 2, 1, 6
 3, 1, 6
 5, 1, 6
 8, 1, 6
*MATERIAL, NAME=STEEL
*ELASTIC
 210000., 0.3
*SHELL SECTION, ELSET=LEFT, MATERIAL=STEEL
 2.0
*STEP
*STATIC
*BOUNDARY
 EDGE, ENCASTRE
 2, 3, 3
*CLOAD
 TIP, 3, -50.
*EQUATION
 2
 6, 2, 1.0, 7, 2, -1.0
*END STEP
"""


def test_keyword_deck_supports_links_and_rewrite(tmp_path):
    path = tmp_path / "bracket.inp"
    path.write_text(BRACKET_INP)
    deck = read_deck(path)
    model = deck.to_model()
    assert model.node_ids.tolist() == list(range(1, 10))
    assert model.cells_by_type() == {"quad": 2}
    assert sorted(deck.node_sets["EDGE"].tolist()) == [1, 4]
    # ENCASTRE holds all six DOFs; "2, 3, 3" holds uz (keyword-format DOF numbers 1-6)
    assert deck_supports(deck) == {0: ["ux", "uy", "uz", "rx", "ry", "rz"],
                                   1: ["uz"], 3: ["ux", "uy", "uz", "rx", "ry", "rz"]}
    assert [("CLOAD", 6), ("CLOAD", 7)] == deck.loads
    links = deck_links(deck)
    assert [a.shape for a in links] == [(1, 2), (1, 5)]
    # the two plates are separate parts, one once the coupling is counted
    assert count_parts(node_graph(model))[0] == 2
    blocks = [b.data for b in model.cells] + links
    assert count_parts(graph_from_cells(blocks, model.n_nodes))[0] == 1
    support_set = deck_support_set(deck, dof_layout(model, dofs_per_node=6))
    assert support_set.n_fixed_dofs == 13
    perm = np.random.default_rng(3).permutation(9)
    ids = new_ids(deck.node_ids, perm)
    result = renumber_deck(deck, ids)
    assert result.changed_cards["NSET"] >= 1 and "KINEMATIC COUPLING" in result.changed_cards
    text = result.text
    assert f"REF NODE={ids[9]}" in text
    assert "GENERATE" not in text.split("*NSET, NSET=EDGE")[1].splitlines()[0]
    for line in ("*MATERIAL, NAME=STEEL\n", " 210000., 0.3\n", " 2.0\n", "*STATIC\n",
                 " EDGE, ENCASTRE\n", "** nodes of the left plate, then of the right plate\n"):
        assert line in text
    _check_renumbered(deck, text, ids, tmp_path, ".inp")


BRACKET_BDF = """\
SOL 101
CEND
SPC = 1
LOAD = 2
BEGIN BULK
$ bracket: a solid block and a rigid spider to a load point
GRID           1       0      0.      0.      0.
GRID           2       0      1.      0.      0.
GRID           3       0      1.      1.      0.
GRID           4       0      0.      1.      0.
GRID*                  5               0              0.              0.
*                     1.
GRID,6,,1.,0.,1.
GRID,7,,1.,1.,1.
GRID    8               0.      1.      1.
GRID    9               .5      .5      2.0     0       456
CHEXA   1       10      1       2       3       4       5       6       +
+       7       8
RBE2    20      9       123456  5       6       7       8
RBE3    21              9       123     1.0     123     1       2
        3
MPC     30      1       1       1.0     2       1       -1.0
MAT1    1       2.1+5           .3
PSOLID  10      1
SPC1    1       123     1       THRU    4
SPC     1       5       3       0.0
FORCE   2       9       0       100.    0.      0.      -1.
MOMENT  2       9       0       10.     1.      0.      0.
ENDDATA
"""


def test_bulk_deck_fields_supports_links_and_rewrite(tmp_path):
    path = tmp_path / "bracket.bdf"
    path.write_text(BRACKET_BDF)
    deck = read_deck(path)
    model = deck.to_model()
    assert model.node_ids.tolist() == list(range(1, 10))
    np.testing.assert_allclose(model.points[4], [0, 0, 1])   # large field, '*' continuation
    np.testing.assert_allclose(model.points[5], [1, 0, 1])   # free field
    assert model.cells_by_type() == {"hexahedron": 1}
    assert model.cells[0].data.tolist() == [[0, 1, 2, 3, 4, 5, 6, 7]]  # continuation read
    held = deck_supports(deck)
    assert held[0] == ["ux", "uy", "uz"] and held[3] == ["ux", "uy", "uz"]
    assert held[4] == ["uz"] and held[8] == ["rx", "ry", "rz"]  # SPC and GRID PS field
    groups = sorted(sorted(g.tolist()) for _, g in deck.links)
    assert groups == [[1, 2], [1, 2, 3, 9], [5, 6, 7, 8, 9]]
    assert deck.loads == [("FORCE", 9), ("MOMENT", 9)]
    perm = np.roll(np.arange(9), 1)  # every id moves: 9 -> 1, 1 -> 2, ...
    ids = new_ids(deck.node_ids, perm)
    result = renumber_deck(deck, ids)
    assert {"GRID", "CHEXA", "RBE2", "RBE3", "MPC", "SPC1", "SPC", "FORCE", "MOMENT"} <= set(
        result.changed_cards)
    text = result.text
    for line in ("MAT1    1       2.1+5           .3\n", "PSOLID  10      1\n", "SOL 101\n",
                 "SPC = 1\n", "$ bracket: a solid block and a rigid spider to a load point\n"):
        assert line in text
    # the SPC1 range is written out as a list (four ids: a range no longer describes them)
    spc1 = next(ln for ln in text.splitlines() if ln.startswith("SPC1"))
    assert sorted(int(v) for v in spc1.split()[3:]) == sorted(ids[i] for i in (1, 2, 3, 4))
    # small-field lines keep every field at its column (GRID cards move to new-id order)
    for old, new in zip(BRACKET_BDF.splitlines(), text.splitlines()):
        if old.startswith(("CHEXA", "RBE2", "FORCE", "MOMENT", "SPC ")):
            assert len(new) == len(old)
    _check_renumbered_bulk(deck, text, ids, tmp_path)


def _check_renumbered_bulk(deck, text, ids, tmp_path):
    out = tmp_path / "renumbered.bdf"
    out.write_text(text)
    again = read_deck(out)
    pos = {int(i): k for k, i in enumerate(again.node_ids)}
    for k, old in enumerate(deck.node_ids):
        np.testing.assert_array_equal(again.points[pos[ids[int(old)]]], deck.points[k])
    old_support = {ids[int(deck.node_ids[k])]: v for k, v in deck_supports(deck).items()}
    assert old_support == {int(again.node_ids[k]): v for k, v in deck_supports(again).items()}


def test_field_too_narrow_is_an_error():
    deck = parse_bulk_deck("GRID    1               0.      0.      0.\n"
                           "GRID    2               1.      0.      0.\n"
                           "CROD    1       1       1       2\n")
    with pytest.raises(InputError, match="does not fit"):
        renumber_deck(deck, {1: 123456789, 2: 1})


def test_map_must_be_one_to_one():
    deck = parse_keyword_deck("*NODE\n1, 0, 0\n2, 1, 0\n*ELEMENT, TYPE=T2D2\n1, 1, 2\n")
    with pytest.raises(InputError, match="same new id"):
        renumber_deck(deck, {1: 1, 2: 1})
    with pytest.raises(InputError, match="no new id"):
        renumber_deck(deck, {1: 2})


@pytest.mark.parametrize("text,match", [
    ("*NODE\n1, 0, 0\n1, 1, 0\n", "defined twice"),
    ("*NODE\n1, 0, 0\n*NGEN\n1, 5\n", "generates"),
    ("*HEADING\nnothing\n", "no \\*NODE"),
    ("*NODE\nx, 0, 0\n", "not a positive integer"),
    ("*NODE\n1, 0, zero\n", "not a coordinate"),
])
def test_keyword_deck_errors(text, match):
    with pytest.raises(MeshReadError, match=match):
        parse_keyword_deck(text)


def test_unhandled_cards_refuse_renumbering():
    deck = parse_bulk_deck("GRID    1               0.      0.      0.\n"
                           "GRID    2               1.      0.      0.\n"
                           "CROD    1       1       1       2\n"
                           "SEQGP   1       2       2       1\n")
    assert deck.unhandled == {"SEQGP": 1}
    with pytest.raises(InputError, match="SEQGP"):
        renumber_deck(deck, {1: 2, 2: 1})


def test_avs_content_behind_inp_is_an_error():
    # meshio returns an empty mesh for this file without a word (shared README)
    with pytest.raises(MeshReadError, match="no \\*NODE"):
        read_deck(shared_path("meshes-real", "dealii", "circle-grid.inp"))


def test_include_is_read_but_not_rewritten():
    path = shared_path("meshes-real", "pyNastran", "static_solid_shell_bar.bdf")
    deck = read_deck(path)
    # meshio ignores the include and finds no cells; the elements are in geom.inc
    assert deck.includes == ["geom.inc"]
    assert deck.to_model().n_cells > 0
    with pytest.raises(InputError, match="includes geom.inc"):
        renumber_deck(deck, new_ids(deck.node_ids, np.arange(deck.n_nodes)))


def test_cli_renumbers_a_deck_in_place(tmp_path, runner, cli_app):
    """``bandwise renumber deck.bdf out.bdf``: node ids rewritten, every other line kept."""
    import json

    src = tmp_path / "bracket.bdf"
    src.write_text(BRACKET_BDF)
    out = tmp_path / "cli_out.bdf"
    result = runner.invoke(cli_app, ["renumber", str(src), str(out), "--method", "rcm",
                                     "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    assert doc["losses"] == [] and "GRID" in doc["deck"]["changed_cards"]
    assert src.read_text() == BRACKET_BDF           # the input is untouched
    deck, again = read_deck(src), read_deck(out)
    for line in ("MAT1    1       2.1+5           .3\n", "PSOLID  10      1\n", "SPC = 1\n"):
        assert line in out.read_text()
    # the node map of the run gives the new position; the new id is the position-th
    # smallest original id (here ids 1..9: the same number)
    from bandwise.formats.node_map import read_node_map

    new_of_old = read_node_map(doc["node_map"]).new_of_old
    ids = {int(deck.node_ids[k]): int(new_of_old[k]) + 1 for k in range(deck.n_nodes)}
    _check_renumbered_bulk(deck, out.read_text(), ids, tmp_path)
    # the rigid spider couples nodes 5-9 to the block: one part in the ordering's graph
    assert sorted(again.node_ids.tolist()) == list(range(1, 10))


def test_cli_deck_with_unrewritable_cards_fails_cleanly(tmp_path, runner, cli_app):
    src = tmp_path / "seq.bdf"
    src.write_text("GRID    1               0.      0.      0.\n"
                   "GRID    2               1.      0.      0.\n"
                   "GRID    3               1.      1.      0.\n"
                   "CTRIA3  1       1       1       2       3\n"
                   "SEQGP   1       3       3       1\n")
    out = tmp_path / "out.bdf"
    result = runner.invoke(cli_app, ["renumber", str(src), str(out), "--method", "rcm"])
    assert result.exit_code == 2
    assert "SEQGP" in result.stderr and len(result.stderr.strip().splitlines()) == 1
    assert not out.exists()


def test_damaged_number_in_a_long_node_table_is_a_read_error():
    """A table of 20 node lines, one coordinate damaged: the line-by-line reader names it."""
    lines = [f"{k}, {k}.0, 0.0, 0.0\n" for k in range(1, 21)]
    lines[7] = "8, 1.0\x1b+00, 0.0, 0.0\n"
    with pytest.raises(MeshReadError, match="line 9: .* is not a coordinate"):
        parse_keyword_deck("*NODE\n" + "".join(lines))
