"""The report as data: one JSON-ready document that the HTML page is rendered from.

Every figure the HTML tables show comes from this document, and
``report.json`` is this document, so a pipeline reads the same numbers an
engineer reads on the page.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from bandwise import __version__
from bandwise.algorithms.checks.verdict import Verdict, decide_verdict
from bandwise.core.caution import CAUTION
from bandwise.core.metrics import INDEX_BYTES, VALUE_BYTES, Metrics, metrics

from .inputs import ReportInputs

if TYPE_CHECKING:
    from bandwise.algorithms.orderings.compare import Comparison
    from bandwise.algorithms.rigid import ZeroEnergyAnalysis

def plain(value: Any) -> Any:
    """Turn numpy scalars, arrays, tuples and dataclass dicts into JSON-ready values."""
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return plain(value.tolist())
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        value = float(value)
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def _as_dict(obj: Any) -> Any:
    return plain(obj.to_dict()) if hasattr(obj, "to_dict") else plain(obj)


def verdict(inputs: ReportInputs) -> Verdict:
    """The verdict the analysis decided; for inputs built by hand, decided the same way.

    Never a second opinion: both paths go through
    :func:`bandwise.algorithms.checks.verdict.decide_verdict`.
    """
    if inputs.verdict is not None:
        return inputs.verdict
    return decide_verdict(None if inputs.findings is None else list(inputs.findings),
                          inputs.fail_on, supports_given=supports_given(inputs),
                          free_modes=0 if inputs.modes is None else
                          int(inputs.modes.n_body_modes))


def body_mode_count(inputs: ReportInputs) -> int:
    """Rigid-body and mechanism modes left free by given supports (0 without supports)."""
    if inputs.modes is None or not supports_given(inputs):
        return 0
    return int(inputs.modes.n_body_modes)


def supports_given(inputs: ReportInputs) -> bool:
    """True when at least one support was applied."""
    return inputs.supports is not None and bool(inputs.supports.applied)


def not_analysed(inputs: ReportInputs) -> list[str]:
    """Plain statements of what this report does not cover."""
    out = []
    if inputs.model is None:
        out.append("A matrix has no mesh: no mesh checks, no picture of the mesh.")
        if inputs.values is None:
            out.append("The matrix values (symmetry, zero modes, pivots) were not checked: "
                       "only its pattern was sized.")
    elif inputs.findings is None:
        out.append("Mesh checks (orphan and coincident nodes, element quality, weak "
                   "joints) were not run.")
    if inputs.chosen_perm is None:
        out.append("No renumbering was applied: the figures describe the current "
                   "numbering only.")
    if inputs.comparison is None:
        out.append("Orderings were not compared.")
    if not supports_given(inputs):
        out.append("No supports were given: held DOFs and reactions are not counted"
                   + (", and the zero-energy modes are those of the free mesh."
                      if inputs.modes is not None else "."))
    if inputs.modes is None:
        out.append("Zero-energy (rigid-body) modes were not analysed.")
    if inputs.equations is None:
        out.append("Equations with held DOFs eliminated were not counted.")
    for block in inputs.summary.skipped:
        out.append(f"Cell block not analysed: {block}.")
    return out


def _level_pair(before: Metrics, after: Metrics | None) -> dict[str, Any]:
    out: dict[str, Any] = {"current": before.to_dict()}
    if after is not None:
        out["renumbered"] = after.to_dict()
    return out


def renumbering(inputs: ReportInputs) -> dict[str, Any] | None:
    """Figures of the chosen ordering beside those of the current numbering."""
    perm = inputs.chosen_perm
    if perm is None:
        return None
    s = inputs.summary
    best = None if inputs.comparison is None else inputs.comparison.best
    if best is not None and perm is best.perm and best.nodes is not None:
        nodes, dofs = best.nodes, best.dofs   # measured when the orderings were compared
    else:  # an ordering given by hand, never measured
        nodes, dofs = metrics(inputs.graph, perm), metrics(inputs.graph, perm, inputs.layout)
    return {"method": inputs.chosen_method, "nodes": _level_pair(s.node_level, nodes),
            "dofs": _level_pair(s.dof_level, dofs)}


def cholesky_bytes(nnz: int, n_rows: int) -> int:
    """Storage of a sparse Cholesky factor in compressed columns (values, row indices,
    column pointers), 8-byte reals and indices."""
    return nnz * (VALUE_BYTES + INDEX_BYTES) + (n_rows + 1) * INDEX_BYTES


def comparison_data(comparison: Comparison) -> dict[str, Any]:
    """The comparison's own JSON, with the sparse Cholesky storage of each candidate."""
    data = plain(comparison.to_dict())
    for row in data.get("methods", []):
        nnz, dofs = row.get("cholesky_nnz"), row.get("dofs")
        if isinstance(nnz, int) and isinstance(dofs, dict):
            row["cholesky_bytes"] = cholesky_bytes(nnz, int(dofs["n_rows"]))
    return data


def modes_data(modes: ZeroEnergyAnalysis) -> dict[str, Any]:
    """The zero-energy analysis' own JSON, with the holds it suggests."""
    data = plain(modes.to_dict())
    data["suggested_holds"] = [plain(h.to_dict()) for h in modes.suggested]
    return data


def equations_data(inputs: ReportInputs) -> dict[str, Any]:
    """The equation count's own JSON, with the node order its equations follow."""
    eq = inputs.equations
    assert eq is not None
    data = plain(eq.to_dict())
    perm, chosen = eq.perm, inputs.chosen_perm
    if chosen is not None and np.array_equal(perm, chosen):
        data["order"] = f"renumbered ({inputs.chosen_method})"
    elif np.array_equal(perm, np.arange(len(perm))):
        data["order"] = "current numbering"
    else:
        data["order"] = "a given order"
    return data


def report_document(inputs: ReportInputs, figures: list[dict[str, str]] | None = None
                    ) -> dict[str, Any]:
    """The whole report as JSON-ready data.

    Parameters
    ----------
    inputs
        What was analysed.
    figures
        ``{"file": ..., "caption": ...}`` of each figure written beside the report.
    """
    s = inputs.summary
    supports = None
    if supports_given(inputs):
        supports = {"applied": _as_dict(inputs.supports),
                    "held_dofs": int(inputs.supports.n_fixed_dofs),
                    "supported_nodes": int(inputs.supports.n_supported_nodes)}
    return {
        "bandwise_version": __version__,
        "created": inputs.created.isoformat(),
        "file": s.source,
        "file_name": Path(s.source).name if s.source else "",
        "subject": inputs.subject,
        "caution": CAUTION,
        "verdict": verdict(inputs).word,
        "verdict_reason": verdict(inputs).reason,
        "next_steps": [n.to_dict() for n in inputs.next_steps],
        "outputs": [{"what": what, "file": str(path)} for what, path in inputs.outputs],
        "output_notes": list(inputs.output_notes),
        "mesh": plain(s.to_dict()),
        "findings": (None if inputs.findings is None
                     else [_as_dict(f) for f in inputs.findings]),
        "renumbering": renumbering(inputs),
        "comparison": None if inputs.comparison is None else comparison_data(inputs.comparison),
        "comparison_time": (None if inputs.comparison_time is None
                            else plain(inputs.comparison_time.to_dict())),
        "supports": supports,
        "modes": None if inputs.modes is None else modes_data(inputs.modes),
        "equations": None if inputs.equations is None else equations_data(inputs),
        "values": None if inputs.values is None else _as_dict(inputs.values),
        "not_analysed": not_analysed(inputs),
        "figures": list(figures or []),
    }
