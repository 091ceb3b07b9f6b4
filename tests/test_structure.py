"""The shape of the program: layers that import only downwards, every input read once, a pure
core that returns the dossier in memory, themes validated like the manifest."""

import builtins
import io
import os
import subprocess
import sys
from pathlib import Path

import pytest
from test_document import make_project

from dossier.common.errors import ManifestError, UserError
from dossier.document import theme as theming
from dossier.engine import build as building
from dossier.engine.build import assemble, build
from dossier.project import load as loading
from dossier.project.load import load_project

REPO = Path(__file__).resolve().parents[1]


def test_the_layer_contracts_hold():
    # import-linter's "layers" and "acyclic_siblings" contracts, as configured in pyproject.toml
    lint_imports = Path(sys.executable).parent / "lint-imports"  # installed with the test extras
    proc = subprocess.run([str(lint_imports)], cwd=REPO, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "2 kept, 0 broken" in proc.stdout


def test_no_import_inside_a_function_reaches_upwards():
    # an import inside a function is invisible to nobody: grimp sees it too, so the contract
    # covers it; here, that a deliberately upward import would be caught
    import grimp

    graph = grimp.build_graph("dossier")
    assert not graph.find_shortest_chain(importer="dossier.project.schema", imported="dossier.metrics.evaluate")
    assert not graph.find_shortest_chain(importer="dossier.publish.archive", imported="dossier.engine.build")
    assert graph.direct_import_exists(importer="dossier.engine.rebuild", imported="dossier.engine.build")


@pytest.fixture
def project(tmp_path):
    root = make_project(tmp_path / "proj")
    (root / "templates").mkdir()
    (root / "templates" / "note.txt").write_text("an override folder's file\n", encoding="utf-8")
    return root


def test_a_build_reads_every_project_file_once_and_validates_the_manifest_once(project, tmp_path, monkeypatch):
    reads: dict[str, int] = {}
    root = project.resolve()

    def count(path):
        p = Path(path).resolve()
        if p.is_relative_to(root):
            reads[p.relative_to(root).as_posix()] = reads.get(p.relative_to(root).as_posix(), 0) + 1

    real_open = io.open  # builtins.open is io.open; Path.read_bytes and read_text open through it

    def opened(file, *a, **k):
        if isinstance(file, (str, os.PathLike)):
            count(file)
        return real_open(file, *a, **k)

    monkeypatch.setattr(builtins, "open", opened)
    monkeypatch.setattr(io, "open", opened)
    validations = []
    real_validated = loading.validated
    monkeypatch.setattr(
        loading, "validated", lambda raw, problems: validations.append(1) or real_validated(raw, problems)
    )

    build(project, tmp_path / "out", use_cache=False, workers=1)

    expected = {"dossier.toml", "rig/a.csv", "notes/summary.md", "templates/note.txt"}
    assert set(reads) == expected, reads
    assert all(n == 1 for n in reads.values()), reads
    assert len(validations) == 1


def test_the_bytes_archived_are_the_bytes_parsed(project, tmp_path, monkeypatch):
    # the loader's bytes go to the parser: a file changed after loading is neither parsed nor archived
    from dossier.publish.integrity import sha256

    loaded = load_project(project)
    (project / "rig/a.csv").write_text("damaged after loading\n", encoding="utf-8")
    (conditioned,) = building.check(loaded)
    assert conditioned.account.sha256 == sha256(loaded.files["rig/a.csv"])
    assert conditioned.account.n_samples > 100  # parsed from the loaded bytes, not the damaged file


def test_assemble_is_pure_and_equals_what_build_writes(project, tmp_path):
    before = sorted(p.relative_to(project).as_posix() for p in project.rglob("*"))
    loaded = load_project(project)
    theme = theming.load_theme("default")
    first = assemble(loaded, theme).files
    assert sorted(p.relative_to(project).as_posix() for p in project.rglob("*")) == before  # nothing written
    out = tmp_path / "out"
    build(project, out, use_cache=False, workers=1)
    written = {p.relative_to(out).as_posix(): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert {k: v for k, v in written.items() if not k.startswith(".dossier-")} == first


def test_a_project_from_archived_files_is_the_project_on_disk(project):
    from dossier.project.load import project_from_files

    on_disk = load_project(project)
    in_memory = project_from_files(on_disk.files, project)
    assert in_memory == on_disk
    with pytest.raises(ManifestError, match=r"runs\[0\]\.file: file not found: 'rig/a.csv'"):
        project_from_files({k: v for k, v in on_disk.files.items() if k != "rig/a.csv"}, project)


def _theme(root: Path, name: str, toml: str) -> None:
    (root / name).mkdir(parents=True)
    (root / name / "theme.toml").write_text(toml, encoding="utf-8")


def test_a_misspelt_parent_is_an_error_not_silently_no_inheritance(tmp_path):
    _theme(tmp_path, "mine", 'name = "mine"\nparent = "defualt"\n')
    _theme(tmp_path, "default", 'name = "default"\n')
    with pytest.raises(UserError, match=r"theme 'defualt' \(the parent of theme 'mine'\) not found"):
        theming.load_theme("mine", tmp_path)


@pytest.mark.parametrize(
    ("toml", "message"),
    [
        ('name = "mine"\ncolour = "red"\n', "colour: unknown key"),
        (
            'name = "mine"\n[options]\norganization_label = "x"\n',
            "options.organization_label: unknown key (did you mean 'organisation_label'?)",
        ),
        ('name = "yours"\n', "name: must equal the theme's folder name 'mine'; got 'yours'"),
        ('name = "mine"\nparent = 3\n', "parent: must be a non-empty string; got an integer 3"),
        ('name = "mine"\n[options\n', "TOML syntax"),
    ],
)
def test_theme_files_are_validated_with_the_key_named(tmp_path, toml, message):
    _theme(tmp_path, "mine", toml)
    with pytest.raises(ManifestError) as exc:
        theming.load_theme("mine", tmp_path)
    assert str(tmp_path / "mine" / "theme.toml") in str(exc.value)
    assert message in str(exc.value)


def test_a_checkout_uses_its_own_themes():
    # run from this repository, the themes are the checkout's, not another installation's copy
    assert theming.builtin_themes_dir() == REPO / "themes"
    default = theming.load_theme("plain")
    assert default.chain == ("plain", "default")
    assert default.files["0/theme.toml"] == (REPO / "themes/plain/theme.toml").read_bytes()


def test_the_build_module_reads_like_a_recipe():
    # the recipe module itself opens no file: reading is the loader's, writing the writer's
    source = Path(building.__file__).read_text(encoding="utf-8")
    for forbidden in ("read_bytes(", "read_text(", "open(", "write_bytes(", "write_text(", "mkdir("):
        assert forbidden not in source, forbidden
