"""Relaxation length from synthetic runs whose first-order lag, sweep rate and speed are known.

The model checked against is the single-contact-point transient model: the force follows the
slip through a first-order lag, time constant τ = σ / V, so a sweep at rate r lags by Δ = r·τ
and σ = V·Δ / r (Pacejka 2006 §7.2, from memory). The simulated force is that model sampled
exactly (:func:`sessions.lagged`, the ramp-invariant discretisation), so the truth is σ = V·τ.
"""

from dataclasses import replace
from pathlib import Path

import numpy as np
import projects as P
import pytest
import sessions as S

from dossier.conditioning.relaxation import (
    LATERAL,
    LONGITUDINAL,
    fit_hold,
    fit_lag,
    point_relaxation,
    relaxation_lengths,
)
from dossier.conditioning.steady_state import LagSamples, SlipCurve, SlipHold, condition_run
from dossier.ingest.rig_table import parse_run
from dossier.project.load import load_project, project_from_files
from dossier.standards.coverage import coverage_factor

FZ0 = 4000.0
KMH = 3.6  # km/h per m/s (exact)


def tire(slip_deg, fz_n):
    """A smooth tire: Fy = −Fz tanh(α / 5°) (ISO 8855 sign), peak beyond the ±12° sweep."""
    return -np.asarray(fz_n) * np.tanh(np.asarray(slip_deg) / 5.0)


def triangle(rate_deg_s, rate_hz=P.RATE_HZ, hold_after_s=0.0):
    """(time s, slip deg) of the sweep_samples program at one load, optionally held at 0° after it."""
    t, a, _, _ = P.sweep_samples([FZ0], tire, rate_deg_s=rate_deg_s)
    if rate_hz != P.RATE_HZ or hold_after_s:
        quarter = 12.0 / rate_deg_s
        tt = np.arange(0.0, 4 * quarter, 1.0 / rate_hz)
        tri = 12.0 * np.where(
            tt < quarter, tt / quarter, np.where(tt < 3 * quarter, 2 - tt / quarter, tt / quarter - 4)
        )
        a = np.concatenate([np.zeros(int(2.0 * rate_hz)), tri, np.zeros(int(hold_after_s * rate_hz))])
        t = np.arange(a.size) / rate_hz
    return t, a


def steps(rate_hz, move_deg_s=10.0, hold_s=3.0, targets=(1, 2, 3, 4, -1, -2, -3, -4, 0)):
    """(time s, slip deg) of a stepped sweep: quick moves between held slip angles."""
    a = [np.zeros(int(2.0 * rate_hz))]
    for target in targets:
        prev = a[-1][-1]
        n = max(int(abs(target - prev) / move_deg_s * rate_hz), 1)
        a += [np.linspace(prev, target, n + 1)[1:], np.full(int(hold_s * rate_hz), float(target))]
    a = np.concatenate(a)
    return np.arange(a.size) / rate_hz, a


def condition(root: Path, t, a, tau_s, *, speed_kmh=30.0, noise_n=0.0, slip_noise_deg=0.0, seed=0, name="a"):
    """Write a one-load rig file with the exact first-order lag, and return its conditioned run."""
    rng = np.random.default_rng(seed)
    fz = np.full(t.size, FZ0)
    f = tire(S.lagged(a, tau_s, float(t[1] - t[0])), fz) + noise_n * rng.standard_normal(t.size)
    a_rec = a + slip_noise_deg * rng.standard_normal(t.size)
    header, cols, units = ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a_rec, -fz, -f], {}  # SAE J670 signs
    if speed_kmh is not None:
        header, cols, units = header + ["SPEED"], cols + [np.full(t.size, speed_kmh)], {"speed": "km/h"}
    P.write_csv(root / f"rig/{name}.csv", header, cols)
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", f"rig/{name}.csv", [FZ0], units=units)
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    m = load_project(root).manifest
    return condition_run(parse_run((root / m.runs[0].file).read_bytes(), m.runs[0]), m.conditioning)


