"""Every output format round-tripped: write, read, renumber, write, read, compare through the map.

The reference is meshio, the open reader/writer of these formats: what it
reads back must equal what was written, node for node through the inverse
permutation.  What a format cannot hold must be named by
:func:`bandwise.formats.keeps.losses` (and only that may differ).
"""

from __future__ import annotations

import numpy as np
import pytest

from bandwise.core.generate import hex_grid
from bandwise.core.model import CellBlock, Model, inverse_permutation
from bandwise.formats.decks import new_ids, read_deck, renumber_deck
from bandwise.formats.keeps import FORMATS, YES, losses
from bandwise.formats.meshio_io import read_model, write_model

EXTENSIONS = {"gmsh22": ".msh", "gmsh": ".msh", "vtu": ".vtu", "vtk": ".vtk", "xdmf": ".xdmf",
              "med": ".med", "exodus": ".exo", "abaqus": ".inp", "nastran": ".bdf"}


def rich_model() -> Model:
    """A small bracket block: hexahedra, boundary quads and two edge lines, with fields and sets."""
    box = hex_grid(4, 3, 3)
    hexes = box.cells[0].data
    bottom = hexes[:, :4][:4]               # quads on the z = 0 face
    edges = np.array([[0, 1], [1, 2], [2, 3]])
    n = box.n_nodes
    rng = np.random.default_rng(11)
    return Model(
        points=box.points,
        cells=[CellBlock("hexahedron", hexes), CellBlock("quad", bottom), CellBlock("line", edges)],
        point_data={"temperature": rng.random(n), "displacement": rng.random((n, 3))},
        cell_data={"pressure": [rng.random(len(hexes)), rng.random(4), rng.random(3)]},
        point_sets={"WALL": np.array([0, 4, 8, 12]), "LOAD": np.array([3, 7])},
        cell_sets={"BODY": [np.arange(len(hexes)), np.zeros(0, np.int64), np.zeros(0, np.int64)],
                   "BASE": [np.zeros(0, np.int64), np.arange(4), np.zeros(0, np.int64)],
                   "EDGE": [np.zeros(0, np.int64), np.zeros(0, np.int64), np.arange(3)]},
    )


def _own(d: dict) -> dict:
    return {k: v for k, v in d.items() if not k.startswith(("gmsh:", "med:"))}


def _written_read(model: Model, fmt: str, path) -> Model:
    write_model(model, path, fmt)
    return read_model(path, "gmsh" if fmt == "gmsh22" else fmt)


def _cell_sets_of(model: Model, fmt: str) -> dict[str, list[np.ndarray]]:
    """Element sets as read back: as sets, or from gmsh 2.2 physical tags and names."""
    if fmt == "gmsh22":
        tags = model.cell_data["gmsh:physical"]
        return {name: [np.flatnonzero(t == tag_dim[0]) for t in tags]
                for name, tag_dim in model.field_data.items()}
    return {k: [np.asarray(a) for a in v] for k, v in _own(model.cell_sets).items()}


def _assert_same_through_map(before: Model, after: Model, perm: np.ndarray, fmt: str) -> None:
    """``after`` is ``before`` renumbered by ``perm`` (perm[new] = old): everything agrees."""
    new_of_old = inverse_permutation(perm)
    np.testing.assert_allclose(after.points[:, :3], before.points[perm][:, :3])
    assert [b.type for b in after.cells] == [b.type for b in before.cells]
    for a, b in zip(after.cells, before.cells):
        np.testing.assert_array_equal(a.data, new_of_old[b.data])
    assert _own(after.point_data).keys() == _own(before.point_data).keys()
    for k, v in _own(before.point_data).items():
        np.testing.assert_allclose(after.point_data[k], v[perm])
    assert _own(after.cell_data).keys() == _own(before.cell_data).keys()
    for k, v in _own(before.cell_data).items():
        for x, y in zip(after.cell_data[k], v):
            np.testing.assert_allclose(x, y)
    assert after.point_sets.keys() == before.point_sets.keys()
    for k, v in before.point_sets.items():
        assert sorted(after.point_sets[k].tolist()) == sorted(new_of_old[v].tolist())
    a_sets, b_sets = _cell_sets_of(after, fmt), _cell_sets_of(before, fmt)
    assert a_sets.keys() == b_sets.keys()
    for k in b_sets:
        for x, y in zip(a_sets[k], b_sets[k]):
            assert sorted(np.asarray(x).tolist()) == sorted(np.asarray(y).tolist())


def _assert_kept_as_table_says(original: Model, read: Model, fmt: str) -> None:
    """What the FORMATS row says is kept came back equal; what it says is lost is reported."""
    holds = FORMATS[fmt]
    np.testing.assert_allclose(read.points[:, :3], original.points)
    for a, b in zip(read.cells, original.cells):
        np.testing.assert_array_equal(a.data, b.data)
    said = " ".join(losses(original, fmt))
    if holds.point_fields == YES:
        for k, v in original.point_data.items():
            np.testing.assert_allclose(read.point_data[k], v)
    else:
        assert "nodal fields" in said and not set(original.point_data) & set(read.point_data)
    cells_kept = holds.cell_fields == YES or (fmt == "gmsh22" and len(original.cells) == 1)
    if cells_kept:
        for x, y in zip(read.cell_data["pressure"], original.cell_data["pressure"]):
            np.testing.assert_allclose(x, y)
    else:
        assert "element fields" in said and "pressure" not in read.cell_data
    if holds.node_sets == YES:
        for k, v in original.point_sets.items():
            np.testing.assert_array_equal(np.sort(read.point_sets[k]), np.sort(v))
    else:
        assert "node sets" in said
        if holds.node_sets.startswith("written as 0/1"):  # VTK: 0/1 fields, read back as sets
            for k, v in original.point_sets.items():
                np.testing.assert_array_equal(read.point_sets[k], np.sort(v))
        else:
            assert not read.point_sets
    sets = _cell_sets_of(read, fmt)
    if holds.cell_sets == YES or holds.cell_sets.startswith(("kept as physical", "written as 0/1")):
        assert sets.keys() == original.cell_sets.keys()
        for k, arrays in original.cell_sets.items():
            for x, y in zip(sets[k], arrays):
                np.testing.assert_array_equal(np.sort(x), np.sort(y))
    else:
        assert "element sets" in said and not sets


