"""``bandwise report``: the HTML + JSON report of a mesh, and the ``--report DIR`` helper.

Other commands offer ``--report DIR`` through :data:`ReportOpt` and
:func:`write_report_option`, passing what they have computed; the report
shows each result given and says plainly what was not analysed.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..dofs import dof_layout
from ..graph import node_graph
from ..meshio_io import read_model
from ..progress import Progress, StderrProgress, step
from ..report import ReportInputs, write_report
from ..report.document import PROBLEMS, verdict
from ..summary import summarise
from . import CAUTION, EXIT_FINDINGS, DofsOpt, FormatOpt, PhysicsOpt, app, guarded

#: The ``--report DIR`` option other commands add to their signature.
ReportOpt = Annotated[Path | None, typer.Option(
    "--report", metavar="DIR",
    help="Also write an HTML report with figures and its JSON into DIR "
         "(created if missing; its parent must exist).")]


def write_report_option(out_dir: Path | None, inputs: ReportInputs,
                        progress: Progress | None = None) -> None:
    """Write the report when ``--report DIR`` was given; say where on stderr.

    stderr keeps stdout clean for ``--json``.  Errors propagate as
    :class:`~bandwise.errors.BandwiseError` for :func:`~bandwise.cli.guarded`.
    """
    if out_dir is None:
        return
    files = write_report(out_dir, inputs, progress)
    typer.echo(f"bandwise: report written: {files.html}", err=True)


@app.command()
@guarded
def report(
    mesh: Annotated[Path, typer.Argument(help="Mesh file to report on (read-only).")],
    out: Annotated[Path, typer.Option(
        "--out", metavar="DIR",
        help="Report folder: report.html, report.json and the PNG figures "
             "(created if missing; its parent must exist).")],
    file_format: FormatOpt = None,
    dofs_per_node: DofsOpt = None,
    physics: PhysicsOpt = None,
) -> None:
    """Write the report to attach to a job: a self-contained HTML page with figures, and JSON.

    Exit code 1 when the verdict is "problems found", 0 otherwise, 2 when it
    cannot run (nothing is written then).
    """
    progress = StderrProgress()
    model = read_model(mesh, file_format)
    layout = dof_layout(model, dofs_per_node=dofs_per_node, physics=physics)
    with step(progress, "building node graph"):
        graph = node_graph(model)
    summary = summarise(model, layout, graph, progress=progress)
    inputs = ReportInputs(model=model, graph=graph, layout=layout, summary=summary)
    files = write_report(out, inputs, progress)
    v = verdict(inputs)
    typer.echo(f"report: {files.html}")
    typer.echo(f"data:   {files.json}")
    typer.echo(f"verdict: {v['status']} ({v['reason']})")
    typer.echo(CAUTION)
    if v["status"] == PROBLEMS:
        raise typer.Exit(EXIT_FINDINGS)
