"""The adapter between meshio and bandwise's :class:`~bandwise.core.model.Model`.

Reading guards against meshio's traps: meshio prints and calls
``sys.exit`` when no reader succeeds, so its output is captured and
``SystemExit`` caught; readers raise many exception types on malformed
files, each turned into one :class:`MeshReadError` line; damaged headers
that would keep a reader busy for minutes or allocate gigabytes are refused
first.  A model read is then put in bandwise's terms: gmsh nodes in the
order of their tags, gmsh bounding entities kept as metadata, FLAC3D groups
under their own names, cells in bandwise's node order
(:mod:`bandwise.formats.conventions`), sets written as 0/1 fields turned
back into sets.  Writing builds a fresh ``meshio.Mesh`` from copies (the
VTU/VTK writers empty the point sets of the mesh they are given) and calls
meshio's public ``write``.

``.vtu`` files are first offered to the streaming reader :mod:`bandwise.formats.vtu`:
meshio's VTU reader holds the whole file, a document tree and whole-array
base64 and zlib copies at once (on a one-million-node tetrahedral box, 54 MiB
of VTU, its peak memory growth was about 4 x the mesh's arrays and bandwise's
read + graph + metrics 3.8 x; with the streaming reader bandwise's is about
2 x, and its read takes about half meshio's time; figures noisy).  Whatever
the streaming reader does not handle is read by meshio as before.

Only this module, :mod:`bandwise.formats.gmsh_writer` and
:mod:`bandwise.formats.mesh_io` import meshio, and only through its public
API; its private names are in :mod:`bandwise.formats.compat`.
"""

from __future__ import annotations

import contextlib
import io
import logging
import mmap
import os
import re
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from bandwise.core.elements import node_count
from bandwise.core.errors import MeshReadError, one_line
from bandwise.core.model import CellBlock, Model

from . import compat, conventions, headers
from .gmsh_writer import BOUNDING


def _meshio():
    import meshio  # imported lazily: meshio's import costs about 0.3 s

    return meshio


def failure_text(exc: BaseException, reading: bool = True) -> str:
    """A reader's or writer's failure in one line, with the exception's name when it helps."""
    text, name = one_line(exc), type(exc).__name__
    if isinstance(exc, SystemExit):
        return "the file is malformed or not of this format"
    if not text:
        return f"the file is malformed ({name})" if reading else f"no reason given ({name})"
    return f"{text} ({name})" if name != "ReadError" else text


#: Most tags a gmsh data section header may announce (gmsh writes 1 to 4 of each kind).
_GMSH_MAX_TAGS = 64
_GMSH_DATA = re.compile(rb"^\$(NodeData|ElementData|ElementNodeData)\r?\n", re.MULTILINE)


def _check_gmsh_data_headers(path: Path) -> None:
    """Refuse a gmsh data section whose header announces absurd tag counts.

    meshio reads such a header line by line, as many times as announced: a
    damaged count (a billion) would keep it busy for many minutes.
    """
    try:
        with open(path, "rb") as fh, mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as data:
            for m in _GMSH_DATA.finditer(data):
                _check_data_header(data, m.end(), path, m.group(1).decode())
    except (OSError, ValueError):
        return  # unreadable here: meshio says why


def _check_data_header(data: Any, pos: int, path: Path, section: str) -> None:
    for kind in ("string", "real", "integer"):
        end = data.find(b"\n", pos)
        line = bytes(data[pos:end if end >= 0 else len(data)]).strip()
        if not line.isdigit() or int(line) > _GMSH_MAX_TAGS:
            raise MeshReadError(f"{path}: malformed ${section} header: {kind} tag count "
                                f"{line[:20].decode('ascii', 'replace')!r}")
        pos = end + 1
        values = []
        for _ in range(int(line)):
            end = data.find(b"\n", pos)
            if end < 0:
                raise MeshReadError(f"{path}: ${section} header cut short")
            values.append(bytes(data[pos:end]).strip())
            pos = end + 1
        # integer tags: time step, components, number of items (each item takes bytes)
        if kind == "integer" and len(values) >= 3:
            items = values[2]
            if not items.isdigit() or int(items) * 4 > len(data):
                raise MeshReadError(f"{path}: malformed ${section} header: "
                                    f"{items[:20].decode('ascii', 'replace')!r} items announced "
                                    f"in a file of {len(data):,} bytes")


