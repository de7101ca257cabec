"""The report page as a browser shows it: headless Chromium renders every section and image.

The page carries no script, so the test looks from outside: ``--dump-dom``
gives the DOM the browser built (every section, every image with its PNG
data), and two screenshots, with and without the images, show that the
browser decoded and painted them.  Chromium comes from the Debian package
``chromium``; the setup installs it when missing and running as root, and
skips with the reason when it cannot.
"""

from __future__ import annotations

import io
import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from conftest import seamed_blocks

import bandwise
from bandwise.algorithms.checks import run_checks
from bandwise.algorithms.orderings.compare import compare_orderings
from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.equations import equation_numbering
from bandwise.core.generate import scrambled, tet_grid
from bandwise.core.graph import node_graph
from bandwise.core.summary import summarise
from bandwise.faces.report import ReportInputs, report_inputs, write_report
from bandwise.faces.report.html import CONVENTION

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


@pytest.fixture(scope="module")
def chromium() -> str:
    """The Chromium binary, installed with apt-get when missing and allowed."""
    found = _chromium()
    if found:
        return found
    if os.geteuid() != 0 or shutil.which("apt-get") is None:
        pytest.skip("chromium is not installed and cannot be installed here "
                    "(needs root and apt-get)")
    try:
        subprocess.run(["apt-get", "install", "-y", "chromium"], check=True,
                       capture_output=True, timeout=600)
    except (subprocess.SubprocessError, OSError) as exc:
        pytest.skip(f"chromium could not be installed with apt-get: {exc}")
    found = _chromium()
    if not found:
        pytest.skip("apt-get ran but no chromium binary was found")
    return found


