"""The format registry: the README's table, the kind of file written, what is refused.

References: meshio's public reader (what a downstream user reads back), the
files' own headers (gmsh reference manual, "MSH file format": ``$MeshFormat``
``version file-type data-size``; VTK file formats, legacy: the version line
and ``ASCII``/``BINARY`` on the third line; VTK XML: ``compressor`` and the
``format`` of each ``DataArray``).
"""

from __future__ import annotations

import json
from pathlib import Path

import meshio
import numpy as np
import pytest
from conftest import shared_path

from bandwise.core.dofs import dof_layout
from bandwise.core.errors import MeshWriteError
from bandwise.core.generate import scrambled, tet_grid
from bandwise.core.graph import node_graph
from bandwise.core.metrics import metrics
from bandwise.formats import plan_output, read_model, write_model
from bandwise.formats.meshio_io import model_from_meshio
from bandwise.formats.registry import FORMATS, FileKind, detect, keeps_table, read_only_text

ROOT = Path(__file__).resolve().parent.parent


def test_the_readme_table_is_the_registry():
    import importlib.util

    spec = importlib.util.spec_from_file_location("format_table",
                                                  ROOT / "scripts" / "format_table.py")
    script = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(script)
    readme = (ROOT / "README.md").read_text()
    assert script.generated() in readme
    assert keeps_table() in readme and read_only_text() in readme
    # one row per writable format, and the deck row
    rows = [ln for ln in keeps_table().splitlines() if ln.startswith("| ") and "---" not in ln]
    assert len(rows) == 1 + sum(f.writable for f in FORMATS.values()) + 1


def _header(path: Path, n: int = 3) -> list[bytes]:
    return path.read_bytes().split(b"\n")[:n]


def _renumber(runner, cli_app, src: Path, out: Path, *extra: str):
    result = runner.invoke(cli_app, ["renumber", str(src), str(out), "--method", "rcm", "--json",
                                     *extra])
    assert result.exit_code == 0, result.stderr
    return json.loads(result.stdout)


@pytest.mark.parametrize("version,encoding", [("4.2", "ascii"), ("4.2", "binary"),
                                              ("5.1", "ascii"), ("5.1", "binary")])
def test_legacy_vtk_comes_back_as_the_same_version_and_encoding(runner, cli_app, tmp_path,
                                                               version, encoding):
    model = scrambled(tet_grid(5, 4, 4), seed=1)
    src = tmp_path / "plate.vtk"
    meshio.write(src, meshio.Mesh(model.points, [("tetra", model.cells[0].data)]),
                 file_format="vtk42" if version == "4.2" else "vtk", binary=encoding == "binary")
    assert _header(src)[0] == f"# vtk DataFile Version {version}".encode()
    out = tmp_path / "renumbered.vtk"
    doc = _renumber(runner, cli_app, src, out)
    head = _header(out)
    assert head[0] == f"# vtk DataFile Version {version}".encode()
    assert head[2] == encoding.upper().encode()
    assert doc["output_kind"] == {"format": "vtk", "version": version, "encoding": encoding,
                                  "compression": None}
    assert meshio.read(out).points.shape[0] == model.n_nodes


@pytest.mark.parametrize("binary,compression", [(False, None), (True, None), (True, "zlib"),
                                                (True, "lzma")])
def test_vtu_keeps_its_encoding_and_compression(runner, cli_app, tmp_path, binary, compression):
    model = tet_grid(4, 4, 3)
    src = tmp_path / "plate.vtu"
    meshio.write(src, meshio.Mesh(model.points, [("tetra", model.cells[0].data)]),
                 binary=binary, compression=compression)
    out = tmp_path / "renumbered.vtu"
    doc = _renumber(runner, cli_app, src, out)
    text = out.read_bytes()
    assert (b'format="ascii"' in text) == (not binary)
    assert (b"vtkZLibDataCompressor" in text) == (compression == "zlib")
    assert (b"vtkLZMADataCompressor" in text) == (compression == "lzma")
    assert doc["output_kind"]["encoding"] == ("binary" if binary else "ascii")


@pytest.mark.parametrize("version,binary", [("2.2", False), ("2.2", True), ("4.1", False),
                                            ("4.1", True)])
def test_gmsh_comes_back_as_the_same_version_and_encoding(runner, cli_app, tmp_path, version,
                                                          binary):
    model = tet_grid(4, 4, 3)
    mesh = meshio.Mesh(model.points, [("tetra", model.cells[0].data)],
                       cell_data={"gmsh:physical": [np.ones(len(model.cells[0]), int)],
                                  "gmsh:geometrical": [np.ones(len(model.cells[0]), int)]})
    src = tmp_path / "bracket.msh"
    meshio.gmsh.write(src, mesh, fmt_version=version, binary=binary)
    out = tmp_path / "renumbered.msh"
    _renumber(runner, cli_app, src, out)
    assert _header(out, 2)[1].split()[:2] == [version.encode(), b"1" if binary else b"0"]