def test_the_reviewers_example_lag_to_length():
    # σ = V·Δα/r: 0.203° at 4 °/s and 30 km/h is 8.333 m/s · 0.05075 s = 0.4229 m (first-order
    # relaxation model, Pacejka 2006 §7.2, from memory). Samples of a steady ramp through zero
    # slip made directly from the model: F = F_ss(x − d·Δ), d = +1 rising, −1 falling.
    rate, lag = 4.0, 0.203
    t = np.arange(0.0, 1.0, 0.01)
    rising, falling = -2.0 + rate * t, 2.0 - rate * t
    x = np.r_[rising, falling]
    d = np.r_[np.ones(t.size), -np.ones(t.size)]
    f = tire(x - d * lag, FZ0)
    samples = LagSamples(
        window=2.0,
        time_s=np.r_[t, 10.0 + t],
        x=x,
        main=f,
        direction=d,
        travel=np.full(x.size, 10.0),
        rate_per_s=d * rate,
        rate_rising_per_s=rate,
        rate_falling_per_s=rate,
    )
    fit = fit_lag(samples)
    assert fit.slip_lag == pytest.approx(lag, rel=1e-3)  # a cubic for tanh over ±2°: 0.1 %
    assert 30.0 / KMH * fit.tau_s == pytest.approx(0.4229, abs=5e-4)


@pytest.mark.parametrize("tau_s", [0.03, 0.06, 0.10, 0.15, 0.25])
@pytest.mark.parametrize("rate_deg_s", [2.0, 4.0])
def test_sigma_is_speed_times_tau_over_time_constants_and_rates(tmp_path, tau_s, rate_deg_s):
    # σ = V·τ (first-order relaxation model, Pacejka 2006 §7.2, from memory); 30 km/h.
    run = condition(tmp_path, *triangle(rate_deg_s), tau_s, noise_n=5.0, seed=3)
    (r,) = relaxation_lengths(run.points)
    truth = 30.0 / KMH * tau_s
    assert r.direction == LATERAL and r.n_points == 1 and r.reason == ""
    assert r.value_m == pytest.approx(truth, rel=0.01)  # stated tolerance: 1 %
    assert r.points[0].lag.rate_per_s == pytest.approx(rate_deg_s, rel=0.005)
    (p,) = run.points
    assert p.hysteresis.sweep_rate_per_s == pytest.approx(rate_deg_s, rel=0.005)  # the recorded rate


def test_the_length_scales_with_speed(tmp_path):
    # The same lag in time at 15 and 60 km/h is four times the distance rolled (σ = V·τ).
    t, a = triangle(4.0)
    slow = relaxation_lengths(condition(tmp_path, t, a, 0.06, speed_kmh=15.0, noise_n=5.0).points)[0]
    fast = relaxation_lengths(condition(tmp_path, t, a, 0.06, speed_kmh=60.0, noise_n=5.0).points)[0]
    assert fast.value_m == pytest.approx(4.0 * slow.value_m, rel=1e-9)
    assert fast.value_m == pytest.approx(60.0 / KMH * 0.06, rel=0.02)


def test_the_test_helpers_own_lag_filter_is_recovered_as_it_lags(tmp_path):
    # sweep_samples(tau_s=…) filters with y[i] = a·y[i−1] + (1 − a)·x[i], which trails a ramp by
    # discrete_lag_deg (a·r·dt/(1 − a), about τ − dt/2), not r·τ: that is the lag to recover.
    tau = 0.06
    t, a, fz, f = P.sweep_samples([FZ0], tire, rate_deg_s=4.0, noise_n=5.0, seed=2, tau_s=tau)
    P.write_csv(tmp_path / "rig/a.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY", "SPEED"], [t, -a, -fz, -f, 0 * t + 30.0])
    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [FZ0], units={"speed": "km/h"})
    (tmp_path / "dossier.toml").write_text(text, encoding="utf-8")
    m = load_project(tmp_path).manifest
    run = condition_run(parse_run((tmp_path / "rig/a.csv").read_bytes(), m.runs[0]), m.conditioning)
    (r,) = relaxation_lengths(run.points)
    assert r.value_m == pytest.approx(30.0 / KMH * P.discrete_lag_deg(4.0, tau) / 4.0, rel=0.02)