def _run(chromium: str, profile: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([chromium, *FLAGS, f"--user-data-dir={profile}", *args],
                          capture_output=True, timeout=120, check=True)


@pytest.fixture(scope="module")
def report(tmp_path_factory) -> Path:
    """Every section: checks, two orderings compared, one support, modes and equations."""
    model = scrambled(tet_grid(10, 7, 4, h=4.0), seed=11)
    model.source, model.file_format = "bracket_block.msh", "gmsh"
    graph = node_graph(model)
    layout = dof_layout(model)
    supports = apply_supports(model, layout, [parse_support("plane x=0:ux,uy,uz")])
    comparison = compare_orderings(graph, "rcm,sloan", "profile", layout)
    perm = comparison.best.perm
    inputs = ReportInputs(
        model, graph, layout, summarise(model, layout, graph),
        findings=run_checks(model, graph), comparison=comparison,
        supports=supports, modes=zero_energy_modes(model, layout, supports, graph),
        equations=equation_numbering(layout, supports.fixed, perm, graph))
    return write_report(tmp_path_factory.mktemp("browser") / "report", inputs).html


def _screenshot(chromium: str, page: Path, tmp: Path, name: str) -> np.ndarray:
    from matplotlib.image import imread

    shot = tmp / f"{name}.png"
    _run(chromium, tmp / f"profile-{name}", f"--screenshot={shot}", "--window-size=1280,4000",
         page.as_uri())
    return imread(io.BytesIO(shot.read_bytes()), format="png")[..., :3].mean(axis=2)


def test_dom_has_every_section_and_image(chromium, report, tmp_path):
    dom = _run(chromium, tmp_path / "profile", "--dump-dom", report.as_uri()).stdout.decode()
    for section in ("findings", "mesh", "sizing", "orderings", "supports", "not-analysed"):
        assert f'id="{section}"' in dom
    images = re.findall(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)"', dom)
    assert len(images) == 5 and all(len(b) > 5000 for b in images)
    assert "Verdict: ready" in dom                    # a fully held face leaves no mode
    assert "No zero-energy mode" in dom


def test_prints_to_several_pdf_pages(chromium, report, tmp_path):
    pdf = tmp_path / "report.pdf"
    _run(chromium, tmp_path / "profile-pdf", f"--print-to-pdf={pdf}", "--no-pdf-header-footer",
         report.as_uri())
    data = pdf.read_bytes()
    assert data[:5] == b"%PDF-"
    assert len(re.findall(rb"/Type\s*/Page\b", data)) >= 3      # A4 pages, figures kept whole


def _blank_boxes(page: str) -> str:
    """The page with each image replaced by an empty box of the same size (same layout)."""
    import base64
    import struct

    def box(match: re.Match) -> str:
        png = base64.b64decode(match.group(1))
        width, height = struct.unpack(">II", png[16:24])          # the PNG IHDR chunk
        return (f'<div style="width:{width}px;max-width:100%;aspect-ratio:{width}/{height};'
                'border:1px solid #c9d1d8"></div>')

    return re.sub(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)"[^>]*>', box, page)


def test_screenshot_shows_the_images(chromium, report, tmp_path):
    with_images = _screenshot(chromium, report, tmp_path, "full")
    boxes = tmp_path / "boxes.html"
    boxes.write_text(_blank_boxes(report.read_text(encoding="utf-8")), encoding="utf-8")
    without = _screenshot(chromium, boxes, tmp_path, "boxes")
    assert with_images.std() > 0.05                              # not blank
    assert np.mean(with_images < 0.8) > 0.02                     # ink on the page
    # same layout, so every changed pixel was painted by a decoded figure
    changed = np.abs(with_images - without) > 0.1
    assert changed.mean() > 0.05, changed.mean()
    rows = np.flatnonzero(changed.any(axis=1))
    assert rows.size > 1000, rows.size                           # figures down the page


@pytest.fixture(scope="module")
def renumbered(tmp_path_factory):
    """A renumbering's report: two unmerged blocks, no supports, the maps written."""
    folder = tmp_path_factory.mktemp("renumbered")
    mesh = seamed_blocks(folder / "foot.vtu")
    result = bandwise.renumber_file(mesh, folder / "foot-rn.vtu", method="rcm,sloan",
                                    dof_map=folder / "foot-dofs.csv", analyse=True)
    return result, write_report(folder / "rep", report_inputs(result)).html


def _text(html: str) -> str:
    """Visible text of a fragment of the DOM, one space between words."""
    import html as html_lib

    return " ".join(html_lib.unescape(re.sub(r"<[^>]+>", " ", html)).split())


def test_dom_names_files_next_steps_one_ratio_and_wall_time(chromium, renumbered, tmp_path):
    result, page = renumbered
    dom = _run(chromium, tmp_path / "profile", "--dump-dom", page.as_uri()).stdout.decode()
    top = dom[:dom.index("<section")]                     # above the first section
    # the files written, by name, near the top
    files = _text(top[top.index('class="files"'):])
    for name in ("foot-rn.vtu", "foot-rn.map.csv", "foot-dofs.csv"):
        assert name in files
    # the verdict box says what to do next: merge the seam, then the holds to pass
    box = _text(top[top.index('class="verdict'):top.index('class="files"')])
    assert "Verdict: problems" in box and "What to do next" in box
    merge = next(s for s in result.check.next_steps if s.kind == "merge")
    holds = next(s for s in result.check.next_steps if s.kind == "supports")
    assert merge.command.startswith("bandwise merge ") and merge.command.endswith(
        "foot-merged.vtu")
    assert merge.command in box and holds.command in box
    assert holds.command.startswith("--support 'node ")
    # one ratio convention, said once, used in the tables
    text = _text(dom)
    assert text.count(CONVENTION) == 1
    assert "below 1 is better" not in text and "improvement" not in text
    assert text.count("reduction") >= 3
    # the wall time, compilation included, beside each ordering's own time
    wall = result.comparison_time
    assert "of wall time in all, compiling included" in text
    assert "loading the orderings before any ran" in text
    assert "wall time of its step" in text
    assert f'<data value="{round(wall.seconds, 6)!r}">' in dom
    assert f'<data value="{round(wall.loading_seconds, 6)!r}">' in dom
    for row in result.comparison.rows:
        assert f'<data value="{round(wall.by_method[row.method], 6)!r}">' in dom
        assert wall.by_method[row.method] >= row.seconds


def test_screenshot_top_of_a_renumbering_report(chromium, renumbered, tmp_path):
    """The first screen holds the verdict box and the files written, drawn."""
    from matplotlib.image import imread

    _, page = renumbered
    shot = tmp_path / "top.png"
    _run(chromium, tmp_path / "profile-top", f"--screenshot={shot}", "--window-size=1280,900",
         page.as_uri())
    grey = imread(io.BytesIO(shot.read_bytes()), format="png")[..., :3].mean(axis=2)
    # the verdict box of "problems" is tinted (#f8e7e4, grey ~0.92) and framed in ink
    tinted = np.abs(grey - grey.dtype.type(0.92)) < 0.02
    assert tinted.mean() > 0.05
    assert (grey < 0.2).mean() > 0.005                            # frames and text
