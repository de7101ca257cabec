"""Support options of ``bandwise check`` and the glue to the library.

Options (all optional, any number of ``--support``)::

    --support "WALL:fixed"           a node set / element set / physical group
    --support "plane x=0:ux,uy"      nodes on a coordinate plane (tol=... optional)
    --support "box 0,0,0 1,1,0:pinned"
    --support "near 10,0,5:uz"       the node nearest to a point
    --support "node 17,42:fixed"     nodes by label
    --supports bracket.toml          the same, from a TOML support file
    --stiffness-check                assemble a unit stiffness and count its zero
                                     eigenvalues (up to 20,000 free DOFs)
    --dof-map dofs.csv               the equation number of every DOF, as CSV

The syntax is documented in :mod:`bandwise.algorithms.supports`.  With no support the
zero-energy analysis still runs and reports the free modes of every part.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

import typer

from bandwise.algorithms.checks.findings import Finding, severity_rank
from bandwise.algorithms.rigid import ZeroEnergyAnalysis, zero_energy_modes
from bandwise.algorithms.stiffness import MAX_VERIFY_DOFS, StiffnessCheck, verify_stiffness
from bandwise.algorithms.supports import (
    Support,
    SupportSet,
    apply_supports,
    parse_support,
    read_support_file,
)
from bandwise.core.dofs import DofLayout
from bandwise.core.equations import EquationNumbering, equation_numbering
from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model
from bandwise.core.progress import Progress, step
from bandwise.core.tables import human_bytes, render_table
from bandwise.formats.node_map import write_dof_map

SupportOpt = Annotated[list[str] | None, typer.Option(
    "--support", help="Hold DOFs: 'SELECTOR:DOFS'. Selector: a set or physical-group name, "
                      "'plane x=0' [tol=..], 'box x0,y0,z0 x1,y1,z1', 'near x,y,z', "
                      "'node 17,42'. DOFs: ux uy uz rx ry rz t, or fixed / pinned. Repeatable.")]
SupportFileOpt = Annotated[Path | None, typer.Option(
    "--supports", help="TOML support file: [[support]] tables with one of set / plane / box / "
                       "near / node, and dofs (and optional tol, label).")]
StiffnessCheckOpt = Annotated[bool, typer.Option(
    "--stiffness-check", help="Assemble a unit-material stiffness, hold the supports and count "
                              f"its zero eigenvalues (up to {MAX_VERIFY_DOFS:,} free DOFs); "
                              "the count must equal the zero-energy analysis.")]
DofMapOpt = Annotated[Path | None, typer.Option(
    "--dof-map", help="Write the equation number of every DOF (or 'fixed') as CSV "
                      "(one mesh file only).")]

#: Modes listed per part, and parts listed, in the text output.
TEXT_MODES, TEXT_PARTS = 12, 10


@dataclass(frozen=True)
class SupportRequest:
    """The support options of one ``check`` run, parsed before any mesh is read."""

    supports: tuple[Support, ...]
    stiffness_check: bool = False
    dof_map: Path | None = None


def support_request(texts: list[str] | None, support_file: Path | None,
                    stiffness_check: bool, dof_map: Path | None, n_files: int) -> SupportRequest:
    """Parse the support options (errors surface before the meshes are read)."""
    supports = [parse_support(t) for t in texts or []]
    if support_file is not None:
        supports += read_support_file(support_file)
    if dof_map is not None and n_files != 1:
        raise InputError(f"--dof-map takes one mesh file, got {n_files}")
    return SupportRequest(tuple(supports), stiffness_check, dof_map)


@dataclass(frozen=True)
class SupportReport:
    """Supports, zero-energy modes, equations and the optional stiffness check of one mesh."""

    supports: SupportSet
    analysis: ZeroEnergyAnalysis
    equations: EquationNumbering
    stiffness: StiffnessCheck | None
    given: bool

    def to_json(self) -> dict[str, Any]:
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
        """Findings for the gate: free modes, moment releases, a stiffness disagreement."""
        out = []
        a = self.analysis
        n_body = a.n_body_modes
        word = self.analysis.node_label_word
        if n_body and self.given:
            out.append(Finding(
                "supports.free_modes", "error", n_body,
                f"the supports leave {n_body} rigid-body or mechanism mode(s) free: the "
                "stiffness matrix is singular; see 'Supports and zero-energy modes'",
                node_ids=tuple(h.node for h in a.suggested), node_id_kind=word))
        if a.moment_release is not None:
            r = a.moment_release
            out.append(Finding("joints.moment_release", "warning", r.n_nodes, r.message,
                               node_ids=r.nodes, node_id_kind=word))
        if self.stiffness is not None and self.stiffness.agrees is False:
            out.append(Finding("stiffness.disagrees", "warning", 1, self.stiffness.message))
        return out

    def text(self) -> str:
        """The "Supports and zero-energy modes" section of the text output."""
        lines = ["Supports and zero-energy modes"]
        if self.supports.applied:
            rows = [(a.support.describe(), a.support.dofs, f"{a.nodes.size:,}", f"{a.n_dofs:,}")
                    for a in self.supports.applied]
            lines.append(render_table(rows, header=("support", "DOFs", "nodes", "held DOFs"),
                                      align="llrr"))
        else:
            lines.append("no supports given (every DOF free)")
        a = self.analysis
        rigid = sum(p.n_rigid for p in a.parts)
        lines.append(f"zero-energy modes: {a.total} ({rigid} rigid, {a.n_body_modes - rigid} "
                     f"mechanism, {a.dofs_without_stiffness} DOFs without stiffness)")
        for part in [p for p in a.parts if p.n_modes or not p.analysed][:TEXT_PARTS]:
            lines.append(f"  part {part.part} ({part.n_nodes:,} nodes, {part.n_bodies} "
                         f"bodies): {part.n_modes} mode(s){'' if part.analysed else ' ?'}")
            for m in part.modes[:TEXT_MODES]:
                moving = ("moving most: nodes " + ", ".join(str(v) for v in m.moving_nodes)
                          if m.moving_nodes else "every node moves alike")
                lines.append(f"    - {m.kind}: {m.description} ({moving})")
            if part.n_modes > TEXT_MODES:
                lines.append(f"    ... {part.n_modes - TEXT_MODES} more (see --json)")
        for note in a.notes:
            lines.append(f"  note: {note}")
        if a.suggested:
            opts = " ".join(f'--support "{h.as_option}"' for h in a.suggested)
            lines.append(f"suggested holds (not applied): {opts}")
        e = self.equations
        eq = (f"equations: {e.n_dofs:,} DOFs, {e.n_fixed:,} held, {e.n_equations:,} "
              "equations")
        if e.reduced is not None and e.n_equations:
            r = e.reduced
            eq += (f"; reduced system: bandwidth {r.bandwidth:,}, profile {r.profile:,}, "
                   f"skyline {human_bytes(r.skyline_bytes)}")
        lines.append(eq)
        if self.stiffness is not None:
            lines.append(self.stiffness.message)
        return "\n".join(lines)


def analyse_supports(model: Model, layout: DofLayout, graph: NodeGraph,
                     request: SupportRequest, progress: Progress | None = None,
                     file_supports: SupportSet | None = None,
                     labels: list[Any] | None = None,
                     links: tuple[Any, ...] | list[Any] = ()) -> SupportReport:
    """Apply the supports, find the zero-energy modes, number the equations (and check).

    ``file_supports`` are supports the input file itself gives (the
    boundary-condition cards of a solver deck); they add to the options'.
    ``labels`` are the face-connected blocks, if already found; ``links``
    the input's rigid links and constraints (:class:`bandwise.algorithms.rigid.Link`).
    """
    supports = apply_supports(model, layout, list(request.supports)).combined(file_supports)
    with step(progress, "finding zero-energy modes"):
        analysis = zero_energy_modes(model, layout, supports, graph, labels, links)
    with step(progress, "numbering equations"):
        equations = equation_numbering(layout, supports.fixed, None, graph)
    stiffness = None
    if request.stiffness_check:
        with step(progress, "checking the stiffness null space"):
            stiffness = verify_stiffness(model, layout, supports, analysis) if not links else \
                StiffnessCheck(False, None, analysis.total, layout.total - supports.n_fixed_dofs,
                               f"the input's {len(links)} rigid link(s) have no stiffness "
                               "representation to check against: not checked")
    if request.dof_map is not None:
        labels = model.node_labels()[0]
        write_dof_map(request.dof_map, equations, labels,
                      "node_id" if model.node_ids is not None else "node")
    return SupportReport(supports, analysis, equations, stiffness, bool(supports.applied))


@dataclass(frozen=True)
class RenumberedEquations:
    """Equation counts and the reduced system before and after a renumbering."""

    before: EquationNumbering
    after: EquationNumbering
    supports: SupportSet

    def to_dict(self) -> dict[str, Any]:
        """The ``renumber --json`` entry ``equations``."""
        return {"supports": self.supports.to_dict(), "before": self.before.to_dict(),
                "after": self.after.to_dict()}

    def text(self) -> str:
        """One line of counts, and the reduced-system figures before -> after."""
        a, b = self.after, self.before
        line = (f"equations: {a.n_dofs:,} DOFs, {a.n_fixed:,} held, {a.n_equations:,} "
                "equations (held DOFs set aside, free DOFs numbered node after node)")
        if a.reduced is None or b.reduced is None or not a.n_equations:
            return line
        if not a.n_fixed:
            return line + "\nno DOF held: the reduced system is the whole one compared above"
        rows = [(name, f"{getattr(b.reduced, key):,}", f"{getattr(a.reduced, key):,}")
                for name, key in (("bandwidth", "bandwidth"), ("profile", "profile"),
                                  ("max wavefront", "max_wavefront"))]
        rows.append(("skyline storage", human_bytes(b.reduced.skyline_bytes),
                     human_bytes(a.reduced.skyline_bytes)))
        return "\n".join([line, "reduced system", render_table(
            rows, header=("figure", "before", "after"), align="lrr")])


def renumbered_equations(model: Model, layout: DofLayout, graph: NodeGraph,
                         supports: list[Support], perm: Any,
                         dof_map: Path | None = None,
                         file_supports: SupportSet | None = None) -> RenumberedEquations:
    """Number the equations before and after ``perm``; write the DOF map of the new numbering.

    ``file_supports`` (a solver deck's boundary-condition cards) add to
    ``supports``.  In the map, nodes are labelled by their 1-based position
    in the renumbered mesh.
    """
    held = apply_supports(model, layout, supports).combined(file_supports)
    before = equation_numbering(layout, held.fixed, None, graph)
    after = equation_numbering(layout, held.fixed, perm, graph)
    if dof_map is not None:
        from bandwise.core.model import inverse_permutation

        write_dof_map(dof_map, after, inverse_permutation(perm) + 1, "node")
    return RenumberedEquations(before, after, held)


def merged_findings(findings: list[Finding], report: SupportReport) -> list[Finding]:
    """The check findings with the support findings added, most serious first (stable)."""
    return sorted([*findings, *report.findings()], key=lambda f: severity_rank(f.severity))
