"""The report: valid figures, numbers that match the JSON, atomic output, clear errors.

References used by the checks below:
- PNG signature: W3C, "Portable Network Graphics (PNG) Specification (Second
  Edition)", 2003, section 5.2 (the 8-byte signature).
- Euler's polyhedron formula V - E + F = 2 for the surface of a solid without
  holes (L. Euler, "Elementa doctrinae solidorum", 1758).
- Bandwidth of a dense matrix: ``scipy.linalg.bandwidth`` (reference library).
- Connected parts: ``networkx.number_connected_components`` (reference library).
- Binned counts: ``numpy.histogram2d`` (reference library).
"""

from __future__ import annotations

import io
import json
import os
from html.parser import HTMLParser
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.linalg
import scipy.sparse as sp
from conftest import shared_path
from scipy.sparse.csgraph import reverse_cuthill_mckee

from bandwise.algorithms.checks.findings import Finding
from bandwise.core.caution import CAUTION
from bandwise.core.dofs import dof_layout
from bandwise.core.errors import MeshWriteError
from bandwise.core.generate import hex_grid, quad_grid, scrambled, tet_grid
from bandwise.core.graph import node_graph
from bandwise.core.model import CellBlock, Model
from bandwise.core.summary import summarise
from bandwise.faces.report import ReportInputs, report_document, verdict, write_report
from bandwise.faces.report import build as report_build
from bandwise.faces.report.meshview import mesh_view, node_parts, outer_faces
from bandwise.faces.report.sampling import envelope, pattern_image

ROOT = Path(__file__).resolve().parent.parent
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification, 2003, section 5.2


class PageParser(HTMLParser):
    """Collects images, section ids, the exact values of <data> and the text of the page."""

    def __init__(self) -> None:
        super().__init__()
        self.images: list[dict[str, str]] = []
        self.sections: list[str] = []
        self.values: list[str] = []
        self.scripts = 0
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.images.append(a)
        elif tag == "section" and "id" in a:
            self.sections.append(a["id"])
        elif tag == "data":
            self.values.append(a["value"])
        elif tag in ("script", "link", "iframe", "object"):
            self.scripts += 1

    def handle_data(self, data):
        self.text.append(data)


def parse(page: str) -> PageParser:
    p = PageParser()
    p.feed(page)
    return p


def bracket_inputs(findings=None, renumber=True, seed=3) -> ReportInputs:
    """A small bracket-like block, badly numbered, with an RCM stand-in ordering."""
    model = scrambled(tet_grid(9, 6, 4, h=5.0), seed=seed)
    model.source, model.file_format = "bracket_block.msh", "gmsh"
    graph = node_graph(model)
    layout = dof_layout(model)
    summary = summarise(model, layout, graph)
    perm = reverse_cuthill_mckee(graph.to_scipy(), symmetric_mode=True) if renumber else None
    return ReportInputs(model, graph, layout, summary, findings=findings, perm=perm,
                        method="rcm (scipy stand-in)" if renumber else None)


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    orphan = Finding("nodes.orphan", "warning", 2, "2 nodes belong to no element.",
                     node_ids=(1, 7), node_id_kind="1-based node position")
    out = tmp_path_factory.mktemp("rep") / "report"
    files = write_report(out, bracket_inputs(findings=[orphan]))
    page = files.html.read_text(encoding="utf-8")
    doc = json.loads(files.json.read_text(encoding="utf-8"))
    return files, page, doc


def decoded_png(src: str) -> np.ndarray:
    import base64

    from matplotlib.image import imread

    assert src.startswith("data:image/png;base64,")
    data = base64.b64decode(src.split(",", 1)[1], validate=True)
    assert data[:8] == PNG_SIGNATURE
    return imread(io.BytesIO(data), format="png")


# --------------------------------------------------------------------------- the page


def test_every_figure_is_an_embedded_non_blank_png(written):
    files, page, doc = written
    p = parse(page)
    assert len(p.images) == len(doc["figures"]) == 4
    for img in p.images:
        pixels = decoded_png(img["src"])
        assert pixels.ndim == 3 and min(pixels.shape[:2]) >= 200
        grey = pixels[..., :3].mean(axis=2)
        assert grey.std() > 0.05                       # not a blank canvas
        assert np.mean(grey < 0.9) > 0.01              # something is drawn
    for path in files.figures:                         # the PNG files beside the page
        assert path.read_bytes()[:8] == PNG_SIGNATURE


