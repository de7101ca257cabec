"""``bandwise renumber``: try orderings, keep the best, write the mesh (or matrix) and the map."""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Annotated, Any

import typer

from bandwise import __version__
from bandwise.algorithms.orderings.compare import OBJECTIVES, Comparison, compare_orderings
from bandwise.algorithms.orderings.frontal import (
    ElementReordering,
    frontal_reordering,
    reordered_elements,
)
from bandwise.algorithms.supports import parse_support, read_support_file
from bandwise.core.dofs import dof_layout
from bandwise.core.errors import InputError, MeshReadError, MeshWriteError
from bandwise.core.graph import graph_from_matrix, node_graph
from bandwise.core.progress import StderrProgress, step
from bandwise.core.tables import human_bytes, human_count, render_table
from bandwise.formats.decks.files import deck_graph, deck_to_renumber, write_renumbered_deck
from bandwise.formats.keeps import losses_for_output
from bandwise.formats.matrix_io import (
    is_matrix_file,
    is_matrix_market_name,
    read_matrix_data,
    write_matrix_market,
)
from bandwise.formats.meshio_io import detect_format, read_model, writable_formats, write_model
from bandwise.formats.node_map import write_node_map
from bandwise.workflows.deck_inputs import deck_support_set

from . import CAUTION, DofsOpt, FormatOpt, JsonOpt, PhysicsOpt, app, emit_json, guarded
from .report_cmd import ReportOpt, check_report_option, renumber_report_inputs, write_report_option
from .support_options import DofMapOpt, SupportFileOpt, SupportOpt, renumbered_equations


def sloan_options(text: str | None) -> dict[str, dict[str, float]]:
    """``"W1,W2"`` -> ``{"sloan": {"w1": W1, "w2": W2}}`` (empty when not given)."""
    if text is None:
        return {}
    parts = [p.strip() for p in text.split(",")]
    try:
        w1, w2 = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"--sloan-weights takes two numbers W1,W2 (e.g. 2,1), got {text!r}") \
            from None
    if not (math.isfinite(w1) and math.isfinite(w2)) or w1 < 0 or w2 < 0 or w1 == w2 == 0:
        raise InputError(f"--sloan-weights must be two non-negative numbers, not both 0; "
                         f"got {text!r}")
    return {"sloan": {"w1": w1, "w2": w2}}


def _same_file(a: Path, b: Path) -> bool:
    if a.resolve() == b.resolve():
        return True
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def _check_outputs(source: Path, out: Path, node_map: Path, replace_input: bool) -> None:
    """Refuse outputs that would overwrite the input or each other, or go nowhere."""
    for path in (out, node_map):
        if not path.resolve().parent.is_dir():
            raise MeshWriteError(f"{path}: the folder {path.resolve().parent} does not exist")
        if path.is_dir():
            raise MeshWriteError(f"{path}: is a folder")
    if _same_file(source, out) and not replace_input:
        raise InputError(f"{out} is the input file; pass --replace-input to overwrite it")
    if _same_file(source, node_map) or _same_file(out, node_map):
        raise InputError(f"the node map {node_map} would overwrite the input or the output; "
                         "name another with --map")


def default_map_path(out: Path) -> Path:
    """``OUT`` without its extension, plus ``.map.csv``."""
    return out.with_name(f"{out.stem}.map.csv")


def _output_format(source: Path, out: Path, input_format: str, output_format: str | None) -> str | None:
    """Explicit ``--output-format``; else the input's format when the extensions agree."""
    if output_format is not None:
        return output_format
    if _same_extension(source, out):
        return input_format or None
    return None


def _same_extension(a: Path, b: Path) -> bool:
    return "".join(a.suffixes).lower() == "".join(b.suffixes).lower()


def _check_writable_format(out: Path, fmt: str | None) -> None:
    """Fail before any work when OUT's format is unknown (one line, exit 2)."""
    if fmt is None:
        try:
            detect_format(out)
        except MeshReadError:
            raise MeshWriteError(f"{out}: unknown output extension; name the format with "
                                 "--output-format") from None
    else:
        if fmt not in writable_formats():
            raise InputError(f"unknown output format {fmt!r}; one of: "
                             f"{', '.join(writable_formats())}")


