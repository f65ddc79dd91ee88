"""Where a run's work is done: in this process, on a local Dask cluster, or on a cluster the user started.

    with Workers(count=2) as workers:           # settle run ... --workers 2
        blocks = workers.map(grid_task, batches, shared=workers.share(state))

`Workers()` runs every task here, one after the other. `Workers(count=N)` starts a `dask.distributed.LocalCluster`
of N worker processes, one thread each (the engine's numpy work holds the GIL between its calls, so processes, not
threads, share the cores). `Workers(scheduler="tcp://HOST:PORT")` connects to a scheduler started with the
`dask scheduler` command, whose workers (`dask worker tcp://HOST:PORT`) must run the same settle version.

The orchestrator cuts the work into the same tasks in every mode, and gathers their results in task order, so a run
gives the same numbers whichever mode ran it (`settle.procedure.chunks`). A task's arguments are its own share of
the work (the rows of its buildings); what every task needs (the project without its assets, the tunnel elements)
goes to each worker once with `share`; only the results come back.
"""
from __future__ import annotations

import logging
from typing import Any, Callable, Iterator, Sequence

from ..errors import InputError
from ..version import __version__

#: How long to wait for a scheduler given with --scheduler before giving up. [s]
CONNECT_TIMEOUT_S = 10.0
#: Large arrays from the heap, not from a fresh mapping each time. Dask's nanny sets MALLOC_TRIM_THRESHOLD_ in its
#: workers, which turns off glibc's adaptive mmap threshold: every array over 128 KiB was then mapped and unmapped,
#: and the tasks of a run took 1.6 to 2.3 times as long as in one process (measured on the envelope's tasks, 4 000
#: buildings); with this they take 1.1 times as long. Workers started by hand get the same with this variable set
#: in their environment (README).
MMAP_THRESHOLD_BYTES = 2**30
WORKER_ENVIRONMENT = {"distributed.nanny.pre-spawn-environ.MALLOC_MMAP_THRESHOLD_": MMAP_THRESHOLD_BYTES}


class Workers:
    """The run's workers. Use as a context manager: a local cluster is closed, a connection dropped, on leaving.

    Parameters
    ----------
    count : int, optional      Worker processes of a local Dask cluster (`--workers N`).
    scheduler : str, optional  Address of a running Dask scheduler (`--scheduler tcp://HOST:PORT`).
    Neither: every task runs in this process.
    """

    def __init__(self, count: int | None = None, scheduler: str | None = None):
        if count is not None and scheduler is not None:
            raise InputError("give --workers N or --scheduler ADDRESS, not both")
        if count is not None and not (isinstance(count, int) and count >= 1):
            raise InputError(f"--workers must be a whole number of at least 1; got {count!r}")
        self.count = count
        self.scheduler = scheduler
        self._cluster = None
        self._client = None

    @property
    def distributed(self) -> bool:
        return self._client is not None

    @property
    def description(self) -> str:
        """The mode in words, for run.json and the closing table."""
        if self.scheduler:
            return f"Dask scheduler {self.scheduler}"
        if self.count:
            return f"local Dask cluster of {self.count} worker process{'es' if self.count > 1 else ''}"
        return "one process"

    def __enter__(self) -> "Workers":
        if self.count is None and self.scheduler is None:
            return self
        from dask.distributed import Client, LocalCluster

        for name in ("distributed", "distributed.scheduler", "distributed.worker", "distributed.nanny"):
            logging.getLogger(name).setLevel(logging.ERROR)
        if self.scheduler:
            try:
                self._client = Client(self.scheduler, timeout=CONNECT_TIMEOUT_S)
            except (OSError, TimeoutError, ValueError, TypeError) as exc:
                raise InputError(f"--scheduler {self.scheduler}: no Dask scheduler answered within "
                                 f"{CONNECT_TIMEOUT_S:g} s ({_one_line(exc)}); start one with `dask scheduler` and "
                                 "its workers with `dask worker ADDRESS`") from None
            self._check_workers()
        else:
            import dask.config

            with dask.config.set(WORKER_ENVIRONMENT):
                self._cluster = LocalCluster(n_workers=self.count, threads_per_worker=1, processes=True,
                                             dashboard_address=None, silence_logs=logging.ERROR)
            self._client = Client(self._cluster)
        return self

    def _check_workers(self) -> None:
        """A scheduler with no workers, or workers of another settle version, is refused before any work is sent."""
        workers = self._client.scheduler_info().get("workers", {})
        if not workers:
            self.close()
            raise InputError(f"--scheduler {self.scheduler}: the scheduler has no workers; start them with "
                             f"`dask worker {self.scheduler}`")
        versions = self._client.run(_settle_version)
        other = {address: v for address, v in versions.items() if v != __version__}
        if other:
            self.close()
            shown = ", ".join(f"{a} has {v}" for a, v in sorted(other.items())[:3])
            raise InputError(f"--scheduler {self.scheduler}: every worker must run settle {__version__}, as this "
                             f"command does; {shown}")

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None
        if self._cluster is not None:
            self._cluster.close()
            self._cluster = None

    @property
    def worker_count(self) -> int:
        """Worker processes the tasks spread over (1 in this process)."""
        if self._client is None:
            return 1
        return max(1, len(self._client.scheduler_info().get("workers", {})))

    def share(self, value: Any) -> Any:
        """`value` made available to every task: sent to each worker once (a Dask future), or itself here."""
        if self._client is None:
            return value
        return self._client.scatter(value, broadcast=True, hash=False)

    def place(self, items: Sequence) -> list:
        """Each item sent to one worker, once, for the tasks of several steps to use where it lies (Dask futures);
        the items themselves here."""
        if self._client is None:
            return list(items)
        return self._client.scatter(list(items), hash=False)

    def map(self, function: Callable, *iterables: Sequence, shared: Any = None,
            progress: Callable[[float], None] | None = None) -> list:
        """[function(*args, shared) for args in zip(*iterables)], in order; on the workers when distributed.
        An error in a task (an InputError among them) is raised here as it was raised there."""
        return list(self.imap(function, *iterables, shared=shared, progress=progress))

    def imap(self, function: Callable, *iterables: Sequence, shared: Any = None,
             progress: Callable[[float], None] | None = None) -> Iterator:
        """As `map`, one result at a time in order, so the caller can add each into a total and drop it (the
        workers go on with the rest meanwhile)."""
        columns = [list(items) for items in iterables]
        n = len(columns[0])
        tell = progress or (lambda fraction: None)
        if self._client is None:
            for k, args in enumerate(zip(*columns)):
                yield function(*args, shared)
                tell((k + 1) / n)
            return
        futures = self._client.map(function, *columns, [shared] * n, pure=False)
        try:
            for k, future in enumerate(futures):
                yield future.result()
                future.release()
                tell((k + 1) / n)
        finally:
            for future in futures:
                future.release()


def _settle_version() -> str:
    from settle.version import __version__ as version

    return version


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split()) or type(exc).__name__
