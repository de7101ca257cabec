"""What a report is made from: plain results of the analysis, gathered in one value."""

from __future__ import annotations

import datetime as dt
import os
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model
from bandwise.core.summary import MeshSummary

if TYPE_CHECKING:  # the report reads these results; it does not need their modules
    from bandwise.algorithms.checks.findings import Finding
    from bandwise.algorithms.checks.verdict import Verdict
    from bandwise.algorithms.orderings.compare import Comparison
    from bandwise.algorithms.rigid import ZeroEnergyAnalysis
    from bandwise.algorithms.supports import SupportSet
    from bandwise.core.equations import EquationNumbering
    from bandwise.workflows import CheckResult, RenumberResult
    from bandwise.workflows.next_steps import NextStep
    from bandwise.workflows.timing import ComparisonTime


def _now() -> dt.datetime:
    return dt.datetime.now(dt.UTC).replace(microsecond=0)


@dataclass(frozen=True)
class ReportInputs:
    """Results the report presents; each optional part gets a section only when given.

    Attributes
    ----------
    model, graph, layout, summary
        The mesh (None for a matrix file: no mesh picture), its node graph (or
        the matrix pattern's graph), its DOFs (a layout, or 1 per matrix row)
        and its sizing summary.
    findings
        Results of the mesh checks (:class:`~bandwise.algorithms.checks.findings.Finding`),
        or None when the checks were not run.
    perm, method
        The chosen ordering ``perm[new] = old`` and its name, or None when the
        mesh was not renumbered.
    comparison
        The orderings compared (:class:`~bandwise.algorithms.orderings.compare.Comparison`), or None;
        its best candidate is the "renumbered" ordering unless ``perm`` is given.
    supports
        The applied supports (:class:`~bandwise.algorithms.supports.SupportSet`), or None.
    modes
        Zero-energy modes (:class:`~bandwise.algorithms.rigid.ZeroEnergyAnalysis`), or None.
    equations
        Equations with held DOFs set aside
        (:class:`~bandwise.core.equations.EquationNumbering`), or None.
    fail_on
        Lowest finding severity that makes the verdict "problems found"
        (the ``--fail-on`` gate of :mod:`bandwise.algorithms.checks.verdict`).
    created
        Time stamp written in the report (UTC).
    verdict
        The verdict the analysis decided (None: decided from the findings here,
        by the same function).
    motion
        One free zero-energy motion ``(nodes, translations)`` to draw as arrows.
    table
        The element facets the checks matched (the picture's outer faces come
        from it instead of a second matching).
    outputs
        Files the run wrote, as ``(what, path)``: the renumbered mesh, the maps.
    output_notes
        What the renumbered file does not keep, and how its kind differs from
        the input's, one sentence each.
    next_steps
        What to do before a static run, as the analysis said
        (:class:`~bandwise.workflows.next_steps.NextStep`).
    comparison_time
        Wall time of the comparison of orderings, compilation included
        (:class:`~bandwise.workflows.timing.ComparisonTime`).
    values
        Checks of a matrix's values, when the analysis made them (anything
        with ``to_dict()``); shown in a section of their own.
    """

    model: Model | None
    graph: NodeGraph
    layout: DofLayout | int
    summary: MeshSummary
    findings: Sequence[Finding] | None = None
    perm: NDArray[np.integer] | None = None
    method: str | None = None
    comparison: Comparison | None = None
    supports: SupportSet | None = None
    modes: ZeroEnergyAnalysis | None = None
    equations: EquationNumbering | None = None
    fail_on: str = "error"
    created: dt.datetime = field(default_factory=_now)
    verdict: Verdict | None = None
    motion: tuple[NDArray[np.int64], NDArray[np.float64]] | None = None
    outputs: tuple[tuple[str, str], ...] = ()
    output_notes: tuple[str, ...] = ()
    next_steps: tuple[NextStep, ...] = ()
    comparison_time: ComparisonTime | None = None
    values: Any = None
    table: Any = None

    @property
    def subject(self) -> str:
        """``"mesh"``, or ``"matrix"`` when the report is of a matrix pattern."""
        return "matrix" if self.model is None else "mesh"

    @property
    def chosen_perm(self) -> NDArray[np.integer] | None:
        """The ordering shown as "renumbered": ``perm``, else the comparison's best."""
        if self.perm is not None or self.comparison is None:
            return self.perm
        return self.comparison.best.perm

    @property
    def chosen_method(self) -> str:
        """Name of :attr:`chosen_perm`."""
        if self.perm is not None or self.comparison is None:
            return self.method or "given ordering"
        return self.comparison.best.method


def report_inputs(result: CheckResult | RenumberResult) -> ReportInputs:
    """What the report shows of a ``check_file`` or ``renumber_file`` result: nothing new computed.

    A renumbering's report shows the checks the run made on the same mesh
    (``renumber_file(..., analyse=True)``), the orderings compared, the
    equations in the kept order and the files written.
    """
    from bandwise.workflows import RenumberResult

    if isinstance(result, RenumberResult):
        check = result.check
        written = "renumbered mesh" if result.model is not None else "renumbered matrix"
        outputs = [(f"{written} ({result.output_format})", os.path.abspath(result.output)),
                   ("node map (old to new)", os.path.abspath(result.node_map))]
        if result.dof_map is not None:   # a report travels: every path in full
            outputs.append(("DOF map (equation of every DOF)", os.path.abspath(result.dof_map)))
        equations = None if result.equations is None else result.equations.after
        held = None if result.equations is None else result.equations.supports
        if check is None:
            raise ValueError(f"{result.input}: a report of a renumbering needs "
                             "renumber_file(..., analyse=True)")
        return ReportInputs(
            model=check.model, graph=check.graph, layout=check.layout, summary=check.summary,
            findings=check.findings, comparison=result.comparison, supports=held,
            modes=None if check.supports is None else check.supports.analysis,
            equations=equations, fail_on=check.fail_on, verdict=check.verdict,
            motion=check.motion, outputs=tuple(outputs),
            output_notes=(*result.losses, *getattr(result, "output_notes", ())),
            next_steps=check.next_steps, comparison_time=result.comparison_time,
            values=getattr(check, "values", None), table=check.table)
    sup = result.supports
    equations = result.kept_equations or (None if sup is None else sup.equations)
    return ReportInputs(
        model=result.model, graph=result.graph, layout=result.layout, summary=result.summary,
        findings=result.findings, comparison=result.comparison,
        supports=None if sup is None else sup.supports,
        modes=None if sup is None else sup.analysis, equations=equations,
        fail_on=result.fail_on, verdict=result.verdict, motion=result.motion,
        next_steps=result.next_steps, comparison_time=result.comparison_time,
        values=getattr(result, "values", None), table=result.table)

