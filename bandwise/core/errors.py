"""Exceptions raised by bandwise.

Findings about a mesh (disconnected parts, orphan nodes ...) are *values*
returned by the checks.  Exceptions are for inputs bandwise cannot work
with at all: the command line turns each into a one-line message and exit
code 2.
"""

from __future__ import annotations


class BandwiseError(Exception):
    """Base class of every error bandwise raises on purpose."""


class MeshReadError(BandwiseError):
    """A file could not be read as a mesh or matrix, or holds an invalid one."""


class MeshWriteError(BandwiseError):
    """An output file could not be written."""


class InputError(BandwiseError):
    """An option or argument is out of range or inconsistent."""


def one_line(exc: BaseException, limit: int = 160, *, named: bool = False) -> str:
    """An exception's message on one line (white space folded), cut to ``limit`` characters.

    With ``named`` the exception's type leads (``ValueError: ...``), and stands
    alone when there is no message; otherwise an exception without a message
    gives an empty string and the caller decides what to say.
    """
    text = " ".join(str(exc).split())
    text = text if len(text) <= limit else text[: limit - 3] + "..."
    if not named:
        return text
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__
