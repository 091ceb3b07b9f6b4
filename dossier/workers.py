"""Worker processes shared by every parallel stage of one build (fits, figures, PDF volumes).

`WorkerPool(n)` does the work of ``n`` processes: the calling process itself and ``n - 1``
workers. The calling process starts on the first job at once, while the workers are still
starting, and every process takes the next job as soon as it is free. On Linux (and wherever
the platform offers it) workers are forked from a server process that has already imported the
heavy libraries (SciPy, matplotlib, WeasyPrint); the server is started early in the build and
imports them while the calling process works. Elsewhere workers are spawned. Where workers
cannot start at all (e.g. a caller whose main module cannot be re-imported), the calling
process does all the jobs. Results never depend on the number of workers: every job is a pure
function of its arguments and results come back in order.
"""

from __future__ import annotations

import multiprocessing
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from typing import Callable, Iterable

PRELOAD = ["dossier.build", "dossier.figures", "weasyprint"]


def _context():
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(PRELOAD)
        return ctx
    return multiprocessing.get_context("spawn")


class WorkerPool:
    """The calling process plus `workers - 1` processes, started on first use and kept for the
    build; use as a context manager."""

    def __init__(self, workers: int):
        self.workers = max(1, int(workers))
        self.timeline: list[tuple[str, str, float, float]] | None = None  # set to a list to record jobs
        self._pool: ProcessPoolExecutor | None = None
        self._failed = False
        self._lock = threading.Lock()

    def __enter__(self) -> "WorkerPool":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def warm_up(self) -> None:
        """Start the process that workers are forked from, so that its imports overlap our work."""
        if self.workers > 1 and not self._failed:
            ctx = _context()
            if ctx.get_start_method() == "forkserver":
                from multiprocessing import forkserver

                try:
                    forkserver.ensure_running()
                except OSError:
                    self._failed = True

    def _executor(self) -> ProcessPoolExecutor:
        with self._lock:
            if self._pool is None:
                self._pool = ProcessPoolExecutor(max_workers=self.workers - 1, mp_context=_context())
            return self._pool

    def map(self, fn: Callable, items: Iterable, cost: Callable | None = None) -> list:
        """``[fn(x) for x in items]``, shared between this process and the workers.

        With `cost` (an estimate per item), the dearest jobs start first, so that no process is
        left with a long job at the end; the results keep the order of `items`.
        """
        items = list(items)
        if self.workers <= 1 or len(items) <= 1 or self._failed:
            return [self._run_here(fn, x) for x in items]
        results: list = [None] * len(items)
        errors: list[tuple[int, BaseException]] = []
        returned: list[int] = []  # jobs a worker could not run (it could not start): done here
        lock = threading.Lock()
        indices = range(len(items))
        order = iter(sorted(indices, key=lambda i: -cost(items[i])) if cost else indices)

        def take() -> int | None:
            with lock:
                return None if errors else next(order, None)

        def relay() -> None:
            """Hand jobs to one worker process, one at a time, until none are left."""
            i = None
            try:
                pool = self._executor()
                while (i := take()) is not None:
                    started = time.perf_counter()
                    results[i] = pool.submit(fn, items[i]).result()
                    self._record(fn, threading.current_thread().name, started)
            except (BrokenProcessPool, OSError):
                self._failed = True
                if i is not None:
                    with lock:
                        returned.append(i)
            except BaseException as exc:  # noqa: BLE001 - the job's own error, raised below
                with lock:
                    errors.append((i, exc))

        relays = [threading.Thread(target=relay, daemon=True, name=f"worker {k + 1}") for k in range(self.workers - 1)]
        for t in relays:
            t.start()
        try:
            while (i := take()) is not None:
                results[i] = self._run_here(fn, items[i])
        except BaseException as exc:  # noqa: BLE001
            with lock:
                errors.append((i, exc))
        for t in relays:
            t.join()
        if errors:
            raise min(errors, key=lambda e: e[0])[1]
        for i in sorted(returned):
            results[i] = self._run_here(fn, items[i])
        if self._failed:
            self.close()
        return results

    def _run_here(self, fn: Callable, item):
        started = time.perf_counter()
        result = fn(item)
        self._record(fn, "caller", started)
        return result

    def _record(self, fn: Callable, who: str, started: float) -> None:
        if self.timeline is not None:
            self.timeline.append((fn.__name__, who, started, time.perf_counter()))

    def close(self) -> None:
        with self._lock:
            if self._pool is not None:
                self._pool.shutdown(wait=True, cancel_futures=True)
                self._pool = None
