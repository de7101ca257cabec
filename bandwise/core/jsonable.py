"""Plain JSON from values that hold numpy scalars or arrays."""

from __future__ import annotations

from typing import Any


def json_default(obj: Any) -> Any:
    """``default=`` hook of :func:`json.dumps`: numpy integers, floats and arrays as plain values.

    Raises
    ------
    TypeError
        For any other type, as :func:`json.dumps` expects.
    """
    import numpy as np

    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return float(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"not JSON serialisable: {type(obj).__name__}")
