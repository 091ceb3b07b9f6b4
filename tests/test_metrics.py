"""Metrics against the published 1987 tire, interval coverage, extrapolation and the cross-check."""

import bnp1987
import numpy as np
import projects as P
import pytest
from test_fit_checks import FZ0, LOADS, P0, SLIP, TRUE_FY, bnp_mz, lateral_points

from dossier.metrics.evaluate import metric_values
from dossier.model import magic_formula as mf
from dossier.model.fit import SpecimenModel, fit_channel
from dossier.project.catalogue import METRICS
from dossier.project.manifest import FitSettings

LINEAR = FitSettings(loss="linear")


def _values(models, load, **kw):
    return {m.metric: m for m in metric_values(models, load, **kw)}


def test_every_metric_has_a_complete_definition():
    for m in METRICS.values():
        assert m.label and m.unit and m.definition and m.computed and m.source and m.channels


def test_metrics_of_the_published_1987_tire():
    # Bakker, Nyborg & Pacejka, SAE 870421 (1987), Tables 2-3 (domain primer §8), at 4 kN.
    pts = [P.operating_point(SLIP, L, fy=-bnp1987.lateral_force_n(SLIP, L / 1000.0), pressure_kpa=P0) for L in LOADS]
    fy = fit_channel(pts, "fy", LINEAR, FZ0, P0)
    got = _values(SpecimenModel("BNP", fy, None, None), FZ0)
    B, C, D, E = bnp1987.coefficients(4.0)
    a = np.linspace(0, 12, 120001)
    published_peak_slip = a[np.argmax(bnp1987.lateral_force_n(a, 4.0))]
    assert got["cornering_stiffness"].value == pytest.approx(B * C * D, rel=0.02)  # 1027.3 N/deg
    assert got["peak_lateral_friction"].value == pytest.approx(D / FZ0, rel=0.02)  # 0.9226
    assert got["slip_angle_at_peak"].value == pytest.approx(published_peak_slip, rel=0.02)


def test_trail_of_the_published_1987_tire():
    # Zero-slip trail t0 = −(dMz/dα)/(dFy/dα) of the 1987 tire at 4 kN is 25.5 mm. Fitted at 4 kN
    # alone, the 2002 Mz0 comes out 3.9 % stiff at zero slip (see test_fit_checks): checked to 5 %.
    pts = [
        P.operating_point(SLIP, FZ0, fy=-bnp1987.lateral_force_n(SLIP, 4.0), mz=-bnp_mz(SLIP, 4.0)[0], pressure_kpa=P0)
    ]
    fy = fit_channel(pts, "fy", LINEAR, FZ0, P0)
    mz = fit_channel(pts, "mz", LINEAR, FZ0, P0, 0.3, fy.values)
    got = _values(SpecimenModel("BNP", fy, mz, None), FZ0)
    B, C, D, E = bnp1987.coefficients(4.0)
    published_trail_mm = 1000 * -bnp_mz(0.0, 4.0)[1] / (B * C * D)
    assert got["pneumatic_trail"].value == pytest.approx(published_trail_mm, rel=0.05)
    assert got["peak_aligning_moment"].value == pytest.approx(abs(bnp_mz(0.0, 4.0)[2]), rel=0.02)


def _true_metrics(load):
    h = 1e-6
    slope = (mf.fy0(h * mf.DEG, load, TRUE_FY, FZ0) - mf.fy0(-h * mf.DEG, load, TRUE_FY, FZ0)) / (2 * h)
    a = np.linspace(0, 12, 240001)
    peaks = [np.max(np.abs(mf.fy0(s * a * mf.DEG, load, TRUE_FY, FZ0))) for s in (1, -1)]
    return -slope, np.mean(peaks) / load


def test_intervals_of_stiffness_and_peak_friction_cover_the_truth():
    true_cs, true_mu = _true_metrics(FZ0)
    hits = {"cornering_stiffness": 0, "peak_lateral_friction": 0}
    seeds = range(30)
    for seed in seeds:
        fy = fit_channel(lateral_points(noise=20.0, seed=seed), "fy", LINEAR, FZ0, P0)
        got = _values(SpecimenModel("S", fy, None, None), FZ0)
        for name, truth in (("cornering_stiffness", true_cs), ("peak_lateral_friction", true_mu)):
            lo, hi = got[name].ci95
            hits[name] += lo <= truth <= hi
    for name, n in hits.items():
        # 30 seeds: a 95 % interval should miss about 1.5 times; allow 24-30 hits.
        assert 24 <= n <= 30, (name, n)


