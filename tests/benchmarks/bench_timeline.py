"""Benchmark: where a cold build of a project spends its time, stage by stage and core by core.

Run: python tests/benchmarks/bench_timeline.py [PROJECT] [--workers N]
Builds PROJECT (default: the demo) without the cache into a temporary folder and prints when each
stage started and ended (seconds from the start), how long each process was busy with pool jobs
and the total time of each kind of job. Idle time is the wall time times the processes, minus
their busy time. Not a test: nothing is asserted.
"""

from __future__ import annotations

import argparse
import collections
import functools
import shutil
import tempfile
import time
from pathlib import Path

import dossier.engine.build as B
import dossier.engine.workers as W

ROOT = Path(__file__).resolve().parents[2]
STAGES = [
    "check",
    "fit_specimens",
    "draw_figures",
    "make_context",
    "render_site",
    "render_volumes",
    "write_dossier",
]


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("project", nargs="?", default=str(ROOT / "demo_project"))
    ap.add_argument("--workers", type=int, default=None)
    args = ap.parse_args()
    t0 = time.perf_counter()
    spans, pools = [], []
    init = W.WorkerPool.__init__

    def recording_init(self, n):
        init(self, n)
        self.timeline = []
        pools.append(self)

    W.WorkerPool.__init__ = recording_init
    for name in STAGES:

        def timed(*a, _f=getattr(B, name), _name=name, **k):
            start = time.perf_counter()
            try:
                return _f(*a, **k)
            finally:
                spans.append((_name, start - t0, time.perf_counter() - t0))

        setattr(B, name, functools.wraps(getattr(B, name))(timed))
    with tempfile.TemporaryDirectory() as tmp:
        project = Path(tmp) / "project"
        shutil.copytree(args.project, project, ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"))
        B.build(project, Path(tmp) / "out", use_cache=False, workers=args.workers)
    total = time.perf_counter() - t0
    for name, a, b in spans:
        print(f"{name:18s} {a:6.2f} → {b:6.2f} s  ({b - a:5.2f} s)")
    busy, jobs = collections.defaultdict(float), collections.defaultdict(lambda: [0, 0.0])
    for pool in pools:
        for fn, who, a, b in pool.timeline or ():
            busy[who] += b - a
            jobs[fn][0] += 1
            jobs[fn][1] += b - a
    for who, seconds in sorted(busy.items()):
        print(f"busy with pool jobs: {who:9s} {seconds:6.2f} s")
    for fn, (n, seconds) in jobs.items():
        print(f"job {fn:20s} ×{n:3d} {seconds:6.2f} s")
    print(f"total {total:.2f} s (this process's imports excluded)")


if __name__ == "__main__":
    main()
