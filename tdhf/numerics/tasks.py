"""Task maps: how a computation with independent pieces lets its caller choose where they run.

A *task map* is a callable ``map_tasks(function, tasks)`` returning ``function(*task)`` for each
task, in task order.  The numerical core accepts one and knows nothing else about it;
:mod:`tdhf.execution` makes pools and cluster clients that fit the type.

>>> list(serial(divmod, [(7, 2), (9, 4)]))
[(3, 1), (2, 1)]
"""

from __future__ import annotations

from typing import Any, Callable, Iterable, Iterator, Sequence

__all__ = ["TaskMap", "serial"]

TaskMap = Callable[[Callable[..., Any], Sequence[tuple]], Iterable[Any]]


def serial(function: Callable[..., Any], tasks: Sequence[tuple]) -> Iterator[Any]:
    """``function(*task)`` for each task, here, one after the other."""
    for task in tasks:
        yield function(*task)
