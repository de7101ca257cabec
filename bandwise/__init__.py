"""bandwise: pre-flight checks, sizing and node renumbering of finite-element meshes.

Read a mesh, build its node connectivity graph, measure bandwidth, profile,
wavefront and solver storage under any node numbering, and renumber it.

>>> import bandwise
>>> model = bandwise.read_model("meshes/bracket.msh")   # doctest: +SKIP
>>> graph = bandwise.node_graph(model)                   # doctest: +SKIP
>>> bandwise.core.metrics(graph).bandwidth                    # doctest: +SKIP
"""

from __future__ import annotations

import os
from importlib.metadata import PackageNotFoundError, version


def _numba_cache_dir() -> str:
    """Where numba keeps the compiled kernels: the user's cache folder, not the package.

    numba writes its cache beside the source by default.  In an installed
    copy that is site-packages, where ``pip uninstall`` leaves the cache
    folders behind as an empty namespace package that then shadows a later
    editable install.  Set ``NUMBA_CACHE_DIR`` to choose another place.
    """
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "bandwise", "numba")


os.environ.setdefault("NUMBA_CACHE_DIR", _numba_cache_dir())  # before numba is imported

from bandwise.algorithms.inertia import ZeroModes, zero_modes
from bandwise.algorithms.orderings.compare import Comparison, OrderingResult, compare_orderings
from bandwise.algorithms.orderings.frontal import (
    FrontWidth,
    front_width,
    frontal_reordering,
    reordered_elements,
)
from bandwise.algorithms.rigid import ZeroEnergyAnalysis, zero_energy_modes
from bandwise.algorithms.stiffness import StiffnessCheck, assemble_stiffness, verify_stiffness
from bandwise.algorithms.supports import (
    SupportSet,
    apply_supports,
    parse_support,
    read_support_file,
)
from bandwise.algorithms.values import ValuesCheck, check_values
from bandwise.core.dofs import DofLayout, dof_layout
from bandwise.core.equations import EquationNumbering, equation_numbering
from bandwise.core.errors import BandwiseError, InputError, MeshReadError, MeshWriteError
from bandwise.core.graph import NodeGraph, graph_from_matrix, node_graph
from bandwise.core.metrics import Metrics, metrics
from bandwise.core.model import CellBlock, Model, inverse_permutation
from bandwise.core.summary import MeshSummary, summarise
from bandwise.formats import read_model, write_model
from bandwise.formats.matrix_io import is_matrix_file, read_matrix, write_matrix_market
from bandwise.formats.node_map import read_node_map, write_dof_map, write_node_map

try:
    __version__ = version("bandwise")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0+unknown"

from bandwise.algorithms.checks.verdict import Verdict  # noqa: E402
from bandwise.workflows import (  # noqa: E402
    CheckResult,
    FileFailure,
    MergeOutcome,
    RenumberResult,
    check_file,
    check_files,
    merge_file,
    renumber_file,
)


def __getattr__(name: str):  # the report (matplotlib) is loaded when first asked for
    if name == "write_report":
        from bandwise.faces.report import write_results_report

        return write_results_report
    raise AttributeError(f"module 'bandwise' has no attribute {name!r}")

# the workflows: one call per job, a frozen result back
__all__ = [
    "CheckResult", "FileFailure", "MergeOutcome", "RenumberResult", "Verdict",
    "check_file", "check_files", "merge_file", "renumber_file", "write_report",
]
# the model, its graph and figures
__all__ += [
    "BandwiseError", "CellBlock", "DofLayout", "InputError", "MeshReadError",
    "MeshSummary", "MeshWriteError", "Metrics", "Model", "NodeGraph",
    "dof_layout", "graph_from_matrix", "inverse_permutation", "metrics",
    "node_graph", "read_model", "summarise", "write_model",
]
# choosing a numbering, frontal element order, matrix files, the node map
__all__ += [
    "Comparison", "FrontWidth", "OrderingResult", "compare_orderings", "front_width",
    "frontal_reordering", "is_matrix_file", "read_matrix", "read_node_map",
    "reordered_elements", "write_matrix_market", "write_node_map",
]
# supports, zero-energy modes, stiffness check, equation numbering
__all__ += [
    "EquationNumbering", "StiffnessCheck", "SupportSet", "ZeroEnergyAnalysis",
    "apply_supports", "assemble_stiffness", "equation_numbering", "parse_support",
    "read_support_file", "verify_stiffness", "write_dof_map", "zero_energy_modes",
    "ValuesCheck", "ZeroModes", "check_values", "zero_modes",
]
