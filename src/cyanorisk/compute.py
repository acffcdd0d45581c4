"""Where the work of many sites runs: one task after another in this process (the 'serial'
engine, the default), on a Dask ``LocalCluster`` of this machine ('local'), or on an existing
Dask cluster ('cluster'); see the ``[compute]`` section of the configuration.

The coordinating process hands out tasks (one site's assessment, one season's replay) and gets
their results back; it alone writes the store, the reports and the notices. A task is a
top-level function of cyanorisk with picklable arguments that returns its site's problems as
values, so an exception that reaches the engine is a fault of the machinery, not of a site.

The engines have one interface: ``submit`` a task, then ``next_done`` among those submitted.
Results do not depend on the engine (the same functions on the same inputs); only the order in
which they arrive does, and the coordinator files them by key.
"""

from __future__ import annotations

import logging
import sys
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from typing import Any, TextIO

from cyanorisk.errors import ComputeError, WorkerLostError

log = logging.getLogger("cyanorisk.progress")

TYPE_CHECKING = False
if TYPE_CHECKING:
    from cyanorisk.config import ComputeSettings


class Ticket:
    """A submitted task: ``result()`` gives its value, raises its exception, or raises
    :class:`WorkerLostError` when the worker running it (or the cluster) was lost."""

    def __init__(self, key: str) -> None:
        self.key = key

    def result(self) -> Any:  # pragma: no cover - engines override
        raise NotImplementedError


class _Deferred(Ticket):
    def __init__(self, key: str, fn: Callable[..., Any], args: tuple) -> None:
        super().__init__(key)
        self._fn, self._args = fn, args
        self._ran, self._value, self._error = False, None, None

    def run(self) -> None:
        if not self._ran:
            try:
                self._value = self._fn(*self._args)
            except Exception as exc:  # kept for result(), as a future would keep it
                self._error = exc
            self._ran = True

    def result(self) -> Any:
        self.run()
        if self._error is not None:
            raise self._error
        return self._value


class SerialEngine:
    """Tasks run in this process, in the order submitted, when their result is asked for."""

    name = "serial"
    workers = 1
    window = 1
    """Tasks handed out at a time: one, run when its result is asked for."""

    def submit(self, key: str, fn: Callable[..., Any], *args: Any) -> Ticket:
        return _Deferred(key, fn, args)

    def next_done(self, pending: list[Ticket]) -> Ticket:
        first = pending[0]
        first.run()  # type: ignore[attr-defined]
        return first

    def close(self) -> None:
        pass

    def __enter__(self) -> SerialEngine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _lost(exc: BaseException) -> bool:
    """Whether an exception from a Dask future means a lost worker or cluster (not the task)."""
    from distributed import KilledWorker
    from distributed.client import FutureCancelledError
    from distributed.comm.core import CommClosedError

    return isinstance(exc, (KilledWorker, FutureCancelledError, CommClosedError, TimeoutError))


class _Future(Ticket):
    def __init__(self, key: str, future: Any) -> None:
        super().__init__(key)
        self.future = future

    def result(self) -> Any:
        try:
            return self.future.result()
        except Exception as exc:
            if _lost(exc):
                said = str(exc).splitlines()[0] if str(exc) else ""
                raise WorkerLostError(f"a worker was lost while running {self.key} "
                                      f"({type(exc).__name__}: {said})") from None
            raise


class DaskEngine:
    """Tasks run on a Dask cluster: a ``LocalCluster`` started here (and stopped at close), or
    the scheduler at an address."""

    def __init__(self, client: Any, cluster: Any = None, name: str = "cluster") -> None:
        self.client, self.cluster, self.name = client, cluster, name

    @property
    def workers(self) -> int:
        try:
            return max(1, len(self.client.scheduler_info(n_workers=-1)["workers"]))
        except Exception:  # a scheduler that does not answer: the next result will say so
            return 1

    @property
    def window(self) -> int:
        """Tasks handed out at a time: two per worker, so that none waits for its next."""
        return 2 * self.workers

    def submit(self, key: str, fn: Callable[..., Any], *args: Any) -> Ticket:
        # a key of its own for every submission: Dask hands back an earlier future that still
        # holds the same key, which would be an earlier run's result
        import uuid

        dask_key = f"{fn.__name__}-{key}-{uuid.uuid4().hex}"
        return _Future(key, self.client.submit(fn, *args, pure=False, key=dask_key))

    def next_done(self, pending: list[Ticket]) -> Ticket:
        from distributed import wait

        try:
            with self.client.as_current():
                done = wait([t.future for t in pending],  # type: ignore[attr-defined]
                            return_when="FIRST_COMPLETED").done
        except Exception as exc:
            if _lost(exc) or isinstance(exc, OSError):
                raise WorkerLostError(f"the cluster was lost ({type(exc).__name__})") from None
            raise
        return next(t for t in pending if t.future in done)  # type: ignore[attr-defined]

    def close(self) -> None:
        try:
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()

    def __enter__(self) -> DaskEngine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


