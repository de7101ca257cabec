"""The one door for mesh files: read a model, plan an output, write it checked and atomically.

>>> from bandwise.formats import read_model, plan_output, write_model
>>> model = read_model("bracket.msh")                       # doctest: +SKIP
>>> model.file_kind.describe()                              # doctest: +SKIP
'gmsh 4.1 binary'
>>> plan = plan_output(model, "bracket-rcm.msh")            # doctest: +SKIP
>>> plan.losses                                             # what the file will not carry
>>> write_model(model.renumbered(perm), "bracket-rcm.msh", plan=plan)   # doctest: +SKIP

Every command reads and writes meshes through these three functions; the
format comes from :mod:`bandwise.formats.registry`.

Reading records the kind of the source file (format, version, encoding,
compression) in ``Model.file_kind``; an output of the same format is then
written as the same kind, as far as the format allows (the plan says where
it does not).  The plan also names, before anything is written, every set,
field, tag and entity the output will not carry, and refuses outputs the
format cannot hold (cell types, node orders bandwise does not know).

Writing goes to the output's temporary folder (:mod:`bandwise.formats.atomic`);
the file is then read back with the reader a downstream user would use
(meshio's public ``read``) and compared with the model: node count and node
positions in file order, cell counts and connectivity per cell type, and
the sets the plan keeps.  Only a file that passes is renamed into place.
"""

from __future__ import annotations

import contextlib
import io
import os
import re
import uuid
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from bandwise.core.errors import MeshReadError, MeshWriteError
from bandwise.core.model import Model

from . import conventions, keeps, registry
from .atomic import atomic_folder
from .registry import FileKind, Format


@dataclass(frozen=True)
class OutputPlan:
    """What writing a model to a file will do, decided before it is written.

    Attributes
    ----------
    path
        The output file.
    format
        Registry name of its format.
    kind
        Version, encoding and compression it is written as.
    losses
        What the model holds that the file will not carry, one sentence each.
    notes
        How the output's kind differs from the source's, one sentence each.
    """

    path: Path
    format: str
    kind: FileKind
    losses: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """The plan as plain data (for JSON)."""
        return {"output": str(self.path), "format": self.format, "kind": self.kind.to_dict(),
                "losses": list(self.losses), "notes": list(self.notes)}


def read_model(path: str | os.PathLike[str], file_format: str | None = None) -> Model:
    """Read a mesh file into a :class:`~bandwise.core.model.Model`.

    Parameters
    ----------
    path
        Any mesh file the registry reads; opened read-only.
    file_format
        A registry format name; overrides detection from the extension.

    Returns
    -------
    Model
        With ``file_format`` (the registry name) and ``file_kind`` (a
        :class:`~bandwise.formats.registry.FileKind`) of the source.

    Raises
    ------
    MeshReadError
        Missing or unreadable file, unknown extension, malformed content, an
        empty mesh, cells that refer to missing nodes, non-finite coordinates.
    InputError
        Unknown format name; a mesh too big for the machine.
    """
    from . import meshio_io

    path = Path(path)
    if not path.exists():
        raise MeshReadError(f"{path}: no such file")
    if path.is_dir():
        raise MeshReadError(f"{path}: is a folder, not a mesh file")
    if not os.access(path, os.R_OK):
        raise MeshReadError(f"{path}: permission denied")
    fmt = registry.detect(path, file_format)
    if path.stat().st_size == 0:
        raise MeshReadError(f"{path}: the file is empty")
    kind = registry.kind_of(path, fmt)
    model = meshio_io.read_file(path, fmt)
    model.file_format, model.file_kind = fmt.name, kind
    return model


def plan_output(model: Model, path: str | os.PathLike[str], file_format: str | None = None,
                like: FileKind | None = None) -> OutputPlan:
    """Decide how ``model`` is written to ``path``, and what the file will not carry.

    Parameters
    ----------
    model
        The mesh about to be written.
    path
        The output file.
    file_format
        A registry format name (``--output-format``); default: from the
        extension (a ``.msh`` output of a gmsh 2.2 source stays 2.2).
    like
        The kind of file to match; default the model's source
        (``model.file_kind``).

    Raises
    ------
    InputError
        ``file_format`` is no format bandwise writes.
    MeshWriteError
        The extension names no format; bandwise does not write the format,
        or the format cannot hold the model (cell types, node orders), with
        the reason.
    """
    path = Path(path)
    like = like if like is not None else getattr(model, "file_kind", None)
    fmt = check_output(path, file_format, like)
    _check_holds(model, fmt, path)
    kind, notes = registry.output_kind(fmt, like)
    return OutputPlan(path, fmt.name, kind, tuple(keeps.losses(model, fmt.name)), tuple(notes))


