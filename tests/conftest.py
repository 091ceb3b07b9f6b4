import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))  # the helpers beside the tests (projects, bnp1987)

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"


def run_dossier(*args, hash_seed="0", cwd=None, wait=True):
    """Run the `dossier` command in a process of its own (its own hash seed, its own imports)."""
    env = {**os.environ, "PYTHONHASHSEED": str(hash_seed)}
    cmd = [sys.executable, "-c", "from dossier.cli import run; run()", *map(str, args)]
    proc = subprocess.Popen(cmd, env=env, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    if not wait:
        return proc
    out, err = proc.communicate()
    return proc.returncode, out, err


@pytest.fixture(scope="session")
def demo_builds(tmp_path_factory):
    """The demo built three times in separate processes: hash seed 1 with one worker and no cache;
    hash seed 2 with two workers and a cold cache (in a copy of the project, so that no cache is
    left in the source tree); hash seed 3 with two workers from the warm cache."""
    base = tmp_path_factory.mktemp("demo-builds")
    project = base / "project"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"))
    first = run_dossier("build", DEMO, "--out", base / "seed1", "--no-cache", "--workers", "1", hash_seed=1, wait=False)
    second = run_dossier("build", project, "--out", base / "seed2", "--workers", "2", hash_seed=2, wait=False)
    results = []
    for proc in (first, second):
        out, err = proc.communicate()
        results.append((proc.returncode, out, err))
    third = run_dossier("build", project, "--out", base / "seed3", "--workers", "2", hash_seed=3)
    for code, _, err in (*results, third):
        assert code == 0, err
    assert "0 computed" in third[1], third[1]  # every stage came from the cache
    return {name: base / name for name in ("seed1", "seed2", "seed3")}
