"""The Dask back-end: ``--workers N`` (a local cluster) or ``--scheduler ADDRESS`` (a cluster).

``open_executor`` gives an executor for the stages' tasks: ``None`` when neither option is
given (the stage runs in this process and Dask is never imported), else a ``DaskExecutor``
whose ``map`` submits tasks to the cluster and yields the results **in task order** (the
``Executor`` protocol of ``lexbuild.senses.executor``), so outputs are identical to a
single-process run. A task that raises is retried (``retries``); a task whose worker dies is
rescheduled by Dask on another worker, and after the scheduler's allowed failures the run stops
with a ``ClusterError`` (exit status 2, no traceback).

Every worker needs the same lexbuild and Python packages as the client (and the spaCy package
of the representation); stages that spill to disk need a folder every worker can reach.
"""

from __future__ import annotations

import argparse
import contextlib
import logging
from collections import deque
from collections.abc import Callable, Iterable, Iterator
from typing import Any, TypeVar

from lexbuild.errors import ClusterError

__all__ = [
    "DaskExecutor",
    "add_cluster_options",
    "executor_from_args",
    "open_executor",
]

T = TypeVar("T")
R = TypeVar("R")

#: Seconds to wait for a scheduler before giving up with a clear error.
CONNECT_TIMEOUT = 10.0
#: Times a task that raised is run again before the run fails (a dead worker is Dask's own
#: ``distributed.scheduler.allowed-failures``).
RETRIES = 2


def add_cluster_options(parser: argparse.ArgumentParser) -> None:
    """``--workers N`` and ``--scheduler ADDRESS`` (exclusive); neither: one process."""
    group = parser.add_argument_group("distributed (Dask)")
    choice = group.add_mutually_exclusive_group()
    choice.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="run on a local Dask cluster of N worker processes (one thread each)",
    )
    choice.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run on an existing Dask cluster (e.g. tcp://host:8786; see the README)",
    )


class DaskExecutor:
    """Runs tasks on a Dask cluster; results in task order, a bounded number in flight."""

    def __init__(
        self,
        client: Any,
        *,
        retries: int = RETRIES,
        in_flight: int | None = None,
        on_done: Callable[[int], None] | None = None,
    ) -> None:
        self.client = client
        self.retries = retries
        workers = max(len(client.scheduler_info().get("workers", {})), 1)
        # Enough to keep every worker busy while the client waits for the oldest task.
        self.in_flight = in_flight or 4 * workers
        self.on_done = on_done

    @property
    def workers(self) -> int:
        return max(len(self.client.scheduler_info().get("workers", {})), 1)

    def map(self, function: Callable[[T], R], tasks: Iterable[T]) -> Iterator[R]:
        import cloudpickle

        pending: deque[Any] = deque()
        iterator = iter(tasks)
        exhausted = False
        while True:
            while not exhausted and len(pending) < self.in_flight:
                try:
                    task = next(iterator)
                except StopIteration:
                    exhausted = True
                    break
                # The task travels as opaque bytes: Dask walks the arguments it is given (and
                # rebuilds dataclasses and dicts on the way), and the client kept those copies
                # (measured: one corpus-level decision per shard task, memory growing with
                # the number of shards).
                payload = cloudpickle.dumps(task)
                future = self.client.submit(
                    _call_pickled, function, payload, retries=self.retries, pure=False
                )
                if self.on_done is not None:
                    # Fed by Dask: the bar moves as tasks finish, in whatever order.
                    future.add_done_callback(_done_callback(self.on_done))
                pending.append(future)
            if not pending:
                return
            yield _result(pending.popleft())


def _call_pickled(function: Callable[[Any], R], payload: bytes) -> R:
    import cloudpickle

    return function(cloudpickle.loads(payload))


def _done_callback(on_done: Callable[[int], None]) -> Callable[[Any], None]:
    def callback(future: Any) -> None:
        if future.status == "finished":
            on_done(1)

    return callback


def _result(future: Any) -> Any:
    from distributed import KilledWorker

    try:
        return future.result()
    except KilledWorker as error:
        raise ClusterError(
            f"a worker died while running a task and so did its retries ({error}); see the "
            "workers' logs (memory limit, a crash in a native library)"
        ) from None
    except OSError as error:
        raise ClusterError(f"lost the connection to the Dask scheduler: {error}") from None


@contextlib.contextmanager
def open_executor(
    workers: int | None = None,
    scheduler: str | None = None,
    *,
    on_done: Callable[[int], None] | None = None,
    timeout: float | None = None,
) -> Iterator[DaskExecutor | None]:
    """A Dask executor for ``--workers``/``--scheduler``; ``None`` (one process) without them."""
    timeout = CONNECT_TIMEOUT if timeout is None else timeout
    if workers is None and scheduler is None:
        yield None
        return
    if workers is not None and scheduler is not None:
        raise ClusterError("give --workers or --scheduler, not both")
    if workers is not None and workers < 1:
        raise ClusterError(f"--workers must be at least 1, got {workers}")
    try:
        import dask
        from distributed import Client, LocalCluster
    except ImportError:
        raise ClusterError(
            "--workers and --scheduler need Dask: pip install 'lexbuild[distributed]'"
        ) from None
    with contextlib.ExitStack() as stack:
        # A worker that dies takes its task with it: the scheduler reruns the task elsewhere
        # this many times before giving up with KilledWorker.
        stack.enter_context(dask.config.set({"distributed.scheduler.allowed-failures": 2}))
        if workers is not None:
            cluster = stack.enter_context(
                LocalCluster(
                    n_workers=workers,
                    threads_per_worker=1,
                    processes=True,
                    host="127.0.0.1",
                    dashboard_address=None,
                    silence_logs=logging.ERROR,
                )
            )
            client = stack.enter_context(Client(cluster))
        else:
            try:
                client = stack.enter_context(
                    Client(scheduler, timeout=timeout, set_as_default=False)
                )
            except (OSError, TimeoutError) as error:
                raise ClusterError(
                    f"cannot reach the Dask scheduler at {scheduler}: {error}"
                ) from None
        yield DaskExecutor(client, on_done=on_done)


def executor_from_args(
    args: argparse.Namespace, *, on_done: Callable[[int], None] | None = None
) -> contextlib.AbstractContextManager[DaskExecutor | None]:
    """``open_executor`` for a command's parsed ``--workers``/``--scheduler``."""
    return open_executor(
        getattr(args, "workers", None), getattr(args, "scheduler", None), on_done=on_done
    )
