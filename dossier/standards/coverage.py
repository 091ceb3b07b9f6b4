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
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

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


@dataclass(frozen=True)
class Component:
    """One line of a budget: a standard uncertainty in the metric's unit, with its sensitivity applied."""

    name: str  # fit, direction, drift, repeatability, calibration, model
    kind: str  # "A" (statistics of observations) or "B" (other knowledge)
    u: float
    dof: float | None  # None: infinite (a Type B bound taken as exact)
    basis: str  # how it was obtained, with its source or "assumed"
    # What two values can share, for differences: "calibration:LAB" (the same load cells) or
    # "drift:LAB|RIG" (the same control line, with `line_gradient` its loading on the line's errors).
    shared: str = ""
    relative: float | None = None  # u as a fraction of the value (force-level terms)
    line_gradient: tuple[float, float] | None = None
    line_covariance: tuple[tuple[float, float], tuple[float, float]] | None = None


@dataclass(frozen=True)
class Budget:
    components: tuple[Component, ...]
    u_combined: float
    dof_effective: float | None  # None: infinite
    k: float
    expanded: float  # U = k·u_c, the half-width of the 95 % interval

    def part(self, name: str) -> Component | None:
        return next((c for c in self.components if c.name == name), None)


def combine(components: Sequence[Component]) -> Budget:
    """Combine independent components: u_c = √Σu², ν_eff (Welch–Satterthwaite), k and U."""
    parts = tuple(components)
    u_c = math.sqrt(sum(c.u**2 for c in parts))
    dof = effective_dof([(c.u, c.dof) for c in parts if c.u > 0.0]) if u_c > 0 else None
    k = coverage_factor(dof)
    return Budget(parts, u_c, dof, k, k * u_c)
