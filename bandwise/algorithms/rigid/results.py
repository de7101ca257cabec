"""The findings of the zero-energy analysis, as frozen values.

Concern: what :func:`bandwise.algorithms.rigid.zero_energy_modes` returns (modes per
part, suggested holds, the moment-release warning) and their JSON form, the
``zero_energy_modes`` entry of ``check --json``.  No computation here.

Sources: the rigid/mechanism split follows S. Pellegrino and C. R. Calladine,
"Matrix analysis of statically and kinematically indeterminate frameworks",
Int. J. Solids Struct. 22 (1986) 409-428.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True)
class ZeroEnergyMode:
    """One zero-energy mode of one part.

    Attributes
    ----------
    part
        1-based part number (parts numbered by their lowest node index).
    kind
        ``"rigid"`` (the part moves as one body) or ``"mechanism"``.
    description
        What moves, in words an engineer reads.
    moving_nodes
        Labels (original ids, else 1-based positions) of the nodes that move most.
    """

    part: int
    kind: str
    description: str
    moving_nodes: tuple[int, ...]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"part": self.part, "kind": self.kind, "description": self.description,
                "moving_nodes": list(self.moving_nodes)}


@dataclass(frozen=True)
class PartModes:
    """The zero-energy modes of one connected part.

    Attributes
    ----------
    part
        1-based part number.
    n_nodes, n_bodies
        Nodes of the part, and rigid bodies it was split into.
    modes
        The modes, rigid ones first; empty when the part is held.
    analysed
        False when the part was too large for the dense analysis (see ``note``).
    """

    part: int
    n_nodes: int
    n_bodies: int
    modes: tuple[ZeroEnergyMode, ...]
    analysed: bool = True
    note: str = ""

    @property
    def n_modes(self) -> int:
        """Number of zero-energy modes of the part."""
        return len(self.modes)

    @property
    def n_rigid(self) -> int:
        """Rigid-body modes among them."""
        return sum(m.kind == "rigid" for m in self.modes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"part": self.part, "nodes": self.n_nodes, "bodies": self.n_bodies,
                "analysed": self.analysed, "modes": self.n_modes, "rigid": self.n_rigid,
                "mechanisms": self.n_modes - self.n_rigid, "note": self.note,
                "details": [m.to_dict() for m in self.modes]}


@dataclass(frozen=True)
class SuggestedHold:
    """DOFs at one node whose holding (with the other suggestions) removes every free mode."""

    node: int
    dofs: str

    @property
    def as_option(self) -> str:
        """The suggestion in ``--support`` syntax."""
        return f"node {self.node}:{self.dofs.replace(' ', ',')}"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"node": self.node, "dofs": self.dofs, "option": self.as_option}


@dataclass(frozen=True)
class ZeroEnergyAnalysis:
    """Zero-energy modes of a supported model, per part and in total.

    Attributes
    ----------
    space
        ``"space"`` (6 rigid motions), ``"plane"`` (3) or ``"scalar"`` (1).
    parts
        One :class:`PartModes` per connected part.
    dofs_without_stiffness
        Free DOFs that no element stiffens (orphan nodes, rotations at nodes
        of solid elements only); each is a zero-energy mode by itself.
    suggested
        A small set of holds that removes every rigid and mechanism mode
        (offered, never applied).
    notes
        Plain-language remarks (bar spins ignored, parts not analysed ...).
    """

    space: str
    parts: tuple[PartModes, ...]
    dofs_without_stiffness: int
    suggested: tuple[SuggestedHold, ...]
    notes: tuple[str, ...] = ()
    node_label_word: str = "1-based node position"
    moment_release: MomentRelease | None = None

    @property
    def n_body_modes(self) -> int:
        """Rigid and mechanism modes over all analysed parts."""
        return sum(p.n_modes for p in self.parts)

    @property
    def total(self) -> int:
        """All zero-energy modes: rigid, mechanism, and DOFs without stiffness."""
        return self.n_body_modes + self.dofs_without_stiffness

    @property
    def complete(self) -> bool:
        """True when every part was analysed."""
        return all(p.analysed for p in self.parts)

    def modes(self) -> list[ZeroEnergyMode]:
        """Every mode of every part, in part order."""
        return [m for p in self.parts for m in p.modes]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the ``zero_energy_modes`` entry of ``check --json``)."""
        return {
            "total": self.total,
            "rigid": sum(p.n_rigid for p in self.parts),
            "mechanisms": sum(p.n_modes - p.n_rigid for p in self.parts),
            "dofs_without_stiffness": self.dofs_without_stiffness,
            "complete": self.complete,
            "motion_space": self.space,
            "node_labels": self.node_label_word,
            "per_part": [p.to_dict() for p in self.parts],
            "notes": list(self.notes),
            "moment_release": None if self.moment_release is None
            else self.moment_release.to_dict(),
        }

    def __repr__(self) -> str:
        return (f"ZeroEnergyAnalysis({self.total} zero-energy modes over {len(self.parts)} "
                f"parts, {self.dofs_without_stiffness} DOFs without stiffness)")


@dataclass(frozen=True)
class MomentRelease:
    """Nodes where frame or shell elements meet solid (or plane) elements.

    Solid elements give a node no rotational stiffness, so the joint passes
    forces but no moment from the frame or shell into the solid: often not
    what the analyst meant.  A warning, not an error.
    """

    nodes: tuple[int, ...]
    n_nodes: int
    message: str = field(default="")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"severity": "warning", "nodes": self.n_nodes, "first_nodes": list(self.nodes),
                "message": self.message}
