"""One free zero-energy motion as a displacement field, for the arrows of the mesh picture.

The zero-energy analysis (:mod:`bandwise.algorithms.rigid`) names each free mode in
words; to draw one, the report takes the null space of the supported
unit-material stiffness (:func:`bandwise.algorithms.stiffness.assemble_stiffness`),
which is the set of zero-energy motions by definition, and shows the
translations of its first vector.  Only for models up to
:data:`MAX_ARROW_DOFS` free DOFs: above, the picture marks the moving nodes
without arrows.

References
----------
K. J. Bathe, *Finite Element Procedures*, Prentice-Hall, 1996, section 10.2.4
(rigid-body modes are the eigenvectors of zero eigenvalues of K).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la
import scipy.sparse.linalg as spla
from numpy.typing import NDArray

from bandwise.algorithms.stiffness import assemble_stiffness
from bandwise.algorithms.supports import SupportSet
from bandwise.core.dofs import DofLayout
from bandwise.core.equations import equation_numbering
from bandwise.core.model import Model

#: Largest number of free DOFs whose stiffness null space is computed for the picture.
MAX_ARROW_DOFS = 20_000
#: Below this many free DOFs the eigenproblem is solved dense.
DENSE_ARROW_DOFS = 1_500
def _null_vectors(kff: object, count: int) -> NDArray[np.float64]:
    """The ``count`` eigenvectors of the smallest eigenvalues of a PSD stiffness."""
    n = kff.shape[0]
    if n <= DENSE_ARROW_DOFS or count >= n - 1:
        _, vec = la.eigh(kff.toarray(), subset_by_index=[0, min(count, n) - 1])
        return vec
    top = float(abs(kff).sum(axis=1).max())
    _, vec = spla.eigsh(kff, k=count, sigma=-1e-6 * top, which="LM", tol=1e-10)
    return vec


def free_motion(model: Model, layout: DofLayout, supports: SupportSet, n_modes: int,
                max_dofs: int = MAX_ARROW_DOFS
                ) -> tuple[NDArray[np.int64], NDArray[np.float64]] | None:
    """Nodes and translations ``(k, 3)`` of one zero-energy motion, or None.

    Parameters
    ----------
    model, layout, supports
        The mesh, its DOFs and the held DOFs.
    n_modes
        Zero-energy modes the analysis found (the eigenvectors asked for).
    max_dofs
        Larger models get no arrows (None).

    Returns
    -------
    (nodes, vectors) or None
        The nodes that move (over 5 % of the largest motion) with their
        ``ux, uy, uz``; None when there is no mode, the model is too big or
        its elements are not covered by the stiffness assembly.
    """
    eq = equation_numbering(layout, supports.fixed)     # node order as assembled
    free = eq.equation >= 0
    if n_modes < 1 or not 0 < int(free.sum()) <= max_dofs:
        return None
    built = assemble_stiffness(model, layout)
    if built.matrix is None:
        return None
    kff = built.matrix[free][:, free].tocsr()
    vector = _null_vectors(kff, n_modes)[:, 0]
    node, dof = eq.node[free], eq.dof[free]
    moves = np.zeros((model.n_nodes, 3))
    keep = dof < 3                                      # ux uy uz
    moves[node[keep], dof[keep]] = vector[keep]
    size = np.linalg.norm(moves, axis=1)
    if not size.max() > 0:
        return None
    moving = np.flatnonzero(size > 0.05 * size.max())
    return moving, moves[moving]