def test_page_is_self_contained(written):
    _, page, _ = written
    p = parse(page)
    assert p.scripts == 0
    assert "http://" not in page and "https://" not in page
    assert "@media print" in page


def _numbers(node, path=()):
    """Every numeric leaf of the document, except id lists, figures and the time stamp."""
    skip = {"node_ids", "element_ids", "moving_nodes", "figures", "created", "bandwise_version"}
    if isinstance(node, dict):
        for k, v in node.items():
            if k not in skip:
                yield from _numbers(v, path + (k,))
    elif isinstance(node, list):
        for k, v in enumerate(node):
            yield from _numbers(v, path + (k,))
    elif isinstance(node, (int, float)) and not isinstance(node, bool):
        yield path, node


def test_every_figure_of_the_json_is_in_the_html_tables(written):
    _, page, doc = written
    values = set(parse(page).values)
    found = list(_numbers(doc))
    assert len(found) > 40
    missing = [(p, v) for p, v in found if repr(v) not in values]
    assert missing == []


def test_shown_numbers_read_like_the_exact_ones(written):
    _, page, doc = written
    cur = doc["mesh"]["current_numbering"]["nodes"]
    assert f'<data value="{cur["bandwidth"]}">{cur["bandwidth"]:,}</data>' in page
    assert f'<data value="{cur["profile"]}">{cur["profile"]:,}</data>' in page


def test_header_states_caution_version_counts_and_verdict(written):
    _, page, doc = written
    text = " ".join(parse(page).text)
    assert CAUTION in text
    assert doc["caution"] == CAUTION
    assert doc["verdict"] == "ready"          # a warning is no error
    assert "Verdict: ready" in text
    assert doc["mesh"]["nodes"] == 9 * 6 * 4
    assert doc["mesh"]["dofs"]["total"] == 3 * 9 * 6 * 4
    sections = parse(page).sections
    assert sections == ["findings", "mesh", "sizing", "not-analysed"]


def test_renumbered_figures_match_a_dense_reference(written):
    # scipy.linalg.bandwidth on the explicitly permuted matrix (reference library)
    _, _, doc = written
    inputs = bracket_inputs(findings=[])
    a = (inputs.graph.to_scipy() + sp.identity(inputs.graph.n)).tocsr()
    lower, _ = scipy.linalg.bandwidth(a.toarray())
    p = inputs.perm
    lower_after, _ = scipy.linalg.bandwidth(a[p][:, p].toarray())
    ren = doc["renumbering"]["nodes"]
    assert ren["current"]["bandwidth"] == lower
    assert ren["renumbered"]["bandwidth"] == lower_after < lower
    assert doc["renumbering"]["method"] == "rcm (scipy stand-in)"


def test_not_analysed_says_what_is_missing(written):
    _, _, doc = written
    gaps = " ".join(doc["not_analysed"])
    assert "Orderings were not compared" in gaps
    assert "supports" in gaps.lower()
    assert "Mesh checks" not in gaps                   # the checks were given


# --------------------------------------------------------------------------- verdicts


def test_verdict_follows_the_findings():
    error = Finding("mesh.coincident", "error", 4, "4 nodes coincide.", node_ids=(3, 4))
    note = Finding("mesh.info", "note", 1, "a note")
    assert verdict(bracket_inputs(findings=[error, note], renumber=False)).word == "problems"
    assert verdict(bracket_inputs(findings=[note], renumber=False)).word == "ready"
    assert verdict(bracket_inputs(findings=None, renumber=False)).word == "unchecked"


def test_findings_sorted_errors_first_with_ids_and_marks():
    note = Finding("parts.info", "note", 1, "one part")
    error = Finding("nodes.coincident", "error", 2, "2 nodes coincide.", node_ids=(5, 9),
                    node_id_kind="1-based node position")
    inputs = bracket_inputs(findings=[note, error], renumber=False)
    doc = report_document(inputs)
    assert doc["verdict"] == "problems"
    marks = report_build.finding_marks(inputs)
    assert marks["coincident"].tolist() == [4, 8]      # labels are 1-based positions
    from bandwise.faces.report.html import findings_section
    section = findings_section(doc, "")
    assert section.index("nodes.coincident") < section.index("parts.info")
    assert "5, 9" in section


