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

Each worker is one process with a pipe of its own, fed by one relay thread of the calling
process, one job at a time. Interruptions (:mod:`dossier.common.interrupts`): Ctrl-C reaches every
process of the terminal's foreground group, but only the calling process decides; workers
ignore SIGINT (they are forked from a server that was started with SIGINT blocked, so the
signal cannot reach them before they ignore it, nor the server while it imports). When the
calling thread is interrupted, the pool terminates its workers at once instead of waiting for
their jobs, and stops the server. A closed pool leaves no process behind: its workers, the
server it started and the server's resource tracker are gone.

``concurrent.futures.ProcessPoolExecutor`` is not used because in Python 3.11 it cannot
terminate its workers (``terminate_workers`` comes with 3.14), and its ``submit`` waits for the
server to fork a worker while holding the lock that ``shutdown`` needs, so an interrupt in the
first seconds of a build could not stop it before the server had finished importing.
"""

from __future__ import annotations

import multiprocessing
import os
import pickle
import signal
import threading
import time
import traceback
from collections.abc import Callable, Iterable
from contextlib import contextmanager
from multiprocessing import forkserver, resource_tracker

from ..common import interrupts

PRELOAD = ["dossier.engine.build", "dossier.document.figures", "weasyprint"]
JOIN_S = 2.0  # how long a closing pool waits for a process to leave before it kills it


def _context():
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(PRELOAD)
        return ctx
    return multiprocessing.get_context("spawn")


class _Lost(Exception):
    """A worker could not start, or its process went away (or the pool was stopped)."""


class _RemoteTraceback(Exception):
    def __init__(self, text: str):
        super().__init__(text)
        self.text = text

    def __str__(self) -> str:
        return self.text


class _Failure:
    """A job's exception with the worker's traceback, raised again in the calling process."""

    def __init__(self, exc: BaseException):
        self.exc = exc
        self.text = "".join(traceback.format_exception(exc))

    def exception(self) -> BaseException:
        self.exc.__cause__ = _RemoteTraceback(self.text)
        return self.exc


def _reply(ok: bool, value) -> bytes:
    """Pickle a worker's reply; an error that cannot make the trip comes back as a RuntimeError."""
    try:
        data = pickle.dumps((ok, value), protocol=pickle.HIGHEST_PROTOCOL)
        if not ok:
            pickle.loads(data)  # an exception whose class cannot be rebuilt from its arguments
        return data
    except Exception as exc:
        what = f"{type(value.exc).__name__}: {value.exc}" if not ok else "its result"
        failure = _Failure(RuntimeError(f"a worker could not send back {what} ({exc})"))
        if not ok:
            failure.text = value.text
        return pickle.dumps((False, failure), protocol=pickle.HIGHEST_PROTOCOL)


def _serve(conn) -> None:
    """A worker's life: run the jobs that come down `conn` until the calling process closes it."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C reaches the whole group: the calling process decides
    while True:
        try:
            data = conn.recv_bytes()
        except (EOFError, OSError):
            return  # the calling process closed the pipe, or is gone
        try:
            fn, item = pickle.loads(data)
            reply = _reply(True, fn(item))
        except BaseException as exc:
            reply = _reply(False, _Failure(exc))
        try:
            conn.send_bytes(reply)
        except OSError:
            return


class _Worker:
    """One worker process and the calling process's end of its pipe."""

    def __init__(self, process, conn):
        self.process = process
        self.conn = conn

    def call(self, fn: Callable, item):
        """``fn(item)`` in the worker; raises the job's own error, or `_Lost` if the worker went away."""
        data = pickle.dumps((fn, item), protocol=pickle.HIGHEST_PROTOCOL)
        try:
            self.conn.send_bytes(data)
            reply = self.conn.recv_bytes()
        except (EOFError, OSError) as exc:
            raise _Lost(str(exc)) from exc
        ok, value = pickle.loads(reply)
        if not ok:
            raise value.exception()
        return value


@contextmanager
def _sigint_blocked():
    """Block SIGINT in this thread: a process started meanwhile inherits the block (the fork
    server, and through it every worker), so that Ctrl-C cannot reach it before it ignores it."""
    if not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