_GENERATE = re.compile(rb"^\*[^\n]*generate[^\n]*\n(?:\*\*[^\n]*\n)*\s*(\d+)\s*,\s*(\d+)"
                       rb"(?:\s*,\s*(\d+))?", re.IGNORECASE | re.MULTILINE)


def _check_generate_ranges(path: Path) -> None:
    """Refuse a keyword deck whose GENERATE range holds more ids than the file could use.

    meshio builds the whole range: a damaged bound (a billion) costs gigabytes.
    """
    try:
        with open(path, "rb") as fh, mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as data:
            for m in _GENERATE.finditer(data):
                first, last = int(m.group(1)), int(m.group(2))
                step = max(int(m.group(3) or 1), 1)
                if (last - first) // step > max(100 * len(data), 10**7):
                    raise MeshReadError(f"{path}: a GENERATE range {first}..{last} holds more "
                                        "ids than the file has bytes: the deck is damaged")
    except (OSError, ValueError):
        return


def _check_enddata(path: Path) -> None:
    """Refuse a bulk-data deck without its closing ENDDATA card (meshio would wait forever)."""
    try:
        with open(path, "rb") as fh, mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as data:
            found = re.search(rb"^ENDDATA", data, re.MULTILINE | re.IGNORECASE) is not None
    except (OSError, ValueError):
        return
    if not found:
        raise MeshReadError(f"{path}: no ENDDATA card: the bulk-data deck is cut short")


def read_file(path: Path, fmt: Any) -> Model:
    """Read a mesh file of registry format ``fmt`` (see :func:`bandwise.formats.read_model`).

    Refuses from the header a file too big for the machine or announcing
    more than it holds, then reads (the streaming reader for VTU, else
    meshio) and validates.
    """
    counts = fmt.counts(path) if fmt.counts is not None else None
    headers.check_counts_fit(path, counts, streamed=fmt.name == "vtu")
    if fmt.name in ("gmsh", "gmsh22"):
        _check_gmsh_data_headers(path)
    if fmt.name == "nastran":
        _check_enddata(path)
    if fmt.name == "abaqus":
        _check_generate_ranges(path)
    from bandwise.core.memory import check_fits, estimate_bytes

    if fmt.name == "vtu":  # streaming fast path (see the module docstring); meshio if not handled
        from .vtu import NotHandled, read_vtu

        try:
            fast = read_vtu(path)
        except NotHandled:
            fast = None
        if fast is not None:
            validate_model(fast)
            check_fits(estimate_bytes(fast.n_nodes, fast.cells_by_type(), streamed=True),
                       what=str(path))
            from .keeps import sets_from_fields

            return sets_from_fields(fast)
    node_tags: dict[str, np.ndarray] = {}
    with compat.gmsh_node_tags(_check_node_tags, node_tags):
        mesh = _meshio_read(path, fmt.meshio_name or fmt.name)
    model = model_from_meshio(mesh, source=str(path), file_format=fmt.name)
    validate_model(model)
    check_fits(estimate_bytes(model.n_nodes, model.cells_by_type()), what=str(path))
    model = _in_bandwise_terms(model, fmt.name)
    return _in_tag_order(model, node_tags.get("tags"))


def read_back(path: Path, fmt: Any) -> Model:
    """Read a file just written, as a downstream user's meshio would: nodes in file order."""
    mesh = _meshio_read(path, fmt.meshio_name or fmt.name)
    model = model_from_meshio(mesh, source=str(path), file_format=fmt.name)
    validate_model(model)
    return _in_bandwise_terms(model, fmt.name)


