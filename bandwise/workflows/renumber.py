"""``renumber_file``: try orderings, keep the best, write the renumbered file and its map.

A mesh comes back in its own format (a solver deck with only its node ids
rewritten in place), a matrix as Matrix Market with its rows permuted.  The
old-to-new node map is always written beside it.  Returns a frozen
:class:`RenumberResult`; never prints, never exits.

>>> import bandwise
>>> r = bandwise.renumber_file("meshes/bracket.msh", "/tmp/bracket-rcm.msh",
...                            method="rcm", supports=["mount_face:fixed"])
>>> r.comparison.best.method
'rcm'
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise import __version__
from bandwise.algorithms.checks import CheckOptions
from bandwise.algorithms.orderings.compare import EFFORTS, OBJECTIVES, Comparison
from bandwise.algorithms.orderings.frontal import (
    ElementReordering,
    frontal_reordering,
    reordered_elements,
)
from bandwise.algorithms.supports import Support
from bandwise.core.caution import CAUTION
from bandwise.core.dofs import DofLayout, dof_layout
from bandwise.core.errors import InputError, MeshWriteError
from bandwise.core.graph import NodeGraph, graph_from_matrix, node_graph
from bandwise.core.model import Model
from bandwise.core.paths import same_extension, same_file
from bandwise.core.progress import Progress, ProgressCallback, as_progress, step
from bandwise.formats import OutputPlan, plan_output, read_model, write_model
from bandwise.formats.decks.files import deck_graph, deck_to_renumber, write_renumbered_deck
from bandwise.formats.matrix_io import (
    is_matrix_file,
    is_matrix_market_name,
    read_matrix_data,
    write_matrix_market,
)
from bandwise.formats.mesh_io import check_output
from bandwise.formats.node_map import write_node_map

from .check import CheckResult, analyse_matrix, analyse_model
from .deck_inputs import DeckInputs, deck_inputs, deck_support_set
from .supports import RenumberedEquations, renumbered_equations, support_list
from .timing import ComparisonTime, timed_comparison


@dataclass(frozen=True)
class RenumberResult:
    """What ``renumber`` chose, wrote and measured for one file.

    Attributes
    ----------
    input, output, node_map
        The file read, the renumbered file written, the old-to-new node map.
    output_format
        How the output was written (format name, or the deck rewrite).
    output_kind
        The kind of file written (format, version, encoding, compression),
        None for a deck rewritten in place or a matrix.
    output_notes
        How that kind differs from the input's (a version not written ...).
    level
        Where the figures were measured (DOF level and its rule, or matrix rows).
    options
        Ordering options used (Sloan weights).
    comparison
        Every ordering tried, with the one kept (:attr:`Comparison.best`).
    element_order
        The element order for a frontal solver, when asked for.
    losses
        What the output format cannot carry, said before writing.
    deck
        Cards rewritten in place and notes, for a deck renumbered in place.
    equations
        Equations before and after, held DOFs set aside (meshes).
    dof_map
        Where the DOF map was written, if asked for.
    check
        The checks, supports and zero-energy modes of the job, when asked for
        (``analyse=True``: what a report of the run shows).
    comparison_time
        Wall time of the comparison of orderings, compilation included (the
        per-method ``seconds`` of :attr:`comparison` leave compilation out).
    """

    input: str
    output: str
    output_format: str
    node_map: str
    level: str
    options: dict[str, dict[str, float]]
    comparison: Comparison
    element_order: ElementReordering | None = None
    losses: tuple[str, ...] = ()
    deck: dict[str, Any] | None = None
    equations: RenumberedEquations | None = None
    dof_map: str | None = None
    check: CheckResult | None = None
    output_kind: dict[str, str | None] | None = None
    output_notes: tuple[str, ...] = ()
    model: Model | None = field(default=None, repr=False, compare=False)
    graph: NodeGraph | None = field(default=None, repr=False, compare=False)
    layout: DofLayout | int = field(default=1, repr=False, compare=False)
    comparison_time: ComparisonTime | None = field(default=None, compare=False)

    def __repr__(self) -> str:
        best = self.comparison.best
        return (f"RenumberResult(input={self.input!r}, output={self.output!r}, "
                f"chosen={best.method!r}, {self.comparison.objective}="
                f"{best.value(self.comparison.objective)}, improvement={best.improvement})")

    @property
    def perm(self) -> NDArray[np.int64]:
        """The kept ordering, ``perm[new] = old``."""
        return self.comparison.best.perm

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``renumber --json`` prints, exactly."""
        return {
            "bandwise_version": __version__,
            "caution": CAUTION,
            "input": self.input,
            "output": self.output,
            "output_format": self.output_format,
            "output_kind": self.output_kind,
            "output_notes": list(self.output_notes),
            "node_map": self.node_map,
            "level": self.level,
            "options": self.options,
            "comparison": self.comparison.to_dict(),
            "comparison_time": (None if self.comparison_time is None
                                else self.comparison_time.to_dict()),
            "element_order": None if self.element_order is None else self.element_order.to_dict(),
            "losses": list(self.losses),
            "deck": self.deck,
            "equations": None if self.equations is None else self.equations.to_dict(),
        }