def comparison_text(comp: Comparison, level: str) -> str:
    """The table of every method tried, the chosen one marked with ``*``."""
    fill_shown = any(r.fill is not None for r in comp.rows)
    header = ["", "method", "bandwidth", "profile", "max wavefront", "RMS wavefront", "banded",
              "skyline"] + (["Cholesky nnz"] if fill_shown else []) + ["time", "vs original"]
    rows = []
    for r in comp.rows:
        mark = "*" if r is comp.best else ""
        if r.dofs is None:
            rows.append([mark, r.method, f"failed: {r.error}"])
            continue
        d = r.dofs
        row = [mark, r.method, f"{d.bandwidth:,}", f"{d.profile:,}", f"{d.max_wavefront:,}",
               f"{d.rms_wavefront:,.1f}", human_bytes(d.banded_bytes), human_bytes(d.skyline_bytes)]
        if fill_shown:
            row.append("-" if r.fill is None else human_count(r.fill))
        row += [_duration(r.seconds),
                "-" if r.improvement is None else f"{r.improvement:.2f}x"]
        if r.error:
            row.append(f"({r.error})")
        rows.append(row)
    title = f"Orderings tried ({level}; objective: {comp.objective}; * = chosen)"
    lines = [title,
             render_table(rows, header=header, align="ll" + "r" * (len(header) - 2))]
    if not fill_shown:
        lines.append(f"Cholesky fill {comp.fill_note}")
    for name, why in comp.skipped.items():
        lines.append(f"not tried: {name}: {why}")
    return "\n".join(lines)


def _duration(seconds: float) -> str:
    return f"{seconds * 1000:.1f} ms" if seconds < 1 else f"{seconds:.2f} s"


def _frontal_text(front: ElementReordering) -> str:
    b, a = front.before, front.after
    kept = " (file order kept: sorting would not shrink the front)" if front.kept_file_order else ""
    return (f"Element order for a frontal solver{kept}: front width max {b.max_dofs:,} -> "
            f"{a.max_dofs:,} DOFs, RMS {b.rms_dofs:,.1f} -> {a.rms_dofs:,.1f} DOFs "
            f"({b.max_nodes:,} -> {a.max_nodes:,} nodes at most)")


def _renumber_matrix(source: Path, out: Path, node_map: Path, methods: str, objective: str,
                     options: dict[str, dict[str, float]], progress: StderrProgress
                     ) -> dict[str, Any]:
    """Matrix in, permuted Matrix Market matrix out."""
    if not is_matrix_market_name(out):
        raise InputError(f"{out}: a matrix is written as Matrix Market: name the output .mtx")
    with step(progress, "reading the matrix"):
        data = read_matrix_data(source)
    if data.n_rows < 2:
        raise InputError(f"{source}: the matrix has {data.n_rows} row: nothing to renumber")
    graph = graph_from_matrix(data.matrix)
    comp = compare_orderings(graph, methods, objective, 1, options, progress)
    perm = comp.best.perm
    with step(progress, "writing the matrix"):
        write_matrix_market(out, data.matrix, perm, field=data.field,
                            comment=f"rows renumbered by bandwise ({comp.best.method})")
    write_node_map(node_map, perm)
    return {"comparison": comp, "level": "matrix rows", "output_format": "matrix market",
            "n_rows": data.n_rows, "front": None, "graph": graph, "matrix": data}


def _renumber_mesh(source: Path, out: Path, node_map: Path, methods: str, objective: str,
                   options: dict[str, dict[str, float]], progress: StderrProgress,
                   file_format: str | None, output_format: str | None,
                   dofs_per_node: int | None, physics: str | None,
                   element_order: bool, supports: list[Any] | None = None,
                   dof_map: Path | None = None) -> dict[str, Any]:
    """Mesh in, renumbered mesh out (same format unless told otherwise)."""
    if output_format is not None or not _same_extension(source, out):
        _check_writable_format(out, output_format)
    deck = deck_to_renumber(source, out, file_format, output_format)  # renumbered in place
    if deck is not None and element_order:
        raise InputError("--element-order cannot reorder the elements of a deck renumbered in "
                         "place; give --output-format to write it through meshio")
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
    comp = compare_orderings(graph, methods, objective, layout, options, progress)
    perm = comp.best.perm
    with step(progress, "numbering equations"):
        equations = renumbered_equations(
            model, layout, graph, supports or [], perm, dof_map,
            None if deck is None else deck_support_set(deck, layout))
    renumbered = model.renumbered(perm)
    front = None
    if element_order:
        with step(progress, "ordering elements"):
            front = frontal_reordering(renumbered, layout)
            renumbered = reordered_elements(renumbered, front.order)
    lost = [] if deck is not None else losses_for_output(renumbered, out, fmt)
    for note in lost:  # said before the file is written
        typer.echo(f"bandwise: note: {out.name} will not keep {note}", err=True)
    rewrite = None
    with step(progress, "writing the mesh"):
        if deck is not None:
            rewrite = write_renumbered_deck(deck, perm, out)
            written = f"{deck.kind} deck, node ids rewritten in place"
        else:
            written = write_model(renumbered, out, fmt)
    write_node_map(node_map, perm, model.node_ids)
    level = f"DOF level, {layout.total:,} DOFs: {layout.rule}"
    return {"comparison": comp, "level": level, "output_format": written,
            "n_rows": layout.total, "front": front, "losses": lost,
            "model": model, "layout": layout, "graph": graph, "equations": equations,
            "deck": None if rewrite is None else {"changed_cards": rewrite.changed_cards,
                                                  "notes": deck.notes + rewrite.notes}}


