"""gmsh files written so that a node's place in the file is its number.

gmsh 4.1 files list their nodes in entity blocks.  meshio's writer makes
one block per geometric entity, so a reader that takes nodes by their place
in the file (meshio's, and every tool built on it) sees them grouped by
entity, not in the order of their tags: a renumbering is undone for those
readers.  bandwise writes every node in one block, in the new order, with
tags 1..n, so that place, tag and node map agree.  The elements keep their
entities: each run of cells with the same geometric tag and physical tag
becomes an element block of its own entity, and the ``$Entities`` section
lists every entity an element block names (with its physical tags and
bounding entities), plus the one the nodes are given to.

Layout of the sections: C. Geuzaine and J.-F. Remacle, "Gmsh reference
manual", section "MSH file format" (version 4.1: ``$Entities``, ``$Nodes``,
``$Elements``; version 2.2: ``$NodeData`` and ``$ElementData``).  meshio's
own section writers are reused for the physical names, the elements and
the periodic links (:mod:`bandwise.formats.compat`).  The data sections are
written here: meshio's write numpy scalars with ``repr``, which numpy 2
turns into ``np.float64(...)`` that no reader parses.

Element tags, physical groups and what gmsh cannot hold
--------------------------------------------------------
gmsh gives physical groups to whole entities (4.1) or one physical tag to
each element (2.2).  :func:`gmsh_layout` decides the tags; what it cannot
carry (an element in two sets, a set spanning two dimensions) is listed by
:func:`set_losses` before writing.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any, BinaryIO

import numpy as np

from bandwise.core.model import Model, as_xyz

from . import compat

GMSH_PHYSICAL, GMSH_GEOMETRICAL = "gmsh:physical", "gmsh:geometrical"
#: Where bandwise keeps the bounding entities of a gmsh 4.1 file: field data holding
#: ``{(dim, entity tag): bounding entity tags}``.
BOUNDING = "gmsh:bounding_entities"
#: Components a gmsh data section may have (gmsh reference manual, $NodeData).
DATA_COMPONENTS = (1, 3, 9)
_C_INT, _C_SIZE_T, _C_DOUBLE = np.dtype("i"), np.dtype("P"), np.dtype("d")


def own(names: Any) -> list[str]:
    """Names that are the user's content, not a reader's bookkeeping (``gmsh:*`` tags)."""
    return [n for n in names if not str(n).startswith("gmsh:")]


def physical_names(model: Model) -> dict[str, tuple[int, int]]:
    """Physical names of the model: name -> (tag, dimension)."""
    out = {}
    for name, value in model.field_data.items():
        if str(name).startswith("gmsh:") or isinstance(value, dict):
            continue
        try:
            arr = np.asarray(value).ravel()
        except ValueError:  # ragged metadata (MED names ...): not a physical name
            continue
        if arr.size == 2 and np.issubdtype(arr.dtype, np.number):
            out[str(name)] = (int(arr[0]), int(arr[1]))
    return out


@dataclass(frozen=True)
class GmshLayout:
    """Element tags for writing a model as gmsh.

    Attributes
    ----------
    physical, geometrical
        Per cell block, the physical and geometrical tag of every cell.
    names
        Physical name -> (tag, dimension), written as ``$PhysicalNames``.
    extra
        (dimension, entity tag) -> further physical tags of the entity (4.1):
        sets that hold every cell of the entity besides its cells' own tag.
    """

    physical: list[np.ndarray]
    geometrical: list[np.ndarray]
    names: dict[str, tuple[int, int]]
    extra: dict[tuple[int, int], list[int]]


def gmsh_layout(model: Model, version: str) -> GmshLayout:
    """The element tags a gmsh file of ``version`` gets for ``model``.

    Existing ``gmsh:physical`` and ``gmsh:geometrical`` tags are kept.  A
    model without them (read from another format) gets one physical group
    per element set (the first set of an element wins) and geometric
    entity 1 of each dimension.  In 4.1, cells of one entity with
    different physical tags are put on entities of their own (new tags
    after the largest of their dimension).
    """
    dims = [b.dimension or 0 for b in model.cells]
    names = physical_names(model)
    if GMSH_PHYSICAL in model.cell_data:
        physical = [np.asarray(a, dtype=np.int64).ravel() for a in model.cell_data[GMSH_PHYSICAL]]
    else:
        physical = [np.zeros(len(b), dtype=np.int64) for b in model.cells]
        used = {t for t, _ in names.values()}
        for name in own(model.cell_sets):
            arrays = model.cell_sets[name]
            if name in names:
                tag = names[name][0]
            else:
                tag = max(used | {0}) + 1
                used.add(tag)
            set_dims = [dims[k] for k, idx in enumerate(arrays[:len(dims)]) if len(idx)]
            if not set_dims:
                continue
            names.setdefault(name, (tag, max(set_dims)))
            for k, idx in enumerate(arrays[:len(physical)]):
                idx = np.asarray(idx, dtype=np.int64)
                free = idx[physical[k][idx] == 0]
                physical[k][free] = tag
    if GMSH_GEOMETRICAL in model.cell_data:
        geometrical = [np.asarray(a, dtype=np.int64).ravel()
                       for a in model.cell_data[GMSH_GEOMETRICAL]]
    else:
        geometrical = [np.ones(len(b), dtype=np.int64) for b in model.cells]
    extra: dict[tuple[int, int], list[int]] = {}
    if version != "2.2":
        geometrical = _split_entities(dims, physical, geometrical)
        extra = _extra_physicals(model, dims, physical, geometrical, names)
    return GmshLayout(physical, geometrical, names, extra)


def _split_entities(dims: list[int], physical: list[np.ndarray],
                    geometrical: list[np.ndarray]) -> list[np.ndarray]:
    """Entity tags such that every entity's cells share one physical tag."""
    seen: dict[tuple[int, int], int] = {}          # (dim, geom) -> its physical tag
    moved: dict[tuple[int, int, int], int] = {}    # (dim, geom, phys) -> new entity tag
    top: dict[int, int] = {}
    for d, g in zip(dims, geometrical):
        if len(g):
            top[d] = max(top.get(d, 0), int(g.max()))
    out = []
    for d, p, g in zip(dims, physical, geometrical):
        g = g.copy()
        if len(g) and (g == g[0]).all() and (p == p[0]).all():   # the usual block: one pair
            pairs = np.array([[g[0], p[0]]], dtype=np.int64)
        else:
            keys = np.unique((g.astype(np.int64) << 32) | (p.astype(np.int64) & 0xFFFFFFFF))
            pairs = np.stack([keys >> 32, (keys & 0xFFFFFFFF).astype(np.int32)], axis=1)
        for geom, phys in pairs.tolist():
            first = seen.setdefault((d, geom), phys)
            if first == phys:
                continue
            key = (d, geom, phys)
            if key not in moved:
                top[d] = top.get(d, 0) + 1
                moved[key] = top[d]
            g[(g == geom) & (p == phys)] = moved[key]
        out.append(g)
    return out


