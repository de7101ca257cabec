"""Every writable format of the registry round-tripped through a random renumbering.

For each format bandwise writes: write a mesh rich in content, read it back
(what the format's row of the registry says is kept comes back equal, what
it says is lost is named by the loss report before writing), renumber it
with a random permutation, write and read again, apply the inverse map, and
get the first read back exactly: points, cells, fields and sets.  The
reader is meshio, the open reference reader of these formats (bandwise
verifies every file it writes with meshio's public ``read`` before renaming
it into place).
"""

from __future__ import annotations

import numpy as np
import pytest

from bandwise.core.generate import hex_grid
from bandwise.core.model import CellBlock, Model, inverse_permutation
from bandwise.formats import plan_output, read_model, write_model
from bandwise.formats.decks import new_ids, read_deck, renumber_deck
from bandwise.formats.keeps import losses
from bandwise.formats.registry import FORMATS, NO, YES, writable_names

WRITABLE = writable_names()


def ext(fmt: str) -> str:
    return FORMATS[fmt].extensions[0]


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


def zones_model() -> Model:
    """Hexahedra only, with two zone groups (a FLAC3D grid holds zones and their groups)."""
    model = rich_model()
    hexes = model.cells[0].data
    return Model(points=model.points, cells=[CellBlock("hexahedron", hexes)],
                 point_data=model.point_data,
                 cell_data={"pressure": model.cell_data["pressure"][:1]},
                 cell_sets={"BODY": [np.arange(len(hexes))], "TOP": [np.arange(4, len(hexes))]})


#: The mesh each writable format is round-tripped with.
CASES = {name: (zones_model if name == "flac3d" else rich_model) for name in WRITABLE}


def test_every_writable_format_has_a_round_trip():
    assert set(CASES) == set(WRITABLE)
    # the registry lists formats it reads but does not write, with the reason
    assert "su2" in FORMATS and not FORMATS["su2"].writable and FORMATS["su2"].refusal


def _own(d: dict) -> dict:
    return {k: v for k, v in d.items() if not k.startswith(("gmsh:", "med:"))}


def _written_read(model: Model, fmt: str, path) -> Model:
    write_model(model, path, fmt)
    return read_model(path, fmt)


def _cells(model: Model, cell_type: str) -> np.ndarray:
    return np.concatenate([b.data for b in model.cells if b.type == cell_type])


def _cell_field(model: Model, name: str, cell_type: str) -> np.ndarray:
    return np.concatenate([a for a, b in zip(model.cell_data[name], model.cells)
                           if b.type == cell_type])


def _cell_sets_of(model: Model, fmt: str) -> dict[str, dict[str, list[int]]]:
    """Element sets as read back, as sorted member positions per cell type.

    gmsh 2.2 gives them as physical tags and names rather than sets.
    """
    out: dict[str, dict[str, list[int]]] = {}
    if fmt == "gmsh22":
        for name, (tag, _) in ((k, v) for k, v in model.field_data.items() if len(v) == 2):
            per = {}
            for t in model.cells_by_type():
                tags = _cell_field(model, "gmsh:physical", t)
                per[t] = np.flatnonzero(tags == tag).tolist()
            out[name] = {t: v for t, v in per.items() if v}
        return out
    for name, arrays in _own(model.cell_sets).items():
        per: dict[str, list[int]] = {}
        offset: dict[str, int] = {}
        for b, idx in zip(model.cells, arrays):
            start = offset.get(b.type, 0)
            per.setdefault(b.type, []).extend((np.asarray(idx) + start).tolist())
            offset[b.type] = start + len(b)
        out[name] = {t: sorted(v) for t, v in per.items() if v}
    return out


