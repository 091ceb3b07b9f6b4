"""Benchmark: how quickly Ctrl-C and SIGTERM stop a cold build of the demo.

Run: python tests/benchmarks/bench_interrupt.py [PROJECT] [--fractions 0.05,0.2,...] [--signals int,term]
       [--workers N]
First builds PROJECT (default: a copy of demo_project) once, cold and timed, which also gives the
previous output. Then, for every fraction f and signal, starts a cold build (``--no-cache``) in a
session of its own, sends the signal after f times the measured build time (SIGINT to the whole
process group, as a terminal does; SIGTERM to the main process only) and prints: the time from
the signal to the exit of the main process, the time until no process of the session was left,
the exit code, the lines on stderr, whether the previous output is byte-identical and whether a
temporary folder was left. The host's speed drifts: compare runs made side by side.
Not a test: nothing is asserted.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
SIGNALS = {"int": signal.SIGINT, "term": signal.SIGTERM}


def live_processes(session: int) -> list[int]:
    """Pids of the live (not zombie) processes of `session`, from /proc (proc(5))."""
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            state, _ppid, _pgrp, sid = stat[stat.rindex(")") + 2 :].split()[:4]
            if int(sid) == session and state != "Z":
                found.append(int(entry.name))
    return found


def tree_digest(folder: Path) -> str:
    h = hashlib.sha256()
    for p in sorted(folder.rglob("*")):
        if p.is_file():
            h.update(str(p.relative_to(folder)).encode() + b"\0" + p.read_bytes())
    return h.hexdigest()


def start(project: Path, out: Path, workers: int | None, *extra: str) -> subprocess.Popen:
    cmd = [sys.executable, "-c", "from dossier.cli import run; run()", "build", str(project), "--out", str(out), *extra]
    if workers:
        cmd += ["--workers", str(workers)]
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("project", nargs="?", type=Path, default=None)
    ap.add_argument("--fractions", default="0.05,0.2,0.4,0.6,0.8,0.95")
    ap.add_argument("--signals", default="int,term")
    ap.add_argument("--workers", type=int, default=None)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        project = Path(tmp) / "project"
        shutil.copytree(
            args.project or ROOT / "demo_project",
            project,
            ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"),
        )
        out = Path(tmp) / "out"
        t0 = time.monotonic()
        proc = start(project, out, args.workers, "--no-cache")
        _, err = proc.communicate()
        full_s = time.monotonic() - t0
        if proc.returncode != 0:
            sys.exit(f"the first build failed:\n{err}")
        previous = tree_digest(out)
        print(f"cold build of {args.project or 'demo_project'}: {full_s:.1f} s (workers: {args.workers or 'default'})")
        print(
            f"{'signal':<8}{'at s':>7}{'exit s':>8}{'gone s':>8}{'code':>6}{'stderr lines':>14}"
            "  previous output / leftovers"
        )
        for fraction in (float(f) for f in args.fractions.split(",")):
            for name in args.signals.split(","):
                sig = SIGNALS[name]
                proc = start(project, out, args.workers, "--no-cache")
                at_s = fraction * full_s
                time.sleep(at_s)
                if proc.poll() is not None:
                    proc.communicate()
                    print(f"SIG{name.upper():<5}{at_s:7.1f}   (the build had finished)")
                    previous = tree_digest(out)
                    continue
                sent = time.monotonic()
                os.killpg(proc.pid, sig) if sig == signal.SIGINT else proc.send_signal(sig)
                _, err = proc.communicate()
                exit_s = time.monotonic() - sent
                while live_processes(proc.pid):
                    time.sleep(0.005)
                gone_s = time.monotonic() - sent
                lines = err.splitlines()
                same = "intact" if tree_digest(out) == previous else "CHANGED"
                left = [p.name for p in out.parent.glob(f".{out.name}.*")]
                traceback = "; Traceback on stderr" if "Traceback" in err else ""
                print(
                    f"SIG{name.upper():<5}{at_s:7.1f}{exit_s:8.2f}{gone_s:8.2f}{proc.returncode:6d}{len(lines):14d}"
                    f"  {same} / {left or 'none'}{traceback}"
                )


if __name__ == "__main__":
    main()