def _extra_physicals(model: Model, dims: list[int], physical: list[np.ndarray],
                     geometrical: list[np.ndarray], names: dict[str, tuple[int, int]]
                     ) -> dict[tuple[int, int], list[int]]:
    """Further physical tags of each entity: named sets holding all of the entity's cells."""
    extra: dict[tuple[int, int], list[int]] = {}
    members: dict[tuple[int, int], list[tuple[int, np.ndarray]]] = {}
    for k, (d, g) in enumerate(zip(dims, geometrical)):
        for geom in np.unique(g).tolist():
            members.setdefault((d, geom), []).append((k, np.flatnonzero(g == geom)))
    for name in own(model.cell_sets):
        if name not in names:
            continue
        tag, dim = names[name]
        flags = [np.zeros(len(b), dtype=bool) for b in model.cells]
        for k, idx in enumerate(model.cell_sets[name][:len(flags)]):
            flags[k][np.asarray(idx, dtype=np.int64)] = True
        for (d, geom), parts in members.items():
            if d != dim:
                continue
            if all(flags[k][rows].all() for k, rows in parts):
                own_tags = {int(physical[k][rows[0]]) for k, rows in parts if len(rows)}
                if tag not in own_tags:
                    extra.setdefault((d, geom), []).append(tag)
    return extra


