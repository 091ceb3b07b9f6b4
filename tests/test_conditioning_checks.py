"""Conditioning against synthetic runs whose lag, offsets, spikes, drift and coverage are known."""

from pathlib import Path

import numpy as np
import projects as P
import pytest

from dossier.common.errors import ManifestError, RigDataError
from dossier.conditioning.drift import correct_points, estimate_drift
from dossier.conditioning.offsets import split_offsets
from dossier.conditioning.steady_state import REASON_SPIKE, condition_run
from dossier.ingest.rig_table import parse_run
from dossier.project.load import load_project
from dossier.project.manifest import ConditioningSettings

FZ0 = 4000.0


def tire(offset_n=0.0, scale=1.0, mu=1.0):
    """A smooth tire: Fy = −μ Fz tanh(α / 5°)·scale + offset (ISO 8855 sign), peak beyond 12°."""

    def fy(slip_deg, fz_n):
        return scale * (-mu * fz_n * np.tanh(np.asarray(slip_deg) / 5.0)) + offset_n

    return fy


def write_run(
    root, name, loads, fy, *, spikes=(), seed=1, noise=10.0, tau_s=None, sweep_deg=12.0, convention="SAE J670"
):
    t, a, fz, f = P.sweep_samples(loads, fy, noise_n=noise, seed=seed, tau_s=tau_s, sweep_deg=sweep_deg)
    f = f.copy()
    for i in spikes:
        f[i] += 800.0
    sign = -1.0 if convention == "SAE J670" else 1.0  # SAE J670 flips slip, Fz and Fy (primer §3)
    P.write_csv(root / f"rig/{name}.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, sign * a, sign * fz, sign * f])
    return t


def manifest(root, runs_text, specimens=(("A", "baseline"),), extra=""):
    text = P.MANIFEST_HEAD + "".join(P.specimen_block(s, r) for s, r in specimens) + runs_text + extra
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    return load_project(root).manifest


def conditioned(root, m, i=0, settings=None, rated=None):
    return condition_run(
        parse_run((Path(root) / m.runs[i].file).read_bytes(), m.runs[i]), settings or m.conditioning, rated
    )


def test_known_lag_is_reported_and_removed_from_the_steady_curve(tmp_path):
    tau = 0.06  # s: e.g. 0.5 m relaxation length at 30 km/h
    write_run(tmp_path, "a", [FZ0], tire(), tau_s=tau, noise=5.0)
    m = manifest(tmp_path, P.run_block("A", "rig/a.csv", [FZ0]))
    (p,) = conditioned(tmp_path, m).points
    true_lag = P.discrete_lag_deg(4.0, tau)
    assert p.hysteresis.slip_lag == pytest.approx(true_lag, abs=0.03)  # stated tolerance ±0.03°
    # The difference between directions at zero slip is about 2·Cα·lag (Cα = Fz/5 per deg here).
    assert p.hysteresis.force_diff_n == pytest.approx(2 * FZ0 / 5.0 * true_lag, rel=0.25)
    truth = tire()(p.curve.x, p.curve.fz_n)
    assert np.max(np.abs(p.curve.fy_n - truth)) < 0.015 * FZ0  # within 1.5 % of the peak everywhere
    lagged_error = np.max(np.abs(p.rising.fy_n - tire()(p.rising.x, p.rising.fz_n)))
    assert lagged_error > 3 * np.max(np.abs(p.curve.fy_n - truth))  # the halves really did lag


def test_known_offset_and_injected_spikes_are_reported(tmp_path):
    spikes = (118, 131, 150)  # on the moving part of the sweep
    write_run(tmp_path, "a", [FZ0], tire(offset_n=60.0), spikes=spikes, noise=8.0)
    m = manifest(tmp_path, P.run_block("A", "rig/a.csv", [FZ0]))
    run = conditioned(tmp_path, m)
    assert run.account.dropped[REASON_SPIKE] == len(spikes)
    (p,) = run.points
    assert p.offsets.fy_at_zero_slip_n == pytest.approx(60.0, abs=8.0)


def test_ply_steer_and_conicity_from_both_rolling_directions(tmp_path):
    conicity, ply = 45.0, -25.0
    write_run(tmp_path, "f", [FZ0], tire(offset_n=conicity + ply), seed=2)
    write_run(tmp_path, "r", [FZ0], tire(offset_n=conicity - ply), seed=3)
    runs = P.run_block("A", "rig/f.csv", [FZ0]) + P.run_block("A", "rig/r.csv", [FZ0]).replace(
        "axis_convention", 'rolling_direction = "reverse"\naxis_convention'
    )
    m = manifest(tmp_path, runs)
    points = [p for i in range(2) for p in conditioned(tmp_path, m, i).points]
    (split,) = split_offsets(points)
    assert split.conicity_fy_n == pytest.approx(conicity, abs=6.0)
    assert split.ply_steer_fy_n == pytest.approx(ply, abs=6.0)


def test_control_tire_drift_is_estimated_and_corrected(tmp_path):
    # Force level falls 3 % per hour; the control is run at 08:00, 10:00 and 12:00, the candidate at 11:00.
    def level(hour):
        return 1.0 - 0.03 * (hour - 8.0)

    runs = ""
    for hour, seed in ((8, 11), (10, 12), (12, 13)):
        write_run(tmp_path, f"c{hour}", [FZ0], tire(scale=level(hour)), seed=seed, noise=5.0)
        runs += P.run_block("CTL", f"rig/c{hour}.csv", [FZ0]) + f"tested_at = 2026-11-12T{hour:02d}:00:00\n"
    write_run(tmp_path, "b", [FZ0], tire(scale=level(11), mu=1.1), seed=14, noise=5.0)
    runs += P.run_block("B", "rig/b.csv", [FZ0]) + "tested_at = 2026-11-12T11:00:00\n"
    # tested_at must sit in the run table, before [runs.columns]
    runs = runs.replace("\n[runs.columns]\n", "\n[runs.columns]\n")
    text_runs = _move_tested_at(runs)
    m = manifest(
        tmp_path,
        text_runs,
        specimens=(("CTL", "control"), ("B", "candidate")),
        extra='\n[drift]\ncontrol = "CTL"\ncorrect = true\n',
    )
    points = [p for i in range(4) for p in conditioned(tmp_path, m, i).points]
    est = estimate_drift(points, "CTL", FZ0)
    (mu,) = [d for d in est.metrics if d.metric == "peak_friction"]
    assert mu.per_hour_pct == pytest.approx(-3.0, abs=0.3)  # stated tolerance ±0.3 %/h
    corrected, est = correct_points(points, est)
    (b,) = [p for p in corrected if p.specimen == "B"]
    assert b.force_scale == pytest.approx(1.0 / level(11), rel=0.005)
    truth = tire(mu=1.1)(b.curve.x, b.curve.fz_n)
    assert np.max(np.abs(b.curve.fy_n - truth)) < 0.01 * 1.1 * FZ0
    # the control's own repeats are referred to the first repeat's level too (the truth is linear here)
    ctl = sorted((p for p in corrected if p.specimen == "CTL"), key=lambda p: p.tested_at)
    for p, hour in zip(ctl, (8, 10, 12)):
        assert p.force_scale == pytest.approx(level(8) / level(hour), rel=0.005)
    # the line's covariance: three repeats leave one degree of freedom for the scatter about it
    assert est.level_dof == 1 and est.level_covariance[0][0] > 0.0


def _move_tested_at(runs: str) -> str:
    """Put each 'tested_at = ...' line into its [[runs]] table (before its [runs.columns])."""
    out = []
    blocks = runs.split("\n[[runs]]\n")
    for block in blocks:
        if not block.strip():
            continue
        lines = block.split("\n")
        tested = [ln for ln in lines if ln.startswith("tested_at")]
        body = [ln for ln in lines if not ln.startswith("tested_at")]
        head = "\n".join(body).replace("[runs.columns]", "\n".join(tested) + "\n[runs.columns]", 1)
        out.append("\n[[runs]]\n" + head)
    return "".join(out)


def test_a_sweep_that_stops_before_the_peak_is_flagged(tmp_path):
    write_run(tmp_path, "a", [FZ0], tire(), sweep_deg=3.0)
    m = manifest(tmp_path, P.run_block("A", "rig/a.csv", [FZ0]))
    run = conditioned(tmp_path, m, settings=ConditioningSettings(min_points_per_curve=5))
    texts = " ".join(f.text for f in run.points[0].findings)
    assert "does not pass the peak on the positive side" in texts
    assert "does not pass the peak on the negative side" in texts
    assert "slip range reaches only" in texts
    assert run.account.verdict == "usable with findings"


def test_load_above_rated_and_detected_load_steps(tmp_path):
    write_run(tmp_path, "a", [3000.0, 6000.0], tire())
    block = P.run_block("A", "rig/a.csv", [1]).replace('load_setpoints = { values = [1], unit = "N" }\n', "")
    m = manifest(tmp_path, block)
    run = conditioned(tmp_path, m, rated=5000.0)
    assert run.account.levels_detected
    assert [round(v, -1) for v in run.account.load_levels_n] == [3000.0, 6000.0]
    assert any("above the rated load of 5000 N" in f.text for f in run.points[1].findings)


def test_slip_ratio_sweeps_are_conditioned_by_slip_ratio(tmp_path):
    # A longitudinal run: Fx against slip ratio −0.3 … +0.3 at 4 kN (stiffness 20 Fz per unit slip).
    def fx(kappa, fz):
        return 1.05 * fz * np.tanh(20.0 * np.asarray(kappa) / 1.05)

    t, s, fz, f = P.sweep_samples([FZ0], fx, sweep_deg=0.3, rate_deg_s=0.1, noise_n=8.0)
    P.write_csv(tmp_path / "rig/x.csv", ["TIME", "SLIP_RATIO", "FZ", "FX"], [t, s, -fz, f])
    block = (
        P.run_block("A", "rig/x.csv", [FZ0], units={"slip_ratio": "1", "fx": "N"})
        .replace('fy = { name = "FY", unit = "N" }\n', "")
        .replace("axis_convention", 'sweep = "slip_ratio"\naxis_convention')
    )
    block = block.replace('slip_angle = { name = "SLIP_ANGLE", unit = "deg" }\n', "")
    m = manifest(tmp_path, block)
    (p,) = conditioned(tmp_path, m).points
    assert p.sweep == "slip_ratio" and p.curve.fy_n is None
    assert p.curve.x.min() < -0.25 and p.curve.x.max() > 0.25
    near = np.abs(p.curve.x) <= 0.02
    slope = np.polyfit(p.curve.x[near], p.curve.fx_n[near], 1)[0]
    assert slope == pytest.approx(20.0 * FZ0, rel=0.05)


@pytest.mark.parametrize(
    "body, message, line",
    [
        (
            "TIME,SLIP_ANGLE,FZ,FY\n0,0,-4000,0\n0.04,1,-4000\n",
            "expected 4 fields as in the header (line 1); found 3 (truncated line?)",
            3,
        ),
        ("TIME,SLIP_ANGLE,FZ,FY\n0,0,-4000,0\n0.04,1,-4000,nan\n", "expected a finite number; found 'nan'", 3),
        ("TIME,SLIP_ANGLE,FZ,FY\n0,-3,-4000,0\n0.08,0,-4000,1\n0.04,3,-4000,2\n", "time goes backwards", 4),
        ("TIME,SLIP_ANGLE,FZ\n0,0,-4000\n", "no column named 'FY' for channel 'fy'", 1),
    ],
)
def test_bad_rig_files_name_file_and_line(tmp_path, body, message, line):
    (tmp_path / "rig").mkdir()
    (tmp_path / "rig/a.csv").write_text(body, encoding="utf-8")
    m = manifest(tmp_path, P.run_block("A", "rig/a.csv", [FZ0]))
    with pytest.raises(RigDataError) as exc:
        parse_run((Path(tmp_path) / m.runs[0].file).read_bytes(), m.runs[0])
    assert str(exc.value).startswith(f"rig/a.csv, line {line}")
    assert message in str(exc.value)


def test_drift_needs_test_times(tmp_path):
    write_run(tmp_path, "a", [FZ0], tire())
    with pytest.raises(ManifestError, match=r"runs\[0\]\.tested_at: is required for every run when \[drift\] is set"):
        manifest(
            tmp_path,
            P.run_block("A", "rig/a.csv", [FZ0]),
            specimens=(("A", "control"),),
            extra='\n[drift]\ncontrol = "A"\n',
        )


def test_stepped_sweeps_use_the_held_steps(tmp_path):
    # Slip held for 1.5 s at each 1° step from −8° to +8°, moved at 8 °/s in between, with lag.
    rate, dt = 8.0, 1.0 / P.RATE_HZ
    targets = np.r_[np.arange(0, 9), np.arange(7, -9, -1), np.arange(-7, 1)].astype(float)
    slip = [np.zeros(int(1.5 / dt))]
    for a, b in zip(targets[:-1], targets[1:]):
        n_move = max(1, int(abs(b - a) / rate / dt))
        slip += [np.linspace(a, b, n_move, endpoint=False), np.full(int(1.5 / dt), b)]
    slip = np.concatenate(slip)
    t = np.arange(slip.size) * dt
    fz = np.full(slip.size, FZ0)
    rng = np.random.default_rng(5)
    fy = tire()(P.lag(slip, 0.06), fz) + 5.0 * rng.standard_normal(slip.size)
    P.write_csv(tmp_path / "rig/s.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -slip, -fz, -fy])
    m = manifest(tmp_path, P.run_block("A", "rig/s.csv", [FZ0]))
    run = conditioned(tmp_path, m)
    (p,) = run.points
    assert run.account.dropped["moving between slip steps (stepped sweep)"] > 0
    assert sorted(np.round(p.curve.x).astype(int)) == list(range(-8, 9))
    np.testing.assert_allclose(p.curve.fy_n, tire()(p.curve.x, p.curve.fz_n), atol=10.0)
