"""``bandwise merge``: merge coincident nodes and write the mesh again (renders ``merge_file``)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise.core.progress import StderrProgress
from bandwise.workflows import merge_file

from . import CAUTION, EXIT_FINDINGS, FormatOpt, JsonOpt, app, emit_json, guarded
from .render import format_note, merge_text


@app.command()
@guarded
def merge(
    source: Annotated[Path, typer.Argument(help="Mesh file to read (never changed).")],
    out: Annotated[Path, typer.Argument(help="Mesh file to write (format from its extension).")],
    tolerance: Annotated[float | None, typer.Option(
        "--tolerance", help="Absolute merge distance (default: a fraction of the shortest "
                            "element edge).")] = None,
    relative_tolerance: Annotated[float, typer.Option(
        "--relative-tolerance", help="That fraction of the shortest element edge.")] = 1e-3,
    file_format: FormatOpt = None,
    output_format: Annotated[str | None, typer.Option(
        "--output-format", help="Format name of the output; overrides its extension.")
    ] = None,
    as_json: JsonOpt = False,
) -> None:
    """Merge coincident nodes (keeping the lowest index) and write the mesh to OUT.

    Exit code 1 when some clusters were refused because merging them would
    collapse an element.
    """
    result = merge_file(source, out, tolerance=tolerance, relative_tolerance=relative_tolerance,
                        file_format=file_format, output_format=output_format,
                        progress=StderrProgress())
    for note in result.losses:
        typer.echo(f"bandwise: note: {format_note(result.output, note)}", err=True)
    if as_json:
        emit_json(result.to_dict())
    else:
        typer.echo(merge_text(result))
        typer.echo("")
        typer.echo(CAUTION)
    if result.refused:
        raise typer.Exit(EXIT_FINDINGS)