def set_losses(model: Model, layout: GmshLayout, version: str) -> list[str]:
    """What the model's element sets lose as gmsh physical groups, one sentence per set.

    A set comes back holding the cells whose physical tag (2.2) or whose
    entity's physical tags (4.1) include its group, of the group's
    dimension only: the rule meshio's readers follow.
    """
    out = []
    for name in own(model.cell_sets):
        if name not in layout.names:
            out.append(f"element set {name!r}: holds no element, not written")
            continue
        tag, dim = layout.names[name]
        want = back = stray = 0
        arrays = model.cell_sets[name]
        for k, b in enumerate(model.cells):
            inside = np.zeros(len(b), dtype=bool)
            if k < len(arrays):
                inside[np.asarray(arrays[k], dtype=np.int64)] = True
            has = layout.physical[k] == tag
            if version != "2.2":
                for (d, geom), extra in layout.extra.items():
                    if d == (b.dimension or 0) and tag in extra:
                        has |= layout.geometrical[k] == geom
            has &= (b.dimension or 0) == dim
            want += int(inside.sum())
            back += int((has & inside).sum())
            stray += int((has & ~inside).sum())
        if back != want or stray:
            more = f" and {stray:,} others" if stray else ""
            out.append(f"element set {name!r}: comes back with {back:,} of its {want:,} "
                       f"elements{more} (gmsh gives each element one physical group, or "
                       "groups to whole entities, of one dimension)")
    return out


def _tagged_mesh(model: Model, layout: GmshLayout, version: str) -> Any:
    """A meshio Mesh of the model's cells, split into runs of one (entity, physical) tag."""
    from .meshio_io import to_meshio

    mesh = to_meshio(dataclasses.replace(
        model, point_data={}, cell_data={}, point_sets={}, cell_sets={}, field_data={}))
    import meshio

    cells, phys, geom = [], [], []
    for b, p, g in zip(mesh.cells, layout.physical, layout.geometrical):
        data = b.data
        if version == "2.2" or len(g) == 0:
            cells.append(meshio.CellBlock(b.type, data))
            phys.append(p)
            geom.append(g)
            continue
        change = np.flatnonzero((np.diff(g) != 0) | (np.diff(p) != 0)) + 1
        for s, e in zip(np.concatenate([[0], change]), np.concatenate([change, [len(g)]])):
            cells.append(meshio.CellBlock(b.type, data[s:e]))
            phys.append(p[s:e])
            geom.append(g[s:e])
    mesh.cells = cells
    mesh.cell_data = {GMSH_PHYSICAL: phys, GMSH_GEOMETRICAL: geom}
    return mesh