@app.command()
@guarded
def renumber(
    source: Annotated[Path, typer.Argument(metavar="IN", help="Mesh or matrix file (read-only).")],
    out: Annotated[Path, typer.Argument(metavar="OUT", help="Renumbered mesh (or .mtx matrix).")],
    objective: Annotated[str, typer.Option(
        "--objective", help=f"What to minimise: {' | '.join(OBJECTIVES)} (wavefront: RMS).")
    ] = "profile",
    method: Annotated[str, typer.Option(
        "--method", help="auto (every registered ordering) or a comma-separated list of names.")
    ] = "auto",
    map_path: Annotated[Path | None, typer.Option(
        "--map", help="Where to write the old-to-new node map (default: OUT stem + .map.csv).")
    ] = None,
    element_order: Annotated[bool, typer.Option(
        "--element-order", help="Also order the elements for a frontal solver.")] = False,
    sloan_weights: Annotated[str | None, typer.Option(
        "--sloan-weights", metavar="W1,W2",
        help="Sloan priority weights (distance, degree); default 2,1.")] = None,
    file_format: FormatOpt = None,
    output_format: Annotated[str | None, typer.Option(
        "--output-format", help="meshio format name of OUT; default: the input's format when "
                                "the extensions agree, else from OUT's extension.")] = None,
    dofs_per_node: DofsOpt = None,
    physics: PhysicsOpt = None,
    as_json: JsonOpt = False,
    replace_input: Annotated[bool, typer.Option(
        "--replace-input", help="Allow OUT to be the input file itself (overwritten whole, "
                                "atomically).")] = False,
    report_dir: ReportOpt = None,
    support: SupportOpt = None,
    support_file: SupportFileOpt = None,
    dof_map: DofMapOpt = None,
) -> None:
    """Renumber the nodes: try orderings, keep the best, write the mesh and the node map.

    With supports, the held DOFs are set aside and the equations numbered in
    the new node order: the reduced system's figures are shown before and
    after, and ``--dof-map`` writes the equation of every DOF.
    """
    progress = StderrProgress()
    supports = [parse_support(t) for t in support or []]
    if support_file is not None:
        supports += read_support_file(support_file)
    node_map = map_path or default_map_path(out)
    options = sloan_options(sloan_weights)
    if options and method != "auto" and "sloan" not in [m.strip() for m in method.split(",")]:
        raise InputError("--sloan-weights needs sloan among the methods (--method auto or "
                         "a list naming sloan)")
    if objective not in OBJECTIVES:
        raise InputError(f"unknown objective {objective!r}; valid: {', '.join(OBJECTIVES)}")
    if not source.exists():
        raise InputError(f"{source}: no such file")
    _check_outputs(source, out, node_map, replace_input)
    check_report_option(report_dir)
    if is_matrix_file(source):
        if element_order:
            raise InputError("--element-order needs a mesh, not a matrix")
        if supports or dof_map is not None:
            raise InputError("supports and --dof-map need a mesh, not a matrix")
        result = _renumber_matrix(source, out, node_map, method, objective, options, progress)
    else:
        result = _renumber_mesh(source, out, node_map, method, objective, options, progress,
                                file_format, output_format, dofs_per_node, physics,
                                element_order, supports, dof_map)
    if report_dir is not None:
        write_report_option(report_dir, renumber_report_inputs(result), progress)
    comp: Comparison = result["comparison"]
    front: ElementReordering | None = result["front"]
    if as_json:
        emit_json({
            "bandwise_version": __version__,
            "caution": CAUTION,
            "input": str(source),
            "output": str(out),
            "output_format": result["output_format"],
            "node_map": str(node_map),
            "level": result["level"],
            "options": options,
            "comparison": comp.to_dict(),
            "element_order": None if front is None else front.to_dict(),
            "losses": result.get("losses", []),
            "deck": result.get("deck"),
            "equations": (None if result.get("equations") is None
                          else result["equations"].to_dict()),
        })
        return
    typer.echo(comparison_text(comp, result["level"]))
    if front is not None:
        typer.echo(_frontal_text(front))
    best = comp.best
    gain = "" if best.improvement is None else f", {best.improvement:.2f}x better than original"
    typer.echo("")
    value = best.value(comp.objective) or 0.0
    shown = f"{value:,.1f}" if comp.objective == "wavefront" else f"{int(value):,}"
    typer.echo(f"chosen: {best.method} ({comp.objective} {shown}{gain})")
    if result.get("equations") is not None:
        typer.echo(result["equations"].text())
    for lost in result.get("losses", []):
        typer.echo(f"not kept by the output format: {lost}")
    if result.get("deck"):
        cards = ", ".join(f"{k} {v}" for k, v in result["deck"]["changed_cards"].items())
        typer.echo(f"deck lines rewritten (node ids only): {cards}")
        for note in result["deck"]["notes"]:
            typer.echo(f"note: {note}")
    typer.echo(f"written: {out} ({result['output_format']})")
    typer.echo(f"node map (old -> new, 1-based): {node_map}")
    typer.echo("")
    typer.echo(CAUTION)
