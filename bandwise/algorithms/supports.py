"""Supports: which DOFs of which nodes are held, and how a user names them.

A support is a *node selector* and a *DOF choice*.  The command line takes
one per ``--support "SELECTOR:DOFS"`` and a support file with ``--supports
FILE.toml``.  Selectors:

=================================  =============================================
``NAME`` or ``set NAME``           a node set, an element set, or a gmsh physical
                                   group of the file (the nodes of its elements)
``plane x=0`` (``y=``, ``z=``)     nodes on a coordinate plane; optional
                                   ``tol=1e-4`` (default 1e-6 of the model size)
``box x0,y0,z0 x1,y1,z1``          nodes inside a box (faces included, same tol)
``near x,y,z``                     the node nearest to a point
``node 17,42``                     nodes by label (original id, else 1-based
                                   position in the file)
=================================  =============================================

DOFs: the trade's names ``ux uy uz rx ry rz`` (``t`` for a scalar field),
separated by commas or spaces, or a shortcut: ``fixed`` (every DOF the node
carries) or ``pinned`` (its translations only).  Examples::

    --support "WALL:fixed"  --support "plane x=0:ux,uy"  --support "near 0,0,0:uz"

A support file (TOML) holds the same, one ``[[support]]`` table each, with
exactly one selector key (``set``, ``plane``, ``box``, ``near``, ``node``)::

    # bracket.toml: supports of the bracket load case
    [[support]]
    set = "WALL"
    dofs = "fixed"

    [[support]]
    plane = "z=0"
    tol = 1e-4
    dofs = ["uz"]

    [[support]]
    box = [[0, 0, 0], [10, 5, 0]]
    dofs = "pinned"

    [[support]]
    near = [40.0, 0.0, 12.5]
    dofs = "ux uy"

A support that selects no node, a set that does not exist, a DOF a selected
node does not carry, or a support on an orphan node (no element gives it
stiffness) is an :class:`~bandwise.core.errors.InputError`: a support that holds
nothing is a mistake, never a silent no-op.
"""

from __future__ import annotations

import os
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DOF_NAMES, DofLayout, dof_mask, mask_names, popcount
from bandwise.core.elements import cell_dimension, is_analysed
from bandwise.core.errors import InputError
from bandwise.core.model import Model, as_xyz

#: Translational DOFs (what ``pinned`` holds).
TRANSLATIONS = dof_mask(["ux", "uy", "uz"])
#: Default plane/box tolerance, relative to the largest extent of the model.
RELATIVE_TOLERANCE = 1e-6
SELECTOR_KINDS = ("set", "plane", "box", "near", "node")
_SHORTCUTS = ("fixed", "pinned")
_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"


@dataclass(frozen=True)
class Support:
    """One support as the user gave it, parsed but not yet applied to a mesh.

    Attributes
    ----------
    kind
        Selector kind: one of :data:`SELECTOR_KINDS`.
    target
        The selector's argument: a set name, ``(axis, value)``, box corners,
        a point, or node labels.
    dofs
        ``"fixed"``, ``"pinned"``, or DOF names separated by spaces.
    tol
        Absolute tolerance for ``plane`` and ``box``; None uses the default.
    origin
        Where it came from, for messages (``--support 'WALL:fixed'``, a file line).
    """

    kind: str
    target: Any
    dofs: str
    tol: float | None = None
    origin: str = ""

    def describe(self) -> str:
        """The selector in the command-line syntax."""
        if self.kind == "set":
            return f"set {self.target}"
        if self.kind == "plane":
            tol = f" tol={self.tol:g}" if self.tol is not None else ""
            return f"plane {self.target[0]}={self.target[1]:g}{tol}"
        if self.kind == "box":
            lo, hi = self.target
            return f"box {_xyz(lo)} {_xyz(hi)}"
        if self.kind == "near":
            return f"near {_xyz(self.target)}"
        return "node " + ",".join(str(v) for v in self.target)


@dataclass(frozen=True)
class AppliedSupport:
    """What one support held on a given mesh.

    Attributes
    ----------
    support
        The support as given.
    nodes
        0-based indices of the nodes it selected (sorted).
    n_dofs
        Number of DOFs it holds (counted once per node and DOF).
    """

    support: Support
    nodes: NDArray[np.int64]
    n_dofs: int

    def __repr__(self) -> str:
        return (f"AppliedSupport({self.support.describe()!r}: {self.support.dofs}, "
                f"{self.nodes.size} nodes, {self.n_dofs} DOFs)")


