"""Supports of one mesh: the held DOFs, the zero-energy modes they leave, the equations.

The workflows :func:`~bandwise.workflows.check.check_file` and
:func:`~bandwise.workflows.renumber.renumber_file` both hold DOFs, count the
modes left free and number the equations; this module does it once for both.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.checks.findings import Finding, severity_rank
from bandwise.algorithms.rigid import Link, ZeroEnergyAnalysis, zero_energy_modes
from bandwise.algorithms.stiffness import StiffnessCheck, verify_stiffness
from bandwise.algorithms.supports import (
    Support,
    SupportSet,
    apply_supports,
    parse_support,
    read_support_file,
)
from bandwise.core.dofs import DofLayout
from bandwise.core.equations import EquationNumbering, equation_numbering
from bandwise.core.graph import NodeGraph
from bandwise.core.metrics import Metrics
from bandwise.core.model import Model, inverse_permutation
from bandwise.core.progress import Progress, step
from bandwise.formats.node_map import write_dof_map


def support_list(supports: Iterable[str | Support] = (),
                 supports_file: str | Path | None = None) -> tuple[Support, ...]:
    """Supports from option texts (``"mount_face:fixed"``), values, and a TOML support file.

    Parsed before any mesh is read, so a bad support fails at once.
    """
    out = [s if isinstance(s, Support) else parse_support(s) for s in supports]
    if supports_file is not None:
        out += read_support_file(Path(supports_file))
    return tuple(out)


@dataclass(frozen=True)
class SupportAnalysis:
    """Held DOFs, zero-energy modes, equations and the optional stiffness check of one mesh.

    Attributes
    ----------
    supports
        The supports applied (options and the file's own boundary cards).
    analysis
        The zero-energy modes left free (:mod:`bandwise.algorithms.rigid`).
    equations
        Equations numbered in the current node order, held DOFs set aside.
    stiffness
        The null-space count of an assembled unit stiffness, when asked for.
    """

    supports: SupportSet
    analysis: ZeroEnergyAnalysis
    equations: EquationNumbering
    stiffness: StiffnessCheck | None = None

    @property
    def given(self) -> bool:
        """True when at least one DOF is held."""
        return bool(self.supports.applied)

    @property
    def free_modes(self) -> int:
        """Rigid-body and mechanism modes left free."""
        return int(self.analysis.n_body_modes)

    def to_dict(self) -> dict[str, Any]:
        """The ``check --json`` entries: supports, zero_energy_modes, suggested_supports, equations."""
        out: dict[str, Any] = {
            "supports": self.supports.to_dict(),
            "zero_energy_modes": self.analysis.to_dict(),
            "suggested_supports": [h.to_dict() for h in self.analysis.suggested],
            "equations": self.equations.to_dict(),
        }
        if self.stiffness is not None:
            out["stiffness_check"] = self.stiffness.to_dict()
        return out

    def findings(self) -> list[Finding]:
        """Findings for the gate: free modes under given supports, moment releases,
        a stiffness count that disagrees."""
        out = []
        a = self.analysis
        word = a.node_label_word
        if self.free_modes and self.given:
            out.append(Finding(
                "supports.free_modes", "error", self.free_modes,
                f"the supports leave {self.free_modes} rigid-body or mechanism mode(s) free: "
                "the stiffness matrix is singular; see 'Supports and zero-energy modes'",
                node_ids=tuple(h.node for h in a.suggested), node_id_kind=word))
        if a.moment_release is not None:
            r = a.moment_release
            out.append(Finding("joints.moment_release", "warning", r.n_nodes, r.message,
                               node_ids=r.nodes, node_id_kind=word))
        if self.stiffness is not None and self.stiffness.agrees is False:
            out.append(Finding("stiffness.disagrees", "warning", 1, self.stiffness.message))
        return out


def analyse_supports(model: Model, layout: DofLayout, graph: NodeGraph,
                     supports: Sequence[Support] = (), *,
                     file_supports: SupportSet | None = None,
                     labels: Any = None, links: Sequence[Link] = (),
                     stiffness_check: bool = False, dof_map: str | Path | None = None,
                     progress: Progress | None = None) -> SupportAnalysis:
    """Hold the supports, find the zero-energy modes, number the equations (and check them).

    Parameters
    ----------
    supports
        Supports from options or a support file.
    file_supports
        Supports the input itself gives (a solver deck's boundary cards); added.
    labels
        The face-connected blocks, if already found.
    links
        The input's rigid links and constraints (:class:`~bandwise.algorithms.rigid.Link`).
    stiffness_check
        Also count the null space of an assembled unit-material stiffness.
    dof_map
        Where to write the equation of every DOF as CSV, if given.
    """
    held = apply_supports(model, layout, list(supports)).combined(file_supports)
    with step(progress, "finding zero-energy modes"):
        analysis = zero_energy_modes(model, layout, held, graph, labels, links)
    with step(progress, "numbering equations"):
        equations = equation_numbering(layout, held.fixed, None, graph)
    stiffness = None
    if stiffness_check:
        with step(progress, "checking the stiffness null space"):
            stiffness = verify_stiffness(model, layout, held, analysis) if not links else \
                StiffnessCheck(False, None, analysis.total, layout.total - held.n_fixed_dofs,
                               f"the input's {len(links)} rigid link(s) have no stiffness "
                               "representation to check against: not checked")
    if dof_map is not None:
        node_labels = model.node_labels()[0]
        write_dof_map(dof_map, equations, node_labels,
                      "node_id" if model.node_ids is not None else "node")
    return SupportAnalysis(held, analysis, equations, stiffness)


@dataclass(frozen=True)
class RenumberedEquations:
    """Equation counts and the reduced system before and after a renumbering."""

    before: EquationNumbering
    after: EquationNumbering
    supports: SupportSet = field(repr=False)

    def to_dict(self) -> dict[str, Any]:
        """The ``renumber --json`` entry ``equations``."""
        return {"supports": self.supports.to_dict(), "before": self.before.to_dict(),
                "after": self.after.to_dict()}


def renumbered_equations(model: Model, layout: DofLayout, graph: NodeGraph,
                         supports: Sequence[Support], perm: NDArray[np.integer],
                         dof_map: str | Path | None = None,
                         file_supports: SupportSet | None = None,
                         whole: tuple[Metrics, Metrics] | None = None) -> RenumberedEquations:
    """Number the equations before and after ``perm``; write the DOF map of the new numbering.

    ``file_supports`` (a solver deck's boundary cards) add to ``supports``.
    ``whole``: the DOF-level figures of the whole system before and after,
    when already measured (a comparison's original and chosen rows), reused
    when no DOF is held.  In the map, nodes are labelled by their 1-based
    position in the renumbered mesh.
    """
    held = apply_supports(model, layout, list(supports)).combined(file_supports)
    before_whole, after_whole = (None, None) if whole is None else whole
    before = equation_numbering(layout, held.fixed, None, graph, whole=before_whole)
    after = equation_numbering(layout, held.fixed, perm, graph, whole=after_whole)
    if dof_map is not None:
        write_dof_map(dof_map, after, inverse_permutation(perm) + 1, "node")
    return RenumberedEquations(before, after, held)


def merged_findings(findings: Sequence[Finding], supports: SupportAnalysis) -> tuple[Finding, ...]:
    """The check findings with the support findings added, most serious first (stable)."""
    return tuple(sorted([*findings, *supports.findings()],
                        key=lambda f: severity_rank(f.severity)))
