"""``bandwise renumber`` with supports: equations counted and numbered in the new order.

The demo bracket's mounting face is the plane z = 0 of a 25 x 9 node grid
(scripts/make_demo_meshes.py): 225 nodes, so holding it fixed sets 675
translational DOFs aside (3 per solid node, common practice).  The reduced
figures must equal those of the library's equation numbering under the
chosen permutation, whose own tests compare them with the definitions on
the expanded matrix.
"""

from __future__ import annotations

import csv
import json

from conftest import MESHES

from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.equations import equation_numbering
from bandwise.core.graph import node_graph
from bandwise.formats import read_model
from bandwise.formats.node_map import read_node_map


def test_renumber_reports_the_reduced_system_and_writes_the_dof_map(runner, cli_app, tmp_path):
    out, dofs = tmp_path / "b.msh", tmp_path / "b.dofs.csv"
    result = runner.invoke(cli_app, ["renumber", str(MESHES / "bracket.msh"), str(out),
                                     "--method", "rcm", "--support", "mount_face:fixed",
                                     "--dof-map", str(dofs), "--json"])
    assert result.exit_code == 0, result.stderr
    eq = json.loads(result.stdout)["equations"]
    after = eq["after"]
    assert after["dofs"] == 3915 and after["fixed_dofs"] == 675
    assert after["equations"] == 3915 - 675
    # the same numbering from the library, with the permutation from the map
    model = read_model(MESHES / "bracket.msh")
    layout = dof_layout(model)
    held = apply_supports(model, layout, [parse_support("mount_face:fixed")])
    perm = read_node_map(tmp_path / "b.map.csv").perm
    ref = equation_numbering(layout, held.fixed, perm, node_graph(model))
    assert after["reduced_system"]["bandwidth"] == ref.reduced.bandwidth
    assert after["reduced_system"]["profile"] == ref.reduced.profile
    assert eq["before"]["reduced_system"]["profile"] > ref.reduced.profile
    rows = list(csv.DictReader(dofs.open()))
    assert len(rows) == 3915
    assert sum(r["equation"] == "fixed" for r in rows) == 675
    numbers = [int(r["equation"]) for r in rows if r["equation"] != "fixed"]
    assert numbers == list(range(1, 3241))  # free DOFs numbered in node order of the output


def test_deck_boundary_cards_count_when_renumbering(runner, cli_app, tmp_path):
    # The demo frame's six column bases held in all 6 DOFs by a *BOUNDARY
    # card: 36 DOFs set aside, as --support "column_bases:fixed" would.
    deck = tmp_path / "frame.inp"
    deck.write_text((MESHES / "frame.inp").read_text() + "*BOUNDARY\ncolumn_bases, 1, 6\n")
    result = runner.invoke(cli_app, ["renumber", str(deck), str(tmp_path / "out.inp"),
                                     "--method", "rcm", "--json"])
    assert result.exit_code == 0, result.stderr
    after = json.loads(result.stdout)["equations"]["after"]
    assert after["fixed_dofs"] == 36 and after["equations"] == 540
    text = (tmp_path / "out.inp").read_text()
    assert text.rstrip().endswith("*BOUNDARY\ncolumn_bases, 1, 6")  # the card kept as written
