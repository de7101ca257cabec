"""Write a report folder: ``report.html``, ``report.json`` and the figures as PNG.

Everything is written into a temporary folder beside the target and moved
into place only when whole: a new folder is renamed in one step; into an
existing folder each file is renamed over its old version, the page last.
A failure at any point leaves no partial page and no stray file behind.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise.core.errors import MeshWriteError
from bandwise.core.metrics import column_heights, wavefront_profile
from bandwise.core.model import Model
from bandwise.core.progress import Progress, step

from . import figures as fg
from .document import body_mode_count, report_document
from .html import json_text, render_html
from .inputs import ReportInputs
from .meshview import MeshView, mesh_view, spread
from .sampling import pattern_image

HTML_NAME, JSON_NAME = "report.html", "report.json"
#: Most arrows drawn for a free motion.
MAX_ARROWS = 120


@dataclass(frozen=True)
class ReportFiles:
    """Where a report was written.

    Attributes
    ----------
    folder
        The report folder.
    html, json
        The page and the machine-readable document.
    figures
        The PNG files (the same images are embedded in the page).
    """

    folder: Path
    html: Path
    json: Path
    figures: tuple[Path, ...]


@dataclass(frozen=True)
class Figure:
    """One rendered figure: its file name, section, caption and PNG bytes."""

    file: str
    section: str
    caption: str
    png: bytes

    def entry(self) -> dict[str, str]:
        """The figure as listed in the report document."""
        return {"file": self.file, "section": self.section, "caption": self.caption}


def node_indices(model: Model, labels: Any) -> NDArray[np.int64]:
    """0-based indices of the nodes a finding names by label (unknown labels dropped)."""
    ids = np.asarray(list(labels), dtype=np.int64)
    all_labels, _ = model.node_labels()
    if ids.size == 0 or all_labels.size == 0:
        return np.zeros(0, dtype=np.int64)
    order = np.argsort(all_labels, kind="stable")
    at = np.clip(np.searchsorted(all_labels[order], ids), 0, order.size - 1)
    found = all_labels[order[at]] == ids
    return order[at[found]].astype(np.int64)


#: Finding codes whose nodes the mesh picture marks, by code prefix, and the mark drawn.
#: The nodes of ``parts.disconnected`` are not marked: the parts have their own colours.
MARKED_CODES: tuple[tuple[str, str], ...] = (
    ("nodes.orphan", "orphan"), ("nodes.point_only", "orphan"),
    ("nodes.coincident", "coincident"), ("joints.", "weak joint"),
    ("nodes.articulation", "weak joint"), ("nodes.", "other"),
)
# ``supports.free_modes`` names the suggested holds, not the moving nodes: the
# moving nodes come from the zero-energy analysis itself (:func:`mode_marks`).


def mark_kind(code: str) -> str | None:
    """The kind of mark drawn for the nodes of a finding (None: not marked)."""
    for prefix, kind in MARKED_CODES:
        if code.startswith(prefix):
            return kind
    return None


def finding_marks(inputs: ReportInputs) -> dict[str, NDArray[np.int64]]:
    """Nodes to mark on the mesh picture, per kind, from the findings' node ids."""
    assert inputs.model is not None
    marks: dict[str, list[NDArray[np.int64]]] = {}
    for f in inputs.findings or ():
        kind = mark_kind(f.code)
        if kind is not None and f.node_ids:
            marks.setdefault(kind, []).append(node_indices(inputs.model, f.node_ids))
    return {k: np.unique(np.concatenate(v)) for k, v in marks.items()}


def mode_marks(inputs: ReportInputs) -> dict[str, NDArray[np.int64]]:
    """The nodes moving most in each mode the given supports leave free.

    Without supports every body is free; marking its nodes would say nothing.
    """
    modes = inputs.modes
    if modes is None or inputs.model is None or not body_mode_count(inputs):
        return {}
    labels = [label for m in modes.modes() for label in m.moving_nodes]
    nodes = node_indices(inputs.model, labels)
    return {"moving most in a free mode": np.unique(nodes)} if nodes.size else {}


def mode_arrows(inputs: ReportInputs) -> tuple[NDArray[np.int64], NDArray[np.float64]] | None:
    """The free motion the analysis computed, drawn as arrows when the supports leave modes."""
    if not body_mode_count(inputs) or inputs.model is None:
        return None
    return inputs.motion


