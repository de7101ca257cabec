"""``check_file``: size up and check one mesh or matrix file before a run.

One call reads the file, builds the node graph, measures the current
numbering, runs every mesh check, holds the supports, counts the zero-energy
modes and the equations, and decides the verdict.  It returns a frozen
:class:`CheckResult`; it never prints and never exits.  A file that cannot
be analysed raises a :class:`~bandwise.core.errors.BandwiseError`;
:func:`check_files` turns that into a :class:`FileFailure` so that one bad
file never costs the others.

>>> import bandwise
>>> result = bandwise.check_file("meshes/bracket.msh", supports=["mount_face:fixed"])
>>> result.verdict.word
'ready'
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.checks import CheckOptions, run_checks
from bandwise.algorithms.checks.findings import Finding, severity_rank
from bandwise.algorithms.checks.verdict import Verdict, check_fail_on, decide_verdict, failing
from bandwise.algorithms.modeshape import free_motion
from bandwise.algorithms.orderings.compare import Comparison
from bandwise.algorithms.supports import Support
from bandwise.algorithms.topology import (
    FacetTable,
    face_connected_blocks,
    facet_table_in_background,
)
from bandwise.algorithms.values import ValuesCheck, check_values
from bandwise.core.dofs import DofLayout, dof_layout
from bandwise.core.equations import EquationNumbering, equation_numbering
from bandwise.core.errors import BandwiseError, InputError, one_line
from bandwise.core.graph import NodeGraph, graph_from_matrix, node_graph
from bandwise.core.model import Model
from bandwise.core.progress import Progress, ProgressCallback, as_progress, step
from bandwise.core.summary import MeshSummary, summarise
from bandwise.formats.decks import Deck
from bandwise.formats.decks.files import deck_graph, read_mesh_or_deck
from bandwise.formats.matrix_io import (
    MatrixData,
    is_matrix_file,
    read_matrix_data,
    summarise_matrix,
)

from .deck_inputs import DeckInputs, deck_inputs
from .next_steps import NextStep, next_steps
from .supports import SupportAnalysis, analyse_supports, merged_findings, support_list
from .timing import ComparisonTime, timed_comparison


@dataclass(frozen=True)
class CheckResult:
    """Everything ``check`` found in one file.

    Attributes
    ----------
    file
        The file as given.
    subject
        ``"mesh"``, or ``"matrix"`` for a matrix file (one unknown per row).
    summary
        Sizes and the figures of the current numbering.
    verdict
        The one verdict every face shows (:func:`~bandwise.algorithms.checks.verdict.decide_verdict`).
    findings
        What the checks found, most serious first; None when nothing could
        be checked (a bare matrix pattern).
    fail_on
        The gate the verdict was decided with.
    supports
        Held DOFs, zero-energy modes and equations (meshes only).
    comparison
        Orderings compared, when asked for (``compare=``).
    motion
        One free zero-energy motion ``(nodes, translations)`` for a picture,
        when asked for (``mode_shape=True``) and small enough to compute.
    kept_equations
        With orderings compared: the equations numbered in the kept order.
    table
        The element facets the checks matched, kept for the report's picture.
    values
        A matrix file with values: what the values say
        (:func:`bandwise.algorithms.values.check_values`).
    model, graph, layout
        What the figures were measured on, kept for a report (not shown).
    next_steps
        What to do before a static run (:mod:`bandwise.workflows.next_steps`):
        merge a seam, hold the suggested DOFs, correct the mesh.
    comparison_time
        Wall time of the comparison of orderings, compilation included.
    """

    file: str
    subject: str
    summary: MeshSummary
    verdict: Verdict
    findings: tuple[Finding, ...] | None
    fail_on: str = "error"
    supports: SupportAnalysis | None = None
    comparison: Comparison | None = None
    motion: tuple[NDArray[np.int64], NDArray[np.float64]] | None = field(
        default=None, repr=False, compare=False)
    kept_equations: EquationNumbering | None = field(default=None, repr=False, compare=False)
    model: Model | None = field(default=None, repr=False, compare=False)
    graph: NodeGraph | None = field(default=None, repr=False, compare=False)
    layout: DofLayout | int = field(default=1, repr=False, compare=False)
    next_steps: tuple[NextStep, ...] = ()
    comparison_time: ComparisonTime | None = field(default=None, compare=False)
    values: ValuesCheck | None = None
    table: FacetTable | None = field(default=None, repr=False, compare=False)

    def __repr__(self) -> str:
        s = self.summary
        n = "-" if self.findings is None else len(self.findings)
        return (f"CheckResult(file={self.file!r}, verdict={self.verdict.word!r}, "
                f"nodes={s.n_nodes}, dofs={s.n_dofs}, parts={s.n_parts}, findings={n})")

    @property
    def failed(self) -> bool:
        """True when a finding is at or above the gate (``check`` exits 1)."""
        return bool(self.findings) and bool(failing(self.findings, self.fail_on))

    def to_dict(self) -> dict[str, Any]:
        """This file's entry of ``check --json`` (``meshes[i]``), exactly."""
        out = {**self.summary.to_dict()}
        if self.supports is not None:
            out.update(self.supports.to_dict())
        out["verdict"] = self.verdict.word
        out["verdict_reason"] = self.verdict.reason
        out["next_steps"] = [n.to_dict() for n in self.next_steps]
        if self.findings is not None:
            out["findings"] = [f.to_dict() for f in self.findings]
        if self.comparison is not None:
            out["comparison"] = self.comparison.to_dict()
        if self.comparison_time is not None:
            out["comparison_time"] = self.comparison_time.to_dict()
        if self.values is not None:
            out["values"] = self.values.to_dict()
        return out


