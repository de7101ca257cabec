"""The one adapter between meshio and bandwise's :class:`~bandwise.core.model.Model`.

Reading guards against meshio's traps: ``.msh`` is read as gmsh unless told
otherwise (meshio would try the ANSYS reader first and print its failure);
meshio prints and calls ``sys.exit`` when no reader succeeds, so its stdout is
captured and ``SystemExit`` caught; readers raise many exception types on
malformed files, each turned into one :class:`MeshReadError` line.  Writing
builds a fresh ``meshio.Mesh`` from copies (the VTU/VTK writers empty the
point sets of the mesh they are given) into a temporary folder, then renames.

``.vtu`` files are first offered to the streaming reader :mod:`bandwise.formats.vtu`:
meshio's VTU reader holds the whole file, a document tree and whole-array
base64 and zlib copies at once (on a one-million-node tetrahedral box, 54 MiB
of VTU, its peak memory growth was about 4 x the mesh's arrays and bandwise's
read + graph + metrics 3.8 x; with the streaming reader bandwise's is about
2 x, and its read takes about half meshio's time; figures noisy).  Whatever
the streaming reader does not handle is read by meshio as before.
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
from bandwise.core.errors import InputError, MeshReadError, MeshWriteError, one_line
from bandwise.core.model import CellBlock, Model

from .atomic import atomic_folder

#: Extensions read by meshio, with bandwise's choice where meshio's is ambiguous.
_COMPOUND = (".vol.gz", ".post.gz", ".dato.gz")


def _meshio():
    import meshio  # imported lazily: meshio's import costs about 0.3 s

    return meshio


def known_formats() -> list[str]:
    """Names of the mesh formats meshio can read (for ``--format``)."""
    from meshio._helpers import reader_map

    return sorted(reader_map)


def writable_formats() -> list[str]:
    """The names of every format this installation can write, sorted."""
    from meshio._helpers import _writer_map  # the names meshio writes

    return sorted(_writer_map)


def detect_format(path: str | os.PathLike[str]) -> str:
    """The meshio format name for a path, from its extension.

    ``.msh`` means gmsh (meshio also lists ANSYS for it); pass ``--format
    ansys`` for a Fluent/ANSYS ``.msh`` file.

    Raises
    ------
    MeshReadError
        If the extension is not one meshio reads.
    """
    from meshio._helpers import extension_to_filetypes

    name = Path(path).name.lower()
    ext = next((c for c in _COMPOUND if name.endswith(c)), Path(name).suffix)
    if ext == ".msh":
        return "gmsh"
    types = extension_to_filetypes.get(ext)
    if not types:
        shown = ext or "(none)"
        raise MeshReadError(
            f"{path}: unknown file extension {shown}; name the format with --format "
            f"(one of: {', '.join(known_formats())})"
        )
    return types[0]


def _one_line(exc: BaseException) -> str:
    """A reader's or writer's failure in one line, with the exception's name when it helps."""
    text, name = one_line(exc), type(exc).__name__
    if isinstance(exc, SystemExit):
        return "the file is malformed or not of this format"
    if not text:
        return f"the file is malformed ({name})"
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


