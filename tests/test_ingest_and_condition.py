from pathlib import Path

import numpy as np
import projects as P
import pytest

from dossier.common.errors import RigDataError
from dossier.conditioning.steady_state import REASON_SETTLING, REASON_SPIKE, REASON_TRANSITION, condition_run
from dossier.ingest.rig_table import parse_run
from dossier.project.load import load_project
from dossier.project.manifest import ConditioningSettings


def _project(tmp_path, body: str, run_kwargs=None):
    (tmp_path / "rig").mkdir(exist_ok=True)
    (tmp_path / "rig/a.csv").write_text(body, encoding="utf-8")
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000], **(run_kwargs or {}))
    (tmp_path / "dossier.toml").write_text(text, encoding="utf-8")
    m = load_project(tmp_path).manifest
    return m, m.runs[0]


def test_semicolons_decimal_commas_and_iso_signs(tmp_path):
    body = "TIME;SLIP_ANGLE;FZ;FY\n0,0;-2,5;4,0;1,2\n0,04;2,5;4,1;-2,4\n"
    m, spec = _project(
        tmp_path, body, dict(convention="ISO 8855", delimiter=";", decimal=",", units={"fz": "kN", "fy": "kN"})
    )
    run = parse_run((Path(m.project_dir) / spec.file).read_bytes(), spec)
    np.testing.assert_allclose(run.channels["slip_angle"], [-2.5, 2.5])
    np.testing.assert_allclose(run.channels["fz"], [4000, 4100])
    np.testing.assert_allclose(run.channels["fy"], [1200, -2400])
    assert list(run.line_numbers) == [2, 3]


def test_bad_number_names_file_line_and_column(tmp_path):
    m, spec = _project(tmp_path, "TIME,SLIP_ANGLE,FZ,FY\n0,0,-4000,0\n0.04,1,-4000,12O\n")
    with pytest.raises(RigDataError) as exc:
        parse_run((Path(m.project_dir) / spec.file).read_bytes(), spec)
    assert str(exc.value) == ("rig/a.csv, line 3, column 'FY': expected a number with decimal mark '.'; found '12O'")


def test_missing_column_lists_the_header(tmp_path):
    m, spec = _project(tmp_path, "TIME,SA,FZ,FY\n0,0,-4000,0\n")
    with pytest.raises(RigDataError, match=r"line 1: no column named 'SLIP_ANGLE' for channel 'slip_angle'"):
        parse_run((Path(m.project_dir) / spec.file).read_bytes(), spec)


def test_load_of_the_wrong_sign_suggests_the_other_convention(tmp_path):
    m, spec = _project(tmp_path, "TIME,SLIP_ANGLE,FZ,FY\n0,-3,4000,10\n0.04,3,4000,-10\n")  # SAE declared, ISO data
    with pytest.raises(RigDataError, match="probably in ISO 8855"):
        parse_run((Path(m.project_dir) / spec.file).read_bytes(), spec)


def test_slip_in_radians_labelled_degrees_is_stopped(tmp_path):
    m, spec = _project(tmp_path, "TIME,SLIP_ANGLE,FZ,FY\n0,-0.2,-4000,10\n0.04,0.2,-4000,-10\n")
    with pytest.raises(RigDataError, match="probably in radians"):
        parse_run((Path(m.project_dir) / spec.file).read_bytes(), spec)


def _synthetic(tmp_path, spikes=()):
    t, a, fz, fy = P.sweep_samples([2000, 4000], lambda s, f: -0.3 * f * np.tanh(s / 4.0), noise_n=10.0, seed=3)
    fy = fy.copy()
    for i in spikes:
        fy[i] += 900.0
    P.write_csv(tmp_path / "rig/a.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz, -fy])
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [2000, 4000])
    (tmp_path / "dossier.toml").write_text(text, encoding="utf-8")
    m = load_project(tmp_path).manifest
    return parse_run((Path(m.project_dir) / m.runs[0].file).read_bytes(), m.runs[0]), t


def test_conditioning_finds_points_and_accounts_for_every_sample(tmp_path):
    # Spikes on the steep part of the sweep (where a moving median misses them), in both stays.
    run, t = _synthetic(tmp_path, spikes=(60, 320))
    before = {k: v.copy() for k, v in run.channels.items()}
    out = condition_run(run, ConditioningSettings())
    a = out.account
    assert [p.load_n for p in out.points] == [2000.0, 4000.0]
    assert a.dropped[REASON_SPIKE] == 2
    assert a.dropped[REASON_SETTLING] > 0 and a.dropped[REASON_TRANSITION] > 0
    assert a.n_kept + sum(a.dropped.values()) == a.n_samples
    for k, v in before.items():  # the stage leaves its input unchanged
        np.testing.assert_array_equal(run.channels[k], v)


def test_shuffling_the_conditioned_points_does_not_change_a_metric(tmp_path):
    from dataclasses import replace

    from dossier.conditioning.steady_state import SlipCurve
    from dossier.metrics.evaluate import metric_values
    from dossier.model.fit import SpecimenModel, fit_lateral
    from dossier.project.manifest import FitSettings

    run, _ = _synthetic(tmp_path)
    points = list(condition_run(run, ConditioningSettings()).points)
    rng = np.random.default_rng(11)
    shuffled = []
    for p in points:
        k = rng.permutation(p.curve.n_points)
        c = p.curve
        shuffled.append(
            replace(p, curve=SlipCurve(c.sweep, c.x[k], c.fz_n[k], c.fy_n[k], None, None, c.samples_per_bin[k]))
        )
    a = metric_values(SpecimenModel("A", fit_lateral(points, FitSettings(), 3000.0), None, None), 2000.0)
    b = metric_values(SpecimenModel("A", fit_lateral(shuffled[::-1], FitSettings(), 3000.0), None, None), 2000.0)
    for x, y in zip(a, b):
        assert x.metric == y.metric
        assert x.value == pytest.approx(y.value, rel=1e-6)
