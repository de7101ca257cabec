"""What each output format keeps of a mesh, and what it loses: said before writing.

Each row of :data:`FORMATS` was established by writing a mesh rich in
content through meshio and reading it back (``tests/test_roundtrip_formats.py``
checks every row).  :func:`losses` compares a model with its target format
and lists, in words, what the written file will not hold, so that the
command line can say so before it writes; :func:`prepared_for` adapts a
model to a format where meshio needs help (gmsh files need element tags,
which bandwise builds from the cell sets).

The keyword (``.inp``) and bulk-data (``.bdf``) decks read by
:mod:`bandwise.formats.decks` are renumbered in place and lose nothing; the rows
for ``abaqus`` and ``nastran`` below describe writing through meshio.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from bandwise.core.model import Model

#: Cell data and field data names of gmsh element tags (meshio's convention).
GMSH_PHYSICAL, GMSH_GEOMETRICAL = "gmsh:physical", "gmsh:geometrical"
YES, NO = "kept", "lost"


@dataclass(frozen=True)
class FormatHolds:
    """What one output format keeps of a :class:`~bandwise.core.model.Model`.

    Attributes
    ----------
    name
        meshio format name.
    label
        What the trade calls the format.
    point_fields, cell_fields
        Nodal and element fields: ``kept``, ``lost``, or how they are kept.
    node_sets, cell_sets
        Node and element sets: ``kept``, ``lost``, or what they become.
    metadata
        Format metadata (gmsh physical names, ...).
    periodic
        gmsh periodic node pairs.
    node_ids
        The original node ids (labels) of the source file.
    """

    name: str
    label: str
    point_fields: str
    cell_fields: str
    node_sets: str
    cell_sets: str
    metadata: str
    periodic: str = NO
    node_ids: str = "lost: nodes are numbered 1..n in the new order"

    def row(self) -> tuple[str, ...]:
        """The format's row of the table in the README."""
        return (self.label, self.name, self.point_fields, self.cell_fields, self.node_sets,
                self.cell_sets, self.metadata, self.periodic)


#: Field-name prefixes under which sets are written to formats without sets.
NODE_SET_FIELD, CELL_SET_FIELD = "node_set:", "cell_set:"
_AS_FIELDS_NODES = (f"written as 0/1 nodal fields '{NODE_SET_FIELD}NAME'; bandwise reads them "
                    "back as sets")
_AS_FIELDS_CELLS = (f"written as 0/1 element fields '{CELL_SET_FIELD}NAME'; bandwise reads them "
                    "back as sets")
_PHYSICAL = "kept as physical groups, one per element (an element in two sets keeps the first)"

#: What each format keeps, by meshio format name.
FORMATS: dict[str, FormatHolds] = {f.name: f for f in (
    FormatHolds("gmsh22", "gmsh 2.2 (.msh)", YES,
                "kept with one cell block; lost with several (meshio cannot read them back)",
                NO, _PHYSICAL + "; read back as element tags and names, not as sets",
                "physical names kept", YES),
    FormatHolds("gmsh", "gmsh 4.1 (.msh)", YES, YES, NO, _PHYSICAL, "physical names kept", YES),
    FormatHolds("vtu", "VTK XML (.vtu)", YES, YES, _AS_FIELDS_NODES, _AS_FIELDS_CELLS, NO),
    FormatHolds("vtk", "VTK legacy (.vtk)", YES, YES, _AS_FIELDS_NODES, _AS_FIELDS_CELLS, NO),
    FormatHolds("xdmf", "XDMF + HDF5 (.xdmf)", YES, YES, NO, NO, NO),
    FormatHolds("med", "MED (.med)", YES, YES, NO, NO, NO),
    FormatHolds("exodus", "Exodus II (.exo, .e)", YES, NO, YES, NO, NO),
    FormatHolds("abaqus", "keyword deck via meshio (.inp)", NO, NO, YES, YES, NO),
    FormatHolds("nastran", "bulk-data deck via meshio (.bdf)", NO, NO, NO, NO, NO),
)}


def _is_gmsh_tag(name: str) -> bool:
    return name.startswith("gmsh:")


def _own(names: Any) -> list[str]:
    """Names that are the user's content, not a reader's bookkeeping (``gmsh:*`` tags)."""
    return [n for n in names if not _is_gmsh_tag(n)]


