"""Run many decks as one series: one JSON result file per deck, failures isolated, resumable.

A series is a list of deck files (e.g. one per member of an isoelectronic or homologous series),
each written to ``<out>/<deck stem>.json``.

* Isolation: whatever happens to one deck (an input error, an unconverged solver, a result file
  that cannot be written, even an unexpected exception) is recorded in its :class:`SeriesEntry`
  and the series goes on.  Only an interrupt (Ctrl-C, SIGTERM) stops it: the deck then running is
  recorded as "interrupted"; finished result files are complete (they are written atomically).
* Resume (``resume=True``): a result file is reused only if it is complete JSON, unflagged (every
  solve converged, nothing rejected), made by this program version and from the deck as it is
  now (``settings.deck_digest``, :func:`tdhf.deck.deck_digest`).  Anything else is recomputed.
* Two series writing one folder: each result file is claimed (:func:`tdhf.report.files.claim`)
  while its deck runs; a deck that another series holds is left for the end and taken up when
  that series lets go of it.  Temporary files an interrupted writer left are removed under the claim.
* Certification (``certify=True``): each result is certified (:func:`tdhf.certify.certified`,
  3-4 extra runs); a result file without a certificate is then not reused by resume.  A
  certificate that fails keeps the run's own numbers, with a note.
* Parallel (``map_tasks``, :mod:`tdhf.execution`): the decks this series can claim are computed
  as independent tasks (a process pool or a Dask cluster); this process loads the decks, checks
  resume and writes every file, so the workers need no access to the folder.  The numbers are
  those of the serial run, bit for bit.
"""

from __future__ import annotations

import json
import logging
import os
import warnings
from dataclasses import dataclass, field, replace
from pathlib import Path
from contextlib import ExitStack
from typing import Any, Callable, Sequence

from tdhf.certify import certified
from tdhf.deck import Deck, deck_digest, load_deck
from tdhf.driver import RunResult, program_info, run_deck
from tdhf.errors import ConvergenceError, InputError, OutputError
from tdhf.numerics.tasks import TaskMap, serial
from tdhf.report.files import check_output_folder, claim, remove_stale_temporaries
from tdhf.report.json_result import result_to_json
from tdhf.report.serialize import write_json

__all__ = ["SeriesEntry", "run_series", "compute_deck", "reusable_result", "STATUSES"]

logger = logging.getLogger(__name__)

#: Every status a deck can end with.
STATUSES = ("ok", "skipped", "input error", "rejected", "not converged", "output error", "internal error",
            "interrupted")
#: Keys every complete result file has (tdhf.report.json_result.result_to_json).
_RESULT_KEYS = frozenset({"atom", "ground_state", "warnings", "settings", "program", "conventions"})


@dataclass(frozen=True)
class SeriesEntry:
    """What happened to one deck of a series.

    ``status`` is one of STATUSES: "ok"; "skipped" (a valid result file was there, with
    ``resume``); "input error"; "rejected" (some real frequencies refused, the rest written);
    "not converged" (results written and flagged); "output error" (computed, but the result file
    could not be written: ``result`` holds the results, else it is None); "internal error" (a bug, isolated);
    "interrupted".  ``warnings`` are the result's notes.
    """

    deck: str
    output: str
    status: str
    system: str | None
    total_energy: float | None
    message: str
    warnings: tuple[str, ...] = ()
    result: RunResult | None = field(default=None, repr=False, compare=False, metadata={"json": False})


