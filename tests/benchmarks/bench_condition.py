"""Benchmark: conditioning a 1 million-row, 12-channel run.

Run: python tests/benchmarks/bench_condition.py
Prints the time of `condition_run` and, as the plain alternative in the same process, the time
of one `np.sort` of each of the 12 channels (a floor any conditioning has to clear: it at least
touches and orders every value). Not a test: nothing is asserted.
"""

from __future__ import annotations

import time

import numpy as np

from dossier.conditioning.steady_state import condition_run
from dossier.ingest.rig_table import RigRun
from dossier.project.manifest import ColumnSpec, ConditioningSettings, RunSpec

N_ROWS = 1_000_000
RATE_HZ = 100.0


def synthetic_run() -> RigRun:
    rng = np.random.default_rng(0)
    t = np.arange(N_ROWS) / RATE_HZ
    loads = np.array([2000.0, 4000.0, 6000.0, 8000.0])
    block = N_ROWS // loads.size
    fz = np.repeat(loads, block)[:N_ROWS] * (1 + 0.005 * rng.standard_normal(N_ROWS))
    phase = (t % 24.0) / 24.0  # a 24 s triangular sweep ±12°, repeated
    slip = 12.0 * np.where(phase < 0.25, 4 * phase, np.where(phase < 0.75, 2 - 4 * phase, 4 * phase - 4))
    fy = -fz * np.tanh(slip / 5.0) + 20 * rng.standard_normal(N_ROWS)
    channels = {
        "time": t,
        "slip_angle": slip,
        "fz": fz,
        "fy": fy,
        "mz": 0.03 * fz * np.sin(np.radians(slip) * 8) + rng.standard_normal(N_ROWS),
        "fx": 5 * rng.standard_normal(N_ROWS),
        "mx": rng.standard_normal(N_ROWS),
        "my": rng.standard_normal(N_ROWS),
        "inclination": 0.01 * rng.standard_normal(N_ROWS),
        "slip_ratio": 0.001 * rng.standard_normal(N_ROWS),
        "pressure": 240 + 0.2 * rng.standard_normal(N_ROWS),
        "speed": 30 + 0.05 * rng.standard_normal(N_ROWS),
    }
    for v in channels.values():
        v.setflags(write=False)
    spec = RunSpec(
        0,
        "BENCH",
        "bench.csv",
        "",
        "ISO 8855",
        ",",
        ".",
        1,
        0,
        {k: ColumnSpec(k, "-") for k in channels},
        tuple(loads),
        (0.0,),
        240.0,
    )
    return RigRun(spec, "0" * 64, channels, np.arange(N_ROWS) + 2)


def main() -> None:
    run = synthetic_run()
    settings = ConditioningSettings()
    condition_run(run, settings)  # warm-up
    times = []
    for _ in range(3):
        t0 = time.perf_counter()
        out = condition_run(run, settings)
        times.append(time.perf_counter() - t0)
    t0 = time.perf_counter()
    for v in run.channels.values():
        np.sort(v)
    floor = time.perf_counter() - t0
    best = min(times)
    print(f"rows: {N_ROWS:,}, channels: {len(run.channels)}, operating points: {len(out.points)}")
    print(f"condition_run: best {best:.3f} s of {len(times)} (all: {', '.join(f'{x:.3f}' for x in times)})")
    print(f"plain alternative, np.sort of every channel: {floor:.3f} s; ratio {best / floor:.1f}x")


if __name__ == "__main__":
    main()
