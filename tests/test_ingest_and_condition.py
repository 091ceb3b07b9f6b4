import dataclasses
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


# --- damaged rows: never accepted silently ------------------------------------------------------

DAMAGE_HEADER = "TIME,SLIP_ANGLE,FZ,FY"


def _damaged(tmp_path, rows, decimal=".", delimiter=","):
    lines = [DAMAGE_HEADER.replace(",", delimiter)]
    for i in range(60):
        a = -6 + 0.2 * i
        row = [f"{0.04 * i:.2f}", f"{a:.2f}", "-4000", f"{-900 * a:.1f}"]
        lines.append(delimiter.join(c.replace(".", decimal) for c in row))
    for at, text in rows:
        lines.insert(at, text)
    (tmp_path / "rig").mkdir(exist_ok=True)
    (tmp_path / "rig/a.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    text = (
        P.MANIFEST_HEAD
        + P.specimen_block("A")
        + P.run_block("A", "rig/a.csv", [4000], delimiter=delimiter, decimal=decimal)
    )
    (tmp_path / "dossier.toml").write_text(text, encoding="utf-8")
    m = load_project(tmp_path).manifest
    return (tmp_path / "rig/a.csv").read_bytes(), m.runs[0]


@pytest.mark.parametrize(
    ("rows", "kw", "message"),
    [
        ([(10, "0.36,-4.4,-4000,3960.0,7")], {}, "line 11: expected 4 fields as in the header (line 1); found 5"),
        (
            [(10, "0.36,-4.4,-4000,3,960.0")],
            {},
            "line 11: expected 4 fields as in the header (line 1); found 5 (a stray ','",
        ),
        (
            [(10, "0,36;-4,4;4.000;3960")],
            {"decimal": ",", "delimiter": ";"},
            "line 11, column 'FZ': found '4.000' in a file with decimal comma",
        ),
    ],
)
def test_a_row_that_does_not_match_the_header_is_an_error_naming_the_line(tmp_path, rows, kw, message):
    raw, spec = _damaged(tmp_path, rows, **kw)
    with pytest.raises(RigDataError) as exc:
        parse_run(raw, spec)
    assert message in str(exc.value)


def test_empty_rows_and_overflow_sentinels_are_dropped_and_counted_with_their_lines(tmp_path):
    # -9.9e37: the overflow value some data-acquisition systems write  # common practice
    raw, spec = _damaged(tmp_path, [(5, ",,,"), (20, "0.76,-2.2,-9.9e37,1980.0"), (30, "1.16,-0.2,-1e10,180.0")])
    run = parse_run(raw, spec)
    assert [(r.line, r.reason.split(" (")[0]) for r in run.rejected] == [
        (6, "empty row"),
        (21, "implausible value"),
        (31, "implausible value"),
    ]
    assert run.n_samples == 60 and 6 not in run.line_numbers and 21 not in run.line_numbers
    assert float(np.max(np.abs(run.channels["fz"]))) == pytest.approx(4000.0)
    c = condition_run(run, ConditioningSettings(min_slip_range_deg=1.0, min_points_per_curve=5))
    assert c.account.n_samples == 63 and c.account.dropped[run.rejected[1].reason] == 2
    texts = " ".join(f.text for f in c.account.findings)
    assert "1 row(s) dropped, empty row (every cell blank): line 6" in texts
    assert "2 row(s) dropped, implausible value" in texts and "line 21 (FZ = 9.9e+37" in texts


@pytest.mark.filterwarnings("error")  # no library warning reaches the user
def test_a_value_that_overflows_in_unit_conversion_is_dropped_not_infinite(tmp_path):
    raw, spec = _damaged(tmp_path, [(8, "0.28,-4.8,-1.79e308,4320.0")])
    spec = dataclasses.replace(spec, columns={**spec.columns, "fz": dataclasses.replace(spec.columns["fz"], unit="kN")})
    run = parse_run(raw.replace(b"-4000", b"-4"), spec)
    assert [r.line for r in run.rejected] == [9] and np.all(np.isfinite(run.channels["fz"]))


@pytest.mark.parametrize(
    ("channel", "written", "looks"),
    [("slip_angle", "rad", "the values look like deg"), ("fz", "kN", "the values look like N")],
)
def test_a_unit_written_wrong_is_named_with_what_the_values_look_like(tmp_path, channel, written, looks):
    # a whole column beyond any rig's range is a unit mistake, not bad rows  # common practice
    raw, spec = _damaged(tmp_path, [])
    column = spec.columns[channel]
    spec = dataclasses.replace(spec, columns={**spec.columns, channel: dataclasses.replace(column, unit=written)})
    with pytest.raises(RigDataError) as exc:
        parse_run(raw, spec)
    assert f"after converting from '{written}'" in str(exc.value) and looks in str(exc.value)
    assert f"runs[0].columns.{channel}.unit" in str(exc.value)


def test_a_load_column_in_lbf_labelled_n_is_named_with_the_factor(tmp_path):
    # set-points 4, 6, 8 kN; the file holds pound-force labelled as newton: every steady level is
    # the set-point divided by 4.448 (NIST SP 811 B.8)
    loads_n = [4000.0, 6000.0, 8000.0]
    t, a, fz, fy = P.sweep_samples(loads_n, lambda s, z: -z * np.sin(1.4 * np.arctan(0.25 * s)), seed=3)
    lbf = 4.4482216152605
    P.write_csv(tmp_path / "rig/a.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz / lbf, -fy])
    (tmp_path / "dossier.toml").write_text(
        P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", loads_n), encoding="utf-8"
    )
    m = load_project(tmp_path).manifest
    run = parse_run((tmp_path / "rig/a.csv").read_bytes(), m.runs[0])
    c = condition_run(run, m.conditioning)
    assert c.account.verdict == "unusable"
    text = " ".join(c.account.verdict_reasons)
    assert "load steps at 899, 1349, 1798 N: the set-points are 4.448 times these, which is the lbf-to-N factor" in text
    assert "runs[0].columns.fz.unit" in text


@pytest.mark.parametrize("cpus", [2, 3])
def test_a_table_read_in_pieces_equals_one_read_whole(tmp_path, monkeypatch, cpus):
    # Large tables are read in pieces, one thread each: the same numbers and line numbers as one
    # piece, and a damaged line in any piece still goes to the careful parser, which names it.
    import dossier.ingest.rig_table as R

    raw, spec = _damaged(tmp_path, [])
    whole = parse_run(raw, spec)
    monkeypatch.setattr(R, "PIECE_BYTES", 200)
    monkeypatch.setattr(R.os, "cpu_count", lambda: cpus)
    assert len(R._pieces(raw, raw.find(b"\n") + 1, len(raw) - 1)) == cpus
    pieces = parse_run(raw, spec)
    assert all(np.array_equal(whole.channels[c], pieces.channels[c]) for c in whole.channels)
    assert np.array_equal(whole.line_numbers, pieces.line_numbers) and pieces.rejected == whole.rejected
    raw, spec = _damaged(tmp_path, [(50, "1.96,3.8,-4000")])  # a short line late in the file
    with pytest.raises(RigDataError, match="line 51") as found:
        parse_run(raw, spec)
    assert "expected 4 fields" in str(found.value)
