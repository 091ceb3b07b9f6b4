"""Ctrl-C and SIGTERM during `dossier build`, each in a process of its own.

Ctrl-C is sent as a terminal sends it, to the whole process group (the build, its fork server
and its workers); SIGTERM to the build's main process only. Every build here starts in a
session of its own, so that the processes it leaves behind, if any, can be found in /proc.
Exit codes 130 and 143: 128 + the signal number, the POSIX shells' convention for a command
ended by a signal (POSIX.1-2017, Shell Command Language §2.8.2). No assertion here is about time.
"""

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from test_document import make_project

from dossier.common import interrupts
from dossier.common.errors import EXIT_SIGINT, EXIT_SIGTERM
from dossier.engine.build import build
from dossier.engine.cache import Cache, digest

pytestmark = pytest.mark.skipif(
    not Path("/proc/self/stat").is_file() or not hasattr(os, "killpg"), reason="needs /proc and process groups (Linux)"
)

STOPPED = "interrupted: the build was stopped; the previous output is unchanged"
FINAL_MARKER = "replaced by the next build"  # the writer's marker once every file is in its folder
HANG_GUARD_S = 600  # only so that a broken build cannot hang the suite; never reached when all is well


@pytest.fixture(scope="module")
def previous(tmp_path_factory):
    """A small project and the output of an earlier build of it (no cache: later builds start cold)."""
    base = tmp_path_factory.mktemp("interrupts")
    root = make_project(base / "proj")
    build(root, base / "out", use_cache=False, workers=1)
    return root, base / "out"


def _copy(previous, tmp_path):
    """The project (with a changed narrative, so that the output is not up to date) and its output."""
    root, out = previous
    project, target = tmp_path / "proj", tmp_path / "out"
    shutil.copytree(root, project, ignore=shutil.ignore_patterns(".dossier-cache"))
    shutil.copytree(out, target)
    (project / "notes/summary.md").write_text("Rebuilt {{ value('A', 'cornering_stiffness') }}.\n", encoding="utf-8")
    return project, target


