"""JSON and CSV output: results (frozen dataclasses holding numpy data) to plain JSON values and
CSV tables, written by the safe writer of :mod:`tdhf.report.files` (checked, atomic, never over a
device or through a symlink).

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

import csv
import dataclasses
import io
import json
import math
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from tdhf.report.files import OutputTarget, write_text

__all__ = ["to_jsonable", "write_json", "write_polarizability_csv", "CSV_COLUMNS"]

#: Header of :func:`write_polarizability_csv`.
CSV_COLUMNS = ("system", "frequency_hartree", "weight", "alpha1", "alpha2", "alpha3")


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


def write_json(path: str | Path | OutputTarget, data: Any, option: str = "") -> None:
    """Write ``to_jsonable(data)`` to ``path`` (:func:`tdhf.report.files.write_text`).

    The JSON text is made before the file is touched, so data with no JSON form (TypeError) leaves
    the file as it was.  Raises :class:`~tdhf.errors.OutputError` if the file cannot be written.
    """
    write_text(path, json.dumps(to_jsonable(data), indent=2, allow_nan=False) + "\n", option)


def write_polarizability_csv(path: str | Path | OutputTarget, tables: Sequence[Any], option: str = "") -> None:
    """Write alpha_L(i w) tables as CSV (columns CSV_COLUMNS, one row per system and node; a.u., hartree).

    ``tables`` are :class:`tdhf.properties.dispersion.ImaginaryFrequencyTable`.  Floats are written
    with ``repr`` (they read back bit-identical; NaN as ``nan``).  Written like :func:`write_json`.
    """
    stream = io.StringIO(newline="")
    writer = csv.writer(stream)
    writer.writerow(CSV_COLUMNS)
    for table in tables:
        for row in zip(table.frequencies, table.weights, table.dipole, table.quadrupole, table.octupole):
            writer.writerow([table.system, *(repr(float(x)) for x in row)])
    write_text(path, stream.getvalue(), option)
