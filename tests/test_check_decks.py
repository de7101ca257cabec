"""``bandwise check`` on solver input decks: the deck's own supports and links count.

Two tetrahedra tied by a rigid link (RBE2) form one structure: the parts
check must not call them disconnected (the link is connectivity, as the
condensed stiffness matrix shows once the constraint is eliminated; common
practice).  Boundary-condition cards hold DOFs exactly as ``--support``
does: the demo frame with every DOF of its six column bases held has no
zero-energy mode left (a space frame clamped at its bases is stable;
rigid-body kinematics).
"""

from __future__ import annotations

import json

from conftest import MESHES, TWO_TETS_BULK

TIED_TETS = TWO_TETS_BULK + """RBE2         100       2  123456      11
SPC1           1     123       1       3       4
ENDDATA
"""


def check_json(runner, app, path):
    result = runner.invoke(app, ["check", str(path), "--json"])
    return result.exit_code, json.loads(result.stdout)["meshes"][0]


def test_rigid_link_joins_parts_and_deck_supports_are_used(runner, cli_app, tmp_path):
    deck = tmp_path / "tied.bdf"
    deck.write_text(TIED_TETS)
    code, mesh = check_json(runner, cli_app, deck)
    codes = [f["code"] for f in mesh["findings"]]
    assert mesh["parts"] == 1 and "parts.disconnected" not in codes
    assert mesh["supports"][0]["held_dofs"] == 9          # SPC1 123 on three grids
    assert "boundary-condition cards" in mesh["supports"][0]["origin"]
    # the second tetrahedron hangs on one node: still free to turn, so singular
    assert "supports.free_modes" in codes and code == 1


def test_boundary_cards_of_a_keyword_deck_hold_the_frame(runner, cli_app, tmp_path):
    deck = tmp_path / "frame.inp"
    deck.write_text((MESHES / "frame.inp").read_text() + "*BOUNDARY\ncolumn_bases, 1, 6\n")
    _, mesh = check_json(runner, cli_app, deck)
    assert mesh["supports"][0]["held_dofs"] == 36         # 6 bases x 6 DOFs
    assert mesh["zero_energy_modes"]["total"] == 0
    assert mesh["equations"]["equations"] == 576 - 36
    _, free = check_json(runner, cli_app, MESHES / "frame.inp")
    assert free["zero_energy_modes"]["total"] == 6        # the same frame unsupported