def visible_arrows(view: MeshView, arrows: tuple[NDArray[np.int64], NDArray[np.float64]] | None,
                   most: int = MAX_ARROWS) -> tuple[NDArray[np.int64], NDArray[np.float64]] | None:
    """The arrows at nodes of drawn facets or members, at most ``most``, evenly spread."""
    if arrows is None:
        return None
    nodes, vectors = arrows
    drawn = np.zeros(view.xy.shape[0], dtype=bool)
    drawn[view.facets.ravel()] = True
    drawn[view.lines.ravel()] = True
    keep = np.flatnonzero(drawn[nodes])
    keep = keep[spread(keep.size, most)]
    return (nodes[keep], vectors[keep]) if keep.size else None


def mesh_figure(inputs: ReportInputs) -> Figure:
    """The mesh coloured by part, the nodes of findings and free modes marked, a free motion."""
    assert inputs.model is not None
    view = mesh_view(inputs.model, inputs.graph, table=inputs.table)
    arrows = visible_arrows(view, mode_arrows(inputs))
    found, moving = finding_marks(inputs), mode_marks(inputs)
    ax = fg.mesh_axes(view, {**found, **moving}, arrows)
    shown = (f"{len(view.facets):,} of {view.facets_total:,} facets drawn (evenly spread "
             "subset)" if view.is_subsampled else "every facet drawn")
    marked = [what for what, group in (("the nodes the findings name", found),
                                       ("the nodes free modes move most", moving))
              if any(nodes.size for nodes in group.values())]
    caption = (f"The mesh, {view.n_parts} connected part(s) coloured"
               + (f"; marked: {' and '.join(marked)}" if marked else "") + f"; {shown}.")
    if view.axis_names[0].startswith("view"):
        caption += " Oblique view; outer faces of solids only."
    if arrows is not None:
        caption += (" Arrows: one free zero-energy motion (a vector of the null space of the "
                    "supported unit stiffness; any combination of the listed modes can occur).")
    return Figure("mesh.png", "findings", caption, fg.png_bytes(ax))


def pattern_figure(inputs: ReportInputs) -> Figure:
    """The sparsity pattern before (and after) renumbering, side by side, one scale."""
    from matplotlib.figure import Figure as MplFigure

    from .style import styled

    before = pattern_image(inputs.graph)
    perm = inputs.chosen_perm
    after = None if perm is None else pattern_image(inputs.graph, perm)
    vmax = max(int(before.counts.max()), int(after.counts.max()) if after else 1)

    @styled
    def draw() -> Any:
        fig = MplFigure(figsize=(12.0 if after else 6.5, 6.0), layout="constrained")
        axes = fig.subplots(1, 2 if after else 1, squeeze=False)[0]
        fg.pattern_axes(before, "Current numbering", ax=axes[0], vmax=vmax)
        if after is not None:
            fg.pattern_axes(after, f"Renumbered ({inputs.chosen_method})",
                            ax=axes[1], vmax=vmax)
        return fig

    exact = before.bins == before.n
    caption = (f"Node-level nonzero pattern, diagonal included ({before.nnz:,} entries); "
               + ("one cell per entry." if exact else
                  f"binned {before.bins} x {before.bins}, darker = more nonzeros (log "
                  "scale, same scale on both sides)."))
    # about one screen pixel per bin: the density image is not resampled away
    return Figure("pattern.png", "sizing", caption, fg.png_bytes(draw(), dpi=130))


def curve_figures(inputs: ReportInputs) -> list[Figure]:
    """Skyline column heights and wavefront along the elimination, before and after."""
    g, p, d = inputs.graph, inputs.chosen_perm, inputs.layout
    label = ("current numbering", f"renumbered ({inputs.chosen_method})")
    sky = fg.skyline_axes(column_heights(g, None, d),
                          None if p is None else column_heights(g, p, d), labels=label)
    wave = fg.wavefront_axes(wavefront_profile(g, None, d),
                             None if p is None else wavefront_profile(g, p, d), labels=label)
    note = " Long curves drawn as their min-max band per bin (no peak lost)."
    return [
        Figure("skyline.png", "sizing", "Skyline: column height of every DOF row; the "
               "filled area is the profile (envelope) a skyline solver stores." + note,
               fg.png_bytes(sky)),
        Figure("wavefront.png", "sizing", "Wavefront: equations active at each "
               "elimination step (DOF level)." + note, fg.png_bytes(wave)),
    ]


