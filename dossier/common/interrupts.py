"""Ctrl-C and SIGTERM: stop a build at once, clean up, say so in one line, exit 130 or 143.

The command line runs inside :class:`Guard`. The first SIGINT (Ctrl-C: the terminal sends it to
every process of the foreground group, workers included) or SIGTERM (sent to this process only)
raises :class:`Interrupted` in the main thread. It is an exception of our own, not
``KeyboardInterrupt``, so that click does not turn it into its own abort, and it derives from
``BaseException``, so that no ``except Exception`` swallows it. It unwinds the build: the writer
removes its temporary folder, the cache its temporary file, the worker pool terminates its
processes and the server they are forked from (workers ignore SIGINT: this process decides).
The exit code is 128 + the signal number, the shells' convention.

Some library code swallows every exception, ``BaseException`` included (WeasyPrint's drawing of
an SVG image logs it and draws on without the image). So until our own code has caught the
interruption (:func:`acknowledge`), it is raised again every `REPEAT_S` (one raised inside a
finalizer, which Python reports as "Exception ignored", is dropped silently); and :func:`check`,
called after every job and before anything is stored or swapped in, raises it again, so that
nothing computed after the signal (a PDF missing a figure) is ever cached or written. Once our
cleanup has begun, further signals are ignored (the first one decided).

:func:`deferred` holds a signal back for the few statements that must not be cut in half (the
renames that swap a finished output folder in, the creation of a temporary file and the
assignment of its name).
"""

from __future__ import annotations

import _thread
import atexit
import os
import signal
import sys
import threading
import time
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from ..common.errors import EXIT_SIGINT, EXIT_SIGTERM

if TYPE_CHECKING:
    from collections.abc import Callable
    from types import FrameType
    from typing import Any, TypeAlias

    # a signal's disposition, as signal.signal returns it
    Handler: TypeAlias = Callable[[int, FrameType | None], Any] | int | signal.Handlers | None

EXIT_CODES: dict[int, int] = {signal.SIGINT: EXIT_SIGINT, signal.SIGTERM: EXIT_SIGTERM}
REPEAT_S = 0.005  # how often an interruption that has not reached our own code is raised again


class Interrupted(BaseException):
    """The build was asked to stop by a signal; carries the exit code to leave with."""

    def __init__(self, signum: int):
        self.signum = signum
        self.exit_code = EXIT_CODES.get(signum, 128 + signum)
        super().__init__(signal.Signals(signum).name)


def exit_code(exc: BaseException) -> int:
    """The exit code for an interruption: `Interrupted`'s own, 130 for a plain KeyboardInterrupt."""
    return exc.exit_code if isinstance(exc, Interrupted) else EXIT_SIGINT


_active: Guard | None = None  # the innermost guard


