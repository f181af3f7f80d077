"""Where batch work runs: in this process, a local process pool, or a Dask cluster.

Each executor runs a module-level function `work(task) -> result` over an
iterable of tasks and yields ``(index, result)`` as results come in, stopping
early when a stop flag is raised (Ctrl-C): a pool lets running tasks finish
and hands their results back; Dask cancels what has not come back.  Tasks are
drawn from the iterable only as workers free up (a bounded number in flight),
so the caller can build each task just in time.
"""
from __future__ import annotations

import multiprocessing
import os
import queue
import re
import signal
import time
from abc import ABC, abstractmethod
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from .errors import RenderError, RunError, option_error

__all__ = ["Inline", "Pool", "Dask", "backend", "default_workers", "POLL_S", "CONNECT_TIMEOUT_S", "WORKER_TIMEOUT_S"]

POLL_S = 0.1  # s, how often the parent looks for Ctrl-C while waiting for results
CONNECT_TIMEOUT_S = 10.0  # s, to reach a Dask scheduler
WORKER_TIMEOUT_S = 120.0  # s, how long a run waits with no Dask worker alive before it gives up
ALIVE_CHECK_S = 1.0  # s, how often the parent asks the scheduler how many workers it has
_ADDRESS = re.compile(r"^(?:[a-z][a-z0-9]*://)?[A-Za-z0-9_.\[\]:-]+:\d{1,5}$|^inproc://\S+$")


def _ignore_sigint():
    """Pool initializer: workers ignore Ctrl-C, so only the parent decides how to stop."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _nothing():
    """The empty task of :meth:`Pool.warm_up`."""
    return None


class Inline:
    """Runs tasks one by one in this process (``workers=1``)."""

    description = "this process"
    workers = 1

    def __init__(self, work):
        self.work = work

    def warm_up(self):
        """Nothing to start."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def terminate(self):
        """Nothing runs elsewhere."""

    def run(self, tasks, stop):
        for index, task in enumerate(tasks):
            if stop.requested:
                return
            yield index, self.work(task)


class _Futures(ABC):
    """Shared loop for executors with futures: yield results as they come, stop on request."""

    @abstractmethod
    def _submit(self, task):
        """Hand `task` to the executor; return a future."""

    def _cancel(self, futures):
        for future in futures:
            future.cancel()

    def _check_alive(self):
        """Called while waiting for results; raises if the work can no longer be done."""

    def _outcome(self, future):
        try:
            return future.result()
        except Exception as error:  # noqa: BLE001 - a dead worker fails its jobs, not the run
            return "error", f"the worker running this job failed ({type(error).__name__}: {error})"

    #: Tasks in flight per worker (keeps every worker busy while results travel back).
    in_flight_per_worker = 2

    def run(self, tasks, stop):
        done = queue.SimpleQueue()
        tasks = iter(tasks)
        index_of = {}
        counter = 0
        window = max(1, self.in_flight_per_worker * self.workers)

        def submit_next():
            nonlocal counter
            task = next(tasks, None)
            if task is None:
                return False
            future = self._submit(task)
            index_of[future] = counter
            counter += 1
            future.add_done_callback(done.put)
            return True

        more = True
        while more and len(index_of) < window:
            more = submit_next()
        while index_of and not stop.requested:
            try:
                future = done.get(timeout=POLL_S)
            except queue.Empty:
                self._check_alive()
                continue
            index = index_of.pop(future)
            outcome = self._outcome(future)
            if more and not stop.requested:
                more = submit_next()
            yield index, outcome
        if index_of:
            yield from self._drain(index_of, done, len(index_of))

    def _drain(self, index_of, done, remaining):
        """After a stop: cancel every job not yet handed back; results still in flight are dropped."""
        self._cancel([future for future in index_of if not future.done()])
        return iter(())


