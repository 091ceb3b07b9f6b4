"""What a change recomputes: each cached piece is keyed by what it is made from, so a change
reaches only the pieces that depend on it. Every build runs in a process of its own, with the
cache on disk between them, as a user's successive builds do."""

import json
import shutil
import subprocess
import sys
from pathlib import Path

import projects as P
import pytest
from test_document import LOADS, tire

ROOT = Path(__file__).resolve().parents[1]

# One build in a fresh process: the project, its output and a theme folder given; prints what the
# build computed (the cache's labels) as JSON.
BUILD = """
import json, sys
from pathlib import Path
from dossier.document.theme import load_theme
from dossier.engine.build import assemble
from dossier.engine.cache import Cache
from dossier.engine.workers import WorkerPool
from dossier.project.load import load_project
from dossier.publish.writer import write_dossier

project_dir, out_dir, themes_dir = map(Path, sys.argv[1:4])
project = load_project(project_dir)
cache = Cache(project_dir / ".dossier-cache")
with WorkerPool(2) as pool:
    dossier = assemble(project, load_theme("default", themes_dir), cache=cache, pool=pool)
write_dossier(out_dir, dossier.files)
print(json.dumps(cache.computed))
"""


def _two_specimens(root: Path, scale_b: float = 1.0) -> Path:
    for name, scale, seed in (("a", 1.0, 4), ("b", 1.08 * scale_b, 5)):
        t, a, fz, fy = P.sweep_samples(LOADS, tire(scale), noise_n=10.0, seed=seed)
        P.write_csv(root / f"rig/{name}.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz, -fy])
    text = (
        P.MANIFEST_HEAD
        + P.specimen_block("A")
        + P.specimen_block("B", role="candidate")
        + P.run_block("A", "rig/a.csv", LOADS)
        + P.run_block("B", "rig/b.csv", LOADS)
        + "\n[fit]\nnominal_load_n = 4000\nleave_one_load_out = false\n"
    )
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    return root


def _build(project: Path, out: Path, themes: Path) -> list[str]:
    done = subprocess.run(
        [sys.executable, "-c", BUILD, str(project), str(out), str(themes)], capture_output=True, text=True, cwd=ROOT
    )
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


def _files(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """A two-specimen project built once cold, with a copy of the built-in themes of its own."""
    base = tmp_path_factory.mktemp("deps")
    themes = base / "themes"
    shutil.copytree(ROOT / "themes", themes)
    project = _two_specimens(base / "p")
    cold = _build(project, base / "out", themes)
    return base, project, themes, cold


def _copy(built, tmp_path):
    base, project, themes, _ = built
    shutil.copytree(project, tmp_path / "p")
    shutil.copytree(themes, tmp_path / "themes")
    return tmp_path / "p", tmp_path / "themes"


def test_a_cold_build_computes_every_piece(built):
    _, _, _, cold = built
    assert {"run 0", "run 1", "specimen A", "specimen B"} <= set(cold)
    assert sum(c.startswith("pdf ") for c in cold) == 5 and sum(c.startswith("figure ") for c in cold) > 10


def test_nothing_changed_computes_nothing(built, tmp_path):
    project, themes = _copy(built, tmp_path)
    assert _build(project, tmp_path / "out", themes) == []


def test_one_rig_file_recomputes_its_run_its_specimen_and_what_shows_them(built, tmp_path):
    project, themes = _copy(built, tmp_path)
    shutil.copy(_two_specimens(tmp_path / "fresh", scale_b=1.05) / "rig/b.csv", project / "rig/b.csv")
    again = _build(project, tmp_path / "out", themes)
    runs = [c for c in again if c.startswith("run ")]
    fits = [c for c in again if c.startswith("specimen ")]
    figures = [c for c in again if c.startswith("figure ")]
    assert runs == ["run 1"] and fits == ["specimen B"]
    # B's own figures and its run's are drawn again; A's own fit and run figures are not
    assert any(f.startswith("figure specimen:B ") for f in figures)
    assert any(f.startswith("figure quality:1 ") for f in figures)
    assert not any(f.startswith("figure quality:0 ") for f in figures)
    a_own = [f for f in figures if f.startswith("figure specimen:A ")]
    # A's page shows B's stiffness against load beside its own: that one figure depends on B
    assert all("stiffness-load" in f for f in a_own), a_own
    cold = [c for c in built[3] if c.startswith("figure specimen:A ")]
    assert len(a_own) < len(cold)


def test_a_screen_stylesheet_edit_renders_no_pdf(built, tmp_path):
    project, themes = _copy(built, tmp_path)
    shutil.copytree(built[0] / "out", tmp_path / "before")
    with (themes / "default/screen.css").open("a", encoding="utf-8") as f:
        f.write(".pagefoot { font-size: .9rem; }\n")
    again = _build(project, tmp_path / "out", themes)
    assert again == []  # the stylesheet is a site file: no cached piece is made from it
    before, after = _files(tmp_path / "before"), _files(tmp_path / "out")
    changed = sorted(n for n in after if after[n] != before.get(n))
    assert changed == ["manifest-sha256.txt", "site/static/screen.css"]


def test_a_shared_stylesheet_edit_renders_every_pdf_and_nothing_else(built, tmp_path):
    project, themes = _copy(built, tmp_path)
    with (themes / "default/common.css").open("a", encoding="utf-8") as f:
        f.write("h3 { letter-spacing: .01em; }\n")
    again = _build(project, tmp_path / "out", themes)
    assert sorted(again) == sorted(c for c in built[3] if c.startswith("pdf "))
