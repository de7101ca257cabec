"""Memory estimate before analysis, and refusal of input too large for the machine.

The estimate is checked against a measurement (resident size growth sampled
from ``/proc/self/statm``; traced numpy allocations, ``tracemalloc``) on a
100,000-node tetrahedral mesh; the header counts against the counts meshio
reads from the same files.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from bandwise.core import memory
from bandwise.core.errors import InputError, MeshReadError
from bandwise.core.generate import tet_grid
from bandwise.core.memory import (
    check_fits,
    estimate_bytes,
    memory_estimate,
)
from bandwise.formats import read_model, write_model
from bandwise.formats.headers import HeaderCounts
from bandwise.formats.registry import header_counts

ROOT = Path(__file__).resolve().parent.parent


def test_estimate_within_a_factor_of_the_measured_peak():
    """Estimate / measured peak growth within [0.67, 1.5] on 100,000 nodes (about 560,000 tetra)."""
    out = subprocess.run([sys.executable, str(ROOT / "scripts" / "memory_check.py"),
                          "--nodes", "100000"], capture_output=True, text=True, timeout=300,
                         check=True).stdout
    ratio = float(re.search(r"estimate/measured ([\d.]+)", out).group(1))
    assert 0.67 <= ratio <= 1.5, out


def test_estimate_grows_with_the_mesh():
    small = memory_estimate(10_000, {"tetra": 50_000})
    big = memory_estimate(1_000_000, {"tetra": 5_000_000})
    # every stage is linear in the mesh size
    assert big.read == pytest.approx(100 * small.read, rel=1e-3)
    assert big.graph == pytest.approx(100 * small.graph, rel=1e-3)
    assert big.nnz == 14 * 1_000_000
    # a hexahedral node has 26 neighbours: more graph for the same node count
    assert memory_estimate(10_000, {"hexahedron": 10_000}).nnz == 26 * 10_000


def test_check_fits_refuses_with_the_figures(monkeypatch):
    check_fits(10 * 2**20, available=2**30)            # fits: nothing happens
    with pytest.raises(InputError, match=r"needs about 2\.0 GiB .* 1\.0 GiB available"):
        check_fits(2 * 2**30, available=2**30)
    monkeypatch.setenv("BANDWISE_MEMORY_CHECK", "off")
    check_fits(2 * 2**30, available=2**30)             # the user asked to run anyway


def test_available_bytes_is_read_from_the_machine():
    avail = memory.available_bytes()
    assert avail is not None and avail > 0
    total = None
    with open("/proc/meminfo") as fh:
        for line in fh:
            if line.startswith("MemTotal:"):
                total = int(line.split()[1]) * 1024
    assert total is None or avail <= total


@pytest.mark.parametrize("fmt,ext", [("gmsh22", ".msh"), ("vtu", ".vtu")])
def test_header_counts_match_the_full_read(fmt, ext, tmp_path):
    model = tet_grid(6, 5, 4)
    path = tmp_path / f"box{ext}"
    write_model(model, path, fmt)
    counts = header_counts(path)
    back = read_model(path)
    assert counts.nodes == back.n_nodes == model.n_nodes
    assert counts.cells == back.n_cells and counts.plausible


def test_header_counts_of_ascii_gmsh41(tmp_path):
    import meshio

    from bandwise.formats.meshio_io import to_meshio

    path = tmp_path / "box.msh"
    mesh = to_meshio(tet_grid(4, 4, 4))
    mesh.cell_data = {"gmsh:physical": [[1] * 162], "gmsh:geometrical": [[1] * 162]}
    meshio.gmsh.write(path, mesh, fmt_version="4.1", binary=False)
    assert header_counts(path) == HeaderCounts(64, 162)


def test_header_counts_none_where_the_format_does_not_allow(tmp_path):
    path = tmp_path / "box.inp"
    write_model(tet_grid(3, 3, 3), path)
    assert header_counts(path) is None


def test_header_counts_of_binary_gmsh41(tmp_path):
    binary = tmp_path / "box.msh"
    write_model(tet_grid(4, 3, 3), binary, "gmsh")   # 4.1 binary: counts are size_t
    assert header_counts(binary) == HeaderCounts(36, 6 * 3 * 2 * 2)


def test_announced_counts_beyond_the_file_size_are_refused(tmp_path):
    path = tmp_path / "box.msh"
    write_model(tet_grid(4, 4, 4), path, "gmsh22")
    data = path.read_bytes().replace(b"$Nodes\n64\n", b"$Nodes\n64000000\n")
    path.write_bytes(data)
    with pytest.raises(MeshReadError, match="64,000,000 nodes"):
        read_model(path)


def test_gmsh41_counts_contradicting_their_blocks_are_refused(tmp_path):
    """A 4.1 header with no entity block but nodes to come: meshio would return garbage."""
    import meshio

    from bandwise.formats.meshio_io import to_meshio

    path = tmp_path / "box.msh"
    mesh = to_meshio(tet_grid(3, 3, 3))
    mesh.cell_data = {"gmsh:physical": [[1] * 48], "gmsh:geometrical": [[1] * 48]}
    meshio.gmsh.write(path, mesh, fmt_version="4.1", binary=False)
    text = path.read_text()
    head = text.split("$Nodes\n")[1].split("\n")[0]
    path.write_text(text.replace("$Nodes\n" + head, "$Nodes\n0 " + head.split(" ", 1)[1]))
    with pytest.raises(MeshReadError, match="contradict"):
        read_model(path)


def test_too_large_file_refused_before_reading(tmp_path, monkeypatch):
    path = tmp_path / "box.msh"
    write_model(tet_grid(10, 10, 10), path, "gmsh22")
    monkeypatch.setattr(memory, "available_bytes", lambda: 2**20)

    def no_read():
        raise AssertionError("the file was read although its header was enough")

    monkeypatch.setattr("bandwise.formats.meshio_io._meshio", no_read)
    with pytest.raises(InputError, match="needs about"):
        read_model(path)


def test_cli_refuses_in_one_line(tmp_path, monkeypatch, runner, cli_app):
    path = tmp_path / "box.vtk"                       # no header counts: refused after reading
    write_model(tet_grid(8, 8, 8), path)
    need = estimate_bytes(512, {"tetra": 6 * 7 ** 3})
    monkeypatch.setattr(memory, "available_bytes", lambda: need // 2)
    result = runner.invoke(cli_app, ["check", str(path)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "needs about" in lines[0] and "Traceback" not in result.stderr
