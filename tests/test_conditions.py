"""Metrics at every camber and pressure tested, slopes against pressure, and targets judged at
their own condition, on a small real project whose tire follows the Magic Formula with the
pressure terms of Besselink, Schmeitz & Pacejka (2010)."""

import numpy as np
import projects as P
import pytest

from dossier.engine.build import build, evaluate
from dossier.evaluation.acceptance import NOT_MEASURED
from dossier.model import magic_formula as mf
from dossier.project.load import load_project

FZ0 = 4000.0
P0 = 250.0
P1 = 290.0
LOADS = (2000.0, 4000.0, 6000.0)
# An invented, plausible passenger-car lateral coefficient set (test material, not a published tire),
# with a linear pressure effect on cornering stiffness (ppy1) and on friction (ppy3), no ppy2.
TRUE_FY = {
    "pCy1": 1.35,
    "pDy1": 1.05,
    "pDy2": -0.08,
    "pDy3": 2.0,
    "pEy1": -0.4,
    "pEy2": -0.3,
    "pKy1": -22.0,
    "pKy2": 1.9,
    "pKy3": 0.4,
    "ppy1": 0.6,
    "ppy3": -0.3,
}


def _tire(camber_deg, pressure_kpa):
    dpi = (pressure_kpa - P0) / P0

    def fy(slip_deg, fz_n):
        return mf.fy0(np.asarray(slip_deg) * mf.DEG, fz_n, TRUE_FY, FZ0, camber_deg * mf.DEG, dpi)

    return fy


def _true_cornering_stiffness(load_n, camber_deg, pressure_kpa, h=1e-4):
    f = _tire(camber_deg, pressure_kpa)
    return -float((f(h, load_n) - f(-h, load_n)) / (2 * h))


def _run(root, name, loads, camber_deg, pressure_kpa, seed):
    t, a, fz, f = P.sweep_samples(loads, _tire(camber_deg, pressure_kpa), noise_n=4.0, seed=seed, tau_s=0.05)
    # SAE J670 flips slip, Fz and Fy against ISO 8855 and keeps the inclination's sign (primer §3)
    gamma = np.full(t.size, camber_deg)
    P.write_csv(root / f"rig/{name}.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY", "INCLINATION"], [t, -a, -fz, -f, gamma])


def _camber(block: str, camber_deg: float) -> str:
    block = block.replace("[runs.columns]\n", f"camber_setpoints_deg = [{camber_deg}]\n[runs.columns]\n", 1)
    return block + 'inclination = { name = "INCLINATION", unit = "deg" }\n'


TARGETS = """
[fit]
nominal_load_n = 4000

[[targets]]
metric = "cornering_stiffness"
load_n = 4000
minimum = 100
camber_deg = -2.0
reference = "spec 1 (cambered)"

[[targets]]
metric = "cornering_stiffness"
load_n = 4000
minimum = 100
pressure_kpa = 290
reference = "spec 2 (high pressure)"

[[targets]]
metric = "cornering_stiffness"
load_n = 12000
minimum = 100
reference = "spec 3 (a load never tested)"
"""


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    root = tmp_path_factory.mktemp("conditions")
    _run(root, "nominal", LOADS, 0.0, P0, seed=1)
    _run(root, "high", LOADS, 0.0, P1, seed=2)
    _run(root, "cambered", (4000.0,), -2.0, P0, seed=3)
    runs = (
        P.run_block("S", "rig/nominal.csv", LOADS, pressure=f"{P0:g}")
        + P.run_block("S", "rig/high.csv", LOADS, pressure=f"{P1:g}")
        + _camber(P.run_block("S", "rig/cambered.csv", (4000.0,), pressure=f"{P0:g}"), -2.0)
    )
    (root / "dossier.toml").write_text(P.MANIFEST_HEAD + P.specimen_block("S") + runs + TARGETS, encoding="utf-8")
    return root


@pytest.fixture(scope="module")
def evaluation(project):
    return evaluate(load_project(project))


def test_metrics_at_every_tested_condition_labelled_with_it(evaluation):
    e = evaluation
    nominal = {
        (m.load_n, m.camber_deg, round(m.pressure_kpa)): m for m in e.metrics if m.metric == "cornering_stiffness"
    }
    assert set(nominal) == {(load, 0.0, P0) for load in (*LOADS, 12000.0)}  # and the target's load
    assert [k for k, m in nominal.items() if m.extrapolated] == [(12000.0, 0.0, P0)]
    others = {
        (m.load_n, m.camber_deg, round(m.pressure_kpa)): m
        for m in e.condition_metrics
        if m.metric == "cornering_stiffness"
    }
    assert set(others) == {(load, 0.0, P1) for load in LOADS} | {(4000.0, -2.0, P0)}
    for (load, camber, pressure), m in others.items():
        assert not m.extrapolated, m
        # Pacejka 2006 eq. 4.E25 with the pressure term of BSP2010, evaluated at the same condition
        assert m.value == pytest.approx(_true_cornering_stiffness(load, camber, pressure), rel=0.02), m


def test_slope_against_pressure_follows_the_published_pressure_term(evaluation):
    # With ppy2 = 0, Kyα = Kyα0·(1 + ppy1·dpi), dpi = (p − p0)/p0 (BSP2010, on Pacejka 2006 eq. 4.E25):
    # the relative change is ppy1/p0 per kPa, i.e. 10⁴·ppy1/p0 % per bar, at every load.
    expected_pct_per_bar = 1e4 * TRUE_FY["ppy1"] / P0  # 24 %/bar
    got = {m.load_n: m for m in evaluation.metrics if m.metric == "cornering_stiffness_pct_per_bar"}
    assert set(got) >= set(LOADS)
    for load in LOADS:
        assert got[load].value == pytest.approx(expected_pct_per_bar, rel=0.1), load
        assert not got[load].extrapolated
        assert got[load].budget is not None and got[load].budget.part("repeatability") is not None
    per10 = {m.load_n: m for m in evaluation.metrics if m.metric == "cornering_stiffness_per_10kpa"}
    for load in LOADS:
        secant = (_true_cornering_stiffness(load, 0.0, P1) - _true_cornering_stiffness(load, 0.0, P0)) / (P1 - P0)
        assert per10[load].value == pytest.approx(10 * secant, rel=0.1), load


def test_targets_are_judged_at_their_condition_and_an_untestable_one_is_a_finding(evaluation, project, tmp_path):
    by_ref = {v.target.reference: v for v in evaluation.judged}
    cambered = by_ref["spec 1 (cambered)"]
    high = by_ref["spec 2 (high pressure)"]
    far = by_ref["spec 3 (a load never tested)"]
    at = {(m.metric, m.load_n, m.camber_deg, round(m.pressure_kpa)): m.value for m in evaluation.condition_metrics}
    assert (cambered.camber_deg, round(cambered.pressure_kpa)) == (-2.0, P0)
    assert cambered.value == at[("cornering_stiffness", 4000.0, -2.0, P0)]
    assert high.value == at[("cornering_stiffness", 4000.0, 0.0, P1)]
    assert far.verdict == NOT_MEASURED and far.untestable and "load" in far.reason
    build(project, tmp_path / "out", workers=1)
    page = (tmp_path / "out/site/index.html").read_text(encoding="utf-8")
    assert "spec 3 (a load never tested)" in page and "cannot be judged from this test" in page
    specimen = (tmp_path / "out/site/specimen-s.html").read_text(encoding="utf-8")
    assert "Metrics at the other conditions tested" in specimen
    assert "camber −2° and 250 kPa" in specimen and "camber 0° and 290 kPa" in specimen