def check_output(path: str | os.PathLike[str], file_format: str | None = None,
                 like: FileKind | None = None) -> Format:
    """The format of an output, checked before any work: known, and written by bandwise.

    Raises
    ------
    InputError
        ``file_format`` is no known format.
    MeshWriteError
        The extension names no format, or bandwise does not write the format.
    """
    fmt = registry.output_format(path, file_format, like)
    if not fmt.writable:
        raise MeshWriteError(f"{path}: bandwise does not write {fmt.name} files: {fmt.refusal}; "
                             f"write one of: {', '.join(registry.writable_names())}")
    return fmt


def _check_holds(model: Model, fmt: Format, path: Path) -> None:
    """Refuse a model whose cells the format cannot hold, or whose node order it does not know."""
    from .compat import cell_types_held

    held = fmt.cell_types if fmt.cell_types is not None else cell_types_held(fmt.name)
    types = model.cells_by_type()
    if held is not None:
        missing = sorted(t for t in types if t not in held)
        if missing:
            listed = ", ".join(f"{t} ({types[t]:,})" for t in missing)
            raise MeshWriteError(f"{path}: a {fmt.label} file cannot hold {listed} cells; "
                                 "write another format")
    unknown = sorted(set(types) & conventions.UNKNOWN_ORDERS.get(fmt.name, frozenset()))
    if unknown:
        raise MeshWriteError(f"{path}: bandwise does not know the node order of "
                             f"{', '.join(unknown)} cells in {fmt.label} files; write another "
                             "format")


def write_model(model: Model, path: str | os.PathLike[str], file_format: str | None = None, *,
                plan: OutputPlan | None = None) -> OutputPlan:
    """Write a model: to a temporary file, read back and compared, then renamed into place.

    Parameters
    ----------
    model
        The mesh to write (its nodes in the order the file is to have).
    path
        The output file.
    file_format
        A registry format name; default from the extension (see :func:`plan_output`).
    plan
        A plan from :func:`plan_output`; made here when not given.

    Returns
    -------
    OutputPlan
        What was written.

    Raises
    ------
    MeshWriteError
        The folder is missing or not writable, the format cannot hold the
        mesh, or the file read back differs from the model (nothing is
        renamed into place then; the message says what differs).
    """
    path = Path(path)
    if plan is None:
        plan = plan_output(model, path, file_format)
    fmt = registry.FORMATS[plan.format]
    references = xdmf_companions if fmt.name == "xdmf" else None
    with atomic_folder(path, references) as tmp:
        part = tmp / path.name
        written = _write_file(model, part, fmt, plan.kind)
        verify(written, part, fmt, plan, path)
    return plan


def _write_file(model: Model, part: Path, fmt: Format, kind: FileKind) -> Model:
    """Write ``model`` to ``part`` in ``fmt``; returns the model as the file is to read back."""
    from . import meshio_io
    from .gmsh_writer import write_gmsh

    binary = kind.encoding == "binary"
    try:
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()), \
                warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if fmt.name in ("gmsh", "gmsh22"):
                write_gmsh(part, model, "2.2" if fmt.name == "gmsh22" else "4.1", binary)
                return model
            prepared = keeps.prepared_for(model, fmt.name)
            options: dict[str, Any] = {}
            name = fmt.meshio_name
            if fmt.name == "vtu":
                options = {"binary": binary, "compression": kind.compression}
            elif fmt.name == "vtk":
                # meshio's writer names: "vtk" writes 5.1, "vtk42" writes 4.2
                options, name = {"binary": binary}, "vtk42" if kind.version == "4.2" else "vtk"
            elif fmt.name == "xdmf":
                options = {"data_format": "XML" if kind.encoding == "ascii" else "HDF"}
            elif fmt.name == "flac3d":
                options = {"binary": binary}
            mesh = meshio_io.to_meshio(prepared, fmt.name)
            if fmt.name == "vtu" and binary and _wrote_own_vtu(part, mesh, kind.compression):
                return model
            meshio_io.write_mesh(part, mesh, name, options)
            if fmt.name == "xdmf":
                _own_companion(part)
    except MeshWriteError:
        raise
    except Exception as exc:  # noqa: BLE001  writers raise any type
        from .meshio_io import failure_text

        raise MeshWriteError(f"{part.name}: cannot write as {fmt.name}: the writer failed "
                             f"on this mesh: {failure_text(exc, reading=False)}") from None
    return model