Engine = SerialEngine | DaskEngine


def open_engine(settings: ComputeSettings) -> Engine:
    """The engine the configuration's ``[compute]`` section asks for (use it in a with-block).
    The 'local' engine starts its worker processes by spawning: a script that opens it must do
    so under ``if __name__ == "__main__":``.

    Raises
    ------
    ComputeError
        When Dask is not installed, or the cluster's scheduler cannot be reached.
    """
    if settings.engine == "serial":
        return SerialEngine()
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise ComputeError(f"compute.engine = {settings.engine!r} needs Dask, which is not "
                           "installed: pip install 'cyanorisk[dask]'") from None
    if settings.engine == "local":
        import os

        workers = settings.workers or os.cpu_count() or 1
        saved = dict(os.environ)  # Dask sets thread limits for its workers in this process's too
        try:
            # on this machine only: the scheduler, the workers and the scheduler's small HTTP
            # server (health, metrics; no dashboard) listen on the loopback, on free ports
            cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                   host="127.0.0.1", dashboard_address=None,
                                   scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
                                   # a worker's fault that matters reaches the coordinator
                                   # through its task; what is left is noise at shutdown
                                   silence_logs=logging.CRITICAL)
        except Exception as exc:  # e.g. no free port, no process may be started
            raise ComputeError(f"compute.engine = 'local': the LocalCluster of {workers} "
                               f"worker(s) cannot start ({exc})") from None
        finally:
            os.environ.clear()
            os.environ.update(saved)
        return DaskEngine(Client(cluster, set_as_default=False), cluster, "local")
    try:
        client = Client(settings.address, timeout=30, set_as_default=False)
    except Exception as exc:
        raise ComputeError(f"compute.address = {settings.address!r}: no Dask scheduler answers "
                           f"there ({type(exc).__name__}: {exc})") from None
    return DaskEngine(client, None, "cluster")


@dataclass
class Done:
    """One finished task: its key and value, or the exception it raised (``error``)."""

    key: str
    value: Any = None
    error: Exception | None = None


Task = tuple[str, Callable[..., Any], tuple]
"""A task: its key (a site id, or 'site/season'), the function and its arguments."""


def run_all(engine: Engine, tasks: Iterable[Task], progress: Progress | None = None,
            window: int | None = None,
            follow: Callable[[Done], Iterable[Task]] | None = None) -> Iterator[Done]:
    """Run every task of ``tasks`` (taken as room frees up: a generator may do its part just
    before each is handed out) on ``engine``, at most ``window`` at a time (default: the
    engine's), yielding each as it finishes. A task's own exception comes back in
    :attr:`Done.error` and the others go on. ``follow`` gives, for a task done without error,
    the tasks that come of it; they are handed out before the rest.

    Raises
    ------
    WorkerLostError
        When a worker or the cluster is lost (the tasks not yet finished are not yielded).
    """
    window = window or engine.window
    todo = iter(tasks)
    ready: list[Task] = []
    pending: list[Ticket] = []
    while True:
        while len(pending) < window:
            nxt = ready.pop(0) if ready else next(todo, None)
            if nxt is None:
                break
            key, fn, args = nxt
            pending.append(engine.submit(key, fn, *args))
        if not pending:
            return
        ticket = engine.next_done(pending)
        pending.remove(ticket)
        try:
            done = Done(ticket.key, ticket.result())
        except WorkerLostError:
            raise
        except Exception as exc:
            done = Done(ticket.key, error=exc)
        if follow is not None and done.error is None:
            ready.extend(follow(done))
        if progress is not None:
            progress.step(ticket.key, "failed" if done.error is not None else "done")
        yield done


class Progress:
    """Progress over a known number of items: a bar on a terminal, otherwise one log line per
    item (on the ``cyanorisk.progress`` logger, or on ``stream`` when given)."""

    def __init__(self, total: int, label: str, stream: TextIO | None = None,
                 bar: bool | None = None) -> None:
        self.total, self.label, self.done = total, label, 0
        self.stream = stream
        out = stream or sys.stderr
        self.bar = out.isatty() if bar is None else bar
        if self.bar:
            self._draw()

    def _draw(self) -> None:
        out = self.stream or sys.stderr
        filled = int(30 * self.done / max(self.total, 1))
        out.write(f"\r{self.label} [{'#' * filled}{'.' * (30 - filled)}] {self.done}/{self.total}")
        if self.done >= self.total:
            out.write("\n")
        out.flush()

    def step(self, item: str, what: str = "done") -> None:
        self.done += 1
        if self.bar:
            self._draw()
        elif self.stream is not None:
            self.stream.write(f"{self.label}: {item} {what} ({self.done}/{self.total})\n")
        else:
            log.info("%s: %s %s (%d/%d)", self.label, item, what, self.done, self.total)
