"""``merge_file``: merge coincident nodes of one mesh and write it again.

Unmerged coincident nodes leave parts that look joined but float apart in
the stiffness matrix.  Merging keeps the lowest index of each cluster and
never merges two nodes of one element (that would collapse it).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise import __version__
from bandwise.algorithms.merge import MergeResult, merged_model
from bandwise.core.caution import CAUTION
from bandwise.core.errors import InputError
from bandwise.core.graph import node_graph
from bandwise.core.paths import same_file
from bandwise.core.progress import Progress, ProgressCallback, as_progress, step
from bandwise.core.summary import count_parts
from bandwise.formats import plan_output, read_model, write_model
from bandwise.formats.mesh_io import check_output


@dataclass(frozen=True)
class MergeOutcome:
    """What ``merge`` did to one file and where it wrote the result.

    Attributes
    ----------
    input, output, output_format
        The mesh read, the mesh written and how.
    merge
        The merge itself (:class:`~bandwise.algorithms.merge.MergeResult`).
    parts_before, parts_after
        Connected parts before and after merging.
    losses
        What the output format cannot carry.
    output_kind, output_notes
        The kind of file written (format, version, encoding, compression), and
        how it differs from the input's.
    labels, label_kind
        How nodes are named to the user (original ids or 1-based positions).
    """

    input: str
    output: str
    output_format: str
    merge: MergeResult = field(repr=False)
    parts_before: int
    parts_after: int
    losses: tuple[str, ...] = ()
    labels: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, np.int64),
                                      repr=False, compare=False)
    label_kind: str = "1-based node position"
    output_kind: dict[str, str | None] | None = None
    output_notes: tuple[str, ...] = ()

    @property
    def n_merged(self) -> int:
        """Nodes merged away."""
        return self.merge.n_merged

    @property
    def refused(self) -> bool:
        """True when some clusters were left unmerged (``merge`` exits 1)."""
        return bool(self.merge.refused.size)

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``merge --json`` prints, exactly."""
        r, labels = self.merge, self.labels
        return {"bandwise_version": __version__, "caution": CAUTION,
                "file": self.input, "output": self.output, "output_format": self.output_format,
                "output_kind": self.output_kind, "output_notes": list(self.output_notes),
                "tolerance": r.tolerance, "tolerance_rule": r.rule,
                "nodes_before": r.model.n_nodes + r.n_merged, "nodes_after": r.model.n_nodes,
                "merged": r.n_merged, "parts_before": self.parts_before,
                "parts_after": self.parts_after, "node_id_kind": self.label_kind,
                "pairs": [[int(labels[k]), int(labels[m])] for k, m in zip(r.kept, r.removed)],
                "refused": [int(labels[m]) for m in r.refused],
                "losses": list(self.losses)}


def merge_file(src: str | os.PathLike[str], dst: str | os.PathLike[str], *,
               tolerance: float | None = None, relative_tolerance: float = 1e-3,
               file_format: str | None = None, output_format: str | None = None,
               progress: Progress | ProgressCallback | None = None) -> MergeOutcome:
    """Merge coincident nodes of ``src`` and write the mesh to ``dst``.

    Parameters
    ----------
    tolerance, relative_tolerance
        Absolute merge distance, or that fraction of the shortest element edge.
    file_format, output_format
        Formats of the input and the output, when not told by the extensions.

    Raises
    ------
    BandwiseError
        The input cannot be read, the output is the input, or it cannot be written.
    """
    progress = as_progress(progress)
    if same_file(src, dst):
        raise InputError(f"{dst} is the input file; the input is never overwritten")
    check_output(dst, output_format)
    with step(progress, "reading the mesh"):
        model = read_model(src, file_format)
    graph = node_graph(model)
    parts_before, _ = count_parts(graph)
    with step(progress, "merging coincident nodes"):
        result = merged_model(model, tolerance, relative_tolerance, graph=graph)
    parts_after, _ = count_parts(node_graph(result.model))
    plan = plan_output(result.model, Path(dst), output_format)
    with step(progress, "writing the mesh"):  # to a temporary place, read back, then renamed
        write_model(result.model, dst, plan=plan)
    labels, kind = model.node_labels()
    return MergeOutcome(str(src), str(dst), plan.format, result, parts_before, parts_after,
                        plan.losses, labels, kind, plan.kind.to_dict(), plan.notes)
