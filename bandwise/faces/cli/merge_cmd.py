"""``bandwise merge``: merge coincident nodes and write the mesh again."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from bandwise import __version__
from bandwise.algorithms.merge import MergeResult, merged_model
from bandwise.core.errors import InputError
from bandwise.core.graph import node_graph
from bandwise.core.summary import count_parts
from bandwise.formats.keeps import losses_for_output
from bandwise.formats.meshio_io import read_model, write_model

from . import CAUTION, EXIT_FINDINGS, FormatOpt, JsonOpt, app, emit_json, guarded

#: Merged pairs listed in the text report (all of them go to --json).
LISTED_PAIRS = 20


def _same_file(a: Path, b: Path) -> bool:
    if a.resolve() == b.resolve():
        return True
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


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
        "--output-format", help="meshio format name of the output; overrides its extension.")
    ] = None,
    as_json: JsonOpt = False,
) -> None:
    """Merge coincident nodes (keeping the lowest index) and write the mesh to OUT.

    Exit code 1 when some clusters were refused because merging them would
    collapse an element.
    """
    if _same_file(source, out):
        raise InputError(f"{out} is the input file; the input is never overwritten")
    model = read_model(source, file_format)
    graph = node_graph(model)
    parts_before, _ = count_parts(graph)
    result = merged_model(model, tolerance, relative_tolerance, graph=graph)
    parts_after, _ = count_parts(node_graph(result.model))
    lost = losses_for_output(result.model, out, output_format)
    for note in lost:  # said before the file is written
        typer.echo(f"bandwise: note: {out.name} will not keep {note}", err=True)
    used_format = write_model(result.model, out, output_format)
    labels, kind = model.node_labels()
    if as_json:
        emit_json({"bandwise_version": __version__, "caution": CAUTION,
                   "file": str(source), "output": str(out), "output_format": used_format,
                   "tolerance": result.tolerance, "tolerance_rule": result.rule,
                   "nodes_before": model.n_nodes, "nodes_after": result.model.n_nodes,
                   "merged": result.n_merged, "parts_before": parts_before,
                   "parts_after": parts_after, "node_id_kind": kind,
                   "pairs": [[int(labels[k]), int(labels[r])]
                             for k, r in zip(result.kept, result.removed)],
                   "refused": [int(labels[r]) for r in result.refused],
                   "losses": lost})
    else:
        typer.echo(_report(result, str(source), str(out), used_format, kind, labels,
                           parts_before, parts_after))
    if result.refused.size:
        raise typer.Exit(EXIT_FINDINGS)


def _report(result: MergeResult, source: str, out: str, used_format: str, kind: str,
            labels: np.ndarray, parts_before: int, parts_after: int) -> str:
    lines = [
        f"read    {source}",
        f"rule    {result.rule}",
        (f"merged  {result.n_merged} nodes ({result.model.n_nodes + result.n_merged} -> "
         f"{result.model.n_nodes}); parts {parts_before} -> {parts_after}"),
    ]
    if result.n_merged:
        lines.append(f"pairs   kept <- removed ({kind}):")
        for k, r in list(zip(result.kept, result.removed))[:LISTED_PAIRS]:
            lines.append(f"        {labels[k]} <- {labels[r]}")
        if result.n_merged > LISTED_PAIRS:
            lines.append(f"        ... {result.n_merged - LISTED_PAIRS} more (see --json)")
    if result.refused.size:
        shown = ", ".join(str(labels[r]) for r in result.refused[:LISTED_PAIRS])
        lines.append(f"refused {result.refused.size} nodes left unmerged: two of them belong "
                     f"to one element, merging would collapse it ({shown})")
    lines.append(f"wrote   {out} ({used_format})")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)
