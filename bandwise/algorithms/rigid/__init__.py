"""Zero-energy modes: the rigid-body and mechanism motions the supports leave free.

Method (exact for sound elements, and cheap).  Every face-connected block of
elements (:func:`bandwise.algorithms.topology.face_connected_blocks`) moves as a rigid
body: 6 motions in 3D (translations, rotations about the block centroid),
3 in a plane (two translations, the rotation about z), 1 for a scalar field
(a constant).  Pin-jointed line elements (nodes without rotational DOFs) are
each a body of their own, whose spin about its own axis is left out: it moves
no DOF, it is a trivial zero mode of no practical interest.  Line elements
whose nodes carry rotations are joined rigidly through the beam's bending, so
a frame chain is one body.  A DOF shared by two bodies that both stiffen it is
an equality constraint between them; a held DOF is a constraint to zero.
The null space of that small system (SVD, rows scaled by body size so that
the tolerance is relative; shift-invert Lanczos on the sparse Gram matrix for
parts of very many bodies) counts rigid and mechanism modes together; the
rigid part of each connected part is separated from its mechanisms and both
are given in a tidy basis (reduced row-echelon form, rotations about and
translations along the axes where possible), described in words with the
nodes that move most.  Parts are numbered by their lowest node.  A small
set of holds that removes every mode is suggested (greedy, node by node, or
pivoted QR), never applied.

The motions are evaluated only at held DOFs and at nodes shared by bodies,
so the system is small even for a mesh of millions of nodes.

A DOF that a node carries but no element stiffens (an orphan node, the
rotations of a node of solid elements only) is a zero-energy mode by itself;
those are counted apart, as ``dofs_without_stiffness``.

References
----------
J. C. Maxwell, "On the calculation of the equilibrium and stiffness of
frames", Phil. Mag. 27 (1864) 294-299.
C. R. Calladine, "Buckminster Fuller's 'Tensegrity' structures and Clerk
Maxwell's rules for the construction of stiff frames", Int. J. Solids Struct.
14 (1978) 161-172 (mechanisms - states of self-stress = 3j - b - 6).
S. Pellegrino and C. R. Calladine, "Matrix analysis of statically and
kinematically indeterminate frameworks", Int. J. Solids Struct. 22 (1986)
409-428.
P. Businger and G. H. Golub, "Linear least squares solutions by Householder
transformations", Numer. Math. 7 (1965) 269-276 (column pivoting).

The package, one module per concern: :mod:`.results` (the values returned),
:mod:`.motions` (the motion space), :mod:`.bodies`, :mod:`.geometry` (body
frames), :mod:`.constraints` (the system and its null space), :mod:`.links`,
:mod:`.analysis` (the driver and the words), :mod:`.suggestions`.
"""

from __future__ import annotations

from .analysis import (
    MAX_PART_COORDINATES,
    MAX_SPARSE_COORDINATES,
    MOVING_NODES,
    moment_release,
    zero_energy_modes,
)
from .bodies import Bodies, make_bodies
from .constraints import MAX_SPARSE_MODES, RANK_RTOL
from .links import Link, link_layout
from .motions import ROTATIONS, motion_space
from .results import (
    MomentRelease,
    PartModes,
    SuggestedHold,
    ZeroEnergyAnalysis,
    ZeroEnergyMode,
)
from .suggestions import GREEDY_MODES, GREEDY_NODES, _pick_holds

__all__ = [
    "GREEDY_MODES",
    "GREEDY_NODES",
    "MAX_PART_COORDINATES",
    "MAX_SPARSE_COORDINATES",
    "MAX_SPARSE_MODES",
    "MOVING_NODES",
    "RANK_RTOL",
    "ROTATIONS",
    "Bodies",
    "Link",
    "MomentRelease",
    "PartModes",
    "SuggestedHold",
    "ZeroEnergyAnalysis",
    "ZeroEnergyMode",
    "_pick_holds",
    "link_layout",
    "make_bodies",
    "moment_release",
    "motion_space",
    "zero_energy_modes",
]