class Pool(_Futures):
    """A local process pool of `workers` processes running `work` (a module-level function).

    `preload` names modules the workers need, imported once in the fork
    server before any worker is forked from it (a worker then starts with
    them loaded: scipy.signal alone takes most of a second to import).
    :meth:`warm_up` starts every worker at once, so they boot while the
    caller still has work of its own to do.
    """

    def __init__(self, work, workers, preload=()):
        self.work = work
        self.workers = workers
        self.preload = tuple(preload)
        self.description = f"{workers} local processes"

    def __enter__(self):
        methods = multiprocessing.get_all_start_methods()
        context = multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")
        if context.get_start_method() == "forkserver":
            context.set_forkserver_preload([self.work.__module__, *self.preload])
        self.executor = ProcessPoolExecutor(max_workers=self.workers, mp_context=context, initializer=_ignore_sigint)
        return self

    def warm_up(self):
        """Start every worker now (each runs the initializer and an empty task); returns at once."""
        for _ in range(self.workers):
            self.executor.submit(_nothing)

    def __exit__(self, *exc):
        if exc[0] is not None:
            self.terminate()
        self.executor.shutdown(wait=True, cancel_futures=True)
        return False

    def terminate(self):
        """Stop every worker now (a second Ctrl-C or SIGTERM): no worker outlives the run."""
        processes = getattr(self.executor, "_processes", None) or {}  # concurrent.futures keeps them by pid
        for process in list(processes.values()):
            if process.is_alive():
                process.terminate()

    def _submit(self, task):
        return self.executor.submit(self.work, task)

    def _outcome(self, future):
        try:
            return future.result()
        except BrokenProcessPool as error:
            raise RenderError(
                f"the worker processes stopped ({error}): one ran out of memory or could not start; from a script, "
                "call build_library under 'if __name__ == \"__main__\":' (or use workers=1); files written so far are kept"
            ) from None

    def _drain(self, index_of, done, remaining):
        """Cancel the jobs not started; wait for the running ones (a few) and hand back their results.

        Every future not yet handed back puts itself on `done` exactly once,
        when it completes or is cancelled.
        """
        for future in index_of:
            future.cancel()
        while remaining:
            future = done.get()
            remaining -= 1
            if not future.cancelled():
                yield index_of[future], self._outcome(future)


class Dask(_Futures):
    """The jobs submitted to an existing Dask distributed scheduler."""

    #: Tasks kept in flight on a cluster (its size is not known here).
    workers = 64

    def __init__(self, work, address, *, worker_timeout=WORKER_TIMEOUT_S, verbose=False):
        self.work = work
        self.address = address
        self.worker_timeout = float(worker_timeout)
        self.verbose = verbose
        self.description = f"Dask scheduler {address}"
        self._checked = 0.0
        self._none_since = None

    def __enter__(self):
        if not _ADDRESS.match(self.address):
            raise option_error(
                f"{self.address!r} is not a scheduler address: give PROTOCOL://HOST:PORT, e.g. tcp://10.0.0.5:8786",
                "--scheduler",
            )
        try:
            from distributed import Client
        except ImportError:
            raise option_error(
                "needs Dask distributed, the optional extra 'cluster': pip install '.[cluster]'", "--scheduler"
            ) from None
        if not self.verbose:  # Dask's own logging stays out of the user's terminal unless asked (--verbose)
            import logging

            for name in ("distributed", "tornado", "asyncio"):
                logging.getLogger(name).setLevel(logging.CRITICAL + 1)
        try:
            self.client = Client(self.address, timeout=CONNECT_TIMEOUT_S, set_as_default=False)
        except (OSError, TimeoutError, ValueError, TypeError) as error:
            raise option_error(f"cannot reach a Dask scheduler at {self.address!r}: {error}", "--scheduler") from None
        return self

    def __exit__(self, *exc):
        try:
            self.client.close(timeout=CONNECT_TIMEOUT_S)
        except Exception:  # noqa: BLE001 - a scheduler that is gone cannot be told goodbye
            pass
        return False

    def warm_up(self):
        """The cluster's workers are running already."""

    def terminate(self):
        """Nothing to stop here: the cluster's workers are not ours (what is pending is cancelled)."""

    def _workers_alive(self):
        try:
            return len(self.client.nthreads())
        except Exception:  # noqa: BLE001 - the scheduler itself is gone or not answering
            return 0

    def _check_alive(self):
        """RunError once no worker has been alive for :attr:`worker_timeout` seconds."""
        now = time.monotonic()
        if now - self._checked < ALIVE_CHECK_S:
            return
        self._checked = now
        if self._workers_alive():
            self._none_since = None
            return
        if self._none_since is None:
            self._none_since = now
        elif now - self._none_since >= self.worker_timeout:
            raise RunError(f"no Dask worker has been alive at {self.address} for {self.worker_timeout:g} s "
                           "(--worker-timeout); files written so far are whole and in the manifest")

    def _submit(self, task):
        return self.client.submit(self.work, task, pure=False)

    def _cancel(self, futures):
        if futures:
            self.client.cancel(futures)


def default_workers():
    """How many CPU cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on every platform
        return os.cpu_count() or 1


def backend(work, workers, scheduler, n_tasks, preload=(), *, worker_timeout=WORKER_TIMEOUT_S, verbose=False):
    """Where `n_tasks` calls of `work` run: Dask if `scheduler`, else a pool or this process.

    `preload`: modules a local pool's workers import before their first task.
    `worker_timeout` (s) and `verbose` (Dask's logging shown): for a cluster.
    """
    if scheduler is not None:
        if workers is not None:
            raise option_error("give --workers for a local run or --scheduler for a Dask cluster, not both", "--workers")
        return Dask(work, scheduler, worker_timeout=worker_timeout, verbose=verbose)
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise option_error(f"must be a whole number >= 1, got {workers!r}", "--workers")
    workers = default_workers() if workers is None else workers
    workers = max(1, min(workers, n_tasks))
    return Inline(work) if workers == 1 else Pool(work, workers, preload)