def test_metrics_at_any_load_and_extrapolation_labels():
    fy = fit_channel(lateral_points(), "fy", LINEAR, FZ0, P0)
    inside = _values(SpecimenModel("S", fy, None, None), 5000.0)
    outside = _values(SpecimenModel("S", fy, None, None), 10000.0)
    assert not inside["cornering_stiffness"].extrapolated
    assert outside["cornering_stiffness"].extrapolated and "extrapolated" in outside["cornering_stiffness"].note
    true_cs, _ = _true_metrics(5000.0)
    assert inside["cornering_stiffness"].value == pytest.approx(true_cs, rel=1e-5)
    # only the channels that were fitted give metrics
    assert "aligning_stiffness" not in inside and "longitudinal_slip_stiffness" not in inside


def test_model_free_cross_check_and_its_finding():
    pts = lateral_points(noise=10.0, seed=3)
    fy = fit_channel(pts, "fy", LINEAR, FZ0, P0)
    models = SpecimenModel("S", fy, None, None)
    calm = _values(models, FZ0, points=pts, crosscheck_threshold_pct=5.0)
    strict = _values(models, FZ0, points=pts, crosscheck_threshold_pct=0.1)
    cs = calm["cornering_stiffness"]
    assert cs.crosscheck == pytest.approx(cs.value, rel=0.03)  # local cubic over ±2° of the data
    assert cs.finding == ""
    assert "model and data disagree" in strict["cornering_stiffness"].finding
    assert calm["peak_lateral_friction"].crosscheck == pytest.approx(calm["peak_lateral_friction"].value, rel=0.02)


def test_peak_and_root_searches_agree_with_scipy():
    """The vectorised searches the metrics use, against SciPy's bounded Brent search and brentq
    (general-purpose reference library) on a Magic Formula curve of the published 1987 tire."""
    from scipy import optimize

    from dossier.metrics.evaluate import _refine_max, _refine_root

    def fy(alpha_deg):  # lateral force of the 1987 tire at 4 kN, N
        return mf.fy0(np.asarray(alpha_deg) * mf.DEG, 4000.0, TRUE_FY, FZ0)

    def minus_abs(a):
        return -abs(float(fy(a)))

    ref = optimize.minimize_scalar(minus_abs, bounds=(3.0, 15.0), method="bounded", options={"xatol": 1e-10})
    x, top = _refine_max(lambda a: np.abs(fy(a)), 3.0, 15.0)
    assert x == pytest.approx(ref.x, abs=1e-6)
    assert top == pytest.approx(-ref.fun, rel=1e-9)

    def level(a):  # crosses zero where |Fy| is 60 % of its peak
        return np.abs(fy(a)) - 0.6 * top

    root = optimize.brentq(lambda a: float(level(a)), 0.0, x, xtol=1e-13)
    assert _refine_root(level, 0.0, x) == pytest.approx(root, abs=1e-10)


def test_intervals_with_every_coefficient_step_in_one_call_equal_those_step_by_step(monkeypatch):
    # Two ways of computing the same delta-method intervals: every coefficient step of a metric in
    # one vectorised model call (evaluate.BATCHED), or two model calls per step. Asked: the same
    # values to 1e-9 relative. The data: Fy, Mz and Fx over 4 loads × 3 cambers × 2 pressures, so
    # that the camber and pressure metrics are computed too.
    import sys
    from pathlib import Path

    import dossier.metrics.evaluate as E

    sys.path.insert(0, str(Path(__file__).parent / "benchmarks"))
    import bench_fit as B

    lat, lon = B.points()
    fy = fit_channel(lat, "fy", LINEAR, B.FZ0, B.P0)
    mz = fit_channel(lat, "mz", LINEAR, B.FZ0, B.P0, B.R0, fy.values)
    fx = fit_channel(lon, "fx", LINEAR, B.FZ0, B.P0)
    model = SpecimenModel("S", fy, mz, fx)
    batched = {m.metric: m for m in metric_values(model, 4000.0)}
    monkeypatch.setattr(E, "BATCHED", frozenset())
    stepwise = {m.metric: m for m in metric_values(model, 4000.0)}
    assert batched.keys() == stepwise.keys() and not E.BATCHED
    covered = set()
    for name, m in stepwise.items():
        assert batched[name].value == m.value, name
        if m.stderr is None:
            assert batched[name].stderr is None, name
            continue
        assert batched[name].stderr == pytest.approx(m.stderr, rel=1e-9, abs=0.0), name
        covered.add(name)
    monkeypatch.undo()
    assert {"cornering_stiffness", "pneumatic_trail", "camber_stiffness", "longitudinal_slip_stiffness"} <= covered
    assert {"cornering_stiffness_per_10kpa", "pneumatic_trail_pct_per_bar"} <= covered
    assert covered >= E.BATCHED & set(stepwise)
