"""The :class:`Finding`: one thing the checks found in a mesh, as a value."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

#: Severities, most serious first.
SEVERITIES: tuple[str, ...] = ("error", "warning", "note")

#: Word used for element labels: bandwise counts cells over all blocks in file order.
ELEMENT_ID_KIND = "1-based element position (all blocks, file order)"


def severity_rank(severity: str) -> int:
    """0 for ``error``, 1 for ``warning``, 2 for ``note``."""
    return SEVERITIES.index(severity)


@dataclass(frozen=True)
class Finding:
    """One finding of the mesh checks.

    Attributes
    ----------
    code
        Short stable identifier, e.g. ``"parts.disconnected"``.
    severity
        ``"error"`` (the run will fail or give wrong answers), ``"warning"``
        (probably a modelling mistake) or ``"note"`` (worth knowing).
    count
        How many items (nodes, elements, pairs, parts ...) are involved.
    message
        Plain-language statement of what was found and why it matters.
    node_ids, element_ids
        Labels of the nodes / elements involved (at most ``max_listed``).
    node_id_kind, element_id_kind
        What the labels are: original ids, or 1-based positions.
    where
        Cell blocks or set names involved.
    details
        Further structured facts (per part, per joint ...), JSON-ready.
    """

    code: str
    severity: str
    count: int
    message: str
    node_ids: tuple[int, ...] = ()
    element_ids: tuple[int, ...] = ()
    node_id_kind: str = ""
    element_id_kind: str = ""
    where: tuple[str, ...] = ()
    details: tuple[dict[str, Any], ...] = field(default=(), compare=False)

    def __post_init__(self) -> None:
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")

    def __repr__(self) -> str:
        ids = ""
        if self.node_ids:
            ids = f", nodes {_preview(self.node_ids)}"
        elif self.element_ids:
            ids = f", elements {_preview(self.element_ids)}"
        return f"Finding({self.severity} {self.code}: {self.count}{ids})"

    def to_dict(self) -> dict[str, Any]:
        """The finding as JSON-ready data."""
        out: dict[str, Any] = {
            "code": self.code, "severity": self.severity, "count": self.count,
            "message": self.message,
        }
        if self.node_ids:
            out["node_ids"] = list(self.node_ids)
            out["node_id_kind"] = self.node_id_kind
        if self.element_ids:
            out["element_ids"] = list(self.element_ids)
            out["element_id_kind"] = self.element_id_kind
        if self.where:
            out["where"] = list(self.where)
        if self.details:
            out["details"] = [dict(d) for d in self.details]
        return out


def counted(n: int, one: str, many: str) -> str:
    """``n`` and the words that agree with it: ``counted(1, "node is", "nodes are")``."""
    return f"{n:,} {one if n == 1 else many}"


def _preview(ids: tuple[int, ...], k: int = 6) -> str:
    head = ", ".join(str(i) for i in ids[:k])
    return f"[{head}{', ...' if len(ids) > k else ''}]"


def as_ids(labels: ArrayLike, limit: int) -> tuple[int, ...]:
    """The first ``limit`` labels as a tuple of Python ints."""
    arr = np.asarray(labels).ravel()[:limit]
    return tuple(int(v) for v in arr.tolist())
