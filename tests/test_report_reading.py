"""The report as an analyst reads it: files named, next steps that work, one ratio, real times.

References used by the checks below:
- Rigid-body modes: a free body in space has 6 (3 translations, 3 rotations),
  one per free part (K. J. Bathe, Finite Element Procedures, 1996, sec. 10.2.4).
- Reduction figures: bandwidth and profile as defined by A. George and
  J. W. H. Liu, Computer Solution of Large Sparse Positive Definite Systems,
  Prentice-Hall, 1981 (the page's ratio is current / renumbered of those).
- Connected parts of the merged mesh: ``networkx.number_connected_components``
  (reference library).
"""

from __future__ import annotations

import json
import re
import shlex
from html.parser import HTMLParser
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from conftest import MESHES, seamed_blocks, shared_path

import bandwise
from bandwise.faces.report import report_document, report_inputs, write_report
from bandwise.faces.report.html import (
    COMPARISON_COLUMNS,
    CONVENTION,
    FIGURE_LABELS,
)
from bandwise.faces.report.labels import FINDING_TITLES, LABELS


class Tables(HTMLParser):
    """Every table row of a page as ``[(tag, text), ...]``, and every finding title."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[tuple[str, str]]] = []
        self.cell: list[str] | None = None
        self.tag = ""
        self.titles: list[str] = []
        self.in_h3 = self.in_code = False
        self.title: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        elif tag in ("th", "td"):
            self.cell, self.tag = [], tag
        elif tag == "h3":
            self.in_h3, self.title = True, []
        elif tag == "span" and ("class", "code") in attrs:
            self.in_code = True

    def handle_endtag(self, tag):
        if tag in ("th", "td") and self.cell is not None and self.rows:
            self.rows[-1].append((self.tag, " ".join("".join(self.cell).split())))
            self.cell = None
        elif tag == "h3":
            self.in_h3 = False
            self.titles.append(" ".join("".join(self.title).split()))
        elif tag == "span":
            self.in_code = False

    def handle_data(self, data):
        if self.cell is not None:
            self.cell.append(data)
        if self.in_h3 and not self.in_code:
            self.title.append(data)


def tables(page: str) -> Tables:
    t = Tables()
    t.feed(page)
    return t


def text_of(page: str) -> str:
    """The page's visible text, one space between words."""
    class Text(HTMLParser):
        def __init__(self):
            super().__init__()
            self.parts, self.skip = [], False

        def handle_starttag(self, tag, attrs):
            self.skip = tag in ("style", "title")

        def handle_endtag(self, tag):
            self.skip = False

        def handle_data(self, data):
            if not self.skip:
                self.parts.append(data)

    t = Text()
    t.feed(page)
    return " ".join(" ".join(t.parts).split())


def verdict_box(page: str) -> str:
    """The text of the verdict box (the box holds no nested div but its next steps)."""
    start = page.index('<div class="verdict')
    end = page.index('<div class="files"') if '<div class="files"' in page \
        else page.index('<p class="caution">')
    return text_of(page[start:end])


# --------------------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def seam_run(tmp_path_factory):
    """``renumber --report`` of the two unmerged blocks, no supports, with a DOF map."""
    from typer.testing import CliRunner

    from bandwise.faces.cli import app, load_commands

    load_commands()
    folder = tmp_path_factory.mktemp("seam")
    mesh = seamed_blocks(folder / "foot.vtu")
    out = folder / "foot-rn.vtu"
    result = CliRunner().invoke(app, ["renumber", str(mesh), str(out), "--method", "rcm,sloan",
                                      "--dof-map", str(folder / "foot-dofs.csv"), "--json",
                                      "--report", str(folder / "rep")])
    assert result.exit_code == 0, result.output
    page = (folder / "rep" / "report.html").read_text(encoding="utf-8")
    doc = json.loads((folder / "rep" / "report.json").read_text(encoding="utf-8"))
    return folder, mesh, json.loads(result.stdout), page, doc