def _write_entities(fh: BinaryIO, model: Model, mesh: Any, layout: GmshLayout,
                    node_entity: tuple[int, int], binary: bool) -> None:
    """The ``$Entities`` section: every entity an element block names, and the nodes' one."""
    points = as_xyz(np.asarray(model.points, dtype=float))
    entities: dict[tuple[int, int], dict[str, Any]] = {}
    for b, p, g in zip(mesh.cells, mesh.cell_data[GMSH_PHYSICAL], mesh.cell_data[GMSH_GEOMETRICAL]):
        key = (b.dim, int(g[0]))
        ent = entities.setdefault(key, {"phys": [], "boxes": []})
        if int(p[0]) and int(p[0]) not in ent["phys"]:
            ent["phys"].append(int(p[0]))
        used = np.zeros(len(points), dtype=bool)
        used[np.asarray(b.data).ravel()] = True
        ent["boxes"].append((points[used].min(axis=0), points[used].max(axis=0)))
    whole = (points.min(axis=0), points.max(axis=0)) if len(points) else (np.zeros(3),) * 2
    entities.setdefault(node_entity, {"phys": [], "boxes": []})["boxes"].append(whole)
    bounding = model.field_data.get(BOUNDING) or {}
    counts = np.zeros(4, dtype=np.int64)
    for d, _ in entities:
        counts[d] += 1
    fh.write(b"$Entities\n")
    _numbers(fh, counts, _C_SIZE_T, binary, end="\n")
    for (d, tag) in sorted(entities):
        ent = entities[(d, tag)]
        lo = np.min([b[0] for b in ent["boxes"]], axis=0)
        hi = np.max([b[1] for b in ent["boxes"]], axis=0)
        phys = ent["phys"] + layout.extra.get((d, tag), [])
        _numbers(fh, [tag], _C_INT, binary)
        _numbers(fh, lo if d == 0 else np.concatenate([lo, hi]), _C_DOUBLE, binary)
        _numbers(fh, [len(phys)], _C_SIZE_T, binary)
        _numbers(fh, phys, _C_INT, binary)
        if d > 0:
            bounds = [int(t) for t in np.asarray(bounding.get((d, tag), []), dtype=np.int64)]
            _numbers(fh, [len(bounds)], _C_SIZE_T, binary)
            _numbers(fh, bounds, _C_INT, binary)
        if not binary:
            fh.write(b"\n")
    if binary:
        fh.write(b"\n")
    fh.write(b"$EndEntities\n")


def _numbers(fh: BinaryIO, values: Any, dtype: np.dtype, binary: bool, end: str = " ") -> None:
    arr = np.asarray(values, dtype=dtype).ravel()
    if binary:
        arr.tofile(fh)
    elif arr.size:
        fmt = "%.16g" if dtype == _C_DOUBLE else "%d"
        fh.write((" ".join(fmt % v for v in arr.tolist()) + end).encode())


def _write_nodes(fh: BinaryIO, points: np.ndarray, entity: tuple[int, int], binary: bool) -> None:
    """The ``$Nodes`` section: one block, every node in order, tags 1..n."""
    points = as_xyz(points)
    n = len(points)
    tags = np.arange(1, n + 1, dtype=_C_SIZE_T)
    fh.write(b"$Nodes\n")
    if binary:
        np.array([1, n, 1, n], dtype=_C_SIZE_T).tofile(fh)
        np.array([entity[0], entity[1], 0], dtype=_C_INT).tofile(fh)
        np.array([n], dtype=_C_SIZE_T).tofile(fh)
        tags.tofile(fh)
        np.ascontiguousarray(points, dtype=_C_DOUBLE).tofile(fh)
        fh.write(b"\n")
    else:
        fh.write(f"1 {n} 1 {n}\n{entity[0]} {entity[1]} 0 {n}\n".encode())
        np.savetxt(fh, tags, fmt="%d")
        np.savetxt(fh, points, fmt="%.16e", delimiter=" ")
    fh.write(b"$EndNodes\n")


def write_data(fh: BinaryIO, section: str, name: str, data: np.ndarray, binary: bool) -> None:
    """One ``$NodeData`` or ``$ElementData`` section (items tagged 1..n, time 0)."""
    data = np.asarray(data, dtype=np.float64)
    if data.ndim > 1 and data.shape[1] == 1:
        data = data[:, 0]
    width = 1 if data.ndim == 1 else data.shape[1]
    n = data.shape[0]
    fh.write(f'${section}\n1\n"{name}"\n1\n0.0\n3\n0\n{width}\n{n}\n'.encode())
    index = np.arange(1, n + 1)
    if binary:
        dtype = [("index", _C_INT), ("data", _C_DOUBLE, (width,))]
        rows = np.empty(n, dtype=dtype)
        rows["index"] = index
        rows["data"] = data.reshape(n, width)
        rows.tofile(fh)
        fh.write(b"\n")
    else:
        np.savetxt(fh, np.column_stack([index, data.reshape(n, width)]),
                   fmt=["%d"] + ["%.17g"] * width, delimiter=" ")
    fh.write(f"$End{section}\n".encode())