def test_a_gmsh_bracket_read_by_position_has_the_profile_reported(runner, cli_app, tmp_path):
    """gmsh 4.1 output read with meshio.read (by position): the kept ordering's profile."""
    for src in (ROOT / "meshes" / "bracket.msh",
                shared_path("meshes-real", "pylith", "crustal-strikeslip-3d_mesh_tet.msh")):
        out = tmp_path / f"{src.stem}-renumbered.msh"
        result = runner.invoke(cli_app, ["renumber", str(src), str(out), "--json"])
        assert result.exit_code == 0, result.stderr
        doc = json.loads(result.stdout)
        chosen = next(m for m in doc["comparison"]["methods"] if m["chosen"])
        assert doc["output_kind"]["version"] == "4.1"
        positional = model_from_meshio(meshio.read(out))        # no tags, file order only
        figures = metrics(node_graph(positional), dofs=dof_layout(positional))
        assert figures.profile == chosen["dofs"]["profile"]
        assert figures.bandwidth == chosen["dofs"]["bandwidth"]
        # and the original file read the same way has the "original" row's profile
        original = next(m for m in doc["comparison"]["methods"] if m["method"] == "original")
        before = read_model(src)
        assert metrics(node_graph(before), dofs=dof_layout(before)).profile == \
            original["dofs"]["profile"]


def test_flac3d_is_written_so_that_meshio_reads_the_same_counts(runner, cli_app, tmp_path):
    src = shared_path("meshes-real", "meshio", "flac3d_mesh_ex.f3grid")
    out = tmp_path / "renumbered.f3grid"
    doc = _renumber(runner, cli_app, src, out)
    before, after = meshio.read(src), meshio.read(out)
    assert after.points.shape == before.points.shape
    count = lambda m: {t: sum(len(b.data) for b in m.cells if b.type == t)  # noqa: E731
                       for t in {b.type for b in m.cells}}
    assert count(after) == count(before)
    assert {k.split(":")[1] for k in after.cell_sets} == {k.split(":")[1] for k in before.cell_sets}
    assert doc["output_kind"] == {"format": "flac3d", "version": None, "encoding": "ascii",
                                  "compression": None}
    # the groups come back with the same members (bandwise reads them per block)
    a, b = read_model(src), read_model(out)
    assert {k: sum(len(x) for x in v) for k, v in a.cell_sets.items()} == \
        {k: sum(len(x) for x in v) for k, v in b.cell_sets.items()}


def test_formats_bandwise_does_not_write_are_refused_before_any_work(runner, cli_app, tmp_path):
    src = tmp_path / "plate.vtu"
    write_model(tet_grid(3, 3, 3), src)
    result = runner.invoke(cli_app, ["renumber", str(src), str(tmp_path / "plate.su2")])
    assert result.exit_code == 2
    assert "does not write su2 files" in result.stderr and "Traceback" not in result.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plate.vtu"]


def test_cells_a_format_cannot_hold_are_refused(tmp_path):
    med = shared_path("meshes-real", "meshio", "cylinder.med")
    model = read_model(med)
    with pytest.raises(MeshWriteError, match="cannot hold line"):
        plan_output(model, tmp_path / "cylinder.f3grid")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("name", ["plate.vtk", "plate.vtu"])
def test_a_file_that_reads_back_differently_is_not_written(tmp_path, monkeypatch, name):
    """A writer (meshio's or bandwise's VTU writer) that puts the nodes in another order:
    caught by the read-back, nothing renamed."""
    import bandwise.formats.meshio_io as adapter
    from bandwise.formats import vtu_writer

    real, own = adapter.write_mesh, vtu_writer.write_vtu

    def shuffled(path, mesh, name, options):
        mesh.points = mesh.points[::-1].copy()
        real(path, mesh, name, options)

    def own_shuffled(path, mesh, compression):
        mesh.points = mesh.points[::-1].copy()
        own(path, mesh, compression)

    monkeypatch.setattr(adapter, "write_mesh", shuffled)
    monkeypatch.setattr(vtu_writer, "write_vtu", own_shuffled)
    out = tmp_path / name
    with pytest.raises(MeshWriteError, match="not written: read back, the .* nodes at "
                                             "other places"):
        write_model(tet_grid(3, 3, 3), out)
    assert list(tmp_path.iterdir()) == []


def test_detection_and_kinds_of_real_files():
    cases = {
        ("meshio", "insulated-2.2.msh"): FileKind("gmsh22", "2.2", "ascii"),
        ("meshio", "insulated-4.1.msh"): FileKind("gmsh", "4.1", "ascii"),
        ("pylith", "box_hex_boundary_binary.msh"): FileKind("gmsh", "4.1", "binary"),
        ("meshio", "cavity.vtk"): FileKind("vtk", "2.0", "binary"),
        ("scikit-fem", "backward-facing_step.vtu"): FileKind("vtu", None, "binary", "zlib"),
        ("meshio", "flac3d_mesh_ex.f3grid"): FileKind("flac3d", None, "ascii"),
        ("xrd_simulator", "grain0056.xdmf"): FileKind("xdmf", None, "hdf5"),
    }
    for parts, kind in cases.items():
        path = shared_path("meshes-real", *parts)
        assert read_model(path).file_kind == kind, parts
        assert detect(path).name == kind.format
