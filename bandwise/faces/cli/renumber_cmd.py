"""``bandwise renumber``: try orderings, keep the best, write the mesh (or matrix) and the map.

Renders :func:`bandwise.workflows.renumber.renumber_file`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise.algorithms.orderings.compare import EFFORTS, OBJECTIVES
from bandwise.core.progress import StderrProgress
from bandwise.workflows import renumber_file

from . import CAUTION, DofsOpt, FormatOpt, JsonOpt, PhysicsOpt, app, emit_json, guarded
from .options import DofMapOpt, SupportFileOpt, SupportOpt
from .render import format_note, renumber_text
from .report_cmd import ReportOpt, check_report_option, write_report_option


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
        "--output-format", help="Format name of OUT; default: the input's format when "
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
    effort: Annotated[str, typer.Option(
        "--effort", help=f"Time traded for a smaller matrix: {' | '.join(EFFORTS)}; fast tries "
                         "the cheap orderings and refines small meshes, thorough tries every "
                         "ordering and refines longest.")] = "fast",
) -> None:
    """Renumber the nodes: try orderings, keep the best, write the mesh and the node map.

    With supports, the held DOFs are set aside and the equations numbered in
    the new node order: the reduced system's figures are shown before and
    after, and ``--dof-map`` writes the equation of every DOF.
    """
    check_report_option(report_dir)
    result = renumber_file(
        source, out, method=method, objective=objective, supports=support or (),
        supports_file=support_file, map_path=map_path, element_order=element_order,
        sloan_weights=sloan_weights, file_format=file_format, output_format=output_format,
        dofs_per_node=dofs_per_node, physics=physics, replace_input=replace_input,
        dof_map=dof_map, effort=effort, analyse=report_dir is not None, progress=StderrProgress())
    for note in result.losses:
        typer.echo(f"bandwise: note: {format_note(result.output, note)}", err=True)
    write_report_option(report_dir, result)
    if as_json:
        emit_json(result.to_dict())
        return
    typer.echo(renumber_text(result))
    typer.echo("")
    typer.echo(CAUTION)