@dataclass(frozen=True)
class FileFailure:
    """A file that could not be analysed, with the one-line reason."""

    file: str
    error: str

    def to_dict(self) -> dict[str, Any]:
        """The file's entry in a batch's JSON: ``file`` and ``error``, no verdict."""
        return {"file": self.file, "error": self.error}


def check_file(path: str | os.PathLike[str], *, supports: Iterable[str | Support] = (),
               supports_file: str | os.PathLike[str] | None = None,
               file_format: str | None = None, dofs_per_node: int | None = None,
               physics: str | None = None, fail_on: str = "error",
               tolerance: float | None = None, relative_tolerance: float = 1e-3,
               stiffness_check: bool = False, dof_map: str | os.PathLike[str] | None = None,
               compare: str | None = None, objective: str = "profile",
               mode_shape: bool = False,
               coordinates: str | os.PathLike[str] | None = None,
               progress: Progress | ProgressCallback | None = None) -> CheckResult:
    """Check one mesh (or matrix) file: parts, nodes, elements, joints, supports, sizes.

    Parameters
    ----------
    path
        The file (never modified).  Matrix files (``.mtx``, ``.rb``, ``.rsa`` ...)
        are sized as patterns, one unknown per row.
    supports, supports_file
        Supports as option texts (``"mount_face:fixed"``) or values, and a TOML
        support file (:mod:`bandwise.algorithms.supports`).  A deck's own
        boundary cards are added.
    file_format, dofs_per_node, physics, fail_on, tolerance, relative_tolerance,
    stiffness_check, dof_map
        As the command line's options of the same names.
    compare, objective
        Also compare orderings (``"auto"`` or names separated by commas) for
        ``objective``; None compares nothing.
    mode_shape
        Also compute one free motion for a picture (small models only).
    coordinates
        For a matrix file with values: a mesh whose nodes, in file order, are
        the matrix's node blocks (``dofs_per_node`` DOFs each, or rows over
        nodes); adds the rigid-body check ``K r = 0``.
    progress
        A :class:`~bandwise.core.progress.Progress`, or a function called with
        ``(label, None)`` when a step starts and ``(label, seconds)`` when it ends.

    Returns
    -------
    CheckResult

    Raises
    ------
    BandwiseError
        The file cannot be read or analysed, or an option is invalid.
    """
    check_fail_on(fail_on)
    held = support_list(supports, supports_file)
    progress = as_progress(progress)
    path = Path(path)
    if is_matrix_file(path):
        if held:
            raise InputError(f"{path}: supports apply to a mesh, not to a matrix file")
        return _check_matrix(path, fail_on, compare, objective, progress, dofs_per_node,
                             coordinates)
    if coordinates is not None:
        raise InputError(f"{path}: coordinates (--coordinates) apply to a matrix file")
    with step(progress, f"reading {path.name}"):
        model, deck = read_mesh_or_deck(path, file_format)
    extra = deck_inputs(model, deck, dof_layout(model, dofs_per_node=dofs_per_node,
                                                physics=physics))
    return analyse_model(model, extra, deck, str(path), held, fail_on=fail_on,
                         options=CheckOptions(tolerance=tolerance,
                                              relative_tolerance=relative_tolerance),
                         stiffness_check=stiffness_check, dof_map=dof_map, compare=compare,
                         objective=objective, mode_shape=mode_shape, progress=progress)