class WorkerPool:
    """The calling process plus `workers - 1` processes, started on first use and kept for the
    build; use as a context manager."""

    def __init__(self, workers: int):
        self.workers = max(1, int(workers))
        self.timeline: list[tuple[str, str, float, float]] | None = None  # set to a list to record jobs
        self._failed = False  # a worker could not start or went away: this process does the jobs
        self._stopped = False  # interrupted: no worker may start any more
        self._lock = threading.Lock()
        self._slots: list[_Worker | None] = [None] * (self.workers - 1)  # the worker of each relay
        self._started: list[_Worker] = []  # every worker started and not yet closed
        self._servers_checked = False
        self._server: int | None = None  # the fork server's pid, if this pool started it
        self._tracker: int | None = None  # the resource tracker's pid, if this pool started it

    def __enter__(self) -> WorkerPool:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        now = exc is not None and not isinstance(exc, Exception)  # an interruption: stop the workers mid-job
        if now:
            interrupts.acknowledge(exc)
        self._shutdown(now=now)

    def warm_up(self) -> None:
        """Start the process that workers are forked from, so that its imports overlap our work."""
        if self.workers > 1 and not self._failed:
            with self._lock:
                if not self._stopped:
                    try:
                        self._start_servers()
                    except OSError:
                        self._failed = True

    def _start_servers(self) -> None:
        """Start the fork server (with the lock held), once; note the processes this started."""
        if self._servers_checked or _context().get_start_method() != "forkserver":
            return
        self._servers_checked = True
        server = getattr(forkserver, "_forkserver", None)
        tracker = getattr(resource_tracker, "_resource_tracker", None)
        # no signal may cut this short between starting a process and noting it (it would outlive us)
        with interrupts.deferred():
            had_server, had_tracker = _pid(server, "_forkserver_pid"), _pid(tracker, "_pid")
            resource_tracker.ensure_running()  # first: starting it unblocks SIGINT in this thread
            with _sigint_blocked():
                forkserver.ensure_running()
            if had_server is None:
                self._server = _pid(server, "_forkserver_pid")
            if had_tracker is None:
                self._tracker = _pid(tracker, "_pid")

    def _start_worker(self, k: int) -> _Worker:
        """Start the worker of relay `k`; `_Lost` if it cannot start or the pool was stopped."""
        ctx = _context()
        with self._lock:
            if self._stopped:
                raise _Lost("the pool was stopped")
            try:
                self._start_servers()
            except OSError as exc:
                raise _Lost(str(exc)) from exc
        here, there = ctx.Pipe()
        process = ctx.Process(target=_serve, args=(there,), name=f"dossier worker {k + 1}", daemon=True)
        try:
            with _sigint_blocked():  # a spawned worker inherits the block until it ignores SIGINT
                process.start()  # waits for the server if it is still importing
        except Exception as exc:
            here.close()
            raise _Lost(str(exc)) from exc
        finally:
            there.close()  # the worker's end: held by the worker alone, so its exit reads as the end
        worker = _Worker(process, here)
        with self._lock:
            stopped = self._stopped
            if not stopped:
                self._started.append(worker)
        if stopped:  # stopped while this one was starting: the stop did not see it
            process.terminate()
            process.join(JOIN_S)
            here.close()
            raise _Lost("the pool was stopped")
        return worker

    def map(self, fn: Callable, items: Iterable, cost: Callable | None = None) -> list:
        """``[fn(x) for x in items]``, shared between this process and the workers.

        With `cost` (an estimate per item), the dearest jobs start first, so that no process is
        left with a long job at the end; the results keep the order of `items`.
        """
        items = list(items)
        if self.workers <= 1 or len(items) <= 1 or self._failed or self._stopped:
            return [self._run_here(fn, x) for x in items]
        results: list = [None] * len(items)
        errors: list[tuple[int, BaseException]] = []
        returned: list[int] = []  # jobs a worker could not run (it could not start): done here
        lock = threading.Lock()
        indices = range(len(items))
        order = iter(sorted(indices, key=lambda i: -cost(items[i])) if cost else indices)

        def take() -> int | None:
            with lock:
                return None if errors or self._stopped else next(order, None)

        def relay(k: int) -> None:
            """Hand jobs to one worker process, one at a time, until none are left."""
            i = None
            try:
                worker = self._slots[k]
                if worker is None:
                    worker = self._slots[k] = self._start_worker(k)
                while (i := take()) is not None:
                    started = time.perf_counter()
                    results[i] = worker.call(fn, items[i])
                    self._record(fn, threading.current_thread().name, started)
            except _Lost:
                if not self._stopped:
                    self._failed = True
                    if i is not None:
                        with lock:
                            returned.append(i)
            except BaseException as exc:
                with lock:
                    errors.append((i, exc))

        relays = [
            threading.Thread(target=relay, args=(k,), daemon=True, name=f"worker {k + 1}")
            for k in range(self.workers - 1)
        ]
        try:
            for t in relays:
                t.start()
            try:
                while (i := take()) is not None:
                    results[i] = self._run_here(fn, items[i])
            except Exception as exc:
                with lock:
                    errors.append((i, exc))
            for t in relays:
                t.join()
        except BaseException as exc:  # interrupted (Ctrl-C, SIGTERM): stop the workers now, not after their jobs
            interrupts.acknowledge(exc)
            self._shutdown(now=True, relays=relays)
            raise
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
        interrupts.check()  # a signal whose exception the job swallowed: its result cannot be trusted
        self._record(fn, "caller", started)
        return result

    def _record(self, fn: Callable, who: str, started: float) -> None:
        if self.timeline is not None:
            self.timeline.append((fn.__name__, who, started, time.perf_counter()))

    def close(self) -> None:
        """Let the workers leave, then stop the server this pool started."""
        self._shutdown(now=False)

    def _shutdown(self, now: bool, relays: list[threading.Thread] = ()) -> None:
        """Close the workers (with `now`, terminate them mid-job and start no more), then the servers."""
        with interrupts.deferred():  # a signal meanwhile waits: a cut-short close would leave processes
            with self._lock:
                self._stopped = self._stopped or now
                workers, self._started = self._started, []
                self._slots = [None] * (self.workers - 1)
                server, tracker = self._server, self._tracker
                self._server = self._tracker = None
                self._servers_checked = False
            for w in workers:
                if now:
                    w.process.terminate()
                else:
                    w.conn.close()  # a waiting worker reads the end of its pipe and leaves
            for w in workers:  # the server reaps them and tells us: stop it only afterwards
                w.process.join(JOIN_S)
                if w.process.exitcode is None:
                    w.process.kill()
                    w.process.join()
            _stop_server(server)  # a relay still waiting for the server to fork its worker gives up
            for t in relays:
                t.join(JOIN_S)  # each sees the end of its worker's pipe (or a failed start) and returns
            for w in workers:
                w.conn.close()
            _stop_tracker(tracker)


