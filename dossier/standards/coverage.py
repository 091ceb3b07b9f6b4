"""The one rule for every 95 % interval in a dossier (GUM, JCGM 100:2008).

An interval is ``value ± k·u``: `u` the standard uncertainty, `k` the coverage factor for a
coverage probability of 95 %, ``k = t₀.₉₇₅(ν)``, the Student-t quantile with `ν` degrees of
freedom (GUM G.3); with ν unknown or infinite, k is the normal quantile 1.960 (GUM G.6.6).

- A coefficient of one fit: ν is the fit's residual degrees of freedom (points − coefficients).
- A metric from the coefficients of several fits: ν is the smallest of their ν, a conservative
  bound on the Welch–Satterthwaite ν_eff (which is never below the smallest ν of its terms).
- A sum or difference of independent quantities (candidate − baseline, front axle against rear):
  ν_eff by the Welch–Satterthwaite formula (GUM G.4.1) from each term's contribution and its ν.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

COVERAGE_PROBABILITY = 0.95
_QUANTILE = 0.975  # two-sided: 0.5 + COVERAGE_PROBABILITY / 2


def coverage_factor(dof: float | None) -> float:
    """k for a 95 % interval with `dof` degrees of freedom (None or inf: the normal quantile)."""
    from scipy import stats

    q = _QUANTILE
    if dof is None or not math.isfinite(dof):
        return float(stats.norm.ppf(q))
    if dof <= 0:
        raise ValueError(f"degrees of freedom must be positive; got {dof!r}")
    return float(stats.t.ppf(q, dof))


def effective_dof(terms: Iterable[tuple[float, float | None]]) -> float | None:
    """Welch–Satterthwaite ν_eff of a combination whose terms contribute `u_i` (already multiplied
    by their sensitivity) with `ν_i` degrees of freedom each: ``(Σ u_i²)² / Σ (u_i⁴ / ν_i)``.
    A term with ν None counts as infinite; None when every term's ν is."""
    terms = list(terms)
    total = sum(u * u for u, _ in terms)
    denominator = sum(u**4 / dof for u, dof in terms if dof is not None and math.isfinite(dof))
    if denominator == 0.0:
        return None
    return total * total / denominator


def interval(value: float, u: float, dof: float | None) -> tuple[float, float]:
    """The 95 % interval ``value ± k·u``."""
    k = coverage_factor(dof)
    return (value - k * u, value + k * u)