def analyse_model(model: Model, extra: DeckInputs, deck: Deck | None, file: str,
                  supports: Sequence[Support] = (), *, fail_on: str = "error",
                  options: CheckOptions | None = None, graph: NodeGraph | None = None,
                  stiffness_check: bool = False, dof_map: str | os.PathLike[str] | None = None,
                  compare: str | None = None, objective: str = "profile",
                  mode_shape: bool = False, progress: Progress | None = None) -> CheckResult:
    """The analysis of a model already read: what :func:`check_file` does after reading.

    ``renumber_file`` calls it too, on the model and graph it already has,
    when a report of the renumbered job is wanted.
    """
    options = dataclasses.replace(options or CheckOptions(), links=extra.check_links)
    layout = extra.layout
    pending = facet_table_in_background(model)  # meanwhile: the graph and the summary
    if graph is None:
        with step(progress, "building node graph"):
            graph = node_graph(model) if deck is None else deck_graph(deck, model)
    summary = summarise(model, layout, graph=graph, progress=progress)
    with step(progress, "matching element facets"):  # shared by the checks and the modes
        table = pending.result()
        _, labels = face_connected_blocks(model, table)
    held = analyse_supports(model, layout, graph, supports, file_supports=extra.supports,
                            labels=labels, links=extra.rigid_links,
                            stiffness_check=stiffness_check, dof_map=dof_map,
                            progress=progress)
    findings = merged_findings(run_checks(model, graph, options, progress=progress,
                                          table=table), held)
    verdict = decide_verdict(findings, fail_on, supports_given=held.given,
                             free_modes=held.free_modes)
    comparison = kept = timing = None
    if compare is not None and compare != "none":
        comparison, timing = timed_comparison(graph, compare, objective, layout,
                                              progress=progress)
        kept = equation_numbering(layout, held.supports.fixed, comparison.best.perm, graph,
                                  whole=comparison.best.dofs)
    motion = None
    if mode_shape and held.given and held.free_modes:
        with step(progress, "drawing a free motion"):
            motion = free_motion(model, layout, held.supports, held.free_modes)
    return CheckResult(file, "mesh", summary, verdict, findings, fail_on, held, comparison,
                       motion, kept, model, graph, layout,
                       next_steps=next_steps(file, findings, held, fail_on, options),
                       comparison_time=timing, table=table)


def _check_matrix(path: Path, fail_on: str, compare: str | None, objective: str,
                  progress: Progress | None, dofs_per_node: int | None = None,
                  coordinates: str | os.PathLike[str] | None = None) -> CheckResult:
    """A matrix: the figures of its current order (and orderings, if asked), its values."""
    with step(progress, "reading the matrix"):
        data = read_matrix_data(path)
    points = None
    if coordinates is not None:
        with step(progress, f"reading node coordinates from {Path(coordinates).name}"):
            points = read_mesh_or_deck(Path(coordinates), None)[0].points
    return analyse_matrix(data, graph_from_matrix(data.matrix), fail_on=fail_on,
                          compare=compare, objective=objective, progress=progress,
                          dofs_per_node=dofs_per_node, coordinates=points)


def analyse_matrix(data: MatrixData, graph: NodeGraph, *, fail_on: str = "error",
                   compare: str | None = None, objective: str = "profile",
                   progress: Progress | None = None, dofs_per_node: int | None = None,
                   coordinates: NDArray[np.float64] | None = None) -> CheckResult:
    """The analysis of a matrix already read: its figures (and orderings, if asked).

    A matrix with real values is also checked by them
    (:func:`bandwise.algorithms.values.check_values`, with ``dofs_per_node``
    and ``coordinates`` for the rigid-body check); its findings make the
    verdict, its zero modes count as free modes (no supports in a matrix).
    """
    path = data.source
    comparison = timing = None
    if compare is not None and compare != "none":
        comparison, timing = timed_comparison(graph, compare, objective, 1, progress=progress)
    values, findings = None, None
    verdict = decide_verdict(None, fail_on)
    if data.field in ("real", "integer"):
        with step(progress, "checking the values"):
            values = check_values(data.matrix, dofs_per_node=dofs_per_node,
                                  coordinates=coordinates)
        findings = tuple(sorted(values.findings(), key=lambda f: severity_rank(f.severity)))
        verdict = decide_verdict(findings, fail_on, free_modes=values.zero_modes or 0)
    return CheckResult(str(path), "matrix", summarise_matrix(data), verdict, findings, fail_on,
                       None, comparison, graph=graph, layout=1, comparison_time=timing,
                       values=values)


def check_files(paths: Iterable[str | os.PathLike[str]], **options: Any
                ) -> list[CheckResult | FileFailure]:
    """:func:`check_file` on each path in turn; a file that fails becomes a :class:`FileFailure`.

    Options are those of :func:`check_file`.  An invalid option (the same for
    every file) is raised at once rather than repeated for each file.
    """
    paths = list(paths)
    check_fail_on(options.get("fail_on", "error"))
    support_list(options.get("supports", ()), options.get("supports_file"))
    if options.get("dof_map") is not None and len(paths) != 1:
        raise InputError(f"a DOF map (--dof-map) takes one mesh file, got {len(paths)}")
    out: list[CheckResult | FileFailure] = []
    for path in paths:
        try:
            out.append(check_file(path, **options))
        except Exception as exc:  # one bad file never costs the others
            out.append(file_failure(path, exc))
    return out


def file_failure(path: str | os.PathLike[str], exc: Exception) -> FileFailure:
    """The :class:`FileFailure` of a file whose work raised ``exc`` (a batch goes on)."""
    if isinstance(exc, BandwiseError):
        return FileFailure(str(path), one_line(exc) or type(exc).__name__)
    if isinstance(exc, MemoryError):
        return FileFailure(str(path), "out of memory")
    return FileFailure(str(path), f"internal error: {type(exc).__name__}: {one_line(exc)}")