def _assert_same(first: Model, back: Model, fmt: str) -> None:
    """``back`` equals ``first``: points, cells per type, fields, sets."""
    np.testing.assert_allclose(back.points[:, :3], first.points[:, :3])
    assert back.cells_by_type() == first.cells_by_type()
    for t in first.cells_by_type():
        np.testing.assert_array_equal(_cells(back, t), _cells(first, t))
    assert _own(back.point_data).keys() == _own(first.point_data).keys()
    for k, v in _own(first.point_data).items():
        np.testing.assert_allclose(back.point_data[k], v)
    assert _own(back.cell_data).keys() == _own(first.cell_data).keys()
    for k in _own(first.cell_data):
        for t in first.cells_by_type():
            np.testing.assert_allclose(_cell_field(back, k, t), _cell_field(first, k, t))
    if fmt in ("gmsh", "gmsh22"):
        for k in ("gmsh:physical", "gmsh:geometrical"):
            for t in first.cells_by_type():
                np.testing.assert_array_equal(_cell_field(back, k, t), _cell_field(first, k, t))
    assert back.point_sets.keys() == first.point_sets.keys()
    for k, v in first.point_sets.items():
        assert sorted(back.point_sets[k].tolist()) == sorted(v.tolist())
    assert _cell_sets_of(back, fmt) == _cell_sets_of(first, fmt)


def _assert_kept_as_the_registry_says(original: Model, read: Model, fmt: str) -> None:
    """What the format's row says is kept came back equal; what it says is lost is reported."""
    holds = FORMATS[fmt].holds
    np.testing.assert_allclose(read.points[:, :3], original.points)
    for t in original.cells_by_type():
        np.testing.assert_array_equal(_cells(read, t), _cells(original, t))
    said = " ".join(losses(original, fmt))
    if holds.point_fields == YES:
        for k, v in original.point_data.items():
            np.testing.assert_allclose(read.point_data[k], v)
    else:
        assert "nodal fields" in said and not set(original.point_data) & set(read.point_data)
    cells_kept = holds.cell_fields == YES or (fmt == "gmsh22" and len(original.cells) == 1)
    if cells_kept:
        for t in original.cells_by_type():
            np.testing.assert_allclose(_cell_field(read, "pressure", t),
                                       _cell_field(original, "pressure", t))
    else:
        assert "element fields" in said and "pressure" not in read.cell_data
    if holds.node_sets == YES or holds.node_sets.startswith("written as 0/1"):
        for k, v in original.point_sets.items():
            np.testing.assert_array_equal(np.sort(read.point_sets[k]), np.sort(v))
    else:
        assert not read.point_sets
    if holds.node_sets != YES and original.point_sets:
        assert "node sets" in said           # fields are not sets for other readers
    if holds.cell_sets == NO:
        assert "element sets" in said and not _cell_sets_of(read, fmt)
    else:
        assert _cell_sets_of(read, fmt) == _cell_sets_of(original, "as sets")


@pytest.mark.parametrize("fmt", WRITABLE)
def test_round_trip_through_the_inverse_map(fmt, tmp_path):
    original = CASES[fmt]()
    first = _written_read(original, fmt, tmp_path / f"bracket{ext(fmt)}")
    _assert_kept_as_the_registry_says(original, first, fmt)
    perm = np.random.default_rng(2).permutation(first.n_nodes)
    second = _written_read(first.renumbered(perm), fmt, tmp_path / f"renumbered{ext(fmt)}")
    # the renumbered file read by position is the renumbered mesh ...
    np.testing.assert_allclose(second.points[:, :3], first.points[perm][:, :3])
    # ... and the inverse map (old position -> new position) gives the first read back
    _assert_same(first, second.renumbered(inverse_permutation(perm)), fmt)


def test_one_block_gmsh22_keeps_cell_fields(tmp_path):
    model = rich_model()
    one = Model(points=model.points, cells=model.cells[:1],
                cell_data={"pressure": model.cell_data["pressure"][:1]},
                cell_sets={"BODY": model.cell_sets["BODY"][:1]})
    assert losses(one, "gmsh22") == ["element sets 'BODY': read back as element tags and "
                                     "physical names, not as sets"]
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