def _wrote_own_vtu(part: Path, mesh: Any, compression: str | None) -> bool:
    """Write a binary VTU file with bandwise's threaded writer; False: meshio's must do it."""
    from .vtu import NotHandled
    from .vtu_writer import write_vtu

    try:
        write_vtu(part, mesh, compression)
    except NotHandled:
        return False
    return True


_H5_NAME = re.compile(r"([^\s\"<>:/\\]+\.h5):")


def xdmf_companions(path: Path) -> set[str]:
    """The HDF5 files an XDMF file names (its companions), beside it."""
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError:
        return set()
    return set(_H5_NAME.findall(text))


def _own_companion(part: Path) -> None:
    """Give an XDMF file's HDF5 companion a name no earlier output uses, and point to it.

    A rename then puts a whole new output in place without touching the
    old one's data (see :mod:`bandwise.formats.atomic`).
    """
    old = part.with_suffix(".h5")
    if not old.exists():
        return
    new_name = f"{part.stem}.{uuid.uuid4().hex[:8]}.h5"
    os.replace(old, part.parent / new_name)
    text = part.read_text(encoding="utf-8")
    part.write_text(text.replace(f"{old.name}:", f"{new_name}:"), encoding="utf-8")


def verify(model: Model, part: Path, fmt: Format, plan: OutputPlan, shown: Path) -> None:
    """Read a written file back with meshio's public reader and compare it with ``model``.

    Compared: the node count and every node's position in file order, the
    cell count and connectivity per cell type (after the format's
    node-order convention), and the presence of the sets the plan keeps.

    Raises
    ------
    MeshWriteError
        What differs.
    """
    from . import meshio_io

    try:
        back = meshio_io.read_back(part, fmt)
    except MeshReadError as exc:
        raise MeshWriteError(f"{shown}: not written: the {fmt.label} file written cannot be "
                             f"read back: {exc}") from None
    problem = compare(model, back, orientation=fmt.name != "flac3d")
    if problem is None:
        problem = _missing_sets(model, back, fmt, plan)
    if problem is not None:
        raise MeshWriteError(f"{shown}: not written: read back, the {fmt.label} file {problem}")


def compare(expected: Model, back: Model, orientation: bool = True) -> str | None:
    """How ``back`` (a file read back) differs from ``expected``, or None when it does not.

    Node positions are compared in order (to a millionth of the mesh's
    extent: text formats round coordinates), cells per type in order.
    With ``orientation`` False a cell may list its nodes in another order
    (a writer that turns inverted cells right-handed).
    """
    if back.n_nodes != expected.n_nodes:
        return f"has {back.n_nodes:,} nodes, the mesh {expected.n_nodes:,}"
    dim = min(back.points.shape[1], expected.points.shape[1])
    extent = float(np.ptp(expected.points, axis=0).max()) if expected.n_nodes else 0.0
    diff = np.abs(back.points[:, :dim] - expected.points[:, :dim]).max(axis=1)
    moved = np.flatnonzero(diff > 1e-6 * max(extent, 1e-300))
    if moved.size:
        return (f"has {moved.size:,} nodes at other places in the file than their numbers "
                f"(first: position {int(moved[0]) + 1})")
    if back.cells_by_type() != expected.cells_by_type():
        return f"holds cells {back.cells_by_type()}, the mesh {expected.cells_by_type()}"
    for cell_type in expected.cells_by_type():
        a, b = _cells_of(expected, cell_type), _cells_of(back, cell_type)
        if a is None or b is None:
            continue
        if not orientation:
            a, b = np.sort(a, axis=1), np.sort(b, axis=1)
        if a.shape != b.shape or not np.array_equal(a, b):
            rows = np.flatnonzero((a != b).any(axis=1)) if a.shape == b.shape else [0]
            return (f"has {cell_type} cells on other nodes than the mesh's (first: "
                    f"{cell_type} {int(rows[0]) + 1})")
    return None


def _cells_of(model: Model, cell_type: str) -> np.ndarray | None:
    blocks = [b.data for b in model.cells if b.type == cell_type]
    if any(d.dtype == object for d in blocks):
        return None
    return np.concatenate(blocks) if blocks else None


def _missing_sets(model: Model, back: Model, fmt: Format, plan: OutputPlan) -> str | None:
    """The sets the plan keeps that the file read back does not hold."""
    node_sets, cell_sets = keeps.kept_set_names(model, fmt.name, plan.losses)
    missing = sorted(set(node_sets) - set(back.point_sets))
    found = set(back.cell_sets) | (set(back.field_data) if fmt.name == "gmsh22" else set())
    missing += sorted(set(cell_sets) - found)
    if missing:
        return f"lacks the sets {', '.join(repr(n) for n in missing[:6])}"
    return None
