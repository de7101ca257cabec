"""Mesh checks before a large run: each finding is a value, never a print.

:func:`run_checks` runs every check of the mesh and returns the findings,
most serious first:

1. connected parts through element coupling (:mod:`.parts`);
2. orphan nodes (:mod:`.orphans`);
3. coincident nodes, seams apart from cracks (:mod:`.coincident`);
4. weak joints between regions and articulation nodes (:mod:`.joints`);
5. element defects (:mod:`.elements`);
6. free faces and edges, free faces lying on each other (:mod:`.faces`);

plus hanging nodes (:mod:`.hanging`) and the cell blocks not analysed.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from bandwise.algorithms.topology import FacetTable
from bandwise.core.background import in_background
from bandwise.core.elements import skipped_blocks
from bandwise.core.graph import NodeGraph, node_graph
from bandwise.core.model import Model
from bandwise.core.progress import Progress, step

from .coincident import check_coincident
from .context import CheckContext, CheckOptions
from .elements import check_elements
from .faces import check_free_facets
from .findings import SEVERITIES, Finding, severity_rank
from .hanging import check_hanging_nodes
from .joints import articulation_nodes, check_joints
from .orphans import check_orphans
from .parts import check_parts

__all__ = [
    "SEVERITIES", "CheckOptions", "Finding", "articulation_nodes", "count_by_severity",
    "run_checks", "severity_rank",
]

#: The checks in the order they run, with the progress label of each.
CHECKS: tuple[tuple[str, Callable[[CheckContext], list[Finding]]], ...] = (
    ("checking parts", check_parts),
    ("checking orphan nodes", check_orphans),
    ("checking coincident nodes", check_coincident),
    ("checking joints between regions", check_joints),
    ("checking elements", check_elements),
    ("checking free faces", check_free_facets),
    ("checking hanging nodes", check_hanging_nodes),
)

#: The checks that read the facet table; the others run while it is built.
NEED_TABLE = frozenset({check_joints, check_free_facets, check_hanging_nodes})

#: Cells from which the checks that need the facet table (and the table, if
#: not given) run on a second thread while the others run (their compiled
#: passes release the interpreter lock).  Below this a thread is not worth
#: starting.
BACKGROUND_TABLE_CELLS = 100_000


def run_checks(model: Model, graph: NodeGraph | None = None,
               options: CheckOptions | None = None,
               progress: Progress | None = None,
               table: FacetTable | None = None) -> list[Finding]:
    """Run every mesh check and return the findings, most serious first.

    Parameters
    ----------
    model
        The mesh (not changed).
    graph
        Its node graph (:func:`~bandwise.core.graph.node_graph`), if already built.
    options
        Tolerances and limits; defaults when None.
    progress
        Receives the steps (the library itself never prints).
    table
        The model's facet table (:func:`~bandwise.algorithms.topology.facet_table`), if
        already built: the costliest shared step, also needed by the
        zero-energy analysis.

    Returns
    -------
    list of Finding
        Sorted by severity (errors first), then in check order.  A mesh with
        no element coupling nodes gives a single ``mesh.no_elements`` error
        plus its orphan nodes.
    """
    options = options or CheckOptions()
    if graph is None:
        with step(progress, "building node graph"):
            graph = node_graph(model)
    ctx = CheckContext(model, graph, options)
    findings = _skipped(model)
    if not ctx.has_elements:
        findings.append(Finding(
            "mesh.no_elements", "error", model.n_cells,
            "the mesh has no element that couples nodes (only vertex cells, cell types "
            "bandwise does not analyse, or no cells at all): there is nothing to solve"))
        findings += check_orphans(ctx)
        return _sorted(findings)
    if table is not None:
        ctx.__dict__["table"] = table  # the cached property, given
    found: dict[str, list[Finding]] = {}
    later = [(label, check) for label, check in CHECKS if check in NEED_TABLE]
    pending = None
    if model.n_cells >= BACKGROUND_TABLE_CELLS:
        ctx.coupling  # noqa: B018  computed once, before the threads share it
        pending = in_background(_run_table_checks, ctx, later)
    for label, check in CHECKS:
        if pending is None or check not in NEED_TABLE:
            with step(progress, label):
                found[label] = check(ctx)
    if pending is not None:
        with step(progress, "matching element facets; " + ", ".join(
                label.removeprefix("checking ") for label, _ in later)):
            found.update(pending.result())
    for label, _ in CHECKS:  # findings in check order, whatever the run order
        findings += found[label]
    return _sorted(findings)


def _run_table_checks(ctx: CheckContext, checks: list[tuple[str, Callable[[CheckContext],
                      list[Finding]]]]) -> dict[str, list[Finding]]:
    """The checks that need the facet table (built first, if not given), in order."""
    return {label: check(ctx) for label, check in checks}


def _skipped(model: Model) -> list[Finding]:
    skipped = skipped_blocks(model)
    if not skipped:
        return []
    return [Finding("mesh.skipped_blocks", "warning", len(skipped),
                    f"{len(skipped)} cell blocks are of types bandwise does not analyse and "
                    "were left out of every check and count", where=tuple(skipped))]


def _sorted(findings: list[Finding]) -> list[Finding]:
    order = np.argsort([severity_rank(f.severity) for f in findings], kind="stable")
    return [findings[i] for i in order]


def count_by_severity(findings: list[Finding]) -> dict[str, int]:
    """Number of findings of each severity, every severity listed."""
    return {s: sum(1 for f in findings if f.severity == s) for s in SEVERITIES}
