"""What an output keeps of a model, and what it loses: said before writing.

:func:`losses` compares a model with its target format (the format's row
of :data:`bandwise.formats.registry.FORMATS`, and for gmsh the physical
groups its sets will become) and names, in words, every set, field, tag
and entity the written file will not carry, so that the command line can
say so before it writes.  :func:`prepared_for` adapts a model to a format
without sets (VTK: each set becomes a 0/1 field) and :func:`sets_from_fields`
turns such fields back into sets on reading.

The keyword (``.inp``) and bulk-data (``.bdf``) decks read by
:mod:`bandwise.formats.decks` are renumbered in place and lose nothing; the
rows for ``abaqus`` and ``nastran`` describe writing through meshio.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from bandwise.core.model import CellBlock, Model

from .gmsh_writer import BOUNDING, data_fields, gmsh_layout, own, physical_names, set_losses
from .registry import CELL_SET_FIELD, FORMATS, NO, NODE_SET_FIELD, YES

#: Formats whose sets bandwise writes as 0/1 fields.
SETS_AS_FIELDS = frozenset({"vtu", "vtk"})
_GMSH = frozenset({"gmsh", "gmsh22"})


def losses(model: Model, file_format: str) -> list[str]:
    """What the model holds that a file of ``file_format`` will not, one sentence each.

    Parameters
    ----------
    model
        The mesh about to be written.
    file_format
        Registry name of the output format (``gmsh22`` for gmsh 2.2).

    Returns
    -------
    list of str
        Empty when nothing is lost.
    """
    holds = FORMATS[file_format].holds
    if holds is None:
        return [f"everything: bandwise does not write {file_format} files"]
    out: list[str] = []
    point_fields, cell_fields = own(model.point_data), own(model.cell_data)
    node_sets, cell_sets = list(model.point_sets), own(model.cell_sets)
    if file_format in _GMSH:
        _, _, refused = data_fields(model)
        out += refused
    elif file_format in SETS_AS_FIELDS:
        out += [f"{kind} {name!r}: a VTK file holds one value or one row of values per "
                f"{'node' if kind == 'nodal field' else 'element'}, not a table"
                for kind, name in _tables(model)]
    if point_fields and holds.point_fields != YES:
        out.append(f"nodal fields {_listed(point_fields)}: {holds.point_fields}")
    if cell_fields and holds.cell_fields != YES:
        if file_format != "gmsh22" or len(model.cells) > 1:
            out.append(f"element fields {_listed(cell_fields)}: {holds.cell_fields}")
    if node_sets and holds.node_sets != YES:
        out.append(f"node sets {_listed(node_sets)}: {holds.node_sets}")
    if file_format in _GMSH:
        version = "2.2" if file_format == "gmsh22" else "4.1"
        out += set_losses(model, gmsh_layout(model, version), version)
        if file_format == "gmsh22" and cell_sets:
            out.append(f"element sets {_listed(cell_sets)}: read back as element tags and "
                       "physical names, not as sets")
    elif cell_sets and not holds.cell_sets.startswith("kept"):
        out.append(f"element sets {_listed(cell_sets)}: {holds.cell_sets}")
    out += _gmsh_metadata_losses(model, file_format)
    names = physical_names(model)
    metadata = [n for n in own(model.field_data) if n not in names]
    if file_format not in _GMSH:
        metadata += list(names)
    if metadata and (holds.metadata == NO or file_format in _GMSH):
        out.append(f"format metadata {_listed(metadata)}: lost")
    if model.periodic and holds.periodic != YES:
        out.append("periodic node pairs: lost")
    if file_format == "flac3d":
        slots = [n for n in cell_sets if ":" in n.removeprefix("face:")]
        if slots:
            out.append(f"group slots of {_listed(slots)}: written in slot 1")
    if model.node_ids is not None:
        out.append(f"original node ids: {holds.node_ids}")
    return out


def _gmsh_metadata_losses(model: Model, file_format: str) -> list[str]:
    """gmsh element tags, node entities and bounding entities the output will not carry."""
    out = []
    tags = [k for k in ("gmsh:physical", "gmsh:geometrical") if k in model.cell_data]
    cells_kept = FORMATS[file_format].holds.cell_fields == YES
    if tags and file_format not in _GMSH and not cells_kept:
        out.append(f"gmsh element tags ({', '.join(t[5:] for t in tags)}): lost")
    dim_tags = model.point_data.get("gmsh:dim_tags")
    if dim_tags is not None and file_format == "gmsh" \
            and len(np.unique(np.asarray(dim_tags), axis=0)) > 1:
        out.append("node entities (gmsh:dim_tags): every node is written in one entity block, "
                   "in the new order, so that its place in the file is its number")
    points_kept = FORMATS[file_format].holds.point_fields == YES
    if dim_tags is not None and (file_format == "gmsh22" or not points_kept):
        out.append("node entities (gmsh:dim_tags): lost")
    if BOUNDING in model.field_data and file_format != "gmsh":
        out.append("gmsh bounding entities: lost")
    return out


def _listed(names: list[str]) -> str:
    """Every name, quoted: the report names each thing lost."""
    return ", ".join(repr(n) for n in names)


def kept_set_names(model: Model, file_format: str, lost: tuple[str, ...] | list[str] = ()
                   ) -> tuple[list[str], list[str]]:
    """(node sets, element sets) a file of ``file_format`` is to hold when read back.

    Sets the format keeps, or writes as fields or physical groups, less
    those a loss sentence names.
    """
    holds = FORMATS[file_format].holds
    said = " ".join(lost)

    def kept(names: list[str], how: str) -> list[str]:
        if how == NO or how.startswith("lost"):
            return []
        return [n for n in names if repr(n) not in said]

    return (kept(list(model.point_sets), holds.node_sets),
            kept(own(model.cell_sets), holds.cell_sets))


def prepared_for(model: Model, file_format: str) -> Model:
    """The model adapted for writing in ``file_format`` (a copy; the input is not changed).

    VTK files hold no sets: each set becomes a 0/1 field, which
    :func:`sets_from_fields` turns back into a set on reading.  Other
    formats take the model as it is.
    """
    if file_format in SETS_AS_FIELDS:
        return _sets_as_fields(model)
    if file_format in ONE_BLOCK_PER_TYPE:
        return one_block_per_type(model)
    return model


#: Formats that hold one cell block per cell type (MED: one section per type).
ONE_BLOCK_PER_TYPE = frozenset({"med"})


def one_block_per_type(model: Model) -> Model:
    """The model with the cell blocks of each type joined (in order of first appearance).

    Cells keep their order within their type; cell fields and cell sets follow them.
    """
    types = list(dict.fromkeys(b.type for b in model.cells))
    if len(types) == len(model.cells) or any(b.data.dtype == object for b in model.cells):
        return model
    groups = {t: [k for k, b in enumerate(model.cells) if b.type == t] for t in types}
    offsets = {}
    for t, ks in groups.items():
        start = 0
        for k in ks:
            offsets[k] = start
            start += len(model.cells[k])
    cells = [CellBlock(t, np.concatenate([model.cells[k].data for k in ks]))
             for t, ks in groups.items()]
    cell_data = {name: [np.concatenate([np.asarray(arrays[k]) for k in ks])
                        for ks in groups.values()]
                 for name, arrays in model.cell_data.items()}
    cell_sets = {name: [np.concatenate([np.asarray(arrays[k], dtype=np.int64) + offsets[k]
                                        for k in ks if k < len(arrays)] or
                                       [np.zeros(0, np.int64)])
                        for ks in groups.values()]
                 for name, arrays in model.cell_sets.items() if isinstance(arrays, list)}
    return dataclasses.replace(model, cells=cells, cell_data=cell_data, cell_sets=cell_sets)


def _tables(model: Model) -> list[tuple[str, str]]:
    """Fields with more than one dimension per node or element (per-element-node tables)."""
    out = [("nodal field", k) for k, v in model.point_data.items() if np.ndim(v) > 2]
    out += [("element field", k) for k, arrays in model.cell_data.items()
            if any(np.ndim(a) > 2 for a in arrays)]
    return out


def _sets_as_fields(model: Model) -> Model:
    tables = {name for _, name in _tables(model)}
    point_data = {k: v for k, v in model.point_data.items() if k not in tables}
    for name, idx in model.point_sets.items():
        flag = np.zeros(model.n_nodes, dtype=np.uint8)
        flag[np.asarray(idx, dtype=np.int64)] = 1
        point_data[NODE_SET_FIELD + name] = flag
    cell_data = {k: v for k, v in model.cell_data.items() if k not in tables}
    for name in own(model.cell_sets):
        flags = [np.zeros(len(b), dtype=np.uint8) for b in model.cells]
        for flag, idx in zip(flags, model.cell_sets[name]):
            flag[np.asarray(idx, dtype=np.int64)] = 1
        cell_data[CELL_SET_FIELD + name] = flags
    return dataclasses.replace(model, point_data=point_data, cell_data=cell_data,
                               point_sets={}, cell_sets={}, field_data=_arrays_only(model))


def _arrays_only(model: Model) -> dict:
    """The metadata entries that are plain arrays (a VTK file's field data holds no others)."""
    out = {}
    for name, value in model.field_data.items():
        if isinstance(value, dict):
            continue
        try:
            arr = np.asarray(value)
        except ValueError:
            continue
        if arr.dtype != object:
            out[name] = arr
    return out


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
