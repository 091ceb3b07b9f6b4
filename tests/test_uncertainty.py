"""Uncertainty budgets (GUM), differences with shared parts, labs and each specimen's own pressure,
checked on small real projects and against the GUM's own rules."""

import math

import numpy as np
import projects as P
import pytest

from dossier.common.errors import ManifestError
from dossier.engine.build import evaluate
from dossier.metrics.budget import RECTANGULAR, Component, combine, difference_uncertainty
from dossier.model import magic_formula as mf
from dossier.project.load import load_project

FZ0 = 4000.0
LOADS = (2000.0, 4000.0, 6000.0)
# An invented, plausible passenger-car lateral coefficient set (test material, not a published tire).
TRUE_FY = {"pCy1": 1.35, "pDy1": 1.05, "pDy2": -0.08, "pEy1": -0.4, "pEy2": -0.3, "pKy1": -22.0, "pKy2": 1.9}


def _tire(scale=1.0):
    def fy(slip_deg, fz_n):
        return scale * mf.fy0(np.asarray(slip_deg) * mf.DEG, fz_n, TRUE_FY, FZ0)

    return fy


def _run(root, name, loads, *, scale=1.0, seed=1, noise=8.0):
    t, a, fz, f = P.sweep_samples(loads, _tire(scale), noise_n=noise, seed=seed, tau_s=0.05)
    # SAE J670 flips slip, Fz and Fy against ISO 8855 (primer §3)
    P.write_csv(root / f"rig/{name}.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz, -f])


def _project(root, runs: str, specimens, extra=""):
    text = P.MANIFEST_HEAD + "".join(P.specimen_block(s, r) for s, r in specimens) + runs + extra
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    return load_project(root)


def _with(block: str, **keys) -> str:
    """A run block with extra top-level keys (they must precede its [runs.columns] table)."""
    extra = "".join(f"{k} = {v}\n" for k, v in keys.items())
    return block.replace("[runs.columns]\n", extra + "[runs.columns]\n", 1)


def test_a_specimen_tested_only_at_its_own_pressure_gets_metrics_at_every_load_with_that_pressure(tmp_path):
    # A wide-base tire run only at 900 kPa while the others ran at 850 kPa: its metrics are at its
    # own pressure and at every load it was tested at, never at a pressure it did not see.
    _run(tmp_path, "b", LOADS, seed=1)
    _run(tmp_path, "w", LOADS, seed=2)
    runs = P.run_block("B", "rig/b.csv", LOADS, pressure="850") + P.run_block("W", "rig/w.csv", LOADS, pressure="900")
    project = _project(tmp_path, runs, (("B", "baseline"), ("W", "candidate")), "\n[fit]\nnominal_load_n = 4000\n")
    e = evaluate(project)
    own = [m for m in e.metrics if m.specimen == "W" and m.metric == "cornering_stiffness"]
    assert sorted(m.load_n for m in own) == list(LOADS)
    assert {round(m.pressure_kpa) for m in own} == {900}
    assert not any(m.extrapolated for m in own)
    assert {round(m.pressure_kpa) for m in e.metrics if m.specimen == "B"} == {850}


def test_every_interval_is_the_expanded_uncertainty_of_its_budget(tmp_path):
    _run(tmp_path, "b", LOADS, seed=3)
    project = _project(tmp_path, P.run_block("B", "rig/b.csv", LOADS), (("B", "baseline"),))
    e = evaluate(project)
    budgets = [m for m in e.metrics if m.budget is not None]
    assert budgets
    for m in budgets:
        b = m.budget
        assert b.u_combined == pytest.approx(math.sqrt(sum(c.u**2 for c in b.components)))
        assert (m.ci95[1] - m.ci95[0]) / 2 == pytest.approx(b.expanded)
        assert m.stderr == pytest.approx(b.u_combined)
        assert {c.name for c in b.components} >= {"fit", "calibration"}
    cs = next(m for m in budgets if m.metric == "cornering_stiffness" and m.load_n == FZ0)
    cal = cs.budget.part("calibration")
    # no [labs] entry: the default force accuracy ±0.5 % of reading, rectangular (GUM 4.3.7: u = a/√3)
    assert cal.u == pytest.approx(0.005 / math.sqrt(3) * cs.value, rel=1e-9)
    assert "assumed" in cal.basis
    assert cs.budget.part("repeatability").basis.startswith("nothing repeated")


def test_declared_lab_accuracy_is_used_and_named(tmp_path):
    _run(tmp_path, "b", LOADS, seed=4)
    runs = _with(P.run_block("B", "rig/b.csv", LOADS), lab='"Lab North"')
    extra = '\n[labs."Lab North"]\nforce_accuracy_pct = 0.2\nload_accuracy_pct = 0.1\n'
    project = _project(tmp_path, runs, (("B", "baseline"),), extra)
    e = evaluate(project)
    mu = next(m for m in e.metrics if m.metric == "peak_lateral_friction" and m.load_n == FZ0)
    cal = mu.budget.part("calibration")
    # peak friction goes as Fy/Fz: both relative accuracies add in quadrature
    assert cal.u == pytest.approx(math.hypot(0.002, 0.001) / math.sqrt(3) * mu.value, rel=1e-9)
    assert "Lab North" in cal.basis and "force ±0.2 %" in cal.basis and "(assumed" not in cal.basis.split(",")[0]


def test_a_lab_entry_no_run_names_is_located(tmp_path):
    _run(tmp_path, "b", LOADS)
    runs = _with(P.run_block("B", "rig/b.csv", LOADS), lab='"Lab North"')
    with pytest.raises(ManifestError) as err:
        _project(tmp_path, runs, (("B", "baseline"),), '\n[labs."Lab Nort"]\nforce_accuracy_pct = 0.2\n')
    text = str(err.value)
    assert 'labs."Lab Nort"' in text and "Lab North" in text
    with pytest.raises(ManifestError) as err:
        _project(tmp_path, runs, (("B", "baseline"),), '\n[labs."Lab North"]\nforce_acuracy_pct = 0.2\n')
    assert 'labs."Lab North".force_acuracy_pct' in str(err.value)


def test_combination_follows_the_gum():
    # GUM 5.1.2 (independent inputs) and G.4.1 (Welch-Satterthwaite): two parts of u = 3 and 4 combine
    # to 5; with 4 and infinite degrees of freedom nu_eff = 5^4 / (3^4 / 4) = 30.9, k = t(0.975, 30.9).
    b = combine([Component("fit", "A", 3.0, 4.0, ""), Component("calibration", "B", 4.0, None, "")])
    assert b.u_combined == pytest.approx(5.0)
    assert b.dof_effective == pytest.approx(625.0 / (81.0 / 4.0))
    assert b.k == pytest.approx(2.04, abs=0.005)  # GUM Table G.2: t95 for 30 dof is 2.04
    assert pytest.approx(math.sqrt(3.0)) == RECTANGULAR


def test_a_shared_calibration_cancels_in_a_difference_and_a_foreign_one_does_not():
    def budget(value, lab):
        rel = 0.004
        return combine(
            [
                Component("fit", "A", 0.01 * value, 50.0, ""),
                Component("calibration", "B", rel * value, None, "", shared=f"calibration:{lab}", relative=rel),
            ]
        )

    a, b = budget(1500.0, "L1"), budget(1400.0, "L1")
    u_same, _, note = difference_uncertainty(a, 1500.0, b, 1400.0)
    fit_only = math.hypot(15.0, 14.0)
    assert u_same == pytest.approx(math.hypot(fit_only, 0.004 * 100.0))  # u_rel·|a − b|: largely cancels
    assert "common to both" in note
    c = budget(1400.0, "L2")
    u_other, _, _ = difference_uncertainty(a, 1500.0, c, 1400.0)
    assert u_other == pytest.approx(math.sqrt(fit_only**2 + 6.0**2 + 5.6**2))  # independent labs


def test_a_comparison_across_labs_without_a_common_reference_is_never_called_real(tmp_path):
    # The candidate is 8 % stiffer and tested at another lab: the difference is clear, but with no
    # specimen tested in both labs it is labelled and not called real on its own.
    _run(tmp_path, "b", LOADS, seed=5)
    _run(tmp_path, "c", LOADS, seed=6, scale=1.08)
    runs = _with(P.run_block("B", "rig/b.csv", LOADS), lab='"Lab North"') + _with(
        P.run_block("C", "rig/c.csv", LOADS), lab='"Lab South"'
    )
    project = _project(tmp_path, runs, (("B", "baseline"), ("C", "candidate")), "\n[fit]\nnominal_load_n = 4000\n")
    e = evaluate(project)
    (standing,) = e.standings
    d = next(x for x in standing.differences if x.metric == "cornering_stiffness")
    assert d.diff_pct == pytest.approx(8.0, abs=1.5)
    assert d.diff_ci95[0] > 0  # the interval excludes zero ...
    assert not d.significant  # ... but no common reference links the labs
    assert d.across_labs.startswith("no common reference")
    assert "no difference is called real on its own" in standing.text