@pytest.mark.parametrize("tau_s", [0.06, 0.12])
def test_the_settling_after_a_stop_agrees(tmp_path, tau_s):
    # After the slip stops, the force settles as exp(−t/τ) (first-order model, Pacejka 2006 §7.2,
    # from memory): a continuous sweep at 100 Hz, then a 3 s hold at zero slip.
    run = condition(tmp_path, *triangle(4.0, rate_hz=100.0, hold_after_s=3.0), tau_s, noise_n=5.0, seed=4)
    (r,) = relaxation_lengths(run.points)
    truth = 30.0 / KMH * tau_s
    assert len(run.points[0].holds) == 1
    assert r.crosscheck_m == pytest.approx(truth, rel=0.1)  # one hold: stated tolerance 10 %
    assert abs(r.crosscheck_m - r.value_m) <= 2.5 * np.hypot(r.u_m, r.crosscheck_u_m)
    assert "in 1 of 1 holds" in r.crosscheck_method


def test_a_stepped_sweep_gives_the_cross_check_and_says_why_there_is_no_lag(tmp_path):
    run = condition(tmp_path, *steps(100.0), 0.1, noise_n=5.0, seed=5)
    (r,) = relaxation_lengths(run.points)
    assert r.value_m is None and r.n_points == 0
    assert "too few samples with the lag built up near zero slip" in r.reason
    assert r.crosscheck_m == pytest.approx(30.0 / KMH * 0.1, rel=0.02)  # nine holds: 2 %
    assert "9 of 9 holds" in r.crosscheck_method


def test_a_point_without_speed_gives_no_value_and_says_why(tmp_path):
    run = condition(tmp_path, *triangle(4.0, rate_hz=100.0, hold_after_s=3.0), 0.06, speed_kmh=None, noise_n=5.0)
    (r,) = relaxation_lengths(run.points)
    assert r.value_m is None and r.u_m is None and r.dof is None and r.n_points == 0
    assert r.reason == (
        "run 0 (rig/a.csv) at 4000 N: no speed channel, so the lag cannot be turned into a length "
        "(map the rig's speed column as columns.speed in the manifest)"
    )
    assert r.points[0].lag.tau_s == pytest.approx(0.06, rel=0.02)  # the lag in time is still measured
    assert r.crosscheck_m is None and r.crosscheck_method == "not available: no speed measured where the holds were"


def test_a_one_sided_point_says_why():
    p = P.operating_point(np.linspace(-12, 12, 49), FZ0, fy=tire(np.linspace(-12, 12, 49), FZ0))
    r = point_relaxation(p)
    assert r.value_m is None and "no moving samples in both directions near zero slip" in r.reason


def test_points_at_one_load_are_averaged_with_their_scatter(tmp_path):
    t, a = triangle(4.0)
    points = []
    for seed in (11, 12, 13):
        points += condition(tmp_path, t, a, 0.08, noise_n=20.0, seed=seed).points
    points = [replace(p, run_index=i) for i, p in enumerate(points)]
    (r,) = relaxation_lengths(points)
    single = [point_relaxation(p).value_m for p in points]
    assert r.n_points == 3 and r.dof == 2
    assert r.value_m == pytest.approx(np.mean(single), rel=1e-12)
    assert r.u_m == pytest.approx(np.std(single, ddof=1) / np.sqrt(3), rel=1e-12)  # GUM 4.2.3
    assert "Mean of 3 operating points" in r.method
    assert relaxation_lengths(points[::-1]) == relaxation_lengths(points)  # order does not matter


