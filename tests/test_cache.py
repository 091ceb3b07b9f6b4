"""The build cache: unchanged work is reused, changed work is never served stale."""

import json
import shutil

import pytest
from test_document import make_project

from dossier.engine.build import build
from dossier.engine.freshness import up_to_date


def _results(out):
    return json.loads((out / "results.json").read_text(encoding="utf-8"))


def test_nothing_changed_reuses_the_output(tmp_path):
    root = make_project(tmp_path / "p")
    first = build(root, tmp_path / "o", workers=1)
    assert not first.reused and first.cache_misses > 0
    assert up_to_date(root, tmp_path / "o", "default") == tmp_path / "o"
    again = build(root, tmp_path / "o", workers=1)
    assert again.reused


def test_a_changed_rig_file_is_refitted_never_served_stale(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "o", workers=1)
    before = _results(tmp_path / "o")
    # change the data (10 % stiffer tire) but keep the manifest: the cache must not reuse the fit
    fresh = make_project(tmp_path / "fresh", scale=1.1)
    shutil.copy(fresh / "rig/a.csv", root / "rig/a.csv")
    summary = build(root, tmp_path / "o", workers=1)
    after = _results(tmp_path / "o")
    assert not summary.reused and summary.cache_misses >= 3  # fit, metrics, figures, PDF
    cs = lambda r: next(
        m["value"]
        for m in r["metrics"]
        if m["metric"] == "cornering_stiffness" and m["load_n"] == 4000 and m["nominal_condition"]
    )
    assert cs(after) == pytest.approx(1.1 * cs(before), rel=0.01)
    # and it equals a build without any cache
    build(root, tmp_path / "nocache", use_cache=False, workers=1)
    assert _results(tmp_path / "nocache") == after


def test_narrative_change_refits_nothing_and_shows_the_new_text(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "o", workers=1)
    pdfs = lambda: {p.name: p.read_bytes() for p in (tmp_path / "o").glob("*.pdf")}
    before = pdfs()
    (root / "notes/summary.md").write_text("New words, {{ value('A', 'cornering_stiffness') }}.\n", encoding="utf-8")
    summary = build(root, tmp_path / "o", workers=1)
    assert summary.cache_hits >= 3 and summary.cache_misses == 1  # only the report's PDF is made again
    assert "New words," in (tmp_path / "o/site/index.html").read_text(encoding="utf-8")
    after = pdfs()
    assert after.keys() == before.keys() and len(after) == 5
    assert after["dossier.pdf"] != before["dossier.pdf"]
    assert all(after[name] == before[name] for name in after if name != "dossier.pdf")  # the annexes: untouched


def test_a_tampered_output_is_rebuilt_not_trusted(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "o", workers=1)
    (tmp_path / "o/results.json").write_text("{}", encoding="utf-8")
    summary = build(root, tmp_path / "o", workers=1)
    assert not summary.reused and _results(tmp_path / "o")["metrics"]


def test_output_does_not_depend_on_the_number_of_workers(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "one", use_cache=False, workers=1)
    build(root, tmp_path / "two", use_cache=False, workers=2)
    for p in sorted((tmp_path / "one").rglob("*")):
        if p.is_file():
            assert p.read_bytes() == (tmp_path / "two" / p.relative_to(tmp_path / "one")).read_bytes(), p


def test_parallel_build_from_a_script_on_standard_input(tmp_path):
    # A main module that worker processes cannot re-import (a script read from stdin) must not
    # break the build: the work falls back to this process.
    import subprocess
    import sys

    root = make_project(tmp_path / "p")
    script = (
        f"from dossier.engine.build import build\nbuild(r'{root}', r'{tmp_path / 'o'}', use_cache=False, workers=2)\n"
    )
    done = subprocess.run([sys.executable, "-"], input=script, text=True, capture_output=True)
    assert done.returncode == 0, done.stderr[-2000:]
    assert (tmp_path / "o/dossier.pdf").is_file()


def test_the_worker_pool_keeps_order_and_reports_the_first_failing_job():
    # Jobs shared between this process and a worker come back in the order given, whatever order
    # they ran in (dearest first); a job's own error reaches the caller. Date codes: DOT TIN
    # format of 49 CFR 574.5 (week and year), as the sidewall tests use.
    from dossier.engine.workers import WorkerPool
    from dossier.standards.sidewall import SidewallError, parse_tin

    tins = [f"DOT XXXX XXX {week:02d}{year:02d}" for week in (1, 17, 33, 52) for year in (19, 23, 26)]
    with WorkerPool(2) as pool:
        got = pool.map(parse_tin, tins, cost=lambda t: -int(t[-4:-2]))  # the latest weeks first
        assert got == [parse_tin(t) for t in tins]
        with pytest.raises(SidewallError, match="week 60"):
            pool.map(parse_tin, tins[:3] + ["DOT XXXX XXX 6019"] + tins[3:])


def test_the_cache_keeps_to_its_budget_and_removes_only_old_entries_of_its_own(tmp_path):
    import os

    from dossier.engine.cache import Cache, digest

    folder = tmp_path / ".dossier-cache"
    first = Cache(folder)
    keys = [digest("entry", i) for i in range(5)]
    for age, key in enumerate(keys):
        first.put(key, bytes(1000))
        os.utime(folder / key[:2] / f"{key}.pkl", (1_000_000 + age, 1_000_000 + age))  # entry 0 is the oldest
    (folder / "keep-me.txt").write_text("not an entry", encoding="utf-8")
    later = Cache(folder)
    assert later.get(keys[0]) == bytes(1000)  # the oldest entry, used by this build
    size = (folder / keys[1][:2] / f"{keys[1]}.pkl").stat().st_size
    removed = later.prune(budget_bytes=4 * size)  # five entries over a budget of four: keep at most 3.2
    assert removed == 2
    left = {k for k in keys if (folder / k[:2] / f"{k}.pkl").exists()}
    assert left == {keys[0], keys[3], keys[4]}  # the used one and the two most recent
    assert (folder / "keep-me.txt").exists()
    assert Cache(folder).prune(budget_bytes=10 * size) == 0  # under budget: nothing removed