def cell_types_held(file_format: str) -> frozenset[str] | None:
    """Cell types meshio can write in a format (None when not known)."""
    try:
        if file_format in ("gmsh", "gmsh22"):
            from meshio.gmsh.common import _meshio_to_gmsh_type as table
        elif file_format in ("vtu", "vtk"):
            from meshio._vtk_common import meshio_to_vtk_type as table
        elif file_format == "xdmf":
            from meshio.xdmf.common import meshio_to_xdmf_type as table
        elif file_format == "med":
            from meshio.med._med import meshio_to_med_type as table
        elif file_format == "exodus":
            from meshio.exodus._exodus import meshio_to_exodus_type as table
        elif file_format == "abaqus":
            from meshio.abaqus._abaqus import meshio_to_abaqus_type as table
        elif file_format == "nastran":
            from meshio.nastran._nastran import nastran_to_meshio_type
            return frozenset(nastran_to_meshio_type.values())
        else:
            return None
    except ImportError:  # a meshio release that moved its tables
        return None
    return frozenset(table)


def losses(model: Model, file_format: str) -> list[str]:
    """What the model holds that a file of ``file_format`` will not, one sentence each.

    Parameters
    ----------
    model
        The mesh about to be written.
    file_format
        meshio format name of the output (``gmsh22`` for gmsh 2.2).

    Returns
    -------
    list of str
        Empty when nothing is lost.
    """
    holds = FORMATS.get(file_format)
    if holds is None:
        return [(f"bandwise has not checked what the {file_format} format keeps: fields, "
                 "sets and metadata may be lost")]
    out = []
    point_fields = _own(model.point_data)
    cell_fields = _own(model.cell_data)
    node_sets = list(model.point_sets)
    cell_sets = _own(model.cell_sets)
    held = cell_types_held(file_format)
    if held is not None:
        missing = sorted({b.type for b in model.cells if b.type not in held})
        if missing:
            out.append(f"cell types {', '.join(missing)}: the format cannot hold them "
                       "(the write will fail)")
    if point_fields and holds.point_fields != YES:
        out.append(f"nodal fields {_listed(point_fields)}: {holds.point_fields}")
    if cell_fields and holds.cell_fields != YES:
        several = len(model.cells) > 1
        if file_format != "gmsh22" or several:
            out.append(f"element fields {_listed(cell_fields)}: {holds.cell_fields}")
    if node_sets and holds.node_sets != YES:
        out.append(f"node sets {_listed(node_sets)}: {holds.node_sets}")
    if cell_sets and holds.cell_sets != YES:
        if holds.cell_sets.startswith(_PHYSICAL):
            if _cells_in_two_sets(model):
                out.append(f"element sets {_listed(cell_sets)}: some elements are in two sets; "
                           "gmsh keeps only the first set of each element")
            if holds.cell_sets != _PHYSICAL:
                out.append(f"element sets {_listed(cell_sets)}: {holds.cell_sets}")
        else:
            out.append(f"element sets {_listed(cell_sets)}: {holds.cell_sets}")
    metadata = _own(model.field_data) if file_format not in ("gmsh", "gmsh22") else []
    if metadata and holds.metadata == NO:
        out.append(f"format metadata {_listed(metadata)}: lost")
    if model.periodic and holds.periodic != YES:
        out.append("periodic node pairs: lost")
    if model.node_ids is not None:
        out.append(f"original node ids: {holds.node_ids}")
    return out


def _listed(names: list[str], most: int = 6) -> str:
    shown = ", ".join(repr(n) for n in names[:most])
    return shown + (f" and {len(names) - most} more" if len(names) > most else "")


def _cells_in_two_sets(model: Model) -> bool:
    for k, block in enumerate(model.cells):
        count = np.zeros(len(block), dtype=np.int64)
        for name in _own(model.cell_sets):
            idx = model.cell_sets[name][k] if k < len(model.cell_sets[name]) else []
            np.add.at(count, np.asarray(idx, dtype=np.int64), 1)
        if (count > 1).any():
            return True
    return False