def test_fit_hold_recovers_the_time_constant_through_a_bending_curve_and_rejects_a_short_hold():
    # First-order model (Pacejka 2006 §7.2, from memory): the slip the contact patch feels
    # relaxes as exp(−t/τ) after a stop; the force follows it through the steady curve, which at
    # 3° bends (tanh(α/5°)). Sampled at 100 Hz, τ = 0.08 s, 0.6° of lag left at the stop.
    x = np.arange(-12.0, 12.01, 0.5)
    curve = SlipCurve("slip_angle", x, np.full(x.size, FZ0), tire(x, FZ0), None, None, np.ones(x.size))
    t = np.arange(0.0, 1.0, 0.01)
    felt = 3.0 - 0.6 * np.exp(-t / 0.08)
    f = tire(felt, FZ0) + 1e-3 * np.sin(37.0 * t)  # a tiny ripple: a residual for the errors
    fit = fit_hold(SlipHold(time_s=t, main=f, slip=3.0, approach_rate_per_s=10.0, first_line=5), curve)
    assert fit.reason == ""
    assert fit.tau_s == pytest.approx(0.08, rel=0.01)  # the quadratic inversion: within 1 %
    assert fit.amplitude == pytest.approx(-0.6, rel=0.02)
    short = fit_hold(SlipHold(time_s=t[:15], main=f[:15], slip=3.0, approach_rate_per_s=10.0, first_line=5), curve)
    assert short.reason == "hold shorter than 3 time constants"


def test_the_intervals_cover_the_true_length_over_seeded_noisy_runs(tmp_path):
    # An interval's claim is testable: over a few hundred seeded cases a 95 % interval must cover
    # the truth in 90–99 % of them (domain primer §5a, GUM / JCGM 100:2008 6.2), k from Student's t.
    t, a = triangle(4.0)
    tau = 0.08
    truth = 30.0 / KMH * tau
    z, hits = [], 0
    n = 300
    for seed in range(n):
        (r,) = relaxation_lengths(
            condition(tmp_path, t, a, tau, noise_n=20.0, slip_noise_deg=0.02, seed=1000 + seed).points
        )
        hits += abs(r.value_m - truth) <= coverage_factor(r.dof) * r.u_m
        z.append((r.value_m - truth) / r.u_m)
    assert 0.90 <= hits / n <= 0.99
    # Not far too wide: the errors are about as large as the uncertainties say.
    assert 0.75 <= float(np.sqrt(np.mean(np.square(z)))) <= 1.3


def test_the_synthetic_sessions_lateral_and_longitudinal_lengths_are_covered():
    # tests/sessions.py simulates the exact first-order lag: σ = V·τ with the session's lateral
    # relaxation length, and τ = 0.03 s for the slip ratio at 30 km/h (0.25 m), with noise on
    # every channel, spikes, drift and calibration errors (which scale forces, not the lag).
    found = {LATERAL: [], LONGITUDINAL: []}
    for seed in range(12):
        files, _ = S.session(seed)
        truth = {LATERAL: S.session_details(seed)["relaxation_length_m"], LONGITUDINAL: 0.03 * S.SPEED_KMH / KMH}
        m = project_from_files(files, Path("unused")).manifest
        points = [p for run in m.runs for p in condition_run(parse_run(files[run.file], run), m.conditioning).points]
        for r in relaxation_lengths(points):
            if r.n_points == 1:  # the control's repeats are combined: dof 3, tested above
                found[r.direction].append(abs(r.value_m - truth[r.direction]) <= coverage_factor(r.dof) * r.u_m)
    for direction, hits in found.items():
        assert len(hits) >= 50, direction
        assert 0.88 <= np.mean(hits) <= 1.0, (direction, np.mean(hits))
