"""The edge: file formats.  Reading files into a core ``Model`` and writing it back.

Formats import only core; workflows (and faces) call them.  meshio is
imported nowhere else.
"""