def comparison_figure(inputs: ReportInputs) -> Figure | None:
    """Bar chart of the orderings compared, DOF level: the reduction of each figure.

    The reduction is the page's one ratio (:data:`~.html.CONVENTION`): the
    original numbering's figure divided by the ordering's.
    """
    comp = inputs.comparison
    if comp is None:
        return None
    base = comp.original
    rows = [r for r in comp.rows if r.ok and r is not base and r.dofs is not None]
    if not rows or base.dofs is None:
        return None
    ratios: dict[str, list[float]] = {}
    for key, label in (("bandwidth", "bandwidth"), ("profile", "profile"),
                       ("max_wavefront", "max front"), ("rms_wavefront", "RMS front"),
                       ("envelope_ops", "envelope\nwork")):
        ref = float(getattr(base.dofs, key))
        ratios[label] = [ref / float(getattr(r.dofs, key)) if getattr(r.dofs, key) else np.nan
                         for r in rows]
    if base.fill and all(r.fill for r in rows):
        ratios["Cholesky\nnnz(L)"] = [float(base.fill) / r.fill for r in rows]
    ax = fg.comparison_axes([r.method for r in rows], ratios, chosen=comp.best.method)
    return Figure("orderings.png", "orderings", "Reduction of each figure by each ordering "
                  "(DOF level; the dashed line at 1 is the current numbering, taller bars are "
                  "smaller matrices); the kept ordering outlined.", fg.png_bytes(ax))


def report_figures(inputs: ReportInputs, progress: Progress | None = None) -> list[Figure]:
    """Render every figure the inputs allow."""
    out = []
    if inputs.model is not None:
        with step(progress, "drawing the mesh"):
            out.append(mesh_figure(inputs))
    with step(progress, "drawing the matrix pattern and curves"):
        out.append(pattern_figure(inputs))
        out.extend(curve_figures(inputs))
        cmp = comparison_figure(inputs)
        if cmp is not None:
            out.append(cmp)
    return out


def check_report_folder(out_dir: str | os.PathLike[str]) -> Path:
    """Check that a report folder can be written (its parent exists, it is no file).

    Commands call it before a long analysis, so a bad ``--out`` fails at once.
    Returns the parent folder; raises :class:`~bandwise.core.errors.MeshWriteError`.
    """
    out_dir = Path(out_dir)
    parent = out_dir.resolve().parent
    if out_dir.exists() and not out_dir.is_dir():
        raise MeshWriteError(f"{out_dir}: exists and is not a folder")
    if not parent.is_dir():
        raise MeshWriteError(f"{out_dir}: cannot create the report folder: "
                             f"{parent} does not exist")
    return parent


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _publish(tmp: Path, out_dir: Path, names: list[str]) -> None:
    """Move the finished files into place: the folder at once, or file by file, page last."""
    if not out_dir.exists():
        with contextlib.suppress(OSError):
            os.replace(tmp, out_dir)
            return
    out_dir.mkdir(exist_ok=True)
    for name in names:  # figures, then the JSON, then the page
        os.replace(tmp / name, out_dir / name)


def write_report(out_dir: str | os.PathLike[str], inputs: ReportInputs,
                 progress: Progress | None = None) -> ReportFiles:
    """Write ``report.html``, ``report.json`` and the PNG figures into ``out_dir``.

    Parameters
    ----------
    out_dir
        The report folder; created if missing (its parent must exist), else
        its report files are replaced.
    inputs
        What the report presents.
    progress
        Receives the steps (the library never prints).

    Returns
    -------
    ReportFiles

    Raises
    ------
    MeshWriteError
        The folder cannot be created or written; nothing is left behind.
    """
    out = Path(out_dir)
    parent = check_report_folder(out)
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".part", dir=parent))
        tmp.chmod(0o777 & ~_umask())  # mkdtemp makes it private; the folder is published
    except OSError as exc:
        raise MeshWriteError(f"{out}: cannot write in {parent}: {exc.strerror}") from None
    try:
        figs = report_figures(inputs, progress)
        with step(progress, "writing the report"):
            doc = report_document(inputs, [f.entry() for f in figs])
            page = render_html(doc, {f.file: f.png for f in figs})
            for f in figs:
                (tmp / f.file).write_bytes(f.png)
            (tmp / JSON_NAME).write_text(json_text(doc), encoding="utf-8")
            (tmp / HTML_NAME).write_text(page, encoding="utf-8")
            names = [f.file for f in figs] + [JSON_NAME, HTML_NAME]
            _publish(tmp, out, names)
    except OSError as exc:
        raise MeshWriteError(f"{out}: report not written: {exc.strerror or exc}") from None
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return ReportFiles(out, out / HTML_NAME, out / JSON_NAME,
                       tuple(out / f.file for f in figs))
