"""The executor seam: how per-verb induction tasks are run.

Sense induction is one pure function applied to independent per-verb tasks. An executor maps
that function over the tasks and yields the results **in task order**, whatever order they
finish in, so that output is deterministic. ``InProcessExecutor`` (the default) runs them one
after the other in this process; a distributed back-end implements the same ``map``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator
from typing import Protocol, TypeVar, runtime_checkable

__all__ = ["Executor", "InProcessExecutor"]

T = TypeVar("T")
R = TypeVar("R")


@runtime_checkable
class Executor(Protocol):
    """Maps a pure function over tasks; results come back in the order of the tasks."""

    def map(self, function: Callable[[T], R], tasks: Iterable[T]) -> Iterator[R]:
        """``function(task)`` for each task, yielded in task order.

        ``function`` and each task must be picklable for executors that run elsewhere; tasks
        may be produced lazily, and an executor may hold several in flight.
        """
        ...


class InProcessExecutor:
    """Runs each task in this process as it is produced (nothing is held in advance)."""

    def map(self, function: Callable[[T], R], tasks: Iterable[T]) -> Iterator[R]:
        for task in tasks:
            yield function(task)