# --------------------------------------------------------------------------- reduced data


def test_pattern_image_matches_histogram2d():
    # numpy.histogram2d of the permuted pattern (reference library)
    model = scrambled(quad_grid(23, 17), seed=5)
    graph = node_graph(model)
    perm = reverse_cuthill_mckee(graph.to_scipy(), symmetric_mode=True)
    a = (graph.to_scipy() + sp.identity(graph.n)).tocsr()[perm][:, perm].tocoo()
    bins = 50
    image = pattern_image(graph, perm, bins=bins)
    edges = np.arange(bins + 1) * graph.n / bins
    ref, _, _ = np.histogram2d(a.row, a.col, bins=[edges, edges])
    assert np.array_equal(image.counts, ref.astype(np.int64))
    assert image.nnz == a.nnz == image.counts.sum()


def test_small_pattern_is_exact():
    graph = node_graph(quad_grid(4, 3))
    image = pattern_image(graph)
    dense = (graph.to_scipy() + sp.identity(graph.n)).toarray()
    assert np.array_equal(image.counts, dense.astype(np.int64))


def test_envelope_keeps_every_peak():
    rng = np.random.default_rng(0)
    y = rng.integers(0, 1000, size=123_457)
    env = envelope(y, max_points=500)
    assert env.start.size <= 500
    assert env.upper.max() == y.max() and env.lower.min() == y.min()
    k = 17
    stop = env.start[k + 1]
    assert env.upper[k] == y[env.start[k]:stop].max()
    assert env.lower[k] == y[env.start[k]:stop].min()


@pytest.mark.parametrize("shape", [(4, 3, 5), (6, 2, 3)])
def test_outer_faces_of_a_box(shape):
    nx_, ny, nz = shape
    quads = 2 * ((nx_ - 1) * (ny - 1) + (ny - 1) * (nz - 1) + (nx_ - 1) * (nz - 1))
    assert len(outer_faces(hex_grid(*shape))) == quads
    tris = outer_faces(tet_grid(*shape))
    assert len(tris) == 2 * quads                    # each outer square split in two
    # Euler (1758): V - E + F = 2 for the closed surface of a box
    faces = tris[:, :3]
    edges = np.unique(np.sort(np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]],
                                              faces[:, [2, 0]]]), axis=1), axis=0)
    assert np.unique(faces).size - len(edges) + len(faces) == 2


def test_parts_and_orphans_match_networkx():
    a, b = quad_grid(4, 4), quad_grid(3, 3)
    points = np.concatenate([a.points, b.points + [10.0, 0.0, 0.0], [[50.0, 50.0, 0.0]]])
    cells = [CellBlock("quad", np.concatenate([a.cells[0].data,
                                               b.cells[0].data + a.n_nodes]))]
    model = Model(points=points, cells=cells)
    graph = node_graph(model)
    part, n_parts = node_parts(graph)
    g = nx.from_scipy_sparse_array(graph.to_scipy())
    assert n_parts == nx.number_connected_components(g) - 1     # minus the orphan
    assert part[-1] == 0 and set(part[:-1]) == {1, 2}
    view = mesh_view(model, graph)
    assert view.n_parts == 2 and view.facets_total == 9 + 4


def test_big_mesh_is_subsampled_and_its_back_hidden():
    model = tet_grid(30, 30, 25)                                  # 22,500 nodes
    graph = node_graph(model)
    view = mesh_view(model, graph, max_facets=2000)
    # seen from +x, -y, +z, three sides of the box face the viewer, each square in two
    # triangles (the outer faces are ordered outward, so the other three are culled)
    assert view.facets_total == 2 * (29 * 29 + 29 * 24 + 29 * 24)
    assert len(view.facets) == 2000 and view.is_subsampled


# --------------------------------------------------------------------------- atomic output


def test_missing_parent_folder_is_an_error_and_leaves_nothing(tmp_path):
    out = tmp_path / "no" / "such" / "report"
    with pytest.raises(MeshWriteError, match="does not exist"):
        write_report(out, bracket_inputs(renumber=False))
    assert not (tmp_path / "no").exists()


def test_a_file_in_the_way_is_an_error(tmp_path):
    out = tmp_path / "report"
    out.write_text("keep me")
    with pytest.raises(MeshWriteError, match="not a folder"):
        write_report(out, bracket_inputs(renumber=False))
    assert out.read_text() == "keep me"


