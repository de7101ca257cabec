"""Shared fixtures: where the reference data live, tiny meshes, a CLI runner.

The open reference data (test matrices, real mesh files) are read in place
from ``../shared/`` beside the repository.  A clone used elsewhere has no
such folder: those tests skip with a reason, except under CI (``CI=true``),
where a missing folder is a failure.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

ROOT = Path(__file__).resolve().parent.parent
SHARED = ROOT.parent / "shared"
MESHES = ROOT / "meshes"

#: Two unit tetrahedra 5 apart, as bulk data (the decks of the link tests add to it).
TWO_TETS_BULK = """BEGIN BULK
GRID           1              0.      0.      0.
GRID           2              1.      0.      0.
GRID           3              0.      1.      0.
GRID           4              0.      0.      1.
GRID          11              5.      0.      0.
GRID          12              6.      0.      0.
GRID          13              5.      1.      0.
GRID          14              5.      0.      1.
CTETRA         1       1       1       2       3       4
CTETRA         2       1      11      12      13      14
"""

settings.register_profile(
    "bandwise", derandomize=True, deadline=None, max_examples=40,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile("bandwise")


def shared_path(*parts: str) -> Path:
    """A path under ``../shared``; skip (or fail under CI) when it is missing."""
    path = SHARED.joinpath(*parts)
    if not path.exists():
        reason = f"reference data not found: {path} (the shared data folder beside the clone)"
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(reason)
        pytest.skip(reason)
    return path


@pytest.fixture
def runner():
    """A typer CLI runner that keeps stdout and stderr apart."""
    from typer.testing import CliRunner

    try:
        return CliRunner(mix_stderr=False)
    except TypeError:  # newer click keeps them apart by default
        return CliRunner()


@pytest.fixture
def cli_app():
    """The bandwise typer app with every command registered."""
    from bandwise.faces.cli import app, load_commands

    load_commands()
    return app


def seamed_blocks(path: Path, seed: int = 4) -> Path:
    """A bracket foot meshed as two tetrahedral blocks that were never merged, written to ``path``.

    Block A spans x = 0..25 (6 x 5 x 4 nodes), block B x = 25..45 (5 x 5 x 4 nodes),
    both with spacing 5: the 20 nodes of B's face x = 25 lie on A's. Merged, the
    two blocks are the one grid of 10 x 5 x 4 = 200 nodes (by construction).
    """
    import numpy as np

    from bandwise.core.generate import scrambled, tet_grid
    from bandwise.core.model import CellBlock, Model
    from bandwise.formats.meshio_io import write_model

    a, b = tet_grid(6, 5, 4, h=5.0), tet_grid(5, 5, 4, h=5.0)
    points = np.concatenate([a.points, b.points + [25.0, 0.0, 0.0]])
    cells = [CellBlock("tetra", np.concatenate([a.cells[0].data, b.cells[0].data + a.n_nodes]))]
    write_model(scrambled(Model(points=points, cells=cells), seed=seed), path)
    return path


def assert_same_mesh(a, b) -> None:
    """Assert two meshes (bandwise Models or meshio Meshes) hold the same arrays.

    Points, cell types and connectivity, point and cell data (values and
    dtypes) and, where both have it, field data.
    """
    np.testing.assert_array_equal(a.points, b.points)
    assert a.points.dtype == b.points.dtype
    assert [x.type for x in a.cells] == [y.type for y in b.cells]
    for x, y in zip(a.cells, b.cells, strict=True):
        np.testing.assert_array_equal(x.data, y.data)
    assert a.point_data.keys() == b.point_data.keys()
    for k in a.point_data:
        np.testing.assert_array_equal(a.point_data[k], b.point_data[k])
        assert a.point_data[k].dtype == b.point_data[k].dtype
    assert a.cell_data.keys() == b.cell_data.keys()
    for k in a.cell_data:
        for x, y in zip(a.cell_data[k], b.cell_data[k], strict=True):
            np.testing.assert_array_equal(x, y)
            assert x.dtype == y.dtype
    assert a.field_data.keys() == b.field_data.keys()
    for k in a.field_data:
        np.testing.assert_array_equal(a.field_data[k], b.field_data[k])