@pytest.mark.parametrize("fmt", list(EXTENSIONS))
def test_round_trip_renumbered(fmt, tmp_path):
    original = rich_model()
    first = _written_read(original, fmt, tmp_path / f"bracket{EXTENSIONS[fmt]}")
    _assert_kept_as_table_says(original, first, fmt)
    perm = np.random.default_rng(2).permutation(first.n_nodes)
    second = _written_read(first.renumbered(perm), fmt, tmp_path / f"renumbered{EXTENSIONS[fmt]}")
    _assert_same_through_map(first, second, perm, fmt)


def test_one_block_gmsh22_keeps_cell_fields(tmp_path):
    model = rich_model()
    one = Model(points=model.points, cells=model.cells[:1],
                cell_data={"pressure": model.cell_data["pressure"][:1]},
                cell_sets={"BODY": model.cell_sets["BODY"][:1]})
    assert losses(one, "gmsh22") == ["element sets 'BODY': " + FORMATS["gmsh22"].cell_sets]
    back = _written_read(one, "gmsh22", tmp_path / "one.msh")
    np.testing.assert_allclose(back.cell_data["pressure"][0], one.cell_data["pressure"][0])


def test_losses_name_everything_a_format_drops():
    model = rich_model()
    assert [s.split(":")[0] for s in losses(model, "gmsh")] == ["node sets 'WALL', 'LOAD'"]
    model_no_nodesets = Model(points=model.points, cells=model.cells,
                              point_data=model.point_data, cell_data=model.cell_data,
                              cell_sets=model.cell_sets)
    assert losses(model_no_nodesets, "gmsh") == []
    nastran = " ".join(losses(model, "nastran"))
    for word in ("nodal fields", "element fields", "node sets", "element sets"):
        assert word in nastran
    assert "has not checked" in losses(model, "su2")[0]


def test_deck_path_round_trip(tmp_path):
    """Keyword and bulk decks written by meshio, renumbered through the deck path, read back."""
    model = rich_model()
    for fmt in ("abaqus", "nastran"):
        path = tmp_path / f"bracket{EXTENSIONS[fmt]}"
        write_model(model, path, fmt)
        deck = read_deck(path)
        perm = np.random.default_rng(4).permutation(deck.n_nodes)
        ids = new_ids(deck.node_ids, perm)
        out = tmp_path / f"renumbered{EXTENSIONS[fmt]}"
        out.write_text(renumber_deck(deck, ids).text)
        before, after = deck.to_model(), read_deck(out).to_model()
        # positions follow the file order; map ids: the node with new id ids[i] has i's place
        pos = {int(i): k for k, i in enumerate(after.node_ids)}
        order = np.array([pos[ids[int(i)]] for i in before.node_ids])
        np.testing.assert_allclose(after.points[order], before.points)
        for a, b in zip(after.cells, before.cells):
            np.testing.assert_array_equal(a.data, order[b.data])
        for k, v in before.point_sets.items():
            assert sorted(after.point_sets[k].tolist()) == sorted(order[v].tolist())
        # and meshio reads the renumbered deck to the same geometry per element
        again = read_model(out)
        for a, b in zip(again.cells, model.cells):
            np.testing.assert_allclose(again.points[a.data], model.points[b.data])


def test_losses_for_output_follow_the_writer_choice():
    """A gmsh 2.2 source written to .msh stays gmsh 2.2 (write_model's rule), and says so."""
    from bandwise.formats.keeps import losses_for_output, output_format

    model = rich_model()
    assert output_format(model, "out.xdmf") == "xdmf"
    model.file_format = "gmsh22"
    assert output_format(model, "out.msh") == "gmsh22"
    assert losses_for_output(model, "out.msh") == losses(model, "gmsh22")
    assert output_format(model, "out.msh", "vtu") == "vtu"


def test_cli_says_what_the_output_format_loses(tmp_path, runner, cli_app):
    import json

    src = tmp_path / "bracket.vtu"
    write_model(rich_model(), src)
    result = runner.invoke(cli_app, ["renumber", str(src), str(tmp_path / "out.xdmf"),
                                     "--method", "rcm", "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    assert any(s.startswith("node sets 'WALL', 'LOAD'") for s in doc["losses"])
    assert any(s.startswith("element sets") for s in doc["losses"])
    assert "will not keep" in result.stderr          # said on stderr, stdout stays clean
    text = runner.invoke(cli_app, ["renumber", str(src), str(tmp_path / "out2.xdmf"),
                                   "--method", "rcm"])
    assert "not kept by the output format: node sets" in text.stdout


def test_merge_says_what_the_output_format_loses(tmp_path, runner, cli_app):
    import json

    src = tmp_path / "bracket.vtu"
    write_model(rich_model(), src)
    result = runner.invoke(cli_app, ["merge", str(src), str(tmp_path / "merged.xdmf"), "--json"])
    assert result.exit_code in (0, 1), result.stderr
    assert any(s.startswith("node sets") for s in json.loads(result.stdout)["losses"])
    assert "will not keep" in result.stderr