def _files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _processes(session: int) -> list[tuple[int, int, bytes]]:
    """(pid, parent pid, command line) of every live process of `session` (zombies are dead: left out)."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            cmdline = (entry / "cmdline").read_bytes()
        except OSError:
            continue  # gone meanwhile
        state, ppid, _pgrp, sid = stat[stat.rindex(")") + 2 :].split()[:4]  # proc(5): after "(comm)"
        if int(sid) == session and state != "Z":
            found.append((int(entry.name), int(ppid), cmdline))
    return found


def _fork_server(main_pid: int) -> int | None:
    for pid, ppid, cmdline in _processes(main_pid):
        if ppid == main_pid and b"multiprocessing.forkserver" in cmdline:
            return pid
    return None


def _has_worker(main_pid: int) -> bool:
    server = _fork_server(main_pid)
    return server is not None and any(ppid == server for _, ppid, _ in _processes(main_pid))


def _start(tmp_path, project, out, prelude=""):
    """Start `dossier build` with two workers in a session of its own; output goes to files."""
    code = prelude + "from dossier.cli import run; run()"
    cmd = [sys.executable, "-c", code, "build", str(project), "--out", str(out), "--workers", "2"]
    stdout, stderr = open(tmp_path / "stdout.txt", "w+"), open(tmp_path / "stderr.txt", "w+")
    proc = subprocess.Popen(cmd, stdout=stdout, stderr=stderr, start_new_session=True)
    proc.logs = (stdout, stderr)
    return proc


def _wait_until(proc, condition, what: str) -> None:
    """Poll until `condition()`; fail if the build ends first (it was too quick to be caught busy)."""
    deadline = time.monotonic() + HANG_GUARD_S
    while not condition():
        if proc.poll() is not None:
            pytest.fail(f"the build ended (exit {proc.returncode}) before {what}")
        if time.monotonic() > deadline:
            proc.kill()
            pytest.fail(f"the build never reached the point where {what}")
        time.sleep(0.02)


def _finish(proc) -> tuple[str, str]:
    proc.wait()
    texts = []
    for log in proc.logs:
        log.seek(0)
        texts.append(log.read())
        log.close()
    return texts[0], texts[1]


def _send(proc, sig) -> None:
    if sig == signal.SIGINT:
        os.killpg(proc.pid, signal.SIGINT)  # as a terminal does: every process of the group
    else:
        proc.send_signal(sig)  # the main process only


def _assert_stopped(proc, sig, out: Path, before: dict[str, bytes], project: Path) -> None:
    stdout, stderr = _finish(proc)
    assert proc.returncode == {signal.SIGINT: EXIT_SIGINT, signal.SIGTERM: EXIT_SIGTERM}[sig], stderr
    assert stderr.splitlines() == [STOPPED], stderr  # one line, no traceback from any process
    assert "Traceback" not in stdout + stderr and stdout == ""
    assert _files(out) == before  # the previous output, byte for byte
    assert not list(out.parent.glob(f".{out.name}.*"))  # no .out.building-* (nor .out.previous) left
    assert not list((project / ".dossier-cache").rglob(".tmp-*"))  # no half-written cache entry
    assert _processes(proc.pid) == []  # no worker, fork server or other process of the build survives


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["ctrl-c", "sigterm"])
def test_a_signal_while_the_workers_run_stops_the_build_and_keeps_the_previous_output(previous, tmp_path, sig):
    project, out = _copy(previous, tmp_path)
    before = _files(out)
    proc = _start(tmp_path, project, out)
    _wait_until(proc, lambda: _has_worker(proc.pid), "a worker process was running")
    _send(proc, sig)
    _assert_stopped(proc, sig, out, before, project)


def test_ctrl_c_while_the_fork_server_imports_prints_no_traceback(previous, tmp_path):
    # the server imports SciPy, matplotlib and WeasyPrint for seconds after it starts; Ctrl-C
    # reaches it too, and must neither interrupt those imports with a traceback nor keep it alive
    project, out = _copy(previous, tmp_path)
    before = _files(out)
    proc = _start(tmp_path, project, out)
    _wait_until(proc, lambda: _fork_server(proc.pid) is not None, "the fork server had started")
    _send(proc, signal.SIGINT)
    _assert_stopped(proc, signal.SIGINT, out, before, project)


def test_ctrl_c_while_writing_removes_the_half_written_folder(previous, tmp_path):
    # Hold the build just before it swaps its finished folder in (the last check before the
    # swap sleeps), so that the signal finds the temporary folder complete beside the output.
    prelude = (
        "import time, dossier.publish.writer as o\n"
        "real_check = o.check\n"
        "o.check = lambda: (time.sleep(300), real_check())\n"
    )

    def folder_written(project) -> bool:
        return any(
            FINAL_MARKER in (p / ".dossier-output").read_text(encoding="utf-8")
            for p in tmp_path.glob(".out.building-*")
            if (p / ".dossier-output").is_file()
        )

    _interrupt_held_build(
        previous, tmp_path, prelude, folder_written, "the temporary output folder was complete", signal.SIGINT
    )


def _interrupt_held_build(previous, tmp_path, prelude, ready, what, sig):
    """Start a build held at some step by `prelude`, signal it once `ready(project)`, check it stopped."""
    project, out = _copy(previous, tmp_path)
    before = _files(out)
    proc = _start(tmp_path, project, out, prelude)
    _wait_until(proc, lambda: ready(project), what)
    _send(proc, sig)
    _assert_stopped(proc, sig, out, before, project)


def test_sigterm_while_a_cache_entry_is_written_removes_its_temporary_file(previous, tmp_path):
    # Hold the first cache write half-way (its pickling sleeps), so that SIGTERM finds the
    # temporary file in the cache folder.
    prelude = (
        "import pickle, time, types, dossier.engine.cache as c\n"
        "c.pickle = types.SimpleNamespace(loads=pickle.loads, HIGHEST_PROTOCOL=pickle.HIGHEST_PROTOCOL,\n"
        "                                 dump=lambda *a, **k: time.sleep(300))\n"
    )
    _interrupt_held_build(
        previous,
        tmp_path,
        prelude,
        lambda project: any((project / ".dossier-cache").rglob(".tmp-*")),
        "a cache entry was being written",
        signal.SIGTERM,
    )


def test_a_finished_build_leaves_no_process_behind(previous, tmp_path):
    project, out = _copy(previous, tmp_path)
    proc = _start(tmp_path, project, out)
    saw_worker = False
    while proc.poll() is None:
        saw_worker = saw_worker or _has_worker(proc.pid)
        time.sleep(0.05)
    stdout, stderr = _finish(proc)
    assert proc.returncode == 0, stderr
    assert stdout.startswith(f"dossier written to {out}")
    assert saw_worker  # the build did use a fork server and its workers
    assert _processes(proc.pid) == []  # and none of them outlives it
    assert "Rebuilt" in (out / "site/index.html").read_text(encoding="utf-8")


# In this process: the guard's rules, each with a signal raised here (signal.raise_signal runs the
# handler before the next statement).


def _swallowed(signum) -> None:
    """Raise `signum` and swallow what its handler raises, as some library code does."""
    try:
        signal.raise_signal(signum)
        time.sleep(HANG_GUARD_S)
    except interrupts.Interrupted:
        pass


def _wait_for_the_repeat() -> None:
    deadline = time.monotonic() + HANG_GUARD_S
    while time.monotonic() < deadline:
        time.sleep(0.01)


def test_sigterm_becomes_interrupted_carrying_143_and_a_second_signal_waits_for_the_cleanup():
    with interrupts.Guard():
        with pytest.raises(interrupts.Interrupted) as caught:
            signal.raise_signal(signal.SIGTERM)
            time.sleep(HANG_GUARD_S)
        assert caught.value.exit_code == EXIT_SIGTERM == 128 + signal.SIGTERM
        interrupts.acknowledge(caught.value)  # our cleanup begins: later signals are ignored
        signal.raise_signal(signal.SIGINT)
        cleaned_up = True
    assert cleaned_up


def test_a_swallowed_interruption_is_raised_again_and_blocks_the_cache():
    # What WeasyPrint does while drawing an SVG image (catch BaseException, draw on): the
    # interruption comes again, and nothing computed after it may be stored.
    with interrupts.Guard():
        _swallowed(signal.SIGINT)
        with pytest.raises(interrupts.Interrupted) as caught:
            interrupts.check()
        assert caught.value.exit_code == EXIT_SIGINT
        with pytest.raises(interrupts.Interrupted):
            _wait_for_the_repeat()


def test_nothing_is_cached_after_a_swallowed_interruption(tmp_path):
    cache = Cache(tmp_path / "cache")
    with interrupts.Guard():
        _swallowed(signal.SIGTERM)
        with pytest.raises(interrupts.Interrupted):
            cache.put(digest("a result computed while the signal was being swallowed"), b"perhaps broken")
        interrupts.acknowledge()
    assert not (tmp_path / "cache").exists() or not any((tmp_path / "cache").rglob("*"))


def test_an_interruption_inside_a_finalizer_is_not_printed_and_comes_again(capsys):
    class Finalized:
        def __del__(self):
            signal.raise_signal(signal.SIGINT)  # its handler raises here, where Python cannot propagate it
            self.after = True

    with interrupts.Guard(), pytest.raises(interrupts.Interrupted):
        Finalized()  # dropped at once: __del__ runs
        _wait_for_the_repeat()
    assert "Exception ignored" not in capsys.readouterr().err


def test_a_signal_during_a_deferred_block_acts_once_the_block_is_done():
    done = []
    with interrupts.Guard(), pytest.raises(interrupts.Interrupted), interrupts.deferred():
        signal.raise_signal(signal.SIGTERM)
        done.append("the block ran to its end")
    assert done == ["the block ran to its end"]
