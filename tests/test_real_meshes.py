"""``bandwise check`` over every real mesh file in the shared collection.

Reference: ``../shared/meshes-real/inventory.json``, which records what
meshio 5.3.5 makes of each file (points, cells by type, whether it reads).
Files meshio reads must give figures whose counts equal the inventory's;
files it cannot read must give the clean one-line error and exit code 2.
"""

from __future__ import annotations

import json

import pytest
from conftest import SHARED, shared_path


def inventory():
    path = SHARED / "meshes-real" / "inventory.json"
    if not path.exists():
        return []
    return [f for f in json.loads(path.read_text())["files"] if f["role"] == "mesh"]


def _grid_cards(path):
    """Number of GRID / GRID* cards of a bulk-data deck (first field of a line)."""
    count = 0
    for line in path.read_text(errors="replace").splitlines():
        first = line.split(",")[0][:8].strip().upper()
        count += first in ("GRID", "GRID*")
    return count


def _id(entry):
    return entry["file"]


@pytest.mark.parametrize("entry", inventory() or [None], ids=lambda e: _id(e) if e else "none")
def test_check_every_real_mesh(runner, cli_app, entry):
    if entry is None:
        shared_path("meshes-real", "inventory.json")  # skips, or fails under CI
    path = shared_path("meshes-real", entry["file"])
    facts = entry["meshio_5_3_5"]
    result = runner.invoke(cli_app, ["check", str(path), "--json"])
    reads = facts["reads"] and facts.get("autodetect_reads", True)
    n_cells = sum(facts.get("cells", {}).values()) if reads else 0
    if path.suffix.lower() in (".bdf", ".nas", ".fem") and not (reads and n_cells > 0):
        # bandwise reads bulk-data decks itself (free field, continuations,
        # INCLUDE files), where meshio fails or finds no elements: the
        # reference is then the file's own node cards.
        assert result.exit_code in (0, 1), result.stderr
        mesh = json.loads(result.stdout)["meshes"][0]
        assert mesh["nodes"] == _grid_cards(path) and mesh["n_elements"] > 0
        return
    if reads and n_cells > 0:
        # 0: nothing at or above --fail-on; 1: it ran and found problems (real
        # files do have disconnected parts and inverted cells)
        assert result.exit_code in (0, 1), result.stderr
        mesh = json.loads(result.stdout)["meshes"][0]
        assert mesh["nodes"] == facts["points"]
        assert mesh["n_elements"] == n_cells
        assert mesh["current_numbering"]["nodes"]["n_rows"] == facts["points"]
        # nodes no cell references are orphans; nodes held only by vertex
        # cells are isolated in the graph too, so the count can only be larger
        assert mesh["orphan_nodes"] >= facts["unreferenced_points"]
    else:
        # unreadable, undetectable without --format, or nodes without elements
        assert result.exit_code == 2, result.stdout
        lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
        assert len(lines) == 1 and lines[0].startswith("bandwise: error: ")
        assert "Traceback" not in result.stderr and path.name in lines[0]