@dataclass(frozen=True)
class SupportSet:
    """The held DOFs of every node, and what each support contributed.

    Attributes
    ----------
    fixed
        Bit mask per node (over :data:`~bandwise.core.dofs.DOF_NAMES`) of its held DOFs.
    applied
        One :class:`AppliedSupport` per support, in the order given.
    """

    fixed: NDArray[np.int64]
    applied: tuple[AppliedSupport, ...]

    @property
    def n_fixed_dofs(self) -> int:
        """Number of held DOFs (a DOF held by two supports counts once)."""
        return int(popcount(self.fixed).sum())

    @property
    def n_supported_nodes(self) -> int:
        """Number of nodes with at least one held DOF."""
        return int(np.count_nonzero(self.fixed))

    def combined(self, other: SupportSet | None) -> SupportSet:
        """Both sets of supports together (a DOF held by either is held)."""
        if other is None or not other.applied:
            return self
        return SupportSet(self.fixed | other.fixed, (*self.applied, *other.applied))

    def to_dict(self) -> list[dict[str, Any]]:
        """JSON-ready list: selector, DOFs, node and DOF counts of each support."""
        return [{"selector": a.support.describe(), "dofs": a.support.dofs,
                 "origin": a.support.origin, "nodes": int(a.nodes.size), "held_dofs": a.n_dofs}
                for a in self.applied]

    def __repr__(self) -> str:
        return (f"SupportSet({len(self.applied)} supports, {self.n_supported_nodes} nodes, "
                f"{self.n_fixed_dofs} held DOFs)")


def no_supports(n_nodes: int) -> SupportSet:
    """The empty support set (every DOF free)."""
    return SupportSet(np.zeros(n_nodes, dtype=np.int64), ())


# --------------------------------------------------------------------------- parsing


def _xyz(p: Any) -> str:
    return ",".join(f"{float(v):g}" for v in p)


def _numbers(text: str, count: int, what: str, origin: str) -> tuple[float, ...]:
    parts = [p for p in re.split(r"[,\s]+", text.strip()) if p]
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        values = ()
    if len(values) not in (count, count - 1) or not all(np.isfinite(values)):
        raise InputError(f"{origin}: {what} needs {count} numbers x,y,z, got {text.strip()!r}")
    return values + (0.0,) * (count - len(values))


def check_dofs(text: str, origin: str = "") -> str:
    """Normalise a DOF choice: ``fixed``, ``pinned`` or known DOF names, space-separated.

    Raises
    ------
    InputError
        For an empty choice, an unknown name, or a shortcut mixed with names.
    """
    names = [p for p in re.split(r"[,\s]+", text.strip().lower()) if p]
    where = f"{origin}: " if origin else ""
    if not names:
        raise InputError(f"{where}no DOFs given; name them ({' '.join(DOF_NAMES)}) or use "
                         "fixed / pinned")
    shortcuts = [n for n in names if n in _SHORTCUTS]
    if shortcuts:
        if len(names) > 1:
            raise InputError(f"{where}{shortcuts[0]!r} stands alone; got {' '.join(names)!r}")
        return names[0]
    unknown = [n for n in names if n not in DOF_NAMES]
    if unknown:
        raise InputError(f"{where}unknown DOF name {unknown[0]!r}; known: "
                         f"{' '.join(DOF_NAMES)}, or fixed / pinned")
    return " ".join(n for n in DOF_NAMES if n in names)


