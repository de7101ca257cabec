"""The edge: file formats.  Reading files into a core ``Model`` and writing it back.

Formats import only core; workflows (and faces) call them.  meshio is
imported nowhere else, and its private names only in :mod:`.compat`.

The door for mesh files is :func:`read_model`, :func:`plan_output` and
:func:`write_model` (:mod:`.mesh_io`); which formats exist, and what each
keeps, is :mod:`.registry`.
"""

from .mesh_io import OutputPlan, plan_output, read_model, write_model
from .registry import FileKind, Format

__all__ = ["FileKind", "Format", "OutputPlan", "plan_output", "read_model", "write_model"]