def data_fields(model: Model) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray], list[str]]:
    """(nodal fields, element fields concatenated over blocks, fields gmsh cannot hold)."""
    point, cell, refused = {}, {}, []
    for name in own(model.point_data):
        v = np.asarray(model.point_data[name])
        width = 1 if v.ndim == 1 else int(np.prod(v.shape[1:]))
        if width in DATA_COMPONENTS and np.issubdtype(v.dtype, np.number):
            point[name] = v.reshape(len(v), width) if v.ndim > 1 else v
        else:
            refused.append(f"nodal field {name!r} ({width} components): gmsh holds fields of "
                           "1, 3 or 9 numbers")
    for name in own(model.cell_data):
        arrays = [np.asarray(a) for a in model.cell_data[name]]
        v = np.concatenate([a.reshape(len(a), -1) for a in arrays]) if arrays else np.zeros(0)
        width = v.shape[1] if v.ndim > 1 else 1
        if width in DATA_COMPONENTS and np.issubdtype(v.dtype, np.number):
            cell[name] = v
        else:
            refused.append(f"element field {name!r} ({width} components): gmsh holds fields of "
                           "1, 3 or 9 numbers")
    return point, cell, refused


def write_gmsh(path: Any, model: Model, version: str, binary: bool) -> None:
    """Write ``model`` as a gmsh file of ``version`` (``"4.1"`` or ``"2.2"``).

    Nodes are written in the model's order with tags 1..n.  Cell fields of
    a gmsh 2.2 file with several cell blocks are not written (meshio reads
    them back wrongly); see :data:`bandwise.formats.registry.FORMATS`.
    """
    import meshio

    layout = gmsh_layout(model, version)
    mesh = _tagged_mesh(model, layout, version)
    mesh.field_data = {n: np.array(v) for n, v in layout.names.items()}
    point, cell, _ = data_fields(model)
    if version == "2.2" and len(model.cells) > 1:
        cell = {}
    if model.periodic is not None:
        mesh.gmsh_periodic = model.periodic
    if version == "2.2":
        meshio.write(path, mesh, file_format="gmsh22", binary=binary)
        with open(path, "ab") as fh:
            _data_sections(fh, point, cell, binary)
        return
    writers = compat.gmsh_section_writers()
    dims = [b.dim for b in mesh.cells]
    top = max(range(len(dims)), key=lambda k: (dims[k], -k)) if dims else 0
    node_entity = (dims[top], int(mesh.cell_data[GMSH_GEOMETRICAL][top][0])) if dims else (0, 1)
    with open(path, "wb") as fh:
        fh.write(b"$MeshFormat\n")
        fh.write(f"4.1 {1 if binary else 0} {_C_SIZE_T.itemsize}\n".encode())
        if binary:
            np.array([1], dtype=_C_INT).tofile(fh)
            fh.write(b"\n")
        fh.write(b"$EndMeshFormat\n")
        if mesh.field_data:
            writers["physical_names"](fh, mesh.field_data)
        _write_entities(fh, model, mesh, layout, node_entity, binary)
        _write_nodes(fh, np.asarray(model.points, dtype=float), node_entity, binary)
        writers["elements"](fh, mesh.cells, mesh.cell_data, binary)
        if mesh.gmsh_periodic is not None:
            writers["periodic"](fh, mesh.gmsh_periodic, ".16e", binary)
        _data_sections(fh, point, cell, binary)


def _data_sections(fh: BinaryIO, point: dict[str, np.ndarray], cell: dict[str, np.ndarray],
                   binary: bool) -> None:
    for name, values in point.items():
        write_data(fh, "NodeData", name, values, binary)
    for name, values in cell.items():
        write_data(fh, "ElementData", name, values, binary)