def parse_support(text: str, origin: str | None = None) -> Support:
    """Parse one ``--support "SELECTOR:DOFS"`` value (syntax in the module docstring).

    Raises
    ------
    InputError
        If the text has no ``:DOFS`` part, an unknown selector, or bad numbers.
    """
    origin = origin or f"--support {text!r}"
    if ":" not in text:
        raise InputError(f"{origin}: expected SELECTOR:DOFS, e.g. 'WALL:fixed' or "
                         "'plane x=0:ux,uy'")
    selector, dofs = text.rsplit(":", 1)
    dofs = check_dofs(dofs, origin)
    selector = selector.strip()
    head, _, rest = selector.partition(" ")
    head = head.lower()
    if head == "plane":
        return _plane(rest, dofs, origin)
    if head == "box":
        corners = rest.split()
        if len(corners) != 2:
            raise InputError(f"{origin}: box needs two corners 'box x0,y0,z0 x1,y1,z1'")
        lo = _numbers(corners[0], 3, "a box corner", origin)
        hi = _numbers(corners[1], 3, "a box corner", origin)
        return Support("box", (lo, hi), dofs, None, origin)
    if head == "near":
        return Support("near", _numbers(rest, 3, "near", origin), dofs, None, origin)
    if head == "node":
        return Support("node", _labels(rest, origin), dofs, None, origin)
    name = rest.strip() if head == "set" else selector
    if not name:
        raise InputError(f"{origin}: no node selector before ':'")
    return Support("set", name, dofs, None, origin)


def _plane(text: str, dofs: str, origin: str, tol: float | None = None) -> Support:
    match = re.fullmatch(rf"\s*([xyzXYZ])\s*=\s*({_NUMBER})\s*(?:tol\s*=\s*({_NUMBER}))?\s*",
                         text)
    if not match:
        raise InputError(f"{origin}: plane needs 'x=VALUE' (or y=, z=), optionally "
                         f"'tol=VALUE'; got {text.strip()!r}")
    axis, value, tol_text = match.groups()
    if tol_text is not None:
        tol = float(tol_text)
    if tol is not None and not tol >= 0:
        raise InputError(f"{origin}: the tolerance must be >= 0, got {tol}")
    return Support("plane", (axis.lower(), float(value)), dofs, tol, origin)


def _labels(text: str, origin: str) -> tuple[int, ...]:
    parts = [p for p in re.split(r"[,\s]+", text.strip()) if p]
    if not parts or not all(re.fullmatch(r"\d+", p) for p in parts):
        raise InputError(f"{origin}: node needs labels such as 'node 17,42', got {text.strip()!r}")
    return tuple(int(p) for p in parts)