def run_series(
    decks: Sequence[Path],
    out_dir: Path,
    resume: bool = False,
    progress: Callable[[str], None] | None = None,
    *,
    certify: bool = False,
    map_tasks: TaskMap | None = None,
    counter: Callable[[int, int], None] | None = None,
) -> tuple[SeriesEntry, ...]:
    """Run ``decks`` (one after the other, or as tasks of ``map_tasks``), writing ``out_dir/<deck stem>.json``.

    Returns one entry per deck in deck order (up to the interrupted one, if any).  ``progress``
    gets a stage description, ``counter(done, total)`` the number of decks finished.

    Raises
    ------
    InputError
        Before any deck runs: two decks with the same stem, a deck that is its own result file,
        or an ``out_dir`` that is not (and cannot be made) a writable folder.
    """
    report = progress or (lambda stage: None)
    decks = [Path(d) for d in decks]
    if len({d.stem for d in decks}) != len(decks):
        raise InputError("series: two decks have the same file name; their result files would collide")
    outputs = [Path(out_dir) / f"{d.stem}.json" for d in decks]
    for deck, output in zip(decks, outputs):
        if output.exists() and deck.exists() and os.path.samefile(deck, output):
            raise InputError(f"series --out {out_dir}: the deck {deck} would be overwritten by its own result")
    check_output_folder(out_dir, "series --out")
    entries: dict[int, SeriesEntry] = {}

    def finished(k: int, entry: SeriesEntry) -> None:
        entries[k] = entry
        if counter is not None:
            counter(len(entries), len(decks))

    try:
        if map_tasks is not None:
            _run_batch(decks, outputs, resume, certify, map_tasks, report, finished)
        _run_all(decks, outputs, resume, certify, report, finished, skip=set(entries))
    except KeyboardInterrupt:  # between two decks: the next one is the interrupted one
        unfinished = [k for k in range(len(decks)) if k not in entries]
        if unfinished:
            entries[unfinished[0]] = _entry(decks[unfinished[0]], "", "interrupted", "interrupted before it ran")
    return tuple(entries[k] for k in sorted(entries))


def _claim_failed(path: Path, output: Path, err: OSError) -> SeriesEntry:
    return _entry(path, "", "output error",
                  f"series --out {output.parent}: cannot claim {output.name}: {err.strerror or err}")


def _run_all(decks: list[Path], outputs: list[Path], resume: bool, certify: bool, report: Callable[[str], None],
             finished: Callable[[int, SeriesEntry], None], skip: set[int]) -> None:
    """Run the decks not in ``skip`` one by one (stopping at an interrupted one)."""
    pending = [k for k in range(len(decks)) if k not in skip]
    for wait in (False, True):  # first every deck no other series holds, then the others
        held_elsewhere = []
        for k in pending:
            try:
                with claim(outputs[k], wait=wait) as held:
                    if not held:
                        held_elsewhere.append(k)
                        continue
                    report(f"deck {k + 1}/{len(decks)}: {decks[k]}")
                    entry = _run_one(decks[k], outputs[k], resume, certify)
            except OSError as err:  # the lock file itself cannot be made: the folder changed under us
                entry = _claim_failed(decks[k], outputs[k], err)
            finished(k, entry)
            if entry.status == "interrupted":
                return
        pending = held_elsewhere


def _run_batch(decks: list[Path], outputs: list[Path], resume: bool, certify: bool, map_tasks: TaskMap,
               report: Callable[[str], None], finished: Callable[[int, SeriesEntry], None]) -> None:
    """Claim every deck no other series holds, then compute them all as tasks of ``map_tasks``.

    Decks held elsewhere are left to :func:`_run_all`, which waits for them.
    """
    with ExitStack() as claims:
        todo: list[tuple[int, Deck]] = []
        for k, (path, output) in enumerate(zip(decks, outputs)):
            try:
                if not claims.enter_context(claim(output)):
                    continue
            except OSError as err:
                finished(k, _claim_failed(path, output, err))
                continue
            deck, entry = _prepare(path, output, resume, certify)
            if entry is not None:
                finished(k, entry)
            else:
                todo.append((k, deck))
        report(f"{len(todo)} decks to compute")
        run = map_tasks if len(todo) > 1 else serial  # one deck: no process to start
        for (k, _), outcome in zip(todo, run(compute_deck, [(deck, certify) for _, deck in todo])):
            finished(k, _finish(decks[k], outputs[k], *outcome))


def _entry(path: Path, output: Path | str, status: str, message: str, result: RunResult | None = None) -> SeriesEntry:
    return SeriesEntry(
        deck=str(path), output=str(output), status=status,
        system=result.atom.name if result else None,
        total_energy=result.ground_state.total_energy if result else None,
        message=message, warnings=result.warnings if result else (),
        result=result if status == "output error" else None,  # only unsaved results are kept in memory
    )