def test_gmsh_set_losses_are_counted_before_writing(tmp_path):
    """An element in two sets keeps one physical group; the report says how many come back."""
    model = rich_model()
    model.cell_sets["HALF"] = [np.arange(6), np.zeros(0, np.int64), np.zeros(0, np.int64)]
    said = [s for s in losses(model, "gmsh") if s.startswith("element set 'HALF'")]
    # the six hexahedra of HALF are in BODY first: none of them comes back in HALF
    assert said == ["element set 'HALF': comes back with 0 of its 6 elements (gmsh gives each "
                    "element one physical group, or groups to whole entities, of one "
                    "dimension)"]
    back = _written_read(model, "gmsh", tmp_path / "half.msh")
    assert [len(a) for a in back.cell_sets["HALF"]] == [0] * len(back.cells)
    assert sum(len(a) for a in back.cell_sets["BODY"]) == 12


def test_gmsh_bounding_entities_come_back(tmp_path):
    """gmsh 4.1 bounding entities (meshio's gmsh:bounding_entities) survive a renumbering."""
    from conftest import shared_path

    path = shared_path("meshes-real", "meshio", "insulated-4.1.msh")
    model = read_model(path)
    bounds = model.field_data["gmsh:bounding_entities"]
    assert bounds and all(len(v) for v in bounds.values())
    perm = np.random.default_rng(5).permutation(model.n_nodes)
    back = _written_read(model.renumbered(perm), "gmsh", tmp_path / "insulated.msh")
    assert back.field_data["gmsh:bounding_entities"] == bounds
    # the physical groups come back with the same elements
    assert _cell_sets_of(back, "gmsh") == _cell_sets_of(model, "gmsh")


def test_deck_path_round_trip(tmp_path):
    """Keyword and bulk decks written by meshio, renumbered through the deck path, read back."""
    model = rich_model()
    for fmt in ("abaqus", "nastran"):
        path = tmp_path / f"bracket{ext(fmt)}"
        write_model(model, path, fmt)
        deck = read_deck(path)
        perm = np.random.default_rng(4).permutation(deck.n_nodes)
        ids = new_ids(deck.node_ids, perm)
        out = tmp_path / f"renumbered{ext(fmt)}"
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


def test_plan_follows_the_writer_choice():
    """A gmsh 2.2 source written to .msh stays gmsh 2.2, and its losses are gmsh 2.2's."""
    from bandwise.formats.registry import FileKind

    model = rich_model()
    assert plan_output(model, "out.xdmf").format == "xdmf"
    model.file_kind = FileKind("gmsh22", "2.2", "ascii")
    plan = plan_output(model, "out.msh")
    assert plan.format == "gmsh22" and plan.kind == FileKind("gmsh22", "2.2", "ascii")
    assert list(plan.losses) == losses(model, "gmsh22")
    assert plan_output(model, "out.msh", "vtu").format == "vtu"


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
    assert doc["output_kind"] == {"format": "xdmf", "version": None, "encoding": "hdf5",
                                  "compression": None}
    # said on stderr as a sentence naming the file, stdout stays clean
    assert "bandwise: note: writing out.xdmf: node sets 'WALL', 'LOAD'" in result.stderr
    text = runner.invoke(cli_app, ["renumber", str(src), str(tmp_path / "out2.xdmf"),
                                   "--method", "rcm"])
    assert "writing out2.xdmf: node sets" in text.stdout


def test_merge_says_what_the_output_format_loses(tmp_path, runner, cli_app):
    import json

    src = tmp_path / "bracket.vtu"
    write_model(rich_model(), src)
    result = runner.invoke(cli_app, ["merge", str(src), str(tmp_path / "merged.xdmf"), "--json"])
    assert result.exit_code in (0, 1), result.stderr
    assert any(s.startswith("node sets") for s in json.loads(result.stdout)["losses"])
    assert "bandwise: note: writing merged.xdmf: node sets" in result.stderr
