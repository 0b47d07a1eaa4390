"""JSON-ready values: numpy scalars and arrays to Python, NaN and infinity to None."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["to_jsonable"]


def to_jsonable(obj: Any) -> Any:
    """Recursively make ``obj`` strict-JSON serialisable (no NaN, no numpy types).

    Examples
    --------
    >>> to_jsonable({"a": np.float32(1.5), "b": [np.nan, np.int64(2)], 3: (True,)})
    {'a': 1.5, 'b': [None, 2], '3': [True]}
    """
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if np.isfinite(obj) else None
    return obj