def _meshio_read(path: Path, name: str) -> Any:
    """``meshio.read``, its printing captured and every failure turned into one line."""
    meshio = _meshio()
    captured = io.StringIO()
    try:
        with contextlib.redirect_stdout(captured), contextlib.redirect_stderr(captured), \
                warnings.catch_warnings():
            warnings.simplefilter("ignore")
            logging.disable(logging.CRITICAL)
            try:
                return meshio.read(path, file_format=name)
            finally:
                logging.disable(logging.NOTSET)
    except KeyboardInterrupt:
        raise
    except SystemExit as exc:
        raise MeshReadError(f"{path}: cannot read as {name}: {failure_text(exc)}") from None
    except MemoryError:
        raise MeshReadError(f"{path}: not enough memory to read the file") from None
    except Exception as exc:  # noqa: BLE001  meshio readers raise any type on malformed files
        raise MeshReadError(f"{path}: cannot read as {name}: {failure_text(exc)}") from None


def _in_bandwise_terms(model: Model, fmt: str) -> Model:
    """A model as meshio read it, put in bandwise's terms (see the module docstring)."""
    from .keeps import sets_from_fields

    if fmt in ("gmsh", "gmsh22"):
        _bounding_entities(model)
    if fmt == "flac3d":
        _flac3d_groups(model)
    conventions.in_model_order(fmt, model)
    return sets_from_fields(model)


def _bounding_entities(model: Model) -> None:
    """Move meshio's ``gmsh:bounding_entities`` (entity tags, not cells) into the metadata."""
    arrays = model.cell_sets.pop(BOUNDING, None)
    geometrical = model.cell_data.get("gmsh:geometrical")
    if arrays is None or geometrical is None:
        return
    found: dict[tuple[int, int], tuple[int, ...]] = {}
    for b, tags, bounds in zip(model.cells, geometrical, arrays):
        if len(tags) and bounds is not None and len(bounds):
            found[(b.dimension or 0, int(tags[0]))] = tuple(int(t) for t in np.ravel(bounds))
    if found:
        model.field_data[BOUNDING] = found


_FLAC3D_GROUP = re.compile(r'^(zone|face):(.*):"?([^":]*)"?$')


def _flac3d_groups(model: Model) -> None:
    """FLAC3D zone and face groups under their own names, members per cell block.

    meshio names a group ``zone:NAME:SLOT`` and gives its members as indices
    into all cells (:data:`bandwise.formats.compat.FLAC3D_SET_INDICES_GLOBAL`).
    A group in the default slot keeps its name; another slot is added as
    ``NAME:SLOT``; a face group whose name a zone group has is ``face:NAME``.
    """
    starts = np.cumsum([0] + [len(b) for b in model.cells])
    renamed: dict[str, list[np.ndarray]] = {}
    for key in list(model.cell_sets):
        m = _FLAC3D_GROUP.match(key)
        if m is None:
            continue
        arrays = model.cell_sets.pop(key)
        entity, name, slot = m.groups()
        if slot not in ("Default", "1", ""):
            name = f"{name}:{slot}"
        if entity == "face" and name in renamed:
            name = f"face:{name}"
        local = []
        for k, idx in enumerate(arrays[:len(model.cells)]):
            idx = np.asarray(idx if idx is not None else [], dtype=np.int64)
            if compat.FLAC3D_SET_INDICES_GLOBAL:
                idx = idx - starts[k]
            local.append(idx[(idx >= 0) & (idx < len(model.cells[k]))])
        renamed[name] = local
    model.cell_sets.update(renamed)


#: Largest node tag accepted, as a multiple of the node count (sparse tags are allowed).
_TAG_SPREAD = 100


