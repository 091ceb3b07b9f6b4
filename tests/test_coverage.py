"""The one rule for 95 % intervals (dossier.standards.coverage), checked against published tables
and its claimed coverage tested by simulation."""

import numpy as np
import pytest

from dossier.evaluation.vehicle import TireInput, propagate
from dossier.standards.coverage import coverage_factor, effective_dof, interval


@pytest.mark.parametrize(
    ("dof", "k"),
    [
        # Student-t two-sided 95 % points: GUM (JCGM 100:2008) Table G.2
        (1, 12.71),
        (2, 4.30),
        (5, 2.57),
        (10, 2.23),
        (20, 2.09),
        (50, 2.01),
        (100, 1.984),
        (None, 1.960),
        (float("inf"), 1.960),
    ],
)
def test_coverage_factor_is_the_student_t_quantile(dof, k):
    assert coverage_factor(dof) == pytest.approx(k, abs=0.006)


def test_welch_satterthwaite_reproduces_the_gum_worked_formula():
    # GUM G.4.1 (G.2b): nu_eff = u_c^4 / sum(u_i^4 / nu_i). Two equal terms of 10 degrees of freedom
    # give 20; a term with infinite degrees of freedom adds nothing to the denominator.
    assert effective_dof([(1.0, 10), (1.0, 10)]) == pytest.approx(20.0)
    assert effective_dof([(1.0, 10), (1.0, None)]) == pytest.approx(40.0)
    assert effective_dof([(1.0, None), (2.0, None)]) is None
    # never below the smallest term's degrees of freedom (the bound the metrics rely on)
    rng = np.random.default_rng(3)
    for _ in range(200):
        terms = [(float(u), int(n)) for u, n in zip(rng.uniform(0.01, 5, 3), rng.integers(1, 300, 3))]
        assert effective_dof(terms) >= min(n for _, n in terms) - 1e-9


def test_the_interval_of_a_difference_covers_95_percent_with_few_degrees_of_freedom():
    # Simulation: two quantities, each estimated from n samples (standard error from the sample),
    # difference interval with the Welch-Satterthwaite degrees of freedom. The claim is 95 %;
    # 4 000 trials give a binomial standard error of 0.35 %; 1.96 without the t factor falls short.
    rng = np.random.default_rng(11)
    n_trials, n = 4000, 4
    true_a, true_b, sigma_a, sigma_b = 10.0, 9.0, 1.0, 2.0
    hits = hits_normal = 0
    for _ in range(n_trials):
        a, b = rng.normal(true_a, sigma_a, n), rng.normal(true_b, sigma_b, n)
        ua, ub = a.std(ddof=1) / np.sqrt(n), b.std(ddof=1) / np.sqrt(n)
        d, u = a.mean() - b.mean(), float(np.hypot(ua, ub))
        lo, hi = interval(d, u, effective_dof([(ua, n - 1), (ub, n - 1)]))
        hits += lo <= true_a - true_b <= hi
        hits_normal += abs(d - (true_a - true_b)) <= 1.96 * u
    assert 0.935 <= hits / n_trials <= 0.975
    assert hits_normal / n_trials < 0.92  # the factor the comparison used before was too small here


def test_the_understeer_interval_uses_the_rule():
    # K = Wf/Cαf − Wr/Cαr (Gillespie 1992, ch. 6) from two specimens' axle stiffnesses with their own
    # standard errors and degrees of freedom: the delta method, then the Welch-Satterthwaite t factor.
    inputs = [TireInput("F", 3000.0, 60.0, 8), TireInput("R", 2800.0, 80.0, 12)]
    e = propagate(lambda c: 8000.0 / c[0] - 7000.0 / c[1], inputs)
    lo, hi = e.ci95
    gf = -8000.0 / 3000.0**2 * 60.0
    gr = 7000.0 / 2800.0**2 * 80.0
    k = coverage_factor(effective_dof([(gf, 8), (gr, 12)]))
    assert (hi - lo) / 2 == pytest.approx(k * float(np.hypot(gf, gr)), rel=1e-6)
    assert k > 2.05  # about 19 effective degrees of freedom: wider than 1.96