def _prepare(path: Path, output: Path, resume: bool, certify: bool = False) -> tuple[Deck | None, SeriesEntry | None]:
    """Load a deck and check resume: (deck, None) if it is to be computed, else (None, its entry)."""
    try:
        deck = load_deck(path)
    except InputError as err:
        return None, _entry(path, "", "input error", str(err))
    remove_stale_temporaries(output)
    if resume:
        data, reason = reusable_result(output, deck)
        if data is not None and certify and not data.get("certification"):
            data, reason = None, "result file is not certified"
        if data is not None:
            return None, SeriesEntry(str(path), str(output), "skipped", data["atom"].get("name"),
                                     data["ground_state"].get("total_energy"), "result file is complete and current")
        logger.info("%s: recomputing (%s)", path, reason)
    return deck, None


def compute_deck(deck: Deck, certify: bool = False) -> tuple[RunResult | None, str, str]:
    """Run (and certify) one deck: (result, "", "") or (None, status, message) for a failure.

    Every failure but an interrupt becomes a status, so a task never raises (it may run in
    another process).  A certificate that fails keeps the run's result, with a note.
    """
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # they are kept in the result file
            result = run_deck(deck)
            if certify and result.ground_state.converged:
                try:
                    result = certified(result, deck)
                except (InputError, ConvergenceError) as err:
                    result = replace(result, warnings=(*result.warnings, f"certification failed: {err}"))
        return result, "", ""
    except InputError as err:
        return None, "input error", str(err)
    except ConvergenceError as err:
        return None, "not converged", str(err)
    except Exception as err:  # a bug, but it stays with its deck
        logger.debug("internal error in a deck", exc_info=True)
        return None, "internal error", f"internal error {type(err).__name__}: {err}"


def _finish(path: Path, output: Path, result: RunResult | None, status: str, message: str) -> SeriesEntry:
    """Write a computed result (or record its failure)."""
    if result is None:
        return _entry(path, "", status, message)
    try:
        write_json(output, result_to_json(result), "series --out")
    except OutputError as err:
        return _entry(path, "", "output error", str(err), result)
    problems = result.convergence_problems()
    status = "rejected" if result.rejected else "not converged" if problems else "ok"
    return _entry(path, output, status, "; ".join(result.rejected or problems), result)


def _run_one(path: Path, output: Path, resume: bool, certify: bool = False) -> SeriesEntry:
    """Load, (re)compute and write one deck; every failure becomes the entry's status."""
    try:
        deck, entry = _prepare(path, output, resume, certify)
        if entry is not None:
            return entry
        return _finish(path, output, *compute_deck(deck, certify))
    except KeyboardInterrupt:
        return _entry(path, "", "interrupted", "interrupted; its result file was not written")
    except Exception as err:  # a bug in the preparation, but it stays with its deck
        logger.debug("internal error in %s", path, exc_info=True)
        return _entry(path, "", "internal error", f"internal error {type(err).__name__}: {err}")


def reusable_result(output: Path, deck: Deck) -> tuple[dict[str, Any] | None, str]:
    """(the data of ``output``, "") if it is a current, complete, unflagged result of ``deck``,
    else (None, why not)."""
    try:
        text = Path(output).read_text(encoding="utf-8")
    except FileNotFoundError:
        return None, "no result file yet"
    except (OSError, UnicodeDecodeError) as err:
        return None, f"result file unreadable: {err}"
    if not text.strip():
        return None, "result file is empty"
    try:
        data = json.loads(text)
    except ValueError:
        return None, "result file is truncated or not JSON"
    if not isinstance(data, dict) or not _RESULT_KEYS <= data.keys() or not all(
            isinstance(data[key], dict) for key in ("atom", "ground_state", "settings", "program")):
        return None, "result file is incomplete"
    if data["settings"].get("deck_digest") != deck_digest(deck):
        return None, "result file was made from another version of the deck"
    version = program_info().version
    if data["program"].get("version") != version:
        return None, f"result file was made by tdhf {data['program'].get('version')}, this is {version}"
    if data.get("rejected") or _flagged(data):
        return None, "result file holds flagged results (not converged or rejected)"
    return data, ""


def _flagged(data: Any) -> bool:
    """True if any ``converged`` in the JSON tree is false."""
    if isinstance(data, dict):
        return data.get("converged") is False or any(_flagged(value) for value in data.values())
    if isinstance(data, list):
        return any(_flagged(value) for value in data)
    return False