def sloan_options(weights: str | tuple[float, float] | None) -> dict[str, dict[str, float]]:
    """``"W1,W2"`` (or a pair) -> ``{"sloan": {"w1": W1, "w2": W2}}``; empty when not given."""
    if weights is None:
        return {}
    try:
        parts = weights.split(",") if isinstance(weights, str) else list(weights)
        w1, w2 = (float(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(f"Sloan weights (--sloan-weights) are two numbers W1,W2 (e.g. 2,1), "
                         f"got {weights!r}") \
            from None
    if not (math.isfinite(w1) and math.isfinite(w2)) or w1 < 0 or w2 < 0 or w1 == w2 == 0:
        raise InputError(f"Sloan weights (--sloan-weights) must be two non-negative numbers, "
                         f"not both 0; "
                         f"got {weights!r}")
    return {"sloan": {"w1": w1, "w2": w2}}


def default_map_path(out: str | os.PathLike[str]) -> Path:
    """``OUT`` without its extension, plus ``.map.csv``."""
    out = Path(out)
    return out.with_name(f"{out.stem}.map.csv")


def renumber_file(src: str | os.PathLike[str], dst: str | os.PathLike[str], *,
                  method: str = "auto", objective: str = "profile",
                  supports: Iterable[str | Support] = (),
                  supports_file: str | os.PathLike[str] | None = None,
                  map_path: str | os.PathLike[str] | None = None,
                  element_order: bool = False,
                  sloan_weights: str | tuple[float, float] | None = None,
                  file_format: str | None = None, output_format: str | None = None,
                  dofs_per_node: int | None = None, physics: str | None = None,
                  replace_input: bool = False,
                  dof_map: str | os.PathLike[str] | None = None,
                  analyse: bool = False, fail_on: str = "error", effort: str = "fast",
                  progress: Progress | ProgressCallback | None = None) -> RenumberResult:
    """Renumber the nodes of one file: try orderings, keep the best, write it and the map.

    Parameters
    ----------
    src, dst
        The input (never modified unless ``replace_input``) and the output.
    method, objective
        Orderings to try (``"auto"`` or names separated by commas) and what the
        kept one minimises (:data:`~bandwise.algorithms.orderings.compare.OBJECTIVES`).
    supports, supports_file
        Held DOFs: set aside in the equation count and the DOF map.
    map_path
        The old-to-new node map (default: ``dst`` stem + ``.map.csv``).
    element_order, sloan_weights, file_format, output_format, dofs_per_node,
    physics, replace_input, dof_map
        As the command line's options of the same names.
    analyse, fail_on
        Also run the checks and the zero-energy analysis on the mesh (what a
        report of the job shows), gated at ``fail_on``.
    effort
        Time traded for quality by the orderings: ``fast`` (default),
        ``balanced`` or ``thorough``
        (:data:`~bandwise.algorithms.orderings.compare.EFFORTS`).
    progress
        A :class:`~bandwise.core.progress.Progress` or a plain function.

    Raises
    ------
    BandwiseError
        Nothing is written when an input or option is refused.
    """
    progress = as_progress(progress)
    src, dst = Path(src), Path(dst)
    held = support_list(supports, supports_file)
    node_map = Path(map_path) if map_path is not None else default_map_path(dst)
    options = sloan_options(sloan_weights)
    if options and method != "auto" and "sloan" not in [m.strip() for m in method.split(",")]:
        raise InputError("Sloan weights (--sloan-weights) need sloan among the methods (auto, "
                         "or a list naming sloan)")
    if objective not in OBJECTIVES:
        raise InputError(f"unknown objective {objective!r}; valid: {', '.join(OBJECTIVES)}")
    if effort not in EFFORTS:
        raise InputError(f"unknown effort {effort!r}; valid: {', '.join(EFFORTS)}")
    if not src.exists():
        raise InputError(f"{src}: no such file")
    _check_outputs(src, dst, node_map, replace_input)
    if is_matrix_file(src):
        if element_order:
            raise InputError("an element order needs a mesh, not a matrix")
        if held or dof_map is not None:
            raise InputError("supports and a DOF map need a mesh, not a matrix")
        return _renumber_matrix(src, dst, node_map, method, objective, options, progress,
                                analyse, fail_on, effort)
    return _renumber_mesh(src, dst, node_map, method, objective, options, progress,
                          file_format, output_format, dofs_per_node, physics, element_order,
                          held, dof_map, analyse, fail_on, effort)


def _check_outputs(source: Path, out: Path, node_map: Path, replace_input: bool) -> None:
    """Refuse outputs that would overwrite the input or each other, or go nowhere."""
    for path in (out, node_map):
        if not path.resolve().parent.is_dir():
            raise MeshWriteError(f"{path}: the folder {path.resolve().parent} does not exist")
        if path.is_dir():
            raise MeshWriteError(f"{path}: is a folder")
    if same_file(source, out) and not replace_input:
        raise InputError(f"{out} is the input file; pass --replace-input to overwrite it")
    if same_file(source, node_map) or same_file(out, node_map):
        raise InputError(f"the node map {node_map} would overwrite the input or the output; "
                         "name another with --map")


def _output_format(source: Path, out: Path, input_format: str,
                   output_format: str | None) -> str | None:
    """Explicit ``output_format``; else the input's format when the extensions agree."""
    if output_format is not None:
        return output_format
    if same_extension(source, out):
        return input_format or None
    return None


def _check_writable_format(out: Path, fmt: str | None) -> None:
    """Fail before any work when OUT's format is unknown, or not one bandwise writes."""
    check_output(out, fmt)


def _renumber_matrix(source: Path, out: Path, node_map: Path, methods: str, objective: str,
                     options: dict[str, dict[str, float]], progress: Progress | None,
                     analyse: bool, fail_on: str, effort: str) -> RenumberResult:
    """Matrix in, permuted Matrix Market matrix out."""
    if not is_matrix_market_name(out):
        raise InputError(f"{out}: a matrix is written as Matrix Market: name the output .mtx")
    with step(progress, "reading the matrix"):
        data = read_matrix_data(source)
    if data.n_rows < 2:
        raise InputError(f"{source}: the matrix has {data.n_rows} row: nothing to renumber")
    graph = graph_from_matrix(data.matrix)
    comp, timing = timed_comparison(graph, methods, objective, 1, options, progress,
                                    effort=effort)
    perm = comp.best.perm
    with step(progress, "writing the matrix"):
        write_matrix_market(out, data.matrix, perm, field=data.field,
                            comment=f"rows renumbered by bandwise ({comp.best.method})")
    write_node_map(node_map, perm)
    check = analyse_matrix(data, graph, fail_on=fail_on, progress=progress) if analyse else None
    return RenumberResult(str(source), str(out), "matrix market", str(node_map),
                          "matrix rows", options, comp, check=check, graph=graph, layout=1,
                          comparison_time=timing)


def _renumber_mesh(source: Path, out: Path, node_map: Path, methods: str, objective: str,
                   options: dict[str, dict[str, float]], progress: Progress | None,
                   file_format: str | None, output_format: str | None,
                   dofs_per_node: int | None, physics: str | None, element_order: bool,
                   supports: tuple[Support, ...], dof_map: str | os.PathLike[str] | None,
                   analyse: bool, fail_on: str, effort: str) -> RenumberResult:
    """Mesh in, renumbered mesh out (same format unless told otherwise)."""
    if output_format is not None or not same_extension(source, out):
        _check_writable_format(out, output_format)
    deck = deck_to_renumber(source, out, file_format, output_format)  # renumbered in place
    if deck is not None and element_order:
        raise InputError("an element order cannot be applied to a deck renumbered in place; "
                         "give --output-format to write it through meshio")
    with step(progress, "reading the mesh"):
        model = deck.to_model() if deck is not None else read_model(source, file_format)
    if model.n_nodes < 2:
        raise InputError(f"{source}: the mesh has {model.n_nodes} node: nothing to renumber")
    layout = dof_layout(model, dofs_per_node=dofs_per_node, physics=physics)
    with step(progress, "building node graph"):
        graph = node_graph(model) if deck is None else deck_graph(deck, model)
    if graph.n_edges == 0:
        raise InputError(f"{source}: no element couples two nodes (only vertex cells?): "
                         "nothing to renumber")
    fmt = _output_format(source, out, model.file_format, output_format)
    # what the output will be and lose, decided (or refused) before the orderings run
    plan: OutputPlan | None = None if deck is not None else plan_output(model, out, fmt)
    comp, timing = timed_comparison(graph, methods, objective, layout, options, progress,
                                    effort=effort)
    perm = comp.best.perm
    file_supports = None if deck is None else deck_support_set(deck, layout)
    with step(progress, "numbering equations"):
        equations = renumbered_equations(model, layout, graph, supports, perm, dof_map,
                                         file_supports, whole=(comp.original.dofs, comp.best.dofs))
    check = None
    if analyse:  # what a report of the job shows: checks and modes on the same mesh
        extra = (deck_inputs(model, deck, layout) if deck is not None
                 else DeckInputs((), [], layout, None))
        check = analyse_model(model, extra, deck, str(source), supports, fail_on=fail_on,
                              options=CheckOptions(), graph=graph, mode_shape=True,
                              progress=progress)
    renumbered = model.renumbered(perm)
    front = None
    if element_order:
        with step(progress, "ordering elements"):
            front = frontal_reordering(renumbered, layout)
            renumbered = reordered_elements(renumbered, front.order)
    lost = () if plan is None else plan.losses
    deck_info = None
    with step(progress, "writing the mesh"):
        if deck is not None:
            rewrite = write_renumbered_deck(deck, perm, out)
            written = f"{deck.kind} deck, node ids rewritten in place"
            deck_info = {"changed_cards": rewrite.changed_cards,
                         "notes": deck.notes + rewrite.notes}
        else:  # written to a temporary place, read back and compared, then renamed
            write_model(renumbered, out, plan=plan)
            written = plan.format
    write_node_map(node_map, perm, model.node_ids)
    level = f"DOF level, {layout.total:,} DOFs: {layout.rule}"
    return RenumberResult(str(source), str(out), written, str(node_map), level, options, comp,
                          front, lost, deck_info, equations,
                          None if dof_map is None else str(dof_map), check,
                          None if plan is None else plan.kind.to_dict(),
                          () if plan is None else plan.notes,
                          model, graph, layout, comparison_time=timing)
