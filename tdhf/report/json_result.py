"""The JSON object of a run: :class:`tdhf.driver.RunResult` fields as keys, uncertainties beside values.

* The response lists are left out when the deck had no ``[response]`` table, ``dispersion``,
  ``polarizability_tables`` and ``partner_ground_states`` when it had no ``[dispersion]`` table, ``certification`` when the run
  was not certified; otherwise they are present, possibly empty.
* A certified number ``x`` at key path ``p`` gets a sibling ``x_uncertainty`` (absolute, same unit):
  the largest change of the number over the varied approximations (:mod:`tdhf.certify`).
* ``quantities`` is the long form (:mod:`tdhf.quantities`): one object per number.
"""

from __future__ import annotations

import re
from typing import Any

from tdhf.driver import RESPONSE_FIELDS, RunResult
from tdhf.quantities import quantities
from tdhf.report.serialize import to_jsonable

__all__ = ["result_to_json"]

_STEP = re.compile(r"([A-Za-z_]\w*)(?:\[(\d+)\])?")


def result_to_json(result: RunResult) -> dict[str, Any]:
    """JSON-ready data of a run (see the module docstring)."""
    data = to_jsonable(result)
    if result.settings.response is None and result.settings.photoionization is None:
        del data["rejected"]
    if result.settings.response is None:
        for name in RESPONSE_FIELDS:
            del data[name]
    if result.settings.photoionization is None:
        for name in ("photoionization", "resonances", "continuum"):
            del data[name]
    if result.settings.dispersion is None:
        del data["dispersion"]
        del data["polarizability_tables"]
        del data["partner_ground_states"]
    if not result.certification:
        del data["certification"]
    for path, uncertainty in result.uncertainties().items():
        parent, key = _parent(data, path)
        if parent is not None:
            parent[f"{key}_uncertainty"] = uncertainty
    data["quantities"] = to_jsonable(quantities(result))
    return data


def _parent(data: dict[str, Any], path: str) -> tuple[dict[str, Any] | None, str]:
    """The object holding the last key of ``path`` (e.g. "polarizabilities[0].coupled") and that key."""
    steps = path.split(".")
    node: Any = data
    for step in steps[:-1]:
        match = _STEP.fullmatch(step)
        if match is None or not isinstance(node, dict) or match.group(1) not in node:
            return None, steps[-1]
        node = node[match.group(1)]
        if match.group(2) is not None:
            index = int(match.group(2))
            if not isinstance(node, list) or index >= len(node):
                return None, steps[-1]
            node = node[index]
    return (node, steps[-1]) if isinstance(node, dict) else (None, steps[-1])