def _gmsh_version(path: Path) -> str | None:
    """'2.2' or '4.1' read from a gmsh file header, else None."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(64).split()
    except OSError:
        return None
    if len(head) >= 2 and head[0] == b"$MeshFormat":
        return head[1].decode("ascii", "replace")
    return None


def read_model(path: str | os.PathLike[str], file_format: str | None = None) -> Model:
    """Read a mesh file into a :class:`Model`.

    Parameters
    ----------
    path
        Any file meshio reads.  The file is opened read-only.
    file_format
        A meshio format name; overrides detection from the extension.

    Raises
    ------
    MeshReadError
        Missing or unreadable file, unknown extension, malformed content, an
        empty mesh, cells that refer to missing nodes, non-finite coordinates.
    """
    path = Path(path)
    if not path.exists():
        raise MeshReadError(f"{path}: no such file")
    if path.is_dir():
        raise MeshReadError(f"{path}: is a folder, not a mesh file")
    if not os.access(path, os.R_OK):
        raise MeshReadError(f"{path}: permission denied")
    if file_format is not None and file_format not in known_formats():
        raise InputError(f"unknown format {file_format!r}; one of: {', '.join(known_formats())}")
    fmt = file_format or detect_format(path)
    if path.stat().st_size == 0:
        raise MeshReadError(f"{path}: the file is empty")
    from bandwise.core.memory import (
        check_file_fits,  # refuse from the header a mesh too big to read
    )

    check_file_fits(path)
    if fmt == "gmsh":
        _check_gmsh_data_headers(path)
    if fmt == "nastran":
        _check_enddata(path)
    if fmt == "abaqus":
        _check_generate_ranges(path)
    if fmt == "vtu":  # streaming fast path (see the module docstring); meshio if not handled
        from .vtu import NotHandled, read_vtu

        try:
            fast = read_vtu(path)
        except NotHandled:
            fast = None
        if fast is not None:
            validate_model(fast)
            from bandwise.core.memory import check_fits, estimate_bytes

            check_fits(estimate_bytes(fast.n_nodes, fast.cells_by_type(), streamed=True),
                       what=str(path))
            from .keeps import sets_from_fields

            return sets_from_fields(fast)
    meshio = _meshio()
    captured = io.StringIO()
    node_tags: dict[str, np.ndarray] = {}
    try:
        with contextlib.redirect_stdout(captured), contextlib.redirect_stderr(captured), \
                warnings.catch_warnings():
            warnings.simplefilter("ignore")
            logging.disable(logging.CRITICAL)
            try:
                with _gmsh41_node_tags(node_tags):
                    mesh = meshio.read(path, file_format=fmt)
            finally:
                logging.disable(logging.NOTSET)
    except (SystemExit, KeyboardInterrupt) as exc:
        if isinstance(exc, KeyboardInterrupt):
            raise
        raise MeshReadError(f"{path}: cannot read as {fmt}: {_one_line(exc)}") from None
    except MemoryError:
        raise MeshReadError(f"{path}: not enough memory to read the file") from None
    except Exception as exc:  # noqa: BLE001  meshio readers raise any type on malformed files
        raise MeshReadError(f"{path}: cannot read as {fmt}: {_one_line(exc)}") from None
    model = model_from_meshio(mesh, source=str(path), file_format=fmt)
    if fmt == "gmsh" and _gmsh_version(path) == "2.2":
        model.file_format = "gmsh22"
    validate_model(model)
    from bandwise.core.memory import check_fits, estimate_bytes  # before any graph is built

    check_fits(estimate_bytes(model.n_nodes, model.cells_by_type()), what=str(path))
    from .keeps import sets_from_fields  # sets written as 0/1 fields where a format has none

    return sets_from_fields(_in_tag_order(model, node_tags.get("tags")))


#: Largest node tag accepted, as a multiple of the node count (sparse tags are allowed).
_TAG_SPREAD = 100


@contextlib.contextmanager
def _gmsh41_node_tags(store: dict[str, np.ndarray]):
    """Keep the node tags meshio's gmsh 4.1 reader reads and then drops; check both readers' tags.

    That reader returns the nodes in file order, grouped by geometrical
    entity, while a file's node numbering is its node tags (meshio's own
    writer gives tag = index + 1 but writes the nodes entity by entity).
    Both gmsh readers next allocate an array as long as the largest tag: a
    damaged tag (a billion) is refused here, before that.
    """
    try:
        from meshio.gmsh import _gmsh22, _gmsh41
        originals = (_gmsh41._read_nodes, _gmsh22._read_nodes)
    except (ImportError, AttributeError):  # another meshio layout: file order is kept
        yield
        return

    def reading41(*args: Any, **kwargs: Any) -> Any:
        points, tags, dim_tags = originals[0](*args, **kwargs)
        _check_node_tags(np.asarray(tags) + 1)
        store["tags"] = np.array(tags)
        return points, tags, dim_tags

    def reading22(*args: Any, **kwargs: Any) -> Any:
        points, tags = originals[1](*args, **kwargs)
        _check_node_tags(np.asarray(tags))
        return points, tags

    _gmsh41._read_nodes, _gmsh22._read_nodes = reading41, reading22
    try:
        yield
    finally:
        _gmsh41._read_nodes, _gmsh22._read_nodes = originals


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


def to_meshio(model: Model) -> Any:
    """A fresh ``meshio.Mesh`` built from copies of the model's arrays."""
    meshio = _meshio()
    cells = []
    for b in model.cells:
        if b.data.dtype == object:
            cells.append(meshio.CellBlock(b.type, [np.array(c) for c in b.data]))
        else:
            cells.append(meshio.CellBlock(b.type, np.array(b.data)))
    return meshio.Mesh(
        np.array(model.points),
        cells,
        point_data={k: np.array(v) for k, v in model.point_data.items()},
        cell_data={k: [np.array(a) for a in v] for k, v in model.cell_data.items()},
        field_data=dict(model.field_data),
        point_sets={k: np.array(v) for k, v in model.point_sets.items()},
        cell_sets={k: [np.array(a) for a in v] for k, v in model.cell_sets.items()},
        gmsh_periodic=model.periodic,
        info=model.info,
    )


