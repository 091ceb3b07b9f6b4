"""Benchmark: ingest, build, rebuild and memory, with plain alternatives measured in the same run.

Run: python tests/benchmarks/bench_build.py [--large]
Prints: rows per second of `read_run` on a generated 1 million-row, 12-channel rig file next to
`numpy.loadtxt` and `pandas.read_csv` on the same file; conditioning time of that run; the demo's
cold build (no cache, three times), warm rebuild (nothing changed) and narrative-only rebuild, each in a fresh
process timed from start to exit, with the peak memory of the process and its workers. `--large` also
builds a generated project of 8 specimens × 1 million rows.
Not a test: nothing is asserted.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))
import projects as P

from dossier.conditioning.steady_state import condition_run
from dossier.ingest.rig_table import parse_run
from dossier.project.load import load_project

N_ROWS = 1_000_000
CHANNELS = ["TIME", "SLIP_ANGLE", "FZ", "FY", "MZ", "FX", "MX", "MY", "INCL", "SR", "P", "V"]


def big_project(root: Path, n_specimens: int = 1) -> Path:
    rng = np.random.default_rng(0)
    t = np.arange(N_ROWS) / 100.0
    loads = np.repeat([2000.0, 4000.0, 6000.0, 8000.0], N_ROWS // 4)
    phase = (t % 24.0) / 24.0
    slip = 12.0 * np.where(phase < 0.25, 4 * phase, np.where(phase < 0.75, 2 - 4 * phase, 4 * phase - 4))
    for k in range(n_specimens):
        fz = loads * (1 + 0.004 * rng.standard_normal(N_ROWS))
        fy = -fz * np.tanh(slip / 5.0) * (1 + 0.02 * k) + 15 * rng.standard_normal(N_ROWS)
        cols = [
            t,
            -slip,
            -fz,
            -fy,
            0.03 * fz * np.tanh(slip / 3.0),
            rng.standard_normal(N_ROWS),
            rng.standard_normal(N_ROWS),
            rng.standard_normal(N_ROWS),
            0.01 * rng.standard_normal(N_ROWS),
            0.001 * rng.standard_normal(N_ROWS),
            240 + 0.1 * rng.standard_normal(N_ROWS),
            30 + 0.01 * rng.standard_normal(N_ROWS),
        ]
        (root / "rig").mkdir(parents=True, exist_ok=True)
        path = root / f"rig/s{k}.csv"
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(",".join(CHANNELS) + "\n")
            np.savetxt(fh, np.column_stack(cols), delimiter=",", fmt="%.6g")
    specimens = "".join(P.specimen_block(f"S{k}", "baseline" if k == 0 else "candidate") for k in range(n_specimens))
    runs = "".join(P.run_block(f"S{k}", f"rig/s{k}.csv", [2000, 4000, 6000, 8000]) for k in range(n_specimens))
    (root / "dossier.toml").write_text(
        P.MANIFEST_HEAD + specimens + runs + "\n[fit]\nnominal_load_n = 4000\n", encoding="utf-8"
    )
    return root


def _tree_rss_mb(pid: int) -> float:
    """Resident memory of a process and all its descendants (workers included), in MB."""
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        try:
            for line in open(f"/proc/{p}/status"):
                if line.startswith("VmRSS"):
                    total += int(line.split()[1])
            for task in os.listdir(f"/proc/{p}/task"):
                todo += [int(c) for c in open(f"/proc/{p}/task/{task}/children").read().split()]
        except (OSError, ValueError):
            pass
    return total / 1024.0


def in_fresh_process(code: str) -> tuple[float, float, str]:
    """Run `code` in a new Python; return (wall seconds from start to exit, peak resident memory
    of the process and its workers in MB, sampled every 20 ms, its output)."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT
    )
    peak = 0.0
    while proc.poll() is None:
        peak = max(peak, _tree_rss_mb(proc.pid))
        time.sleep(0.02)
    wall = time.perf_counter() - t0
    out, err = proc.communicate()
    if proc.returncode != 0:
        raise RuntimeError(err)
    return wall, peak, out


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        proj = big_project(tmp / "big")
        m = load_project(proj).manifest
        t0 = time.perf_counter()
        run = parse_run((Path(proj) / m.runs[0].file).read_bytes(), m.runs[0])
        t_ingest = time.perf_counter() - t0
        t0 = time.perf_counter()
        condition_run(run, m.conditioning)
        t_cond = time.perf_counter() - t0
        t0 = time.perf_counter()
        np.loadtxt(proj / "rig/s0.csv", delimiter=",", skiprows=1)
        t_np = time.perf_counter() - t0
        import pandas

        t0 = time.perf_counter()
        pandas.read_csv(proj / "rig/s0.csv")
        t_pd = time.perf_counter() - t0
        print(
            f"ingest 1M rows × 12 channels: {N_ROWS / t_ingest:,.0f} rows/s ({t_ingest:.2f} s); "
            f"numpy.loadtxt on the same file {N_ROWS / t_np:,.0f} rows/s ({t_np:.2f} s, ratio {t_np / t_ingest:.2f}); "
            f"pandas.read_csv of every column {N_ROWS / t_pd:,.0f} rows/s ({t_pd:.2f} s, ratio {t_pd / t_ingest:.2f})"
        )
        print(f"conditioning that run: {t_cond:.2f} s; ingest + conditioning {t_ingest + t_cond:.2f} s")

        demo = tmp / "demo"
        shutil.copytree(ROOT / "demo_project", demo, ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"))
        build = f"from dossier.cli import main; main(['build', r'{demo}', '--out', r'{tmp / 'out'}'])"
        # The host's speed drifts by a third over minutes: the cold build runs three times.
        colds = [
            in_fresh_process(
                f"from dossier.cli import main; main(['build', r'{demo}', '--out', "
                f"r'{tmp / f'cold{k}'}', '--no-cache'])"
            )[:2]
            for k in range(3)
        ]
        cold, mem_cold = min(colds)
        # fill the cache once, then measure the warm and narrative-only rebuilds
        in_fresh_process(build.replace(str(tmp / "out"), str(tmp / "out2")))
        warm, mem_warm, _ = in_fresh_process(build.replace(str(tmp / "out"), str(tmp / "out2")))
        notes = demo / "narrative/test_notes.md"
        notes.write_text(notes.read_text(encoding="utf-8") + "\nOne more sentence.\n", encoding="utf-8")
        narr, mem_narr, _ = in_fresh_process(build.replace(str(tmp / "out"), str(tmp / "out2")))
        print(
            f"demo cold build (no cache): best of three {cold:.1f} s (all: "
            f"{', '.join(f'{t:.1f}' for t, _ in colds)} s), peak {max(m for _, m in colds):.0f} MB"
        )
        print(f"demo rebuild, nothing changed: {warm:.2f} s, peak {mem_warm:.0f} MB")
        print(f"demo rebuild, narrative changed: {narr:.1f} s, peak {mem_narr:.0f} MB")

        if "--large" in sys.argv:
            large = big_project(tmp / "large", n_specimens=8)
            t, mem, _ = in_fresh_process(
                f"from dossier.cli import main; main(['build', r'{large}', '--out', r'{tmp / 'lo'}', '--no-cache'])"
            )
            print(f"large project (8 specimens × 1M rows) cold build: {t:.1f} s, peak {mem:.0f} MB")


if __name__ == "__main__":
    main()
