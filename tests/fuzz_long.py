"""A longer local run of the fuzzers: N mutated rig files and N mutated manifests (default
10 000 each), with the counts of every outcome and the first cases of each failure.

    python tests/fuzz_long.py [--cases 10000] [--seed 0]

Cases are drawn with numpy's generator from the seed, so a run can be repeated; each case is
timed out after 20 s, a full build after 120 s (a hang counts as a failure).
`--builds N` also assembles N mutated projects in full (figures and PDFs: seconds each).
"""

from __future__ import annotations

import argparse
import collections
import signal
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import fuzzing as F

TEXTS = ["", "abc", "1,5", "1.5.5", "NaN", "--", "1e", "\x00", "é", " ", "0x10", "1_000", "+-1", "∞", "\t", "#x"]
NUMBERS = [0.0, -0.0, 1e300, -1e300, 1e-300, 4000.0, -4000.0, float("nan"), float("inf"), 3.3, 1e15, 2.0**60]


class Hang(Exception):
    pass


def _alarm(signum, frame):
    raise Hang()


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=10_000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--only", choices=["rig", "manifest", "build"], default=None)
    ap.add_argument("--builds", type=int, default=0, help="also assemble this many mutated projects in full")
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    signal.signal(signal.SIGALRM, _alarm)
    root = Path(tempfile.mkdtemp(prefix="dossier-fuzz-"))
    bases = {(d, s): F.base_rig_lines(d, s) for d, s in ((".", ","), (",", ";"))}
    for family in ("rig", "manifest", "build"):
        if (args.only and family != args.only) or (family == "build" and not args.builds):
            continue
        n_cases = args.builds if family == "build" else args.cases
        counts: collections.Counter = collections.Counter()
        examples: dict[str, list[str]] = collections.defaultdict(list)
        start = time.monotonic()
        for _ in range(n_cases):
            signal.alarm(120 if family == "build" else 20)
            try:
                if family == "rig":
                    decimal, delimiter = [(".", ","), (",", ";")][int(rng.integers(2))]
                    kind = F.RIG_MUTATIONS[int(rng.integers(len(F.RIG_MUTATIONS)))]
                    data, where = F.mutate_rig(
                        bases[(decimal, delimiter)],
                        kind,
                        int(rng.integers(10**6)),
                        int(rng.integers(10)),
                        TEXTS[int(rng.integers(len(TEXTS)))],
                        NUMBERS[int(rng.integers(len(NUMBERS)))],
                        decimal,
                        delimiter,
                    )
                    outcome = F.check_rig_case(root / "rig", data, where, decimal, delimiter)
                    label = kind
                else:
                    op = ["set", "set", "set", "delete", "add", "nest"][int(rng.integers(6))]
                    path = F.MANIFEST_PATHS[int(rng.integers(len(F.MANIFEST_PATHS)))]
                    value = F.TARGETED[int(rng.integers(len(F.TARGETED)))]
                    check = F.check_build_case if family == "build" else F.check_manifest_case
                    outcome = check(root / family, op, path, value)
                    label = op
            except Hang:
                outcome, label = F.Outcome("hang", "over 20 s"), "hang"
            finally:
                signal.alarm(0)
            counts[outcome.kind] += 1
            if not outcome.ok and len(examples[outcome.kind]) < 5:
                examples[outcome.kind].append(f"{label}: {outcome.detail[:300]}")
        elapsed = time.monotonic() - start
        print(
            f"{family}: {n_cases} cases in {elapsed:.0f} s: " + ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
        )
        for kind, lines in examples.items():
            for line in lines:
                print(f"  {kind}: {line}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