def gmsh_dim_tags(model: Model) -> np.ndarray:
    """Entity (dimension, tag) of every node, which meshio's gmsh 4.1 writer needs.

    As gmsh classifies nodes, each node is given to the lowest-dimensional
    cell containing it, with that cell's ``gmsh:geometrical`` tag (1 when the
    model has none), so that every entity an element block names exists.
    """
    dim_tags = np.zeros((model.n_nodes, 2), dtype=np.int64)
    dim_tags[:, 1] = 1
    geometrical = model.cell_data.get("gmsh:geometrical")
    for k, block in sorted(enumerate(model.cells), key=lambda kb: -(kb[1].dimension or 0)):
        if block.data.dtype == object or not len(block):
            continue
        dim = block.dimension or 0
        tags = geometrical[k] if geometrical is not None else np.ones(len(block), np.int64)
        nodes = block.data.ravel()
        dim_tags[nodes, 0] = dim
        dim_tags[nodes, 1] = np.repeat(np.asarray(tags, dtype=np.int64), block.data.shape[1])
    return dim_tags


def write_model(model: Model, path: str | os.PathLike[str], file_format: str | None = None) -> str:
    """Write a model atomically; returns the meshio format name used.

    The format is ``file_format`` if given, else the one the extension
    implies; a gmsh 2.2 source written to ``.msh`` stays gmsh 2.2.

    Raises
    ------
    MeshWriteError
        The folder is missing or not writable, or the format cannot hold the mesh.
    """
    path = Path(path)
    if file_format is None:
        try:
            file_format = detect_format(path)
        except MeshReadError as exc:
            raise MeshWriteError(str(exc)) from None
        if file_format == "gmsh" and model.file_format == "gmsh22":
            file_format = "gmsh22"
    from .keeps import prepared_for  # gmsh needs element tags: built from the cell sets

    model = prepared_for(model, file_format)
    mesh = to_meshio(model)
    if file_format == "gmsh" and "gmsh:dim_tags" not in mesh.point_data \
            and len({b.type for b in model.cells}) > 1:
        mesh.point_data["gmsh:dim_tags"] = gmsh_dim_tags(model)
    meshio = _meshio()
    with atomic_folder(path) as tmp:
        try:
            with contextlib.redirect_stdout(io.StringIO()), \
                    contextlib.redirect_stderr(io.StringIO()), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                meshio.write(tmp / path.name, mesh, file_format=file_format)
        except MeshWriteError:
            raise
        except Exception as exc:  # noqa: BLE001  meshio writers raise any type
            raise MeshWriteError(f"{path}: cannot write as {file_format}: {_one_line(exc)}") from None
    return file_format