@pytest.fixture(scope="module")
def bracket_run(tmp_path_factory):
    """``renumber --report`` of the demo bracket bolted on its mount face."""
    from typer.testing import CliRunner

    from bandwise.faces.cli import app, load_commands

    load_commands()
    folder = tmp_path_factory.mktemp("bracket")
    result = CliRunner().invoke(app, [
        "renumber", str(MESHES / "bracket.msh"), str(folder / "bracket-rn.msh"),
        "--support", "mount_face:fixed", "--method", "rcm,gps,sloan",
        "--report", str(folder / "rep")])
    assert result.exit_code == 0, result.output
    page = (folder / "rep" / "report.html").read_text(encoding="utf-8")
    return folder, page, json.loads((folder / "rep" / "report.json").read_text())


# --------------------------------------------------------------------------- files written


def test_renumber_report_names_the_files_it_wrote(seam_run):
    folder, _, run, page, doc = seam_run
    names = ["foot-rn.vtu", "foot-rn.map.csv", "foot-dofs.csv"]
    assert [Path(o["file"]).name for o in doc["outputs"]] == names
    for o in doc["outputs"]:                       # in full: the report travels with the job
        assert Path(o["file"]).is_absolute() and Path(o["file"]).is_file()
    assert Path(run["output"]).resolve() == Path(doc["outputs"][0]["file"])
    assert Path(run["node_map"]).resolve() == Path(doc["outputs"][1]["file"])
    files = page[page.index('<div class="files"'):page.index("</div>", page.index(
        '<div class="files"'))]
    for name in names:
        assert f'<code class="file">{name}</code>' in files
    assert "Files written" in files and str(folder.resolve()) in files
    # near the top: after the verdict, before the first section
    assert page.index('<div class="files"') < page.index("<section")
    assert page.index('<div class="verdict') < page.index('<div class="files"')


# --------------------------------------------------------------------------- next steps


def test_seam_next_step_is_a_merge_command_that_closes_it(seam_run, runner, cli_app):
    folder, mesh, _, page, doc = seam_run
    steps = {s["kind"]: s for s in doc["next_steps"]}
    merged = folder / "foot-merged.vtu"
    assert steps["merge"]["command"] == shlex.join(["bandwise", "merge", str(mesh), str(merged)])
    box = verdict_box(page)
    assert "What to do next" in box and steps["merge"]["command"] in box
    assert "merged, the parts become one" in box
    # the disconnection is closed by the merge: no separate step asks to correct it
    assert "findings" not in steps
    # the command as printed does the job (without the leading program name)
    words = shlex.split(steps["merge"]["command"])
    result = runner.invoke(cli_app, words[1:])
    assert result.exit_code == 0, result.stderr
    after = bandwise.check_file(merged)
    # by construction the merged blocks are the one 10 x 5 x 4 grid: 200 nodes, one part
    assert after.summary.n_nodes == 200
    g = nx.from_scipy_sparse_array(after.graph.to_scipy())
    assert nx.number_connected_components(g) == 1 == after.summary.n_parts
    assert not any(f.code in ("nodes.coincident_seam", "facets.coincident_free")
                   for f in after.findings)