def _pid(obj, attribute: str) -> int | None:
    return getattr(obj, attribute, None)


def _stop_server(pid: int | None) -> None:
    """Stop the fork server `pid` at once (it may still be importing, which it would finish
    before noticing that its clients have left), and forget it so that a new one can start."""
    server = getattr(forkserver, "_forkserver", None)
    if pid is None or not hasattr(server, "_lock"):
        return  # (another Python's internals: the server then leaves when its clients have gone)
    with server._lock:
        if _pid(server, "_forkserver_pid") != pid:
            return
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass
        try:
            server._stop_unlocked()  # closes our end of its "alive" pipe, waits for it, forgets its address
        except (AttributeError, OSError):
            pass


def _stop_tracker(pid: int | None) -> None:
    """Stop the resource tracker `pid` (started with the server; it holds nothing of ours: the
    pool uses no named semaphores). It leaves when the last copy of its pipe is closed."""
    tracker = getattr(resource_tracker, "_resource_tracker", None)
    if pid is None or not hasattr(tracker, "_lock") or not hasattr(tracker, "_fd"):
        return  # (another Python's internals: the tracker then leaves when our process does)
    with tracker._lock:
        if _pid(tracker, "_pid") != pid:
            return
        fd, tracker._fd, tracker._pid = tracker._fd, None, None
    try:
        os.close(fd)
        deadline = time.monotonic() + JOIN_S
        while os.waitpid(pid, os.WNOHANG)[0] == 0:
            if time.monotonic() > deadline:  # a copy of its pipe lives on in a stray process
                os.kill(pid, signal.SIGKILL)
                os.waitpid(pid, 0)
                break
            time.sleep(0.005)
    except (ChildProcessError, ProcessLookupError, OSError):
        pass
