"""The old-to-new node map of a renumbering, as a CSV file.

Layout (our own): one header line, then one line per node in the order of
the input file::

    old_position,new_position,node_id
    1,17,101
    2,3,102

Positions are 1-based places of the node in the input and output files;
``node_id`` is the node's original id (label), present only when the input
carries ids.  For a matrix the positions are row (and column) numbers.
A spreadsheet or a script joins results computed on either numbering with
it; :func:`read_node_map` reads it back.
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DOF_NAMES
from bandwise.core.equations import EquationNumbering
from bandwise.core.errors import InputError, MeshReadError
from bandwise.core.model import check_permutation, inverse_permutation

from .atomic import write_text_atomic

HEADER = "old_position,new_position"
HEADER_WITH_IDS = "old_position,new_position,node_id"


@dataclass(frozen=True)
class NodeMap:
    """An old-to-new node map.

    Attributes
    ----------
    new_of_old
        0-based new position of each node, indexed by its 0-based old position.
    node_ids
        Original node ids in old order, or None.
    """

    new_of_old: NDArray[np.int64]
    node_ids: NDArray[np.int64] | None = None

    @property
    def perm(self) -> NDArray[np.int64]:
        """The permutation ``perm[new] = old`` (see :mod:`bandwise.core.model`)."""
        return inverse_permutation(self.new_of_old)

    def __repr__(self) -> str:
        ids = "" if self.node_ids is None else ", with node ids"
        return f"NodeMap({self.new_of_old.size} nodes{ids})"


def node_map_text(perm: NDArray[np.integer], node_ids: NDArray[np.integer] | None = None) -> str:
    """The CSV text of the map of ``perm`` (``perm[new] = old``)."""
    perm = check_permutation(perm, np.asarray(perm).size)
    new_of_old = inverse_permutation(perm)
    n = perm.size
    columns = [np.arange(1, n + 1, dtype=np.int64), new_of_old + 1]
    header = HEADER
    if node_ids is not None:
        ids = np.asarray(node_ids, dtype=np.int64)
        if ids.shape != (n,):
            raise ValueError(f"node ids must be one per node ({n}), got shape {ids.shape}")
        columns.append(ids)
        header = HEADER_WITH_IDS
    body = columns[0].astype(str)
    for c in columns[1:]:
        body = np.char.add(np.char.add(body, ","), c.astype(str))
    return "\n".join([header, *body.tolist()]) + "\n"


def write_node_map(path: str | os.PathLike[str], perm: NDArray[np.integer],
                   node_ids: NDArray[np.integer] | None = None) -> None:
    """Write the old-to-new map of ``perm`` as CSV, atomically.

    Parameters
    ----------
    path
        Output file (temporary file in the same folder, then a rename).
    perm
        New order ``perm[new] = old``.
    node_ids
        Original ids of the nodes in OLD order, if the input has them.

    Raises
    ------
    MeshWriteError
        Missing folder or failed write.
    """
    write_text_atomic(path, node_map_text(perm, node_ids))


def read_node_map(path: str | os.PathLike[str]) -> NodeMap:
    """Read a map written by :func:`write_node_map`.

    Raises
    ------
    MeshReadError
        Missing file, unknown header, malformed line, or positions that are
        not a permutation of 1..n.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise MeshReadError(f"{path}: cannot read the node map: {exc}") from None
    header, _, body = text.partition("\n")
    header = header.strip()
    if header not in (HEADER, HEADER_WITH_IDS):
        raise MeshReadError(f"{path}: not a bandwise node map (header {header[:60]!r})")
    width = header.count(",") + 1
    try:
        table = np.loadtxt(io.StringIO(body), delimiter=",", dtype=np.int64, ndmin=2)
    except ValueError as exc:
        raise MeshReadError(f"{path}: malformed node map: {' '.join(str(exc).split())}") from None
    if table.size == 0:
        raise MeshReadError(f"{path}: the node map has no nodes")
    if table.shape[1] != width:
        raise MeshReadError(f"{path}: expected {width} columns, found {table.shape[1]}")
    n = table.shape[0]
    if not np.array_equal(table[:, 0], np.arange(1, n + 1)):
        raise MeshReadError(f"{path}: old positions must run 1..{n} in order")
    new_of_old = table[:, 1] - 1
    try:
        check_permutation(new_of_old, n)
    except InputError:
        raise MeshReadError(f"{path}: new positions are not a permutation of 1..{n}") from None
    return NodeMap(new_of_old, table[:, 2].copy() if width == 3 else None)


def write_dof_map(path: str | os.PathLike[str], numbering: EquationNumbering,
                  labels: NDArray[np.integer] | None = None, label_word: str = "node") -> None:
    """Write the DOF map as CSV: node label, DOF name, equation number (1-based) or ``fixed``.

    Parameters
    ----------
    path
        Output file; written atomically (temporary file, then rename).
    numbering
        From :func:`bandwise.core.equations.equation_numbering`.
    labels
        Node labels by old index (``Model.node_labels()[0]``); default 1-based positions.
    label_word
        Heading of the node column (``"node"``; e.g. ``"node_id"``).
    """
    node_labels = (numbering.node + 1) if labels is None else np.asarray(labels)[numbering.node]
    eq = numbering.equation
    eq_text = np.where(eq < 0, "fixed", (eq + 1).astype(str))
    names = np.array(DOF_NAMES if numbering.named else
                     [f"dof{k + 1}" for k in range(int(numbering.dof.max(initial=0)) + 1)])
    lines = [f"{label_word},dof,equation"]
    lines += [f"{a},{b},{c}" for a, b, c in
              zip(node_labels.tolist(), names[numbering.dof].tolist(), eq_text.tolist())]
    write_text_atomic(path, "\n".join(lines) + "\n")
