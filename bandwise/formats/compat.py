"""Every private meshio name bandwise uses, in one place.

meshio's public face is ``meshio.read``, ``meshio.write``, ``Mesh`` and
``CellBlock``.  A few things bandwise needs are only reachable through
meshio's private modules: the names of the formats it reads and writes,
its cell-type tables, its VTK cell tables (for the streaming VTU reader),
the gmsh node readers (their node tags, which meshio reads and then drops)
and the gmsh section writers (for bandwise's own gmsh 4.1 writer, which
keeps the place of each node in the file equal to its number).

Each such name is listed in :data:`PRIVATE_NAMES` and reached through
:func:`private`; ``tests/test_formats_compat.py`` imports every one of them
from the installed meshio and checks the behaviour bandwise relies on, so
that a meshio upgrade that moves or changes one fails the tests loudly
instead of misreading files.  No other module of bandwise names a private
meshio module.
"""

from __future__ import annotations

import contextlib
import importlib
from collections.abc import Callable, Iterator
from typing import Any

import numpy as np

#: The meshio release these names were checked against.
TESTED_MESHIO = "5.3.5"

#: (module, attribute) of every private meshio name bandwise uses, and what for.
PRIVATE_NAMES: dict[tuple[str, str], str] = {
    ("meshio._helpers", "reader_map"): "names of the formats meshio reads (--format)",
    ("meshio._helpers", "_writer_map"): "names of the formats meshio writes",
    ("meshio._common", "num_nodes_per_cell"): "nodes per cell type (streaming VTU reader)",
    ("meshio._vtk_common", "vtk_to_meshio_type"): "VTK cell type numbers (streaming VTU reader)",
    ("meshio._vtk_common", "vtk_to_meshio_order"): "VTK node order per cell type",
    ("meshio._vtk_common", "meshio_to_vtk_type"): "cell types a VTK file holds",
    ("meshio.gmsh.common", "_meshio_to_gmsh_type"): "cell types a gmsh file holds",
    ("meshio.gmsh.common", "_write_physical_names"): "gmsh $PhysicalNames section",
    ("meshio.gmsh.common", "_write_data"): "gmsh $NodeData / $ElementData sections",
    ("meshio.gmsh._gmsh41", "_write_elements"): "gmsh 4.1 $Elements section",
    ("meshio.gmsh._gmsh41", "_write_periodic"): "gmsh 4.1 $Periodic section",
    ("meshio.gmsh._gmsh41", "_read_nodes"): "gmsh 4.1 node tags (dropped by meshio)",
    ("meshio.gmsh._gmsh22", "_read_nodes"): "gmsh 2.2 node tags (checked before use)",
    ("meshio.xdmf.common", "meshio_to_xdmf_type"): "cell types an XDMF file holds",
    ("meshio.med._med", "meshio_to_med_type"): "cell types a MED file holds",
    ("meshio.exodus._exodus", "meshio_to_exodus_type"): "cell types an Exodus file holds",
    ("meshio.abaqus._abaqus", "meshio_to_abaqus_type"): "cell types a keyword deck holds",
    ("meshio.nastran._nastran", "nastran_to_meshio_type"): "cell types a bulk-data deck holds",
    ("meshio.flac3d._flac3d", "meshio_only"): "cell types a FLAC3D file holds (zones, faces)",
}


def private(module: str, name: str) -> Any:
    """One private meshio name (must be listed in :data:`PRIVATE_NAMES`).

    Raises
    ------
    ImportError
        When the installed meshio no longer has it (the compatibility test
        reports which).
    """
    if (module, name) not in PRIVATE_NAMES:
        raise KeyError(f"{module}.{name} is not a listed private meshio name")
    try:
        return getattr(importlib.import_module(module), name)
    except AttributeError:
        raise ImportError(f"the installed meshio has no {module}.{name}") from None


def reader_names() -> list[str]:
    """Names of every format meshio reads."""
    return sorted(private("meshio._helpers", "reader_map"))