def prepared_for(model: Model, file_format: str) -> Model:
    """The model adapted for writing in ``file_format`` (a copy; the input is not changed).

    gmsh files need an element tag per cell: when the model has none, the
    cell sets become physical groups (tag ``k`` for the ``k``-th set, names
    in the metadata) and every cell gets geometrical entity 1 of its
    dimension.  gmsh 2.2 with several cell blocks drops the element fields,
    which meshio cannot read back (see :data:`FORMATS`).  VTK files hold no
    sets: each set becomes a 0/1 field, which :func:`sets_from_fields` turns
    back into a set on reading.
    """
    if file_format in SETS_AS_FIELDS:
        return _sets_as_fields(model)
    if file_format not in ("gmsh", "gmsh22"):
        return model
    cell_data = dict(model.cell_data)
    field_data = dict(model.field_data)
    if GMSH_PHYSICAL not in cell_data:
        physical, names = _physical_tags(model)
        cell_data[GMSH_PHYSICAL] = physical
        for tag, (name, dim) in names.items():
            field_data.setdefault(name, np.array([tag, dim]))
    if GMSH_GEOMETRICAL not in cell_data:
        cell_data[GMSH_GEOMETRICAL] = [np.ones(len(b), dtype=np.int64) for b in model.cells]
    if file_format == "gmsh22" and len(model.cells) > 1:
        cell_data = {k: v for k, v in cell_data.items() if _is_gmsh_tag(k)}
    # the sets are now element tags; meshio's gmsh writers take no cell sets
    return dataclasses.replace(model, cell_data=cell_data, field_data=field_data,
                               cell_sets={})


def _physical_tags(model: Model) -> tuple[list[np.ndarray], dict[int, tuple[str, int]]]:
    """Physical tag per cell from the cell sets (first set wins; 0 = in no set)."""
    tags = [np.zeros(len(b), dtype=np.int64) for b in model.cells]
    names: dict[int, tuple[str, int]] = {}
    for t, name in enumerate(_own(model.cell_sets), start=1):
        arrays = model.cell_sets[name]
        for k, idx in enumerate(arrays[:len(tags)]):
            idx = np.asarray(idx, dtype=np.int64)
            if idx.size == 0:
                continue
            free = idx[tags[k][idx] == 0]
            tags[k][free] = t
            dim = model.cells[k].dimension or 0
            names.setdefault(t, (name, dim))
    return tags, names


#: Formats whose sets bandwise writes as 0/1 fields.
SETS_AS_FIELDS = frozenset({"vtu", "vtk"})


def _sets_as_fields(model: Model) -> Model:
    point_data = dict(model.point_data)
    for name, idx in model.point_sets.items():
        flag = np.zeros(model.n_nodes, dtype=np.uint8)
        flag[np.asarray(idx, dtype=np.int64)] = 1
        point_data[NODE_SET_FIELD + name] = flag
    cell_data = dict(model.cell_data)
    for name in _own(model.cell_sets):
        flags = [np.zeros(len(b), dtype=np.uint8) for b in model.cells]
        for flag, idx in zip(flags, model.cell_sets[name]):
            flag[np.asarray(idx, dtype=np.int64)] = 1
        cell_data[CELL_SET_FIELD + name] = flags
    return dataclasses.replace(model, point_data=point_data, cell_data=cell_data,
                               point_sets={}, cell_sets={})


def sets_from_fields(model: Model) -> Model:
    """Turn the 0/1 set fields written by :func:`prepared_for` back into sets (in place)."""
    for name in [k for k in model.point_data if k.startswith(NODE_SET_FIELD)]:
        flag = np.asarray(model.point_data.pop(name)).ravel()
        model.point_sets[name[len(NODE_SET_FIELD):]] = np.flatnonzero(flag).astype(np.int64)
    for name in [k for k in model.cell_data if k.startswith(CELL_SET_FIELD)]:
        flags = model.cell_data.pop(name)
        model.cell_sets[name[len(CELL_SET_FIELD):]] = [
            np.flatnonzero(np.asarray(f).ravel()).astype(np.int64) for f in flags]
    return model


def output_format(model: Model, path: str | os.PathLike[str], file_format: str | None = None) -> str:
    """The meshio format :func:`bandwise.formats.meshio_io.write_model` will use for ``path``.

    Raises
    ------
    MeshWriteError
        The extension names no format meshio writes.
    """
    from bandwise.core.errors import MeshReadError, MeshWriteError

    from .meshio_io import detect_format

    if file_format is not None:
        return file_format
    try:
        fmt = detect_format(path)
    except MeshReadError as exc:
        raise MeshWriteError(str(exc)) from None
    return "gmsh22" if fmt == "gmsh" and model.file_format == "gmsh22" else fmt


def losses_for_output(model: Model, path: str | os.PathLike[str],
                      file_format: str | None = None) -> list[str]:
    """What writing ``model`` to ``path`` will lose (see :func:`losses`)."""
    return losses(model, output_format(model, path, file_format))