def _check_node_tags(tags: np.ndarray) -> None:
    """Refuse 1-based node tags below 1 or far beyond the node count."""
    if tags.size == 0:
        return
    top, low = float(tags.max()), float(tags.min())
    if low < 1 or top > max(_TAG_SPREAD * tags.size, 10**7):
        bad = low if low < 1 else top
        raise ValueError(f"node tag {bad:.0f} is out of range for a file of {tags.size} nodes")


def _in_tag_order(model: Model, tags: np.ndarray | None) -> Model:
    """The model with its nodes in node-tag order (the file's numbering), if it is not already."""
    if tags is None or tags.shape != (model.n_nodes,) or np.all(np.diff(tags) > 0):
        return model
    if np.unique(tags).size != tags.size:
        return model
    ordered = model.renumbered(np.argsort(tags, kind="stable"))
    # the reader gives nodal fields in tag order already; only its entity tags follow the file
    ordered.point_data = {k: (v if k == "gmsh:dim_tags" else model.point_data[k])
                          for k, v in ordered.point_data.items()}
    return ordered


def model_from_meshio(mesh: Any, source: str = "", file_format: str = "") -> Model:
    """Turn a ``meshio.Mesh`` into a :class:`Model` (arrays copied, indices int64)."""
    points = np.asarray(mesh.points, dtype=np.float64)  # meshio's arrays are ours now: no copy
    if points.ndim != 2:
        raise MeshReadError(f"{source}: node coordinates are not a table (shape {points.shape})")
    blocks = []
    for block in mesh.cells:
        data = block.data
        if isinstance(data, np.ndarray) and data.ndim == 2:
            arr = np.asarray(data)
            if not np.issubdtype(arr.dtype, np.integer) and (
                    not np.all(np.isfinite(arr)) or np.any(arr != np.round(arr))):
                raise MeshReadError(f"{source}: {block.type} connectivity is not integer")
            blocks.append(CellBlock(block.type, arr.astype(np.int64, copy=False)))
        else:  # ragged (polyhedron ...): kept to be written back, not analysed
            ragged = np.empty(len(data), dtype=object)
            ragged[:] = [np.asarray(c, dtype=np.int64) for c in data]
            blocks.append(CellBlock(block.type, ragged))
    cell_sets = {
        name: [np.asarray(a if a is not None else [], dtype=np.int64).ravel() for a in arrays]
        for name, arrays in (mesh.cell_sets or {}).items()
    }
    return Model(
        points=points,
        cells=blocks,
        point_data={k: np.array(v) for k, v in (mesh.point_data or {}).items()},
        cell_data={k: [np.array(a) for a in v] for k, v in (mesh.cell_data or {}).items()},
        point_sets={k: np.asarray(v, dtype=np.int64).ravel()
                    for k, v in (mesh.point_sets or {}).items()},
        cell_sets=cell_sets,
        field_data=dict(mesh.field_data or {}),
        periodic=getattr(mesh, "gmsh_periodic", None),
        info=getattr(mesh, "info", None),
        source=source,
        file_format=file_format,
    )


#: Largest coordinate magnitude accepted: far beyond any model size, while products of
#: coordinates stay finite in double precision (common practice).
MAX_COORDINATE = 1e50


