"""Rigid links in the zero-energy (rigid-body) analysis.

Sources: a free 3D rigid body has 6 rigid-body motions, a plane one 3 (common
practice; any mechanics text, e.g. Cook, Malkus, Plesha, Witt, "Concepts and
Applications of Finite Element Analysis", 4th ed., 2002, sec. 2.7).  Two rigid
bodies sharing one point form a spherical joint: 6 + 3 = 9 degrees of freedom
(Grubler-Kutzbach count, common practice).
"""

from __future__ import annotations

import numpy as np
from conftest import TWO_TETS_BULK

from bandwise.algorithms.rigid import Link, link_layout, zero_energy_modes
from bandwise.algorithms.supports import SupportSet, no_supports
from bandwise.core.dofs import SOLID, dof_layout
from bandwise.core.generate import tet_grid
from bandwise.core.model import CellBlock, Model


def _two_blocks(gap: float = 3.0) -> Model:
    a = tet_grid(2, 2, 2)
    pts = np.vstack([a.points, a.points + [gap, 0.0, 0.0]])
    c = a.cells[0].data
    return Model(points=pts, cells=[CellBlock("tetra", np.vstack([c, c + a.n_nodes]))])


def _modes(model, links, fixed_nodes=()):
    layout = link_layout(model, dof_layout(model), links)
    fixed = np.zeros(model.n_nodes, dtype=np.int64)
    for n in fixed_nodes:
        fixed[n] = layout.masks[n]
    supports = SupportSet(fixed, ()) if fixed_nodes else no_supports(model.n_nodes)
    return zero_energy_modes(model, layout, supports, links=links)


def test_without_links_two_free_blocks_have_twelve_modes() -> None:
    assert _modes(_two_blocks(), ()).total == 12   # 6 per free body (common practice)


def test_rbe2_over_both_blocks_leaves_one_rigid_body() -> None:
    # reference node 0 of block A, dependents: three more nodes of A, three of B
    link = Link("rigid", "RBE2", np.array([0, 1, 2, 4, 8, 9, 10]))
    assert _modes(_two_blocks(), [link]).total == 6


def test_rbe2_from_one_node_of_a_is_a_spherical_joint() -> None:
    # reference node 0 on solid block A (no rotations there), dependents on block B:
    # B is rigidly tied to the point 0 only, so it may still turn about it: 6 + 3
    link = Link("rigid", "RBE2", np.array([0, 8, 9, 10, 12]))
    assert _modes(_two_blocks(), [link]).total == 9


def test_translation_only_link_on_solid_nodes_is_the_same_as_all_dofs() -> None:
    # solid nodes carry no rotations, so "123" and "123456" tie the same DOFs
    full = Link("rigid", "RBE2", np.array([0, 1, 2, 4, 8, 9, 10]))
    trans = Link("rigid", "RBE2", full.nodes, SOLID)
    assert _modes(_two_blocks(), [trans]).total == _modes(_two_blocks(), [full]).total == 6


def test_block_hanging_from_a_held_reference_node_has_no_modes() -> None:
    block = tet_grid(2, 2, 2)
    pts = np.vstack([block.points, [[0.5, 0.5, 3.0]]])       # node 8: in no element
    model = Model(points=pts, cells=block.cells)
    link = Link("rigid", "RBE2", np.array([8, 4, 5, 6, 7]))
    assert _modes(model, [link]).total == 6                     # free: one rigid body
    assert _modes(model, [link], fixed_nodes=[8]).total == 0    # held reference node


def test_rbe3_is_left_out_with_a_note() -> None:
    link = Link("average", "RBE3", np.array([0, 8, 9, 10, 12]))
    a = _modes(_two_blocks(), [link])
    assert a.total == 12      # RBE3 adds no stiffness between the blocks
    assert any("RBE3" in n and "not modelled" in n for n in a.notes)


HANGING_BULK = TWO_TETS_BULK + """GRID          99              3.      0.      0.
RBE2         100      99  123456       2       3       4      11      12
RBE2         101      99  123456      13
"""


def _json_modes(runner, app, path):
    import json

    result = runner.invoke(app, ["check", str(path), "--json"])
    return json.loads(result.stdout)["meshes"][0]["zero_energy_modes"]["total"]


