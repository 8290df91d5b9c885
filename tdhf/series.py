"""Run many decks as one series: one JSON result file per deck, failures isolated, resumable.

A series is a list of deck files (e.g. one per member of an isoelectronic or homologous series).
Each deck runs on its own; a bad deck or an unconverged solver is recorded against that deck and
the others go on.  With ``resume=True`` a deck whose result file already exists is skipped, so an
interrupted series can be restarted where it stopped.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Sequence

from tdhf.deck import load_deck
from tdhf.driver import run_deck
from tdhf.report.json_result import result_to_json
from tdhf.errors import InputError
from tdhf.report.serialize import write_json

__all__ = ["SeriesEntry", "run_series"]


@dataclass(frozen=True)
class SeriesEntry:
    """What happened to one deck of a series.

    ``status`` is "ok", "skipped" (result file already there), "input error", "not converged"
    (results written and flagged) or "rejected" (some real frequencies refused, the rest written).
    """

    deck: str
    output: str
    status: str
    system: str | None
    total_energy: float | None
    message: str


def run_series(
    decks: Sequence[Path],
    out_dir: Path,
    resume: bool = False,
    progress: Callable[[str], None] | None = None,
) -> tuple[SeriesEntry, ...]:
    """Run ``decks`` one after the other, writing ``out_dir/<deck stem>.json`` for each."""
    report = progress or (lambda stage: None)
    if len({Path(d).stem for d in decks}) != len(decks):
        raise InputError("series: two decks have the same file name; their result files would collide")
    out_dir.mkdir(parents=True, exist_ok=True)
    entries = []
    for number, path in enumerate(decks, start=1):
        output = out_dir / f"{Path(path).stem}.json"
        if resume and output.exists():
            entries.append(SeriesEntry(str(path), str(output), "skipped", None, None, "result file exists"))
            continue
        report(f"deck {number}/{len(decks)}: {path}")
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # they are kept in the result file
                result = run_deck(load_deck(path))
        except InputError as err:
            entries.append(SeriesEntry(str(path), "", "input error", None, None, str(err)))
            continue
        write_json(output, result_to_json(result))
        problems = result.convergence_problems()
        status = "rejected" if result.rejected else "not converged" if problems else "ok"
        message = "; ".join(result.rejected or problems)
        entries.append(
            SeriesEntry(str(path), str(output), status, result.atom.name, result.ground_state.total_energy, message)
        )
    return tuple(entries)