def writer_names() -> list[str]:
    """Names of every format meshio writes."""
    return sorted(private("meshio._helpers", "_writer_map"))


def cell_types_held(meshio_name: str) -> frozenset[str] | None:
    """meshio cell types a format's meshio writer can write (None when not known)."""
    tables = {
        "gmsh": ("meshio.gmsh.common", "_meshio_to_gmsh_type"),
        "gmsh22": ("meshio.gmsh.common", "_meshio_to_gmsh_type"),
        "vtu": ("meshio._vtk_common", "meshio_to_vtk_type"),
        "vtk": ("meshio._vtk_common", "meshio_to_vtk_type"),
        "xdmf": ("meshio.xdmf.common", "meshio_to_xdmf_type"),
        "med": ("meshio.med._med", "meshio_to_med_type"),
        "exodus": ("meshio.exodus._exodus", "meshio_to_exodus_type"),
        "abaqus": ("meshio.abaqus._abaqus", "meshio_to_abaqus_type"),
    }
    try:
        if meshio_name == "nastran":
            return frozenset(private("meshio.nastran._nastran", "nastran_to_meshio_type").values())
        if meshio_name == "flac3d":
            only = private("meshio.flac3d._flac3d", "meshio_only")
            return frozenset(only["zone"]) | frozenset(only["face"])
        if meshio_name not in tables:
            return None
        return frozenset(private(*tables[meshio_name]))
    except ImportError:
        return None


def vtk_cell_tables() -> tuple[dict[int, str], Callable[[int], Any], dict[str, int]]:
    """(VTK type number -> meshio type, VTK-to-meshio node order, nodes per meshio type)."""
    return (private("meshio._vtk_common", "vtk_to_meshio_type"),
            private("meshio._vtk_common", "vtk_to_meshio_order"),
            private("meshio._common", "num_nodes_per_cell"))


def gmsh_section_writers() -> dict[str, Callable[..., Any]]:
    """meshio's gmsh 4.1 section writers that bandwise's gmsh 4.1 writer reuses."""
    return {
        "physical_names": private("meshio.gmsh.common", "_write_physical_names"),
        "data": private("meshio.gmsh.common", "_write_data"),
        "elements": private("meshio.gmsh._gmsh41", "_write_elements"),
        "periodic": private("meshio.gmsh._gmsh41", "_write_periodic"),
    }


@contextlib.contextmanager
def gmsh_node_tags(check: Callable[[np.ndarray], None], store: dict[str, np.ndarray]
                   ) -> Iterator[None]:
    """Within the block, keep the node tags meshio's gmsh readers read, and check them.

    The gmsh 4.1 reader returns the nodes in file order and drops their tags
    (a file's numbering is its node tags); the kept tags (1-based) go to
    ``store["tags"]``.  ``check`` sees the 1-based tags of either reader
    before meshio allocates an array as long as the largest one.
    """
    try:
        r41 = importlib.import_module("meshio.gmsh._gmsh41")
        r22 = importlib.import_module("meshio.gmsh._gmsh22")
        originals = (r41._read_nodes, r22._read_nodes)
    except (ImportError, AttributeError):  # caught by the compatibility test
        yield
        return

    def reading41(*args: Any, **kwargs: Any) -> Any:
        points, tags, dim_tags = originals[0](*args, **kwargs)
        check(np.asarray(tags) + 1)
        store["tags"] = np.asarray(tags) + 1
        return points, tags, dim_tags

    def reading22(*args: Any, **kwargs: Any) -> Any:
        points, tags = originals[1](*args, **kwargs)
        check(np.asarray(tags))
        return points, tags

    r41._read_nodes, r22._read_nodes = reading41, reading22
    try:
        yield
    finally:
        r41._read_nodes, r22._read_nodes = originals


#: meshio's FLAC3D reader gives the members of a zone or face group as indices into
#: the whole list of cells, not into each cell block (checked by the compatibility test).
FLAC3D_SET_INDICES_GLOBAL = True