def test_failure_while_drawing_leaves_no_partial_output(tmp_path, monkeypatch):
    old = tmp_path / "report"
    old.mkdir()
    (old / "report.html").write_text("old page")

    def broken(inputs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(report_build, "curve_figures", broken)
    with pytest.raises(MeshWriteError, match="No space left"):
        write_report(old, bracket_inputs(renumber=False))
    assert (old / "report.html").read_text() == "old page"
    assert sorted(os.listdir(old)) == ["report.html"]
    assert sorted(os.listdir(tmp_path)) == ["report"]            # no temporary folder left
    with pytest.raises(MeshWriteError):
        write_report(tmp_path / "fresh", bracket_inputs(renumber=False))
    assert sorted(os.listdir(tmp_path)) == ["report"]


def test_existing_report_folder_is_replaced_whole(tmp_path, monkeypatch):
    # the figures are not the point here: one small real PNG stands for them
    png = report_build.fg.png_bytes(report_build.fg.new_axes(2, 2))
    monkeypatch.setattr(report_build, "report_figures", lambda inputs, progress=None: [
        report_build.Figure("mesh.png", "findings", "a stand-in figure", png)])
    out = tmp_path / "report"
    (tmp_path / "report").mkdir()
    (out / "notes.txt").write_text("the analyst's own file")
    write_report(out, bracket_inputs(renumber=False))
    first = (out / "report.json").read_text()
    files = write_report(out, bracket_inputs(renumber=True))
    doc = json.loads(files.json.read_text())
    assert doc["renumbering"] is not None and json.loads(first)["renumbering"] is None
    assert sorted(p.name for p in out.iterdir()) == [
        "mesh.png", "notes.txt", "report.html", "report.json"]
    assert (out / "notes.txt").read_text() == "the analyst's own file"  # left alone
    assert sorted(os.listdir(tmp_path)) == ["report"]


# --------------------------------------------------------------------------- command line


def test_cli_report_of_the_demo_frame(runner, cli_app, tmp_path):
    out = tmp_path / "frame-report"
    mesh = ROOT / "meshes" / "frame.inp"
    before = mesh.read_bytes()
    result = runner.invoke(cli_app, ["report", str(mesh), "--out", str(out), "--method", "none"])
    assert result.exit_code == 0, result.stderr
    assert (out / "report.html").is_file() and (out / "report.json").is_file()
    doc = json.loads((out / "report.json").read_text())
    assert doc["mesh"]["nodes"] == 96 and doc["mesh"]["elements"] == {"line": 104}
    assert doc["mesh"]["dofs"]["total"] == 6 * 96                 # a space frame
    assert doc["comparison"] is None and "Orderings were not compared." in doc["not_analysed"]
    assert doc["findings"] is not None                            # the checks ran
    assert "report.html" in result.stdout and CAUTION in result.stdout
    assert mesh.read_bytes() == before                            # the input is read-only


def test_cli_unreadable_mesh_exit_2_nothing_written(runner, cli_app, tmp_path):
    bad = tmp_path / "broken.msh"
    bad.write_text("$MeshFormat\nthis is not gmsh\n")
    out = tmp_path / "rep"
    result = runner.invoke(cli_app, ["report", str(bad), "--out", str(out)])
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "Traceback" not in result.stderr
    assert sorted(os.listdir(tmp_path)) == ["broken.msh"]


def test_cli_uncreatable_folder_exit_2(runner, cli_app, tmp_path):
    mesh = ROOT / "meshes" / "gusset.vtu"
    out = tmp_path / "missing" / "rep"
    result = runner.invoke(cli_app, ["report", str(mesh), "--out", str(out)])
    assert result.exit_code == 2
    assert result.stderr.startswith("bandwise: error:") and "does not exist" in result.stderr
    assert os.listdir(tmp_path) == []


# --------------------------------------------------------------------------- the whole analysis


@pytest.fixture(scope="module")
def full_report(tmp_path_factory):
    """``bandwise report`` on the demo bracket held at one corner node (all translations)."""
    from typer.testing import CliRunner

    from bandwise.faces.cli import app, load_commands

    load_commands()
    out = tmp_path_factory.mktemp("full") / "report"
    result = CliRunner().invoke(app, [
        "report", str(ROOT / "meshes" / "bracket.msh"), "--out", str(out),
        "--support", "near 0,0,0:ux,uy,uz", "--method", "rcm,sloan"])
    page = (out / "report.html").read_text(encoding="utf-8")
    return result, page, json.loads((out / "report.json").read_text(encoding="utf-8"))


def test_full_report_counts_modes_and_equations(full_report):
    result, page, doc = full_report
    # one node held in all translations leaves the 3 rotations about it
    # (rigid-body theory: 6 motions in 3D minus 3 restrained translations)
    assert doc["modes"]["total"] == 3 and doc["modes"]["rigid"] == 3
    assert doc["verdict"] == "problems"
    assert result.exit_code == 1
    eq = doc["equations"]
    assert eq["dofs"] == 3 * 1305 and eq["fixed_dofs"] == 3 and eq["equations"] == 3 * 1305 - 3
    assert eq["reduced_system"]["n_rows"] == eq["equations"]
    assert eq["order"] == f"renumbered ({doc['comparison']['chosen']})"
    assert "supports.free_modes" in doc["verdict_reason"]     # the gate of check
    sections = parse(page).sections
    assert sections == ["findings", "mesh", "sizing", "orderings", "supports", "not-analysed"]


def test_full_report_comparison_is_shown_and_kept_marked(full_report):
    _, page, doc = full_report
    comp = doc["comparison"]
    names = [m["method"] for m in comp["methods"]]
    assert names == ["original", "rcm", "sloan"]
    kept = [m for m in comp["methods"] if m["chosen"]]
    assert len(kept) == 1 and kept[0]["method"] == comp["chosen"] == doc["renumbering"]["method"]
    assert page.count('<tr class="kept">') == 2                    # DOF and node tables
    assert len(parse(page).images) == 5                           # the chart is there
    # the kept ordering is never worse than the original for the objective (profile)
    assert kept[0]["dofs"]["profile"] <= comp["methods"][0]["dofs"]["profile"]


def test_full_report_every_json_figure_is_in_the_html(full_report):
    _, page, doc = full_report
    values = set(parse(page).values)
    found = list(_numbers(doc))
    assert len(found) > 100
    assert [(p, v) for p, v in found if repr(v) not in values] == []


def test_real_findings_marked_on_two_blocks_and_an_orphan(tmp_path):
    """Two hexahedral blocks apart, a far orphan node and an orphan on top of node 1."""
    from bandwise.algorithms.checks import run_checks

    a, b = hex_grid(5, 4, 3), hex_grid(3, 3, 3)
    points = np.concatenate([a.points, b.points + [6.0, 0.0, 0.0], [[20.0, 20.0, 20.0]],
                             a.points[:1]])
    cells = [CellBlock("hexahedron", np.concatenate([a.cells[0].data,
                                                     b.cells[0].data + a.n_nodes]))]
    model = Model(points=points, cells=cells, source="two_blocks.vtu", file_format="vtu")
    graph = node_graph(model)
    layout = dof_layout(model)
    findings = run_checks(model, graph)
    inputs = ReportInputs(model, graph, layout, summarise(model, layout, graph),
                          findings=findings)
    marks = report_build.finding_marks(inputs)
    n = model.n_nodes
    assert marks["orphan"].tolist() == [n - 2, n - 1]
    assert marks["coincident"].tolist() == [0, n - 1]
    assert "other" not in marks                       # the parts are coloured, not marked
    doc = json.loads(write_report(tmp_path / "r", inputs).json.read_text())
    assert doc["verdict"] == "problems"
    assert "parts.disconnected" in doc["verdict_reason"]
    assert doc["mesh"]["parts"] == 2 and doc["mesh"]["orphan_nodes"] == 2


# --------------------------------------------------------------------------- matrices


def _published(name: str) -> dict[str, int]:
    """A row of published.csv (SuiteSparse Matrix Collection index, Davis and Hu 2011)."""
    import csv

    with shared_path("matrices", "published.csv").open() as fh:
        row = next(r for r in csv.DictReader(fh) if r["name"] == name)
    return {k: int(v) for k, v in row.items() if k != "name"}


@pytest.mark.parametrize("name", ["dwt_198"])          # six components
def test_matrix_report_matches_published_figures(runner, cli_app, tmp_path, name):
    # Duff, Grimes and Lewis, "Sparse matrix test problems", ACM TOMS 15 (1989);
    # figures from the SuiteSparse index (Davis and Hu, ACM TOMS 38, 2011)
    pub = _published(name)
    out = tmp_path / "rep"
    result = runner.invoke(cli_app, ["report", str(shared_path("matrices", f"{name}.mtx")),
                                     "--out", str(out), "--method", "rcm"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads((out / "report.json").read_text())
    cur = doc["mesh"]["current_numbering"]["nodes"]
    assert cur["n_rows"] == pub["n"]
    assert cur["bandwidth"] == pub["bandwidth_original"]
    assert doc["mesh"]["parts"] + doc["mesh"]["orphan_nodes"] == pub["components"]
    assert doc["subject"] == "matrix" and doc["verdict"] == "unchecked"
    page = (out / "report.html").read_text()
    p = parse(page)
    assert "mesh.png" not in [f["file"] for f in doc["figures"]]
    assert len(p.images) == len(doc["figures"]) == 4              # pattern, curves, chart
    assert [(q, v) for q, v in _numbers(doc) if repr(v) not in set(p.values)] == []


def test_mesh_axes_draws_given_mode_arrows():
    """A displacement field given per node is drawn as arrows, projected to the picture."""
    from matplotlib.quiver import Quiver

    from bandwise.faces.report.figures import mesh_axes

    model = hex_grid(3, 3, 3)
    view = mesh_view(model, node_graph(model))
    nodes = np.arange(model.n_nodes)
    spin = np.cross([0.0, 0.0, 1.0], model.points - model.points.mean(axis=0))  # about z
    ax = mesh_axes(view, arrows=(nodes, spin))
    quivers = [c for c in ax.collections if isinstance(c, Quiver)]
    assert len(quivers) == 1 and quivers[0].N == model.n_nodes
    uv = np.column_stack([quivers[0].U, quivers[0].V])
    assert np.allclose(uv / np.abs(uv).max(), (spin @ view.screen) / np.abs(spin @ view.screen).max())


def test_free_motion_of_a_block_pinned_at_one_node_is_a_rotation_about_it():
    # rigid-body theory: a 3D body with all translations of one node held keeps the
    # three rotations about that node; the null space of K is exactly those motions
    # (K. J. Bathe, Finite Element Procedures, 1996, sec. 10.2.4)
    from bandwise.algorithms.modeshape import free_motion
    from bandwise.algorithms.supports import apply_supports, parse_support

    model = hex_grid(4, 3, 3)
    layout = dof_layout(model)
    held = apply_supports(model, layout, [parse_support("near 0,0,0:ux,uy,uz")])
    nodes, u = free_motion(model, layout, held, n_modes=3)
    x = model.points[nodes]                       # node 0 sits at the origin
    # u = w x x for one angular velocity w: a linear least-squares fit must be exact
    cross = np.zeros((len(x), 3, 3))
    cross[:, 0, 1], cross[:, 0, 2] = x[:, 2], -x[:, 1]
    cross[:, 1, 0], cross[:, 1, 2] = -x[:, 2], x[:, 0]
    cross[:, 2, 0], cross[:, 2, 1] = x[:, 1], -x[:, 0]
    a = cross.reshape(-1, 3)
    w = np.linalg.lstsq(a, u.ravel(), rcond=None)[0]
    assert np.linalg.norm(w) > 0
    assert np.abs(a @ w - u.ravel()).max() < 1e-8 * np.abs(u).max()
    assert 0 not in nodes.tolist()                  # the held node does not move
    free = apply_supports(model, layout, [parse_support("plane x=0:fixed")])
    assert free_motion(model, layout, free, n_modes=0) is None


def test_arrows_only_at_drawn_nodes_and_few(full_report):
    from bandwise.faces.report.build import MAX_ARROWS

    _, _, doc = full_report
    caption = next(f["caption"] for f in doc["figures"] if f["file"] == "mesh.png")
    assert "Arrows: one free zero-energy motion" in caption
    model = read_model_for_test("bracket.msh")
    view = mesh_view(model, node_graph(model))
    nodes = np.arange(model.n_nodes)
    arrows = report_build.visible_arrows(view, (nodes, np.ones((model.n_nodes, 3))))
    drawn = set(view.facets.ravel().tolist())
    assert len(arrows[0]) == MAX_ARROWS and set(arrows[0].tolist()) <= drawn


def read_model_for_test(name: str):
    from bandwise.formats import read_model

    return read_model(ROOT / "meshes" / name)


def test_palettes_stay_apart_in_grey():
    """Neighbouring part colours and the two curves differ in luminance (ITU-R BT.709 weights)."""
    from matplotlib.colors import to_rgb

    from bandwise.faces.report.style import AFTER, BEFORE, PARTS

    def grey(colour: str) -> float:
        r, g, b = to_rgb(colour)
        return 255 * (0.2126 * r + 0.7152 * g + 0.0722 * b)

    from itertools import pairwise

    steps = [abs(grey(a) - grey(b)) for a, b in pairwise(PARTS)]
    assert min(steps) >= 60
    assert abs(grey(BEFORE) - grey(AFTER)) >= 80


def test_report_folder_one_per_input_when_several(tmp_path):
    from bandwise.faces.cli.report_cmd import report_folder

    out = tmp_path / "reports"
    assert report_folder(out, Path("a/bracket.msh"), 1) == out and not out.exists()
    assert report_folder(out, Path("a/bracket.msh"), 2) == out / "bracket"
    assert out.is_dir()                                   # made for the several reports
    with pytest.raises(MeshWriteError, match="does not exist"):
        report_folder(tmp_path / "no" / "reports", Path("x.msh"), 2)
    assert not (tmp_path / "no").exists()


# --------------------------------------------------------------------------- --report of other commands


def test_check_report_option_one_folder_per_mesh(runner, cli_app, tmp_path):
    out = tmp_path / "reports"
    frame, gusset = ROOT / "meshes" / "frame.inp", ROOT / "meshes" / "gusset.vtu"
    result = runner.invoke(cli_app, ["check", str(frame), str(gusset), "--json",
                                     "--report", str(out)])
    assert result.exit_code in (0, 1), result.stderr
    gate = json.loads(result.stdout)                           # stdout stays pure JSON
    for name, mesh in (("frame", gate["meshes"][0]), ("gusset", gate["meshes"][1])):
        doc = json.loads((out / name / "report.json").read_text())
        assert doc["mesh"]["nodes"] == mesh["nodes"]
        # the report's verdict is the gate of check: same findings, same --fail-on
        assert (doc["verdict"] == "problems") == (mesh["verdict"] == "problems")
        assert [f["code"] for f in doc["findings"]] == [f["code"] for f in mesh["findings"]]
    assert result.stderr.count("report written") == 2


def test_check_report_option_bad_folder_fails_before_work(runner, cli_app, tmp_path):
    result = runner.invoke(cli_app, ["check", str(ROOT / "meshes" / "frame.inp"),
                                     "--report", str(tmp_path / "no" / "rep")])
    assert result.exit_code == 2 and "does not exist" in result.stderr
    assert result.stdout == ""                                 # nothing was checked


def test_renumber_report_option(runner, cli_app, tmp_path):
    out = tmp_path / "frame_rn.inp"
    result = runner.invoke(cli_app, ["renumber", str(ROOT / "meshes" / "frame.inp"), str(out),
                                     "--method", "rcm", "--json", "--report",
                                     str(tmp_path / "rep")])
    assert result.exit_code == 0, result.stderr
    run = json.loads(result.stdout)
    doc = json.loads((tmp_path / "rep" / "report.json").read_text())
    assert doc["comparison"] == report_document_comparison(run["comparison"])
    assert doc["renumbering"]["method"] == run["comparison"]["chosen"]
    # the report of a renumbering runs the checks too: the same findings as check
    checked = json.loads(runner.invoke(cli_app, ["check", str(ROOT / "meshes" / "frame.inp"),
                                                 "--json"]).stdout)["meshes"][0]
    assert doc["verdict"] in ("ready", "unsupported", "problems")
    assert sorted(f["code"] for f in doc["findings"]) == sorted(
        f["code"] for f in checked["findings"])


def report_document_comparison(comparison: dict) -> dict:
    """The comparison as the report stores it: the command's own, plus the Cholesky storage."""
    from bandwise.faces.report.document import cholesky_bytes

    out = json.loads(json.dumps(comparison))
    for row in out["methods"]:
        if isinstance(row.get("cholesky_nnz"), int) and row.get("dofs"):
            row["cholesky_bytes"] = cholesky_bytes(row["cholesky_nnz"], row["dofs"]["n_rows"])
    return out