class Guard:
    """While active, SIGINT and SIGTERM raise `Interrupted` in the main thread, until our own
    code has caught it; use as a context manager."""

    def __init__(self) -> None:
        self.signum: int | None = None  # the first signal received
        self.acknowledged = False  # our own code has caught the interruption: its cleanup runs
        self.replaced: Path | None = None  # an output folder swapped in before the signal took effect
        self._lock = threading.Lock()
        self._previous: dict[int, Handler] = {}
        self._unraisable: Callable[[sys.UnraisableHookArgs], Any] | None = None  # the hook ours replaced
        self._outer: Guard | None = None

    def __enter__(self) -> Guard:
        global _active
        if _in_main_thread():  # only the main thread may set handlers (and only it runs them)
            self._previous = {s: signal.signal(s, self._handle) for s in EXIT_CODES}
            self._unraisable, sys.unraisablehook = sys.unraisablehook, self._unraisable_hook
        self._outer, _active = _active, self
        return self

    def __exit__(self, *exc) -> None:
        global _active
        with self._lock:
            self.acknowledged = True  # no more repeats; one already on its way is ignored by _handle
        _active = self._outer
        for s, handler in self._previous.items():
            signal.signal(s, handler)  # runs any pending handler (ours, which ignores it) first
        self._previous = {}
        if self._unraisable is not None:
            sys.unraisablehook, self._unraisable = self._unraisable, None

    def _handle(self, signum: int, frame) -> None:
        if self.signum is None:
            self.signum = signum
            threading.Thread(target=self._repeat, name="interruption", daemon=True).start()
        elif self.acknowledged:
            return  # the first signal decided and our cleanup has begun: let it run to its end
        raise Interrupted(self.signum)

    def _unraisable_hook(self, unraisable) -> None:
        """Drop an interruption raised inside a finalizer (``__del__``, a weakref callback): Python
        cannot propagate it from there and would print it; it is raised again shortly."""
        if not isinstance(unraisable.exc_value, Interrupted):
            (self._unraisable or sys.__unraisablehook__)(unraisable)

    def _repeat(self) -> None:
        """Raise the interruption again in the main thread until our own code has caught it."""
        while True:
            time.sleep(REPEAT_S)
            with self._lock:
                if self.acknowledged:
                    return
                assert self.signum is not None  # _handle sets it before it starts this thread
                # as if the signal came again: calls _handle (the stub wants a Signals; the value is the same)
                _thread.interrupt_main(signal.Signals(self.signum))

    def message(self, command: str | None = "build") -> str:
        """The one line to print on stderr for an interrupted `command`."""
        if self.replaced is not None:
            return f"interrupted: stopped after the new output was written to {self.replaced}"
        if command == "build":  # the writer replaces an output only at its very end (see note_replaced)
            return "interrupted: the build was stopped; the previous output is unchanged"
        return f"interrupted: dossier {command} was stopped" if command else "interrupted: stopped"


def acknowledge(exc: BaseException | None = None) -> None:
    """Say that the interruption `exc` has reached our own code, whose cleanup now begins."""
    guard = _active
    if guard is not None and guard.signum is not None and (exc is None or is_interruption(exc)):
        with guard._lock:
            guard.acknowledged = True


def is_interruption(exc: BaseException) -> bool:
    return isinstance(exc, (Interrupted, KeyboardInterrupt))


def check() -> None:
    """Raise the interruption again if a signal has come (whatever swallowed what it raised)."""
    guard = _active
    if guard is not None and guard.signum is not None:
        raise Interrupted(guard.signum)


def note_replaced(out_dir: Path) -> None:
    """Tell the active guard that `out_dir` now holds a new output (so the message stays true)."""
    if _active is not None:
        _active.replaced = Path(out_dir)


def leave(code: int) -> None:
    """End the process now with `code`, its cleanup done: run the exit handlers and flush, but skip
    the teardown of every module and object (a second or more after a build's PDF rendering)."""
    run_exit_handlers = getattr(atexit, "_run_exitfuncs", None)
    if run_exit_handlers is None:
        sys.exit(code)
    run_exit_handlers()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    os._exit(code)


def ignore() -> None:
    """Ignore SIGINT and SIGTERM from now on (the process is ending: a late Ctrl-C must not
    print a traceback from the interpreter's shutdown)."""
    if _in_main_thread():
        for s in EXIT_CODES:
            signal.signal(s, signal.SIG_IGN)


@contextmanager
def deferred():
    """Hold SIGINT and SIGTERM back until the block is done, then act on the first one held."""
    if not _in_main_thread():
        yield  # Python runs signal handlers in the main thread only: nothing can cut this block
        return
    held: list[int] = []
    previous = {s: signal.signal(s, lambda signum, frame: held.append(signum)) for s in EXIT_CODES}
    try:
        yield
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)
        if held:
            _deliver(held[0], previous[held[0]])


def _deliver(signum: int, handler) -> None:
    """Do what `handler` (a signal's disposition before `deferred`) would have done."""
    if callable(handler):
        handler(signum, None)  # ours raises Interrupted; Python's default for SIGINT, KeyboardInterrupt
    elif handler == signal.SIG_DFL:
        signal.raise_signal(signum)


def _in_main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()
