"""Words for the report page: every key of the report document that becomes a label.

``report.json`` keeps its keys (pipelines read them); the page shows each
as the trade says it.  :func:`label` looks a key up in :data:`LABELS`;
:func:`worded` turns a coded value (``"space"``, ``True``) into words.
A key missing from :data:`LABELS` still reads as words (underscores become
spaces), and the report tests fail on it, so a new key gets its words here.
"""

from __future__ import annotations

from typing import Any

#: Key of the report document -> the label shown on the page.
LABELS: dict[str, str] = {
    # the files written
    "what": "what",
    "folder": "folder",
    # the mesh or matrix
    "file": "file",
    "format": "format",
    "nodes": "nodes",
    "elements": "elements",
    "n_elements": "elements in all",
    "dimension": "highest cell dimension",
    "rule": "DOF rule",
    "nodes_by_signature": "nodes by DOFs carried",
    "total": "total",
    "dofs_total": "DOFs",
    "parts": "connected parts",
    "orphan_nodes": "orphan nodes (in no element)",
    "skipped_blocks": "cell blocks not analysed",
    "matrix": "matrix",
    "symmetry": "symmetry",
    "field": "value type",
    "entries": "stored entries",
    "title": "title",
    "rows": "rows (unknowns)",
    "isolated_rows": "isolated rows (no off-diagonal entry)",
    # finding details
    "part": "part",
    "bounding_box": "bounding box (min, max)",
    "sets": "sets touching it",
    "regions": "regions joined",
    "region_elements": "elements in each region",
    "parts_before": "parts now",
    "parts_after_merge": "parts once merged",
    "tolerance": "coincidence distance",
    # supports
    "selector": "selector",
    "dofs": "DOFs",
    "origin": "given as",
    "held_dofs": "held DOFs",
    "supported_nodes": "supported nodes",
    "node": "node",
    "option": "value of --support",
    # zero-energy modes
    "rigid": "rigid-body modes",
    "mechanisms": "mechanisms",
    "dofs_without_stiffness": "DOFs without stiffness",
    "complete": "every part analysed",
    "motion_space": "rigid motions counted",
    "node_labels": "nodes named by",
    "bodies": "rigid blocks",
    "analysed": "analysed",
    "modes": "zero-energy modes",
    "note": "note",
    "kind": "kind",
    "description": "what moves",
    "moving_nodes": "nodes moving most",
    # equations
    "fixed_dofs": "held DOFs",
    "equations": "equations to solve",
    "free_dofs": "free DOFs",
    "reduced_system": "reduced system",
    # stiffness check
    "verified": "verified",
    "agrees": "agrees with the kinematic count",
    "kinematic": "kinematic count",
    "zero_eigenvalues": "zero eigenvalues",
    "smallest_nonzero_relative": "smallest nonzero eigenvalue / largest",
    "message": "message",
    "method": "method",
}

#: Coded values shown in words, per key.
VALUE_WORDS: dict[str, dict[str, str]] = {
    "motion_space": {
        "space": "in space: 6 per free part (3 translations, 3 rotations)",
        "plane": "in a plane: 3 per free part (2 translations, 1 rotation)",
        "scalar": "a scalar field: 1 per free part (a uniform value)",
    },
}


def label(key: str) -> str:
    """The words for a document key (underscores become spaces when it has none yet)."""
    return LABELS.get(key, key.replace("_", " "))


def worded(value: Any, key: str = "") -> Any:
    """A coded value in words: booleans as yes/no, enumerations as :data:`VALUE_WORDS` say."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, str) and value in VALUE_WORDS.get(key, {}):
        return VALUE_WORDS[key][value]
    return value


#: Finding code -> its title in words (the code itself is shown beside it, small).
FINDING_TITLES: dict[str, str] = {
    "elements.clockwise": "elements numbered clockwise",
    "elements.distorted": "distorted elements",
    "elements.duplicate": "duplicate elements",
    "elements.inverted": "inverted elements",
    "elements.mixed_dimension": "elements of another dimension than their part",
    "elements.repeated_nodes": "elements listing a node twice",
    "elements.zero_measure": "elements of zero size",
    "facets.coincident_free": "free faces lying on each other (a seam or crack)",
    "facets.free_faces": "free faces",
    "facets.free_edges": "free edges",
    "mesh.no_elements": "no elements",
    "mesh.skipped_blocks": "cell blocks not analysed",
    "nodes.articulation": "nodes that alone join two regions",
    "nodes.coincident": "coincident nodes within a part",
    "nodes.coincident_seam": "coincident nodes across parts (an unmerged seam)",
    "nodes.hanging": "hanging nodes",
    "nodes.orphan": "orphan nodes",
    "nodes.point_only": "nodes on point cells or sets only",
    "joints.single_node": "regions joined by a single node",
    "joints.edge_only": "solid regions sharing only an edge",
    "joints.nonconforming": "regions sharing nodes but no face or edge",
    "joints.line_one_node": "line elements attached by one node",
    "joints.moment_release": "moment releases",
    "parts.disconnected": "disconnected parts",
    "supports.free_modes": "zero-energy modes the supports leave free",
    "stiffness.disagrees": "stiffness check disagrees with the kinematic count",
}


def finding_title(code: str) -> str:
    """The title of a finding in words (its code's last part, spaced, when not listed)."""
    return FINDING_TITLES.get(code, code.rsplit(".", 1)[-1].replace("_", " "))