def test_suggested_holds_as_printed_remove_every_free_mode(seam_run, runner, cli_app):
    _, mesh, _, page, doc = seam_run
    step = next(s for s in doc["next_steps"] if s["kind"] == "supports")
    assert step["advice"].startswith("A static run needs supports")
    # two free solid parts: 6 rigid-body modes each (Bathe 1996, sec. 10.2.4)
    assert "12 zero-energy modes" in step["advice"]
    assert step["command"] in verdict_box(page)
    options = shlex.split(step["command"])
    assert options[::2] == ["--support"] * (len(options) // 2)
    result = runner.invoke(cli_app, ["check", str(mesh), "--json", *options])
    checked = json.loads(result.stdout)["meshes"][0]
    assert checked["zero_energy_modes"]["total"] == 0
    assert checked["verdict"] == "problems"          # the seam is still there, and says so
    assert [s["kind"] for s in checked["next_steps"]] == ["merge"]


def test_unsupported_bracket_says_a_static_run_needs_supports(tmp_path):
    result = bandwise.check_file(MESHES / "bracket.msh")
    assert result.verdict.word == "unsupported"
    (step,) = result.next_steps
    assert step.kind == "supports" and "A static run needs supports" in step.advice
    held = shlex.split(step.command)[1::2]
    ready = bandwise.check_file(MESHES / "bracket.msh", supports=held)
    assert ready.verdict.word == "ready" and ready.next_steps == ()
    page = write_report(tmp_path / "rep", report_inputs(result)).html.read_text()
    box = verdict_box(page)
    assert "Verdict: unsupported" in box and "A static run needs supports" in box
    assert step.command in box
    assert '<div class="verdict unsupported">' in page


def test_merge_command_carries_the_check_tolerance(tmp_path):
    mesh = seamed_blocks(tmp_path / "foot.vtu")
    result = bandwise.check_file(mesh, tolerance=0.01, supports=["plane x=0:fixed"])
    (step,) = [s for s in result.next_steps if s.kind == "merge"]
    assert shlex.split(step.command)[-2:] == ["--tolerance", "0.01"]
    loose = bandwise.check_file(mesh, relative_tolerance=0.01)
    (step,) = [s for s in loose.next_steps if s.kind == "merge"]
    assert shlex.split(step.command)[-2:] == ["--relative-tolerance", "0.01"]


def test_ready_report_says_nothing_is_left_to_correct(bracket_run):
    _, page, doc = bracket_run
    assert doc["verdict"] == "ready" and doc["next_steps"] == []
    assert "Nothing to correct before a static run." in verdict_box(page)


# --------------------------------------------------------------------------- one ratio


def _data(cell: str) -> float:
    return float(re.search(r'<data value="([^"]+)">', cell).group(1))


def test_one_ratio_convention_said_once_and_used_everywhere(bracket_run):
    _, page, doc = bracket_run
    text = text_of(page)
    assert text.count(CONVENTION) == 1
    for other in ("below 1 is better", "renumbered / current", "original objective / this",
                  "improvement", "relative to current"):
        assert other not in text, other
    # the sizing table: reduction = current / renumbered (George and Liu 1981 figures)
    sizing = page[page.index("id='sizing'"):page.index("id='orderings'")]
    rows = re.findall(r"<tr><td>([^<]+)</td>(.*?)</tr>", sizing)
    checked = 0
    for name, cells in rows:
        key = next(k for k, (label, _) in FIGURE_LABELS.items() if label == name)
        tds = re.findall(r"<td[^>]*>(.*?)</td>", cells)
        for level, (cur, new, red) in (("nodes", tds[0:3]), ("dofs", tds[3:6])):
            c = doc["mesh"]["current_numbering"][level][key]
            n = doc["renumbering"][level]["renumbered"][key]
            assert _data(cur) == c and _data(new) == n
            assert _data(red) == pytest.approx(c / n, rel=1e-12)
            assert red.endswith("&times;</data>")
            checked += 1
    assert checked == 2 * len(FIGURE_LABELS)
    # the comparison: reduction of the objective = original / this one, same direction
    orderings = page[page.index("id='orderings'"):page.index("<h3>Node level")]
    base = doc["comparison"]["methods"][0]["dofs"]["profile"]
    for m in doc["comparison"]["methods"]:
        row = re.search(rf"<tr[^>]*><td>{re.escape(m['method'])}</td>(.*?)</tr>", orderings)
        cells = re.findall(r"<td[^>]*>(.*?)</td>", row.group(1))
        red = cells[1 + len(COMPARISON_COLUMNS) + 2]
        assert _data(red) == pytest.approx(base / m["dofs"]["profile"], rel=1e-12)
    assert "reduction of the profile" in orderings


def test_orderings_chart_draws_the_same_reduction(monkeypatch):
    from bandwise.faces.report import build

    result = bandwise.check_file(MESHES / "bracket.msh", compare="rcm,sloan")
    drawn = {}

    def capture(methods, ratios, chosen=None, ax=None):
        drawn.update(methods=list(methods), ratios=dict(ratios))
        return build.fg.new_axes()

    monkeypatch.setattr(build.fg, "comparison_axes", capture)
    build.comparison_figure(report_inputs(result))
    comp = result.comparison
    for k, method in enumerate(drawn["methods"]):
        row = next(r for r in comp.rows if r.method == method)
        assert drawn["ratios"]["profile"][k] == pytest.approx(
            comp.original.dofs.profile / row.dofs.profile)
        assert drawn["ratios"]["profile"][k] == pytest.approx(row.improvement)
        assert drawn["ratios"]["bandwidth"][k] == pytest.approx(
            comp.original.dofs.bandwidth / row.dofs.bandwidth)


# --------------------------------------------------------------------------- times


def test_wall_time_includes_compiling_that_the_ordering_time_leaves_out(monkeypatch, tmp_path):
    import numba

    from bandwise.algorithms.orderings import ORDERINGS, OrderingInfo

    @numba.njit  # a fresh kernel: its first call compiles, as a new install's orderings do
    def reversed_kernel(n):
        out = np.empty(n, dtype=np.int64)
        for i in range(n):
            out[i] = n - 1 - i
        return out

    def reverse(graph):
        return reversed_kernel(graph.n)

    monkeypatch.setitem(ORDERINGS, "reverse", OrderingInfo(
        "reverse", reverse, "the current order reversed (test)", "profile"))
    mesh = seamed_blocks(tmp_path / "foot.vtu")
    r = bandwise.renumber_file(mesh, tmp_path / "out.vtu", method="reverse,rcm", analyse=True)
    timing, rows = r.comparison_time, {x.method: x for x in r.comparison.rows}
    assert list(timing.by_method) == ["original", "reverse", "rcm"]
    for name, row in rows.items():
        assert timing.by_method[name] >= row.seconds
    assert timing.seconds >= sum(timing.by_method.values())
    # the compilation (tens of milliseconds at least) went into the wall time only: the
    # comparison compiles each ordering on a small ring before timing it
    assert timing.seconds - sum(row.seconds for row in rows.values()) > 0.02
    assert rows["reverse"].seconds < 0.02
    page = write_report(tmp_path / "rep", report_inputs(r)).html.read_text()
    assert "wall time of its step" in page
    wall = re.search(r"took <data value=\"([^\"]+)\">([^<]+)</data> of wall time in all, "
                     r"compiling included", page)
    assert float(wall.group(1)) == round(timing.seconds, 6)
    doc = json.loads((tmp_path / "rep" / "report.json").read_text())
    assert doc["comparison_time"] == timing.to_dict()
    assert r.to_dict()["comparison_time"] == timing.to_dict()


def test_compiling_while_the_orderings_load_counts_in_the_comparison(monkeypatch, tmp_path):
    """On a first run the ordering modules compile their kernels as they load, before
    any method's step: that time is in the comparison's wall time, said apart."""
    import time

    import numba

    from bandwise.algorithms.orderings import compare

    spent = []
    registry = compare._registry

    def loading_with_a_compile():
        t0 = time.perf_counter()

        @numba.njit  # a fresh kernel: compiled here, as a module compiles on import
        def kernel(n):
            total = 0
            for i in range(n):
                total += i * i
            return total

        kernel(10)
        out = registry()
        spent.append(time.perf_counter() - t0)
        return out

    monkeypatch.setattr(compare, "_registry", loading_with_a_compile)
    mesh = seamed_blocks(tmp_path / "foot.vtu")
    r = bandwise.renumber_file(mesh, tmp_path / "out.vtu", method="rcm")
    timing = r.comparison_time
    assert len(spent) == 1 and spent[0] > 0.02
    assert timing.loading_seconds >= spent[0]
    assert timing.seconds == pytest.approx(timing.loading_seconds
                                           + sum(timing.by_method.values()))
    assert r.to_dict()["comparison_time"]["loading_seconds"] == round(timing.loading_seconds, 6)
    page = write_report(tmp_path / "rep", report_inputs(
        bandwise.renumber_file(mesh, tmp_path / "out2.vtu", method="rcm", analyse=True))
    ).html.read_text()
    assert re.search(r'<data value="[^"]+">[^<]+</data> loading the orderings before any ran',
                     page)


def test_cli_table_shows_the_wall_time_beside_the_ordering_time(runner, cli_app, tmp_path):
    mesh = seamed_blocks(tmp_path / "foot.vtu")
    result = runner.invoke(cli_app, ["renumber", str(mesh), str(tmp_path / "o.vtu"),
                                     "--method", "rcm"])
    assert result.exit_code == 0, result.stderr
    header = next(line for line in result.stdout.splitlines() if "bandwidth" in line)
    assert header.split()[-4:] == ["time", "wall", "vs", "original"]
    assert "first-call compilation and measuring included" in result.stdout
    assert re.search(r"The comparison took [\d.]+ (ms|s) in all, [\d.]+ (ms|s) of it loading "
                     r"the orderings", result.stdout)


# --------------------------------------------------------------------------- labels in words


def _raw_keys(node, out=None):
    out = set() if out is None else out
    if isinstance(node, dict):
        for k, v in node.items():
            out.add(str(k).replace("_", " "))
            _raw_keys(v, out)
    elif isinstance(node, list):
        for v in node:
            _raw_keys(v, out)
    return out


WORDED = (set(LABELS.values()) | {label for label, _ in FIGURE_LABELS.values()}
          | {c[0] for c in COMPARISON_COLUMNS})


def assert_labels_in_words(page: str, doc: dict) -> int:
    raw = _raw_keys(doc)
    t = tables(page)
    seen = 0
    for row in t.rows:
        for k, (tag, text) in enumerate(row):
            if tag != "th":
                continue
            seen += 1
            assert "_" not in text, text                   # no key as it is stored
            if text in raw:                                 # a key of the document ...
                assert text in WORDED, text                 # ... only when its words are it
            if k + 1 < len(row) and row[k + 1][0] == "td":   # a label | value row
                value = row[k + 1][1].lower()
                assert value not in text.lower().split(), (text, value)
    for title in t.titles:
        assert "_" not in title and "." not in title.split("—")[0], title
    return seen


def test_every_label_is_in_words(seam_run, bracket_run, tmp_path):
    _, _, _, page, doc = seam_run
    assert assert_labels_in_words(page, doc) > 40
    _, page, doc = bracket_run
    assert assert_labels_in_words(page, doc) > 40
    assert "rigid motions counted" in page and "in space: 6 per free part" in page
    frame = bandwise.check_file(MESHES / "frame.inp", compare="rcm", mode_shape=True)
    files = write_report(tmp_path / "frame", report_inputs(frame))
    assert assert_labels_in_words(files.html.read_text(), json.loads(files.json.read_text()))


def test_every_finding_code_of_the_checks_has_a_title_in_words():
    # the codes the checks can emit, read from their source
    source = "".join(p.read_text() for p in (Path(bandwise.__file__).parent / "algorithms"
                                            ).rglob("*.py"))
    source += (Path(bandwise.__file__).parent / "workflows" / "supports.py").read_text()
    codes = set(re.findall(r'"((?:nodes|elements|facets|joints|parts|mesh|supports|stiffness)'
                           r'\.[a-z_]+)"', source))
    codes |= {f"facets.free_{w}" for w in ("faces", "edges")}
    codes.discard("facets.free_")
    assert len(codes) >= 20
    assert sorted(codes - set(FINDING_TITLES)) == []


# --------------------------------------------------------------------------- CLI wording


def test_help_shows_the_support_table_header(runner, cli_app):
    result = runner.invoke(cli_app, ["check", "--help"], env={"COLUMNS": "200"})
    assert result.exit_code == 0
    assert "one [[support]] table per support" in result.stdout
    assert "[] tables" not in result.stdout


def test_format_note_reads_as_a_sentence(runner, cli_app, tmp_path):
    from bandwise.core.generate import tet_grid
    from bandwise.formats.meshio_io import write_model

    model = tet_grid(4, 3, 3)
    model.point_sets["mount_face"] = np.arange(4)
    write_model(model, tmp_path / "bracket.vtu")
    result = runner.invoke(cli_app, ["renumber", str(tmp_path / "bracket.vtu"),
                                     str(tmp_path / "foot.xdmf"), "--method", "rcm",
                                     "--report", str(tmp_path / "rep")])
    assert result.exit_code == 0, result.stderr
    assert "bandwise: note: writing foot.xdmf: node sets 'mount_face': lost" in result.stderr
    assert "writing foot.xdmf: node sets 'mount_face': lost" in result.stdout
    assert "will not keep" not in result.stderr + result.stdout
    page = (tmp_path / "rep" / "report.html").read_text()
    files = page[page.index('<div class="files"'):page.index("</div>", page.index(
        '<div class="files"'))]
    assert "Format notes on foot.xdmf:" in files and "node sets &#x27;mount_face&#x27;: lost" in files


# --------------------------------------------------------------------------- matrices


def test_matrix_json_and_report_carry_the_verdict(runner, cli_app, tmp_path):
    mtx = shared_path("matrices", "dwt_198.mtx")
    checked = json.loads(runner.invoke(cli_app, ["check", str(mtx), "--json"]).stdout)
    entry = checked["meshes"][0]
    assert entry["verdict"] == "unchecked" and "pattern" in entry["verdict_reason"]
    assert entry["next_steps"] == []
    result = runner.invoke(cli_app, ["renumber", str(mtx), str(tmp_path / "dwt.mtx"),
                                     "--method", "rcm", "--report", str(tmp_path / "rep")])
    assert result.exit_code == 0, result.stderr
    doc = json.loads((tmp_path / "rep" / "report.json").read_text())
    assert doc["verdict"] == entry["verdict"] and doc["verdict_reason"] == entry["verdict_reason"]
    assert [Path(o["file"]).name for o in doc["outputs"]] == ["dwt.mtx", "dwt.map.csv"]
    assert doc["values"] is None                      # the place the values checks fill
    assert any("values" in gap for gap in doc["not_analysed"])
    page = (tmp_path / "rep" / "report.html").read_text()
    assert "Verdict: unchecked" in page and "<h3>Node level" not in page
    assert_labels_in_words(page, doc)


def test_matrix_values_get_a_section_when_the_analysis_gives_them(tmp_path):
    result = bandwise.check_file(shared_path("matrices", "dwt_198.mtx"))
    inputs = report_inputs(result)
    from dataclasses import replace

    class Values:                                      # what a values check would hand over
        def to_dict(self):
            return {"symmetric": True, "zero_modes": 0}

    doc = report_document(replace(inputs, values=Values()))
    assert doc["values"] == {"symmetric": True, "zero_modes": 0}
    assert not any("values" in gap for gap in doc["not_analysed"])
    page = write_report(tmp_path / "rep", replace(inputs, values=Values())).html.read_text()
    assert "id='values'" in page and "Matrix values" in page
