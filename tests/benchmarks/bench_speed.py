"""Benchmark: the whole picture of build speed in one run, CPU counted over the whole process tree.

Run: python tests/benchmarks/bench_speed.py [--large]
Prints, each figure measured in this run:
  1. the stage table of a cold demo build (`bench_timeline.py`);
  2. ingest against `pandas.read_csv` with the same options, and our fits against a plain
     `scipy.optimize.curve_fit` (`bench_fit.py`);
  3. the demo's cold build (twice, from an empty cache) and each rebuild scenario (nothing changed,
     the narrative, one sample of one rig file, the screen stylesheet, the shared stylesheet),
     each as CPU seconds of the whole process tree, wall seconds and a fraction of the cold CPU;
  4. with `--large`, a generated project of 8 specimens × 1 million rows: CPU, wall, peak memory.
CPU is counted by `perf stat -e task-clock` where perf is available (it follows the fork server
and its workers), else by the rusage of the reaped children (the build reaps its workers and its
fork server, so that sees them too; both are printed for the cold build when both exist).
Every build runs in a fresh process on a copy of the demo and of the built-in themes, so the
stylesheet scenarios never touch the checkout. Not a test: nothing is asserted.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(HERE))

# One build, with the themes taken from a folder of the benchmark's own.
DRIVER = """
import sys
from pathlib import Path
import dossier.engine.build as B
from dossier.document.theme import load_theme
project, out, themes = map(Path, sys.argv[1:4])
B.load_theme = lambda name: load_theme(name, themes)
s = B.build(project, out, use_cache=sys.argv[4] == "cache")
print("reused" if s.reused else f"computed {len(s.computed)}: " + ", ".join(s.computed))
"""


def _perf() -> bool:
    try:
        done = subprocess.run(["perf", "stat", "-x,", "-e", "task-clock", "true"], capture_output=True, text=True)
    except OSError:
        return False
    return done.returncode == 0 and "task-clock" in done.stderr


PERF = _perf()


def measured(argv: list[str]) -> tuple[float, float, str]:
    """Run `argv`; (task-clock CPU s, or nan without perf; wall s; stdout)."""
    with tempfile.NamedTemporaryFile(suffix=".perf", delete=False) as fh:
        perf_out = fh.name
    cmd = (["perf", "stat", "-x,", "-e", "task-clock", "-o", perf_out, "--"] if PERF else []) + argv
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    out, err = proc.communicate()
    wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(err)
    cpu = float("nan")
    if PERF:
        text = Path(perf_out).read_text()
        m = re.search(r"^([\d.]+),msec,task-clock", text, re.M)
        cpu = float(m.group(1)) / 1000.0 if m else float("nan")
    os.unlink(perf_out)
    return cpu, wall, out


def _children_cpu() -> float:
    import resource

    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def build_once(project: Path, out: Path, themes: Path, cache: bool = True) -> tuple[float, float, float, str]:
    before = _children_cpu()
    cpu, wall, text = measured(
        [sys.executable, "-c", DRIVER, str(project), str(out), str(themes), "cache" if cache else "no-cache"]
    )
    ru = _children_cpu() - before  # this child and all it reaped (workers, fork server)
    return cpu, ru, wall, text.strip()


def _touch_one_sample(path: Path, field: int) -> None:
    """Change the last digit of one sample (field `field` of the data line whose slip angle is
    nearest 5°, inside a sweep, of a comma-separated rig file): one number, the same layout."""
    lines = path.read_bytes().split(b"\n")

    def off(line: bytes) -> float:
        try:
            return abs(abs(float(line.split(b",")[1])) - 5.0)
        except (ValueError, IndexError):
            return float("inf")

    i = min(range(len(lines)), key=lambda k: off(lines[k]))
    cells = lines[i].split(b",")
    digit = int(cells[field][-1:])
    cells[field] = cells[field][:-1] + str((digit + 1) % 10).encode()
    lines[i] = b",".join(cells)
    path.write_bytes(b"\n".join(lines))


def _append(path: Path, text: str) -> None:
    with path.open("a", encoding="utf-8") as fh:
        fh.write(text)


SCENARIOS = [
    ("nothing changed", lambda p, t: None),
    ("narrative edited", lambda p, t: _append(p / "narrative/test_notes.md", "\nOne more sentence.\n")),
    ("one Fy sample of one rig file", lambda p, t: _touch_one_sample(p / "rig/HR-4472_CND-B.csv", 4)),
    ("screen stylesheet edited", lambda p, t: _append(t / "default/screen.css", ".pagefoot { font-size: .9rem; }\n")),
    ("shared stylesheet edited", lambda p, t: _append(t / "default/common.css", "h3 { letter-spacing: .01em; }\n")),
]


def _cpu(cpu: float, ru: float) -> float:
    return cpu if cpu == cpu else ru  # task-clock where perf counted it


def rebuilds(tmp: Path) -> None:
    base = tmp / "base"
    shutil.copytree(ROOT / "demo_project", base / "p", ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"))
    shutil.copytree(ROOT / "themes", base / "themes")
    colds = []
    for _ in range(2):
        shutil.rmtree(base / "p/.dossier-cache", ignore_errors=True)
        shutil.rmtree(base / "out", ignore_errors=True)
        colds.append(build_once(base / "p", base / "out", base / "themes"))
    cold_cpu = min(_cpu(c, r) for c, r, _, _ in colds)
    print("\n## The demo: cold build and rebuilds (whole process tree)")
    for k, (cpu, ru, wall, _) in enumerate(colds):
        print(
            f"cold build {k + 1} (empty cache): task-clock {cpu:.1f} s CPU, "
            f"rusage of children {ru:.1f} s CPU, {wall:.1f} s wall"
        )
    print(f"{'scenario':30s} {'CPU s':>7s} {'wall s':>7s} {'of cold CPU':>12s}  computed")
    for name, change in SCENARIOS:
        case = tmp / re.sub(r"\W+", "-", name)
        shutil.copytree(base, case)
        change(case / "p", case / "themes")
        cpu, ru, wall, text = build_once(case / "p", case / "out", case / "themes")
        c = _cpu(cpu, ru)
        what = text if len(text) < 140 else text[:137] + "..."
        print(f"{name:30s} {c:7.2f} {wall:7.2f} {c / cold_cpu:12.3f}  {what}")
        shutil.rmtree(case)


def ingest_ratio(tmp: Path) -> None:
    import numpy as np
    import pandas
    from bench_build import N_ROWS, big_project

    from dossier.ingest.rig_table import parse_run
    from dossier.project.load import load_project

    proj = big_project(tmp / "big")
    spec = load_project(proj).manifest.runs[0]
    raw = (proj / spec.file).read_bytes()
    best = lambda f: min(_timed(f) for _ in range(3))
    t_ours = best(lambda: parse_run(raw, spec))
    t_pd = best(lambda: pandas.read_csv(proj / spec.file, sep=",", decimal=".", dtype=np.float64))
    print("\n## Ingest: 1 million rows × 12 channels, best of three")
    print(
        f"dossier parse_run {N_ROWS / t_ours:,.0f} rows/s ({t_ours:.2f} s); pandas.read_csv, same delimiter, "
        f"decimal mark and float64: {N_ROWS / t_pd:,.0f} rows/s ({t_pd:.2f} s); ours / pandas = {t_pd / t_ours:.2f}"
    )


def _timed(f) -> float:
    t0 = time.perf_counter()
    f()
    return time.perf_counter() - t0


def main() -> None:
    print(
        f"# Build speed, {os.cpu_count()} CPU(s); CPU counted by {'perf task-clock' if PERF else 'rusage of children'}"
    )
    print("\n## Stage table of a cold demo build (bench_timeline.py)")
    sys.stdout.flush()
    subprocess.run([sys.executable, str(HERE / "bench_timeline.py")], cwd=ROOT, check=True)
    print("\n## Fits against plain curve_fit (bench_fit.py)")
    sys.stdout.flush()
    subprocess.run([sys.executable, str(HERE / "bench_fit.py")], cwd=ROOT, check=True)
    with tempfile.TemporaryDirectory() as tmp:
        ingest_ratio(Path(tmp))
        rebuilds(Path(tmp))
        if "--large" in sys.argv:
            from bench_build import big_project, in_fresh_process

            large = big_project(Path(tmp) / "large", n_specimens=8)
            before = _children_cpu()
            out = Path(tmp) / "lo"
            code = f"from dossier.cli import main; main(['build', r'{large}', '--out', r'{out}', '--no-cache'])"
            wall, peak, _ = in_fresh_process(code)
            print(
                f"\n## 8 specimens × 1M rows, cold: {_children_cpu() - before:.1f} s CPU (rusage of children), "
                f"{wall:.1f} s wall, peak {peak:.0f} MB across the process tree"
            )


if __name__ == "__main__":
    main()
