"""Worker processes shared by every parallel stage of one build (fits, figures, PDF volumes).

On Linux (and wherever the platform offers it) workers are forked from a server process that has
already imported the heavy libraries (SciPy, matplotlib, WeasyPrint), so a worker costs nothing
to start; the server is started at the beginning of the build and imports them while the main
process reads and conditions the rig data. Elsewhere workers are spawned. Where workers cannot
start at all (e.g. a caller whose main module cannot be re-imported), the same work is done in
the calling process. Results never depend on the number of workers: every job is a pure function
of its arguments and results come back in order.
"""

from __future__ import annotations

import multiprocessing
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
    """`workers` processes, started on first use and kept for the build; use as a context manager."""

    def __init__(self, workers: int):
        self.workers = max(1, int(workers))
        self._pool: ProcessPoolExecutor | None = None
        self._failed = False

    def __enter__(self) -> "WorkerPool":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def warm_up(self) -> None:
        """Start the process that workers are forked from, so that its imports overlap our work."""
        if self.workers > 1:
            ctx = _context()
            if ctx.get_start_method() == "forkserver":
                from multiprocessing import forkserver

                try:
                    forkserver.ensure_running()
                except OSError:
                    self._failed = True

    def map(self, fn: Callable, items: Iterable) -> list:
        """``[fn(x) for x in items]``, in the workers when there is more than one item and worker."""
        items = list(items)
        if self.workers <= 1 or len(items) <= 1 or self._failed:
            return [fn(x) for x in items]
        try:
            if self._pool is None:
                self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=_context())
            return list(self._pool.map(fn, items))
        except (BrokenProcessPool, OSError):
            self._failed = True
            self.close()
            return [fn(x) for x in items]

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
