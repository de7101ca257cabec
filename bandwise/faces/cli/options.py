"""Options shared by several commands: supports, the stiffness check, the DOF map.

Support syntax (any number of ``--support``)::

    --support "WALL:fixed"           a node set / element set / physical group
    --support "plane x=0:ux,uy"      nodes on a coordinate plane (tol=... optional)
    --support "box 0,0,0 1,1,0:pinned"
    --support "near 10,0,5:uz"       the node nearest to a point
    --support "node 17,42:fixed"     nodes by label
    --supports bracket.toml          the same, from a TOML support file

The syntax is documented in :mod:`bandwise.algorithms.supports`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise.algorithms.stiffness import MAX_VERIFY_DOFS

SupportOpt = Annotated[list[str] | None, typer.Option(
    "--support", help="Hold DOFs: 'SELECTOR:DOFS'. Selector: a set or physical-group name, "
                      "'plane x=0' [tol=..], 'box x0,y0,z0 x1,y1,z1', 'near x,y,z', "
                      "'node 17,42'. DOFs: ux uy uz rx ry rz t, or fixed / pinned. Repeatable.")]
SupportFileOpt = Annotated[Path | None, typer.Option(
    "--supports", help="TOML support file: one \\[\\[support]] table per support, with one of "
                       "set / plane / box / near / node, and dofs (and optional tol, label).")]
StiffnessCheckOpt = Annotated[bool, typer.Option(
    "--stiffness-check", help="Assemble a unit-material stiffness, hold the supports and count "
                              "its zero eigenvalues by inertia (up to "
                              f"{MAX_VERIFY_DOFS:,} free DOFs); "
                              "the count must equal the zero-energy analysis.")]
DofMapOpt = Annotated[Path | None, typer.Option(
    "--dof-map", help="Write the equation number of every DOF (or 'fixed') as CSV "
                      "(one mesh file only).")]