def read_support_file(path: str | os.PathLike[str]) -> list[Support]:
    """Read the supports of a TOML support file (layout in the module docstring).

    Raises
    ------
    InputError
        A missing or unreadable file, a TOML syntax error (with its line and
        column), a table without exactly one selector key, unknown keys.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(f"{path}: cannot read the support file: {exc.strerror}") from None
    try:
        doc = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"{path}: the support file is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: TOML syntax error: {exc}") from None
    unknown = sorted(set(doc) - {"support"})
    if unknown:
        raise InputError(f"{path}: unknown top-level key {unknown[0]!r}; "
                         "supports go in [[support]] tables")
    tables = doc.get("support", [])
    if not isinstance(tables, list) or not tables:
        raise InputError(f"{path}: no [[support]] table found")
    return [_support_from_table(t, f"{path}, support {k + 1}") for k, t in enumerate(tables)]


def _support_from_table(table: Any, origin: str) -> Support:
    if not isinstance(table, dict):
        raise InputError(f"{origin}: expected a [[support]] table")
    keys = set(table)
    unknown = sorted(keys - {*SELECTOR_KINDS, "dofs", "tol", "label"})
    if unknown:
        raise InputError(f"{origin}: unknown key {unknown[0]!r}; allowed: "
                         f"{', '.join(SELECTOR_KINDS)}, dofs, tol, label")
    kinds = [k for k in SELECTOR_KINDS if k in keys]
    if len(kinds) != 1:
        raise InputError(f"{origin}: give exactly one of {', '.join(SELECTOR_KINDS)}")
    if "dofs" not in table:
        raise InputError(f"{origin}: 'dofs' is missing (e.g. dofs = \"fixed\")")
    dofs_value = table["dofs"]
    dofs_text = " ".join(map(str, dofs_value)) if isinstance(dofs_value, list) else str(dofs_value)
    dofs = check_dofs(dofs_text, origin)
    if "label" in table:
        origin = f"{origin} ({table['label']})"
    kind, value = kinds[0], table[kinds[0]]
    tol = table.get("tol")
    if tol is not None and (not isinstance(tol, int | float) or not tol >= 0):
        raise InputError(f"{origin}: tol must be a number >= 0")
    if kind == "set":
        if not isinstance(value, str) or not value:
            raise InputError(f"{origin}: set must be a name")
        return Support("set", value, dofs, None, origin)
    if kind == "plane":
        return _plane(str(value), dofs, origin, None if tol is None else float(tol))
    if kind == "box":
        if not (isinstance(value, list) and len(value) == 2):
            raise InputError(f"{origin}: box must be two corners [[x0,y0,z0],[x1,y1,z1]]")
        lo, hi = (_point(v, origin, "a box corner") for v in value)
        return Support("box", (lo, hi), dofs, None if tol is None else float(tol), origin)
    if kind == "near":
        return Support("near", _point(value, origin, "near"), dofs, None, origin)
    labels = value if isinstance(value, list) else [value]
    if not labels or not all(isinstance(v, int) and v > 0 for v in labels):
        raise InputError(f"{origin}: node must be a positive label or a list of them")
    return Support("node", tuple(labels), dofs, None, origin)


def _point(value: Any, origin: str, what: str) -> tuple[float, ...]:
    if not isinstance(value, list) or not all(isinstance(v, int | float) for v in value):
        raise InputError(f"{origin}: {what} must be a list of 2 or 3 numbers")
    return _numbers(",".join(str(v) for v in value), 3, what, origin)


# --------------------------------------------------------------------------- resolution


def model_extent(pts: NDArray[np.float64]) -> float:
    """Largest coordinate range of the nodes (column by column: fast on (n, 3) arrays)."""
    if pts.shape[0] == 0:
        return 0.0
    return max(float(pts[:, k].max() - pts[:, k].min()) for k in range(pts.shape[1]))


def coupled_nodes(model: Model) -> NDArray[np.bool_]:
    """True for every node of an element that couples nodes (not an orphan)."""
    used = np.zeros(model.n_nodes, dtype=bool)
    for b in model.cells:
        if is_analysed(b.type) and b.data.dtype != object and cell_dimension(b.type) \
                and b.data.ndim == 2 and b.data.shape[1] > 1:
            used[b.data.ravel()] = True
    return used


def set_names(model: Model) -> list[str]:
    """Names a ``set`` selector accepts: node sets, element sets, gmsh physical groups."""
    names = list(model.point_sets) + list(model.cell_sets) + list(_physical_groups(model))
    return sorted(dict.fromkeys(n for n in names if not n.startswith("gmsh:")))


def _physical_groups(model: Model) -> dict[str, tuple[int, int]]:
    """gmsh physical name -> (tag, dimension), from ``field_data``."""
    if "gmsh:physical" not in model.cell_data:
        return {}
    groups = {}
    for name, value in model.field_data.items():
        arr = np.asarray(value).ravel()
        if arr.size == 2 and np.issubdtype(arr.dtype, np.number):
            groups[name] = (int(arr[0]), int(arr[1]))
    return groups


def set_nodes(model: Model, name: str) -> NDArray[np.int64]:
    """Nodes of a node set, of the elements of an element set, or of a physical group.

    Raises
    ------
    InputError
        If no set of that name exists (the message lists those that do).
    """
    if name in model.point_sets:
        return np.unique(model.point_sets[name])
    if name in model.cell_sets:
        parts = [np.asarray(b.data[idx]).ravel() for b, idx in zip(model.cells, model.cell_sets[name])
                 if idx.size and b.data.dtype != object]
        return np.unique(np.concatenate(parts)) if parts else np.zeros(0, np.int64)
    groups = _physical_groups(model)
    if name in groups:
        tag, dim = groups[name]
        tags = model.cell_data["gmsh:physical"]
        parts = [b.data[np.asarray(t) == tag].ravel() for b, t in zip(model.cells, tags)
                 if b.data.dtype != object and cell_dimension(b.type) == dim]
        return np.unique(np.concatenate(parts)) if parts else np.zeros(0, np.int64)
    known = set_names(model)
    shown = ", ".join(known[:20]) + (" ..." if len(known) > 20 else "")
    raise InputError(f"no node set, element set or physical group named {name!r}; "
                     + (f"the file has: {shown}" if known else "the file has none"))


def select_nodes(model: Model, support: Support, extent: float | None = None,
                 ) -> NDArray[np.int64]:
    """The 0-based indices of the nodes a support's selector picks (sorted, unique).

    ``extent`` (the model's largest coordinate range) scales the default
    tolerance; computed when not given.
    """
    pts = as_xyz(model.points)
    if extent is None:
        extent = model_extent(pts)
    tol = support.tol if support.tol is not None else RELATIVE_TOLERANCE * (extent or 1.0)
    if support.kind == "set":
        return set_nodes(model, support.target)
    if support.kind == "plane":
        axis, value = support.target
        col = pts[:, "xyz".index(axis)]
        return np.flatnonzero(np.abs(col - value) <= tol).astype(np.int64)
    if support.kind == "box":
        lo, hi = (np.asarray(c) for c in support.target)
        lo, hi = np.minimum(lo, hi) - tol, np.maximum(lo, hi) + tol
        return np.flatnonzero(((pts >= lo) & (pts <= hi)).all(axis=1)).astype(np.int64)
    if support.kind == "near":
        d2 = ((pts - np.asarray(support.target)) ** 2).sum(axis=1)
        return np.array([int(np.argmin(d2))], dtype=np.int64)
    labels, word = model.node_labels()
    wanted = np.asarray(support.target, dtype=np.int64)
    found = np.isin(wanted, labels)
    if not found.all():
        raise InputError(f"{support.origin}: no node with {word} {int(wanted[~found][0])}")
    return np.unique(np.flatnonzero(np.isin(labels, wanted))).astype(np.int64)


def _requested_mask(support: Support, node_masks: NDArray[np.int64]) -> NDArray[np.int64]:
    """Held DOFs at each selected node, after checking the nodes carry them."""
    if support.dofs == "fixed":
        return node_masks.copy()
    if support.dofs == "pinned":
        held = node_masks & TRANSLATIONS
        if (held == 0).any():
            carries = mask_names(int(node_masks[held == 0][0]))
            raise InputError(f"{support.origin}: 'pinned' holds translations, but "
                             f"{int(np.count_nonzero(held == 0))} selected node(s) carry "
                             f"only {carries}; name the DOFs instead")
        return held
    wanted = dof_mask(support.dofs.split())
    lacking = (node_masks & wanted) != wanted
    if lacking.any():
        missing = mask_names(wanted & ~int(node_masks[lacking][0]))
        carries = mask_names(int(node_masks[lacking][0]))
        raise InputError(f"{support.origin}: {int(np.count_nonzero(lacking))} selected node(s) "
                         f"do not carry {missing} (they carry {carries})")
    return np.full(node_masks.shape, wanted, dtype=np.int64)


def apply_supports(model: Model, layout: DofLayout, supports: list[Support]) -> SupportSet:
    """Resolve supports on a mesh to the held DOFs of every node.

    Parameters
    ----------
    model
        The mesh (node sets, physical groups, coordinates).
    layout
        DOFs of each node (:func:`bandwise.core.dofs.dof_layout`); a support may
        hold only DOFs a node carries.
    supports
        Parsed supports (:func:`parse_support`, :func:`read_support_file`).

    Returns
    -------
    SupportSet

    Raises
    ------
    InputError
        A selector that picks no node, an unknown set, a DOF a node does not
        carry, a support on an orphan node, a layout without DOF names.
    """
    fixed = np.zeros(model.n_nodes, dtype=np.int64)
    if not supports:
        return SupportSet(fixed, ())
    if layout.unnamed is not None:
        raise InputError(f"supports need named DOFs; {layout.unnamed} DOFs per node have no "
                         "standard names (use --dofs-per-node 1, 2, 3 or 6)")
    used = coupled_nodes(model)
    labels, word = model.node_labels()
    applied = []
    extent = model_extent(as_xyz(model.points))
    for support in supports:
        nodes = select_nodes(model, support, extent)
        if nodes.size == 0:
            raise InputError(f"{support.origin}: the selector {support.describe()!r} picks "
                             "no node")
        orphan = nodes[~used[nodes]]
        if orphan.size:
            raise InputError(f"{support.origin}: {orphan.size} selected node(s) belong to no "
                             f"element (first: {word} {int(labels[orphan[0]])}); a support "
                             "there holds nothing")
        held = _requested_mask(support, layout.masks[nodes])
        applied.append(AppliedSupport(support, nodes, int(popcount(held).sum())))
        fixed[nodes] |= held
    return SupportSet(fixed, tuple(applied))