def test_check_counts_the_modes_of_an_rbe2_tied_deck(runner, cli_app, tmp_path) -> None:
    # both tetrahedra tied through the bare reference grid 99: one rigid body, 6 modes
    free = tmp_path / "tied.bdf"
    free.write_text(HANGING_BULK + "ENDDATA\n")
    assert _json_modes(runner, cli_app, free) == 6
    # the reference grid held in all 6 DOFs holds the whole structure
    held = tmp_path / "held.bdf"
    held.write_text(HANGING_BULK + "SPC1           1  123456      99\nENDDATA\n")
    assert _json_modes(runner, cli_app, held) == 0


KINEMATIC_INP = """*NODE
1, 0., 0., 0.
2, 1., 0., 0.
3, 0., 1., 0.
4, 0., 0., 1.
99, 0.3, 0.3, 3.
*ELEMENT, TYPE=C3D4
1, 1, 2, 3, 4
*KINEMATIC COUPLING, REF NODE=99
2, 1, 6
3, 1, 6
4, 1, 6
"""


def test_kinematic_coupling_of_a_keyword_deck(runner, cli_app, tmp_path) -> None:
    free = tmp_path / "k.inp"
    free.write_text(KINEMATIC_INP)
    assert _json_modes(runner, cli_app, free) == 6
    held = tmp_path / "kh.inp"
    held.write_text(KINEMATIC_INP + "*BOUNDARY\n99, 1, 6\n")
    assert _json_modes(runner, cli_app, held) == 0


def test_rbe2_components_are_read_and_a_missing_node_is_an_error(tmp_path) -> None:
    import pytest

    from bandwise.core.errors import MeshReadError
    from bandwise.formats.decks import parse_bulk_deck
    from bandwise.workflows.deck_inputs import deck_rigid_links

    text = HANGING_BULK.replace("RBE2         101      99  123456", "RBE2         101      99     123")
    links = deck_rigid_links(parse_bulk_deck(text + "ENDDATA\n", "t.bdf"))
    assert [ln.components for ln in links] == [SOLID | 0o70, SOLID]   # 123456, 123
    assert [ln.kind for ln in links] == ["rigid", "rigid"]
    bad = HANGING_BULK.replace("      13\n", "      77\n")
    with pytest.raises(MeshReadError):
        deck_rigid_links(parse_bulk_deck(bad + "ENDDATA\n", "t.bdf"))


def test_stiffness_check_of_a_linked_deck_says_it_was_not_checked(runner, cli_app,
                                                                   tmp_path) -> None:
    # The unit-material stiffness has no term for a rigid link, so comparing its
    # null space with the linked kinematic count would report a false disagreement:
    # the check must say it did not run, and why.
    import json

    path = tmp_path / "tied.bdf"
    path.write_text(HANGING_BULK + "ENDDATA\n")
    result = runner.invoke(cli_app, ["check", str(path), "--json", "--stiffness-check"])
    doc = json.loads(result.stdout)["meshes"][0]
    text = json.dumps(doc)
    assert doc["zero_energy_modes"]["total"] == 6
    assert "rigid link(s) have no stiffness representation" in text
    assert "stiffness.disagrees" not in text


def test_report_of_a_deck_uses_its_links_and_boundary_cards(runner, cli_app, tmp_path) -> None:
    # `report` reads a deck as `check` does: the RBE2 ties the two tetrahedra
    # into one rigid body (6 modes, common practice for a free 3D body) and the
    # SPC1 on the reference grid holds it (0).
    import json

    for text, expected in ((HANGING_BULK + "ENDDATA\n", 6),
                           (HANGING_BULK + "SPC1           1  123456      99\nENDDATA\n", 0)):
        deck = tmp_path / f"deck{expected}.bdf"
        deck.write_text(text)
        out = tmp_path / f"report{expected}"
        result = runner.invoke(cli_app, ["report", str(deck), "--out", str(out)])
        assert result.exit_code == 0, result.output
        doc = json.loads((out / "report.json").read_text())
        assert doc["modes"]["total"] == expected
