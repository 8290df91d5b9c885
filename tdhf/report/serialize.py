"""JSON output: results (frozen dataclasses holding numpy data) to plain JSON values, atomic writes.

Conventions
-----------
* A dataclass becomes an object with one key per field, in field order; a field whose metadata
  has ``{"json": False}`` (grids, orbitals, raw arrays) is left out.
* numpy scalars and arrays become Python numbers and (nested) lists, tuples become lists.
* Non-finite floats (nan, inf) become ``null``: JSON has no such numbers.

>>> import numpy as np
>>> from dataclasses import dataclass, field
>>> @dataclass
... class Row:
...     energy: float
...     moments: np.ndarray
...     cache: object = field(default=None, metadata={"json": False})
>>> to_jsonable(Row(np.float64(-0.5), np.array([1.0, np.inf])))
{'energy': -0.5, 'moments': [1.0, None]}
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import tempfile
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["to_jsonable", "write_json"]


def to_jsonable(obj: Any) -> Any:
    """Plain JSON data (dict, list, str, int, float, bool, None) equal to ``obj``.

    Raises
    ------
    TypeError
        For a value with no JSON form (a callable, a set, an arbitrary object).
    """
    if obj is None or isinstance(obj, (str, bool)):
        return obj
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {
            f.name: to_jsonable(getattr(obj, f.name))
            for f in dataclasses.fields(obj)
            if f.metadata.get("json", True)
        }
    if isinstance(obj, dict):
        return {str(key): to_jsonable(value) for key, value in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(item) for item in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, int):
        return int(obj)
    if isinstance(obj, float):
        return float(obj) if math.isfinite(obj) else None
    raise TypeError(f"cannot write a {type(obj).__name__} to JSON: {obj!r}")


def write_json(path: str | Path, data: Any) -> None:
    """Write ``to_jsonable(data)`` to ``path`` atomically.

    The text is written to a temporary file in the same directory and moved over ``path`` with
    :func:`os.replace`, so ``path`` holds either its previous content or the complete new file,
    never a partial one.
    """
    path = Path(path)
    text = json.dumps(to_jsonable(data), indent=2, allow_nan=False) + "\n"
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
        os.chmod(temporary, 0o666 & ~_umask())  # mkstemp makes the file private (0600)
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
