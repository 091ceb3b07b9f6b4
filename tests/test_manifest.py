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


# --- the crash corpus: inputs that once ended in an internal error, each now a located problem --

VEHICLE = """
[vehicle]
name = "Test car"
[[vehicle.axles]]
name = "front"
position = "steer"
from_front = { value = 0, unit = "m" }
load = { value = 8000, unit = "N" }
[[vehicle.axles]]
name = "rear"
position = "drive"
from_front = { value = 2.7, unit = "m" }
load = { value = 7000, unit = "N" }
[[vehicle.fitments]]
name = "A all round"
mounted = { front = { specimen = "A" }, rear = { specimen = "A" } }
"""
BASE = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000])


def _one_run(file):
    return P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", file, [4000])


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (_one_run("a" * 300 + ".csv"), "runs[0].file: has a name longer than 255 bytes"),
        (_one_run("."), "runs[0].file: must name a file inside the project folder; got '.'"),
        (_one_run("rig"), "runs[0].file: is not a regular file: 'rig' (a folder)"),
        (_one_run("rig/\\u0000a.csv"), "runs[0].file: contains a NUL byte"),
        (
            BASE + VEHICLE.replace('{ value = 2.7, unit = "m" }', '{ value = 2.7, unit = "metre" }'),
            "vehicle.axles[1].from_front.unit: unknown unit 'metre'",
        ),
        (
            BASE + VEHICLE.replace('{ value = 2.7, unit = "m" }', '{ unit = "m" }'),
            "vehicle.axles[1].from_front.value: is required",
        ),
        (
            BASE + '\n[[targets]]\nmetric = ["cornering_stiffness"]\nload_n = 4000\nminimum = 1\nreference = "x"\n',
            "targets[0].metric: unknown metric a list",
        ),
        (
            BASE.replace('decimal = "."', 'decimal = "."\nheader_line = ' + str(2**70)),
            "runs[0].header_line: must be an integer from 1 to 1000000",
        ),
        (
            BASE + VEHICLE.replace('{ value = 8000, unit = "N" }', "{ value = 1.79e308, unit = 'N' }"),
            "vehicle.axles[0].load.value: must be <= 1e+07",
        ),
        (BASE.replace("values = [4000]", "values = [1.79e308]"), "runs[0].load_setpoints.values[0]: must be <= 1e+07"),
        (
            P.MANIFEST_HEAD
            + P.specimen_block("PRD-A")
            + P.specimen_block("PRD A", role="candidate")
            + P.run_block("PRD-A", "rig/a.csv", [4000])
            + P.run_block("PRD A", "rig/a.csv", [4000]),
            "specimens[1].id: 'PRD A' and 'PRD-A' would share the file and page names 'prd-a'",
        ),
        (
            P.MANIFEST_HEAD + P.specimen_block("+++") + P.run_block("+++", "rig/a.csv", [4000]),
            "specimens[0].id: must contain a letter or a digit",
        ),
        ("x = " + "[" * 600 + "]" * 600 + "\n", "TOML syntax: nested too deeply"),
    ],
)
def test_hostile_manifest_values_are_located_problems(tmp_path, text, expected):
    problems = _problems(_write(tmp_path, text))
    assert any(p.startswith(expected) for p in problems), problems


def test_tested_at_with_and_without_utc_offset_is_one_located_problem(tmp_path):
    run = P.run_block("A", "rig/a.csv", [4000])
    local = run.replace("[runs.columns]", "tested_at = 2026-11-03T09:40:00\n[runs.columns]")
    zoned = run.replace("[runs.columns]", "tested_at = 2026-11-03T10:40:00+01:00\n[runs.columns]")
    problems = _problems(_write(tmp_path, P.MANIFEST_HEAD + P.specimen_block("A") + local + zoned))
    assert "runs[1].tested_at: has a UTC offset but runs[0].tested_at has none" in " ".join(problems), problems


def test_a_symbolic_link_that_points_to_itself_is_a_located_problem(tmp_path):
    _write(tmp_path, _one_run("rig/loop.csv"))
    (tmp_path / "rig/loop.csv").symlink_to("loop.csv")
    assert any(p.startswith("runs[0].file: is a symbolic link that loops") or "loops" in p for p in _problems(tmp_path))


def test_ten_thousand_runs_stop_at_the_stated_limit(tmp_path):
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000]) * 10_000
    problems = _problems(_write(tmp_path, text))
    assert problems == ["runs: must have at most 1000 item(s); got 10000"]


def test_a_template_override_that_links_out_of_the_project_is_refused(tmp_path):
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "base.html").write_text("stolen", encoding="utf-8")
    root = tmp_path / "p"
    root.mkdir()
    _write(root, BASE)
    (root / "templates").mkdir()
    (root / "templates" / "base.html").symlink_to(outside / "base.html")
    with pytest.raises(ManifestError) as exc:
        load_project(root)
    assert "templates/base.html: (a template override) resolves outside the project folder" in str(exc.value)
