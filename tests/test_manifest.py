import tomllib

import projects as P
import pytest

from dossier.common.errors import ManifestError
from dossier.project.load import load_project


def _write(tmp_path, text, with_rig=True):
    if with_rig:
        (tmp_path / "rig").mkdir(exist_ok=True)
        (tmp_path / "rig/a.csv").write_text("TIME,SLIP_ANGLE,FZ,FY\n0,0,-4000,0\n", encoding="utf-8")
    (tmp_path / "dossier.toml").write_text(text, encoding="utf-8")
    return tmp_path


def _problems(tmp_path):
    with pytest.raises(ManifestError) as exc:
        load_project(tmp_path)
    return [str(p) for p in exc.value.problems]


def test_a_valid_manifest_converts_units_of_set_points(tmp_path):
    text = (
        P.MANIFEST_HEAD
        + P.specimen_block("A")
        + P.run_block("A", "rig/a.csv", [2, 4], load_unit="kN", pressure="2.5", pressure_unit="bar")
    )
    m = load_project(_write(tmp_path, text)).manifest
    assert m.runs[0].load_setpoints_n == (2000.0, 4000.0)
    assert m.runs[0].pressure_kpa == pytest.approx(250.0)
    assert m.document.number == "T-0001"


def test_every_problem_is_reported_at_once_with_its_key_path(tmp_path):
    text = (
        P.MANIFEST_HEAD.replace('revision = "A"\n', "").replace("[document]", "[document]\ntitel = 'x'")
        + P.specimen_block("A", role="candidat")
        + P.run_block("B", "rig/a.csv", [4000], units={"fy": "klbf"})
    )
    problems = _problems(_write(tmp_path, text))
    assert "document.titel: unknown key (did you mean 'title'?)" in problems
    assert "document.revision: is required" in problems
    assert (
        "specimens[0].role: must be one of baseline, candidate, control; got 'candidat' (did you mean 'candidate'?)"
    ) in problems
    assert (
        "runs[0].columns.fy.unit: unknown unit 'klbf' for force; expected one of N, kN, lbf, kgf (did you mean 'lbf'?)"
    ) in problems
    assert "runs[0].specimen: no specimen with id 'B'; known ids: A" in problems


def test_paths_must_stay_inside_the_project(tmp_path):
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "../outside.csv", [4000])
    problems = _problems(_write(tmp_path, text))
    assert problems == ["runs[0].file: must stay inside the project folder (relative, no '..'); got '../outside.csv'"]


def test_missing_file_and_required_channel(tmp_path):
    text = (
        P.MANIFEST_HEAD
        + P.specimen_block("A")
        + P.run_block("A", "rig/missing.csv", [4000]).replace('fy = { name = "FY", unit = "N" }\n', "")
    )
    problems = _problems(_write(tmp_path, text))
    assert "runs[0].file: file not found: 'rig/missing.csv' (paths are relative to the manifest's folder)" in problems
    assert any(p.startswith("runs[0].columns.fy: is required") for p in problems)


def test_toml_syntax_error_is_located(tmp_path):
    _write(tmp_path, "[document\ntitle = 1\n")
    (problem,) = _problems(tmp_path)
    assert problem.startswith("TOML syntax:") and "line 1" in problem


def test_manifest_text_is_still_valid_toml_after_our_edits():
    tomllib.loads(P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [1]))