def validate_model(model: Model) -> None:
    """Raise :class:`MeshReadError` for a mesh no analysis can start from."""
    src = model.source or "mesh"
    n = model.n_nodes
    if n == 0:
        raise MeshReadError(f"{src}: the mesh has no nodes")
    if model.points.shape[1] not in (1, 2, 3):
        raise MeshReadError(f"{src}: nodes have {model.points.shape[1]} coordinates")
    bad = ~np.isfinite(model.points).all(axis=1)
    if bad.any():
        first = int(np.flatnonzero(bad)[0]) + 1
        raise MeshReadError(
            f"{src}: {int(bad.sum())} node(s) have non-finite coordinates (first: node at position {first})"
        )
    huge = np.abs(model.points).max(axis=1) > MAX_COORDINATE
    if huge.any():
        first = int(np.flatnonzero(huge)[0]) + 1
        raise MeshReadError(f"{src}: {int(huge.sum())} node(s) have coordinates beyond "
                            f"{MAX_COORDINATE:g} (first: node at position {first}): the file is "
                            "damaged")
    if model.n_cells == 0:
        raise MeshReadError(f"{src}: the mesh has {n} nodes but no elements")
    for k, block in enumerate(model.cells):
        if len(block) == 0:
            continue
        data = block.data
        expected = node_count(block.type)
        if data.dtype != object and expected is not None and data.shape[1] != expected:
            raise MeshReadError(f"{src}: cell block {k + 1} ({block.type}) has {data.shape[1]} "
                                f"nodes per cell where a {block.type} has {expected}: the file "
                                "is cut short or damaged")
        if data.dtype == object:
            flat = np.concatenate(list(data)) if len(data) else np.zeros(0, np.int64)
        else:
            flat = data
        if flat.size and (flat.min() < 0 or flat.max() >= n):
            wrong = int(flat.max()) if flat.max() >= n else int(flat.min())
            raise MeshReadError(
                f"{src}: cell block {k + 1} ({block.type}) refers to node index {wrong}, "
                f"but the mesh has {n} nodes"
            )
    for name, idx in model.point_sets.items():
        if idx.size and (idx.min() < 0 or idx.max() >= n):
            raise MeshReadError(f"{src}: node set {name!r} refers to a node that does not exist")
    for name, values in model.point_data.items():
        if np.shape(values)[:1] != (n,):
            raise MeshReadError(f"{src}: nodal field {name!r} has {np.shape(values)[:1] or 0} "
                                f"rows for {n} nodes")
    for name, arrays in model.cell_data.items():
        sizes = [len(a) for a in arrays] if len(arrays) == len(model.cells) else None
        if sizes != [len(b) for b in model.cells]:
            raise MeshReadError(f"{src}: element field {name!r} does not match the cell blocks")




def to_meshio(model: Model, fmt: str | None = None) -> Any:
    """A fresh ``meshio.Mesh`` built from copies of the model's arrays.

    With ``fmt`` (a registry name) the cells are put in that format's node
    order (:mod:`bandwise.formats.conventions`).  Metadata that is not a
    meshio field (bandwise's own ``gmsh:bounding_entities``) stays out.
    """
    meshio = _meshio()
    cells = []
    for b in model.cells:
        if b.data.dtype == object:
            cells.append(meshio.CellBlock(b.type, [np.array(c) for c in b.data]))
        else:
            data = conventions.file_order(fmt, b.data, b.type) if fmt else b.data
            cells.append(meshio.CellBlock(b.type, np.array(data)))
    return meshio.Mesh(
        np.array(model.points),
        cells,
        point_data={k: np.array(v) for k, v in model.point_data.items()},
        cell_data={k: [np.array(a) for a in v] for k, v in model.cell_data.items()},
        field_data={k: v for k, v in model.field_data.items() if not isinstance(v, dict)},
        point_sets={k: np.array(v) for k, v in model.point_sets.items()},
        cell_sets={k: [np.array(a) for a in v] for k, v in model.cell_sets.items()},
        gmsh_periodic=model.periodic,
        info=model.info,
    )


def write_mesh(path: Path, mesh: Any, name: str, options: dict[str, Any]) -> None:
    """``meshio.write`` of a mesh to a path in the output's temporary folder."""
    _meshio().write(path, mesh, file_format=name, **options)


def read_model(path: str | os.PathLike[str], file_format: str | None = None) -> Model:
    """:func:`bandwise.formats.read_model` (kept here for existing callers)."""
    from .mesh_io import read_model as read

    return read(path, file_format)


def write_model(model: Model, path: str | os.PathLike[str], file_format: str | None = None) -> str:
    """:func:`bandwise.formats.write_model`, returning the format name (for existing callers)."""
    from .mesh_io import write_model as write

    return write(model, path, file_format).format
